"""Tuples end to end: construction, indexing, unpacking, comparison, returns.

Python rules checked: the Language Reference ("Value comparisons": sequences
compare lexicographically, the first unequal pair decides; "Assignment
statements": unpacking needs as many targets as items) and the tuple
documentation ("Common Sequence Operations": negative indexes, IndexError).
"""

from refines.verdict import PROVED, REFUTED

from helpers import check_one


def test_a_sorted_pair_is_proved(tmp_path):
    r = check_one(tmp_path, '''
        @refines(lambda low, high, result: result[0] <= result[1]
                 and result in ((low, high), (high, low)))
        def span(low: int, high: int):
            pair = (low, high)
            a, b = pair
            if a > b:
                a, b = b, a
            return (a, b)
        ''')
    assert r.verdict == PROVED, r.reason or r.counterexample


def test_lexicographic_order_is_refuted_with_a_counterexample(tmp_path):
    # (2, 0) > (1, 9): the first items decide (Language Reference).
    r = check_one(tmp_path, '''
        @refines(lambda grade, bonus, result: result == (grade >= 1 and bonus > 5))
        def harder(grade: int, bonus: int) -> bool:
            return (grade, bonus) > (1, 5)
        ''')
    assert r.verdict == REFUTED, r.reason
    assert r.counterexample.confirmed
    assert int(r.counterexample.inputs["grade"]) >= 2  # the first item decides alone


def test_tuple_index_out_of_range_gives_a_precondition(tmp_path):
    r = check_one(tmp_path, '''
        @refines(lambda i, result: result >= 10)
        def level(i: int) -> int:
            levels = (10, 20, 30)
            return levels[i]
        ''')
    assert r.verdict == REFUTED
    assert r.counterexample.outcome == {"raised": "IndexError"}
    assert r.exact_precondition == "-3 <= i < 3"
