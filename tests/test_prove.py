"""The prover's decisions: raises semantics, replay, budgets, ill-formed specs."""

import pytest

from refines import replay
from refines.verdict import ERROR, PROVED, REFUTED, TESTED

from helpers import check_one, check_source


class TestRaises:
    """If a listed condition holds the function must raise that class (or a
    subclass); otherwise it must return and meet the relation."""

    def test_subclass_of_a_listed_class_is_allowed(self, tmp_path):
        r = check_one(tmp_path, '''
            class FareError(ValueError):
                pass

            @refines(lambda n, result: result == 2 * n,
                     raises={ValueError: lambda n: n < 0})
            def fare(n: int) -> int:
                if n < 0:
                    raise FareError("negative")
                return 2 * n
            ''')
        assert r.verdict == PROVED

    def test_raising_the_wrong_class_refutes(self, tmp_path):
        r = check_one(tmp_path, '''
            @refines(lambda n, result: result == n, raises={ValueError: lambda n: n < 0})
            def fare(n: int) -> int:
                if n < 0:
                    raise TypeError("negative")
                return n
            ''')
        assert r.verdict == REFUTED
        assert r.counterexample.outcome == {"raised": "TypeError"}
        assert r.counterexample.violated == "raises ValueError when n < 0"

    def test_returning_when_a_raise_is_required_refutes(self, tmp_path):
        r = check_one(tmp_path, '''
            @refines(lambda n, result: True, raises={ValueError: lambda n: n > 100})
            def fare(n: int) -> int:
                if n > 101:
                    raise ValueError("too many")
                return n
            ''')
        assert r.verdict == REFUTED
        assert r.counterexample.inputs == {"n": "101"}
        assert r.counterexample.outcome == {"returned": "101"}

    def test_an_unlisted_exception_refutes(self, tmp_path):
        r = check_one(tmp_path, '''
            @refines(lambda total, people, result: result >= 0,
                     assuming=lambda total, people: total >= 0 and people >= 0)
            def share(total: int, people: int) -> int:
                return total // people
            ''')
        assert r.verdict == REFUTED
        assert r.counterexample.inputs["people"] == "0"
        assert r.counterexample.outcome == {"raised": "ZeroDivisionError"}
        assert "no raises= entry allows ZeroDivisionError" in r.counterexample.violated

    def test_a_failing_assert_is_an_outcome(self, tmp_path):
        r = check_one(tmp_path, '''
            @refines(lambda n, result: result == n)
            def checked(n: int) -> int:
                assert n != 7, "seven is reserved"
                return n
            ''')
        assert r.verdict == REFUTED
        assert r.counterexample.inputs == {"n": "7"}
        assert r.counterexample.outcome == {"raised": "AssertionError"}

    def test_any_true_condition_may_choose_the_class(self, tmp_path):
        r = check_one(tmp_path, '''
            @refines(lambda n, result: result == n,
                     raises={ValueError: lambda n: n < 0, KeyError: lambda n: n < 10})
            def pick(n: int) -> int:
                if n < 10:
                    raise KeyError(n)
                return n
            ''')
        assert r.verdict == PROVED


def test_a_relation_that_raises_does_not_hold(tmp_path):
    r = check_one(tmp_path, '''
        @refines(lambda d, result: 10 // result > 0, assuming=lambda d: 0 <= d <= 10)
        def same(d: int) -> int:
            return d
        ''')
    assert r.verdict == REFUTED
    assert r.counterexample.inputs == {"d": "0"}
    assert "the relation raised ZeroDivisionError" in r.counterexample.detail


def test_old_reads_the_pre_state(tmp_path):
    r = check_one(tmp_path, '''
        @refines(lambda stock, sold, result: result == old(stock) - sold,
                 assuming=lambda stock, sold: 0 <= sold <= stock)
        def remaining(stock: int, sold: int) -> int:
            stock -= sold
            return stock
        ''')
    assert r.verdict == PROVED


def test_a_spec_that_can_itself_raise_is_an_error(tmp_path):
    r = check_one(tmp_path, '''
        @refines(lambda x, y, result: True, assuming=lambda x, y: x // y > 0)
        def first(x: int, y: int) -> int:
            return x
        ''')
    assert r.verdict == ERROR
    assert "itself raises ZeroDivisionError" in r.reason and "y=0" in r.reason
    assert r.message_key == "spec-raising"


def test_replay_disagreement_is_an_error_never_a_refutation(tmp_path, monkeypatch):
    # Make the real call come out differently from the translation's prediction.
    real_run = replay.run

    def fake_run(ob, inputs):
        out = real_run(ob, inputs)
        return replay.Run(returned=100) if out.raised is None else out

    monkeypatch.setattr(replay, "run", fake_run)
    r = check_one(tmp_path, '''
        @refines(lambda x, result: result > 5)
        def inc(x: int) -> int:
            return x + 1
        ''')
    assert r.verdict == ERROR
    assert r.reason.startswith("translation disagrees with Python")
    assert "predicted it returns 5" in r.reason and "returned 100" in r.reason
    assert r.counterexample is None


def test_an_exhausted_budget_is_tested_never_proved(tmp_path, monkeypatch):
    # Starve the solver of resources: the verdict must say why it is not
    # proved, never proved (and never refuted without a model); the tester
    # then runs it (the claim is true: x**3 - x is a product of three
    # consecutive ints, so a multiple of 3).
    from refines import prove

    monkeypatch.setattr(prove, "RLIMIT_PER_SECOND", 1)
    r = check_one(tmp_path, '''
        @refines(lambda x, y, result: result % 3 == 0)
        def cubes(x: int, y: int) -> int:
            return x * x * x - x + 3 * y * x * x
        ''', timeout=1.0)
    assert r.verdict == TESTED
    assert r.reason.startswith("not proved: the solver could not decide")
    assert r.testing.examples >= 50


def test_every_obligation_gets_its_own_context_and_same_answer(tmp_path):
    source = '''
        @refines(lambda a, b, result: result >= a and result >= b)
        def larger(a: int, b: int) -> int:
            return a if a > b else b
        '''
    verdicts = {check_one(tmp_path, source).verdict for _ in range(3)}
    assert verdicts == {PROVED}


def test_stacked_specs_are_independent(tmp_path):
    results = check_source(tmp_path, '''
        @refines(lambda x, result: result >= 0)
        @refines(lambda x, result: result <= 5, assuming=lambda x: x <= 5)
        def clamp(x: int) -> int:
            return max(0, min(x, 5))

        @refines(lambda x, result: result > x)
        @refines(lambda x, result: result == x)
        def bump(x: int) -> int:
            return x + 1
        ''')
    assert [r.verdict for r in results] == [PROVED, PROVED, PROVED, REFUTED]


def test_def_relations_are_read_from_their_return_expression(tmp_path):
    r = check_one(tmp_path, '''
        def keeps_order(low, high, result):
            """The pair comes back sorted."""
            return result[0] <= result[1]

        @refines(keeps_order)
        def ordered(low: int, high: int):
            if low > high:
                low, high = high, low
            return low, high
        ''')
    assert r.verdict == PROVED


@pytest.mark.parametrize("body,verdict", [
    ("return (x > 0) + (x > 1)", PROVED),       # bool is an int: True + True == 2
    ("return True if x else 2", PROVED),         # bool and int on different paths
])
def test_bool_is_an_int(tmp_path, body, verdict):
    r = check_one(tmp_path, f'''
        @refines(lambda x, result: 0 <= result <= 2)
        def f(x: int) -> int:
            {body}
        ''')
    assert r.verdict == verdict
