"""None, Optional[T] and isinstance end to end, on invented ticket-desk helpers.

Python rules checked (Language Reference, "Comparisons" -- `is` compares
identity, None is a singleton -- and "Value comparisons"; the `typing`
documentation for Optional[T] == Union[T, None] == T | None; the `isinstance`
documentation, with bool a subclass of int per "The standard type hierarchy").
"""

import pytest

from refines.verdict import PROVED, REFUTED, TESTED

from helpers import check_one

HEADER = "from typing import Optional, Union\nfrom refines import refines, old\n\n"


def one(tmp_path, source):
    return check_one(tmp_path, source, header=HEADER)


def test_an_optional_discount_is_refuted_with_a_none_aware_precondition(tmp_path):
    r = one(tmp_path, '''
        @refines(lambda discount, result: result >= 0)
        def price(discount: Optional[int]) -> int:
            if discount is None:
                return 100
            return 100 - discount
        ''')
    assert r.verdict == REFUTED
    assert int(r.counterexample.inputs["discount"]) > 100
    assert r.exact_precondition == "discount is None or discount <= 100"


def test_arithmetic_on_none_raises_type_error(tmp_path):
    r = one(tmp_path, '''
        @refines(lambda seats, result: result == 2 * seats)
        def pairs(seats: "int | None") -> int:
            return seats * 2
        ''')
    assert r.verdict == REFUTED
    assert r.counterexample.call == "pairs(seats=None)"
    assert r.counterexample.outcome == {"raised": "TypeError"}
    assert r.exact_precondition == "seats is not None"


def test_returning_none_on_some_paths_is_an_optional_result(tmp_path):
    r = one(tmp_path, '''
        @refines(lambda code, result: result is None or len(result) == 3)
        def desk(code: Optional[str]) -> Optional[str]:
            if not code or len(code) < 3:
                return None
            return code[:3]
        ''')
    assert r.verdict == PROVED, r.reason or r.counterexample


def test_a_local_that_may_be_none(tmp_path):
    r = one(tmp_path, '''
        @refines(lambda row, result: result == (row if row > 0 else -1))
        def seat_row(row: int) -> int:
            found = None
            if row > 0:
                found = row
            if found is None:
                return -1
            return found
        ''')
    assert r.verdict == PROVED, r.reason or r.counterexample


def test_none_equals_only_none(tmp_path):
    r = one(tmp_path, '''
        @refines(lambda a, b, result: result == ((a is None and b is None)
                                                 or (a is not None and b is not None
                                                     and a == b)))
        def same(a: Optional[int], b: Union[int, None]) -> bool:
            return a == b
        ''')
    assert r.verdict == PROVED, r.reason or r.counterexample


def test_method_on_none_raises_attribute_error(tmp_path):
    r = one(tmp_path, '''
        @refines(lambda name, result: result in (True, False),
                 raises={AttributeError: lambda name: name is None})
        def vip(name: Optional[str]) -> bool:
            return name.startswith("VIP")
        ''')
    assert r.verdict == PROVED, r.reason or r.counterexample


@pytest.mark.parametrize("hint, value_is, expected", [
    ("int", "int", True), ("int", "bool", False), ("bool", "int", True),
    ("float", "int", False), ("str", "str", True), ("Optional[int]", "type(None)", None),
])
def test_isinstance_follows_the_type_hierarchy(tmp_path, hint, value_is, expected):
    # isinstance(True, int) is True: bool is a subclass of int.
    if expected is None:
        relation = "lambda x, result: result == (x is None)"
    else:
        relation = f"lambda x, result: result is {expected}"
    r = one(tmp_path, f'''
        @refines({relation})
        def f(x: {hint}) -> bool:
            return isinstance(x, {value_is})
        ''')
    assert r.verdict == PROVED, r.reason or r.counterexample


def test_isinstance_with_a_tuple_of_types(tmp_path):
    r = one(tmp_path, '''
        @refines(lambda amount, result: result == (amount is not None))
        def given(amount: Optional[float]) -> bool:
            return isinstance(amount, (int, float))
        ''')
    assert r.verdict == PROVED, r.reason or r.counterexample


def test_str_of_an_optional(tmp_path):
    r = one(tmp_path, '''
        @refines(lambda n, result: result == "None" or result[0] in "-0123456789")
        def show(n: Optional[int]) -> str:
            return str(n)
        ''')
    assert r.verdict == PROVED, r.reason or r.counterexample


def test_float_and_int_returns_on_different_paths(tmp_path):
    # Returns of different sorts are checked apart (they cannot be one term).
    r = one(tmp_path, '''
        @refines(lambda x, result: result >= 0)
        def fee(x: int):
            if x > 0:
                return 2.5
            return 0
        ''')
    assert r.verdict == PROVED, r.reason or r.counterexample


@pytest.mark.parametrize("hint", ["Optional[int]", "int | None", "None | int",
                                  "Union[int, None]", "'Optional[int]'"])
def test_every_spelling_of_optional_is_read(tmp_path, hint):
    r = one(tmp_path, f'''
        @refines(lambda x, result: result == (x is None))
        def f(x: {hint}) -> bool:
            return x is None
        ''')
    assert r.verdict == PROVED, r.reason or r.counterexample


@pytest.mark.parametrize("hint", ["Union[int, str]", "Optional[list]", "int | str"])
def test_unions_of_two_types_are_not_proved_and_named(tmp_path, hint):
    # Not modelled by the prover; hypothesis draws such values, so it is tested.
    r = one(tmp_path, f'''
        @refines(lambda x, result: result is True)
        def f(x: {hint}) -> bool:
            return True
        ''')
    assert r.verdict == TESTED
    assert "`x`" in r.reason and r.reason.startswith("not proved: not translated")


def test_an_optional_slice_bound_is_omitted_when_none(tmp_path):
    # Language Reference, "Slicings": a None bound is an omitted one.
    r = one(tmp_path, '''
        @refines(lambda code, cut, result: result == (code if cut is None else code[cut:]))
        def tail(code: str, cut: Optional[int]) -> str:
            return code[cut:]
        ''')
    assert r.verdict == PROVED, r.reason or r.counterexample


def test_an_optional_index_raises_type_error_when_none(tmp_path):
    r = one(tmp_path, '''
        @refines(lambda code, at, result: len(result) == 1,
                 raises={IndexError: lambda code, at: at is not None and not -len(code) <= at < len(code)})
        def letter(code: str, at: Optional[int]) -> str:
            return code[at]
        ''')
    assert r.verdict == REFUTED
    assert r.counterexample.outcome == {"raised": "TypeError"}
    assert r.exact_precondition == "at is not None"
