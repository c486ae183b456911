"""The translator, construct by construct, judged by what CPython does.

Every test translates a real function, evaluates the predicted outcome on
concrete inputs and compares it with calling the function. Tests never look
at the shape of the IR terms. Where a test is about a particular case (a
division by zero only reached on some inputs, say) it also checks that the
inputs do reach that case, so it cannot pass vacuously.
"""

from __future__ import annotations

import pytest

from refines.errors import Untranslatable

from semantics_helpers import SMALL, check_agrees, grid, line_of, translated

WIDE = tuple(range(-4, 5)) + (10**30, -(10**30))


def results(t, inputs):
    return [t.run(*args) for args in inputs]


def raised(t, inputs, exc):
    """The inputs on which CPython raises ``exc``."""
    return [args for args in inputs if t.run(*args) == ("raised", exc)]


# ---------------------------------------------------------------- statements

def test_assignment_and_reassignment():
    check_agrees("""
    def f(x: int, y: int) -> int:
        a = x + 1
        b = a * y
        a = b - x
        c = d = a + b
        return c * 10 + d - a
    """, WIDE)


def test_annotated_assignment():
    check_agrees("""
    def f(x: int) -> int:
        total: int = x * 3
        return total - 1
    """, WIDE)


@pytest.mark.parametrize("op", ["+=", "-=", "*=", "//=", "%="])
def test_augmented_assignment(op):
    t = check_agrees(f"""
    def f(x: int, y: int) -> int:
        acc = x
        acc {op} y
        acc {op} 3
        return acc
    """, WIDE)
    if op in ("//=", "%="):
        assert raised(t, grid(WIDE, WIDE), ZeroDivisionError)


def test_augmented_assignment_on_a_tuple():
    check_agrees("""
    def f(x: int) -> tuple:
        t = (x,)
        t += (x + 1, 2)
        return t
    """, WIDE)


def test_tuple_unpacking_and_swap():
    check_agrees("""
    def f(x: int, y: int) -> tuple:
        a, b = x, y
        a, b = b, a
        (c, d), e = (a - b, a * b), x
        return a, b, c, d, e
    """, WIDE)


def test_swap_through_three_names():
    check_agrees("""
    def f(x: int, y: int, z: int) -> tuple:
        x, y, z = z, x, y
        x, y = y + z, x - z
        return x, y, z
    """, SMALL)


def test_unpacking_the_wrong_number_of_values_raises_valueerror():
    t = check_agrees("""
    def f(x: int) -> int:
        if x > 0:
            a, b = (x, x, x)
            return a + b
        return x
    """, WIDE)
    assert raised(t, grid(WIDE), ValueError)


def test_unpacking_an_int_raises_typeerror():
    t = check_agrees("""
    def f(x: int) -> int:
        if x < 0:
            a, b = x
            return a
        return -x
    """, WIDE)
    assert raised(t, grid(WIDE), TypeError)


def test_nested_if_elif_else():
    check_agrees("""
    def f(x: int, y: int) -> int:
        if x < 0:
            if y < 0:
                r = 1
            elif y == 0:
                r = 2
            else:
                r = 3
        elif x == 0:
            r = 4
        elif x < y:
            if y > 2:
                r = 5
            else:
                r = 6
            r = r * 10
        else:
            r = 7
        return r + x
    """, WIDE)


def test_early_return():
    t = check_agrees("""
    def f(x: int, y: int) -> int:
        if x < 0:
            return -1
        y = y + x
        if y > 3:
            return y // 2
        elif y == 0:
            return 0
        y = y * 7
        return y
    """, WIDE)
    assert len({r for r in results(t, grid(WIDE, WIDE))}) > 4


def test_code_after_a_return_on_every_path_is_never_run():
    check_agrees("""
    def f(x: int) -> int:
        if x > 0:
            return 1
        else:
            return 2
        return 1 // 0
    """, WIDE)


def test_falling_off_the_end_returns_none():
    t = check_agrees("""
    def f(x: int) -> int:
        if x > 0:
            return x
        elif x == 0:
            return
        x = x + 1
    """, WIDE)
    assert ("returned", None) in results(t, grid(WIDE))


def test_pass_and_docstring_do_nothing():
    check_agrees('''
    def f(x: int) -> int:
        """Docstring."""
        if x > 0:
            pass
        else:
            pass
        "a bare string"
        return x
    ''', WIDE)


def test_expression_statement_can_raise():
    t = check_agrees("""
    def f(x: int, y: int) -> int:
        x // y
        return x
    """, WIDE)
    assert raised(t, grid(WIDE, WIDE), ZeroDivisionError)


def test_assert_raises_assertionerror_exactly_when_false():
    t = check_agrees("""
    def f(x: int, y: int) -> int:
        assert x >= 0, "x must not be negative"
        y = y - x
        assert y
        return y
    """, WIDE)
    assert raised(t, grid(WIDE, WIDE), AssertionError)


def test_assert_with_a_raising_condition():
    t = check_agrees("""
    def f(x: int, y: int) -> int:
        assert x // y > 0
        return x
    """, WIDE)
    inputs = grid(WIDE, WIDE)
    assert raised(t, inputs, AssertionError) and raised(t, inputs, ZeroDivisionError)


def test_raise_builtin_exception_classes():
    t = check_agrees("""
    def f(x: int) -> int:
        if x < -2:
            raise ValueError("too small")
        if x > 2:
            raise OverflowError
        if x == 0:
            raise ZeroDivisionError(f"x is {x}")
        return x
    """, WIDE)
    kinds = {r for r in results(t, grid(WIDE)) if r[0] == "raised"}
    assert kinds == {("raised", ValueError), ("raised", OverflowError),
                     ("raised", ZeroDivisionError)}


def test_raise_user_defined_exception_classes():
    t = check_agrees("""
    class BookingError(Exception):
        pass

    class Overbooked(BookingError):
        pass

    def f(seats: int, wanted: int) -> int:
        if wanted <= 0:
            raise BookingError("nothing to book")
        if wanted > seats:
            raise Overbooked
        return seats - wanted
    """, WIDE)
    names = {r[1].__name__ for r in results(t, grid(WIDE, WIDE)) if r[0] == "raised"}
    assert names == {"BookingError", "Overbooked"}


def test_module_level_int_and_bool_constants():
    check_agrees("""
    CAPACITY = 12
    STRICT = True
    LENIENT = False
    NOTHING = None

    def f(x: int) -> int:
        if STRICT and x > CAPACITY:
            return CAPACITY
        if LENIENT or NOTHING is not None:
            return -1
        return x + STRICT
    """, WIDE + (12, 13))


# ---------------------------------------------------------------- unbound locals

def test_local_read_before_its_assignment_raises_unboundlocalerror():
    t = check_agrees("""
    def f(x: int) -> int:
        if x > 0:
            return level
        level = x
        return level
    """, WIDE)
    assert raised(t, grid(WIDE), UnboundLocalError)


def test_local_assigned_on_one_branch_only():
    # Python reads the local's value where it was assigned and raises
    # UnboundLocalError on the other paths.
    t = check_agrees("""
    def f(x: int) -> int:
        if x > 0:
            y = x * 2
        return y
    """, WIDE)
    assert raised(t, grid(WIDE), UnboundLocalError)


def test_local_assigned_in_then_branch_when_the_else_branch_returns():
    # A common shape: the else branch leaves early, so the read is always bound.
    check_agrees("""
    def f(x: int) -> int:
        if x > 0:
            y = x - 1
        else:
            return 0
        return y + 1
    """, WIDE)


def test_local_assigned_on_both_branches_under_a_constant_condition():
    # A module-level flag makes one branch dead; the local is still assigned on
    # every path Python can take.
    check_agrees("""
    VERBOSE = False

    def f(x: int) -> int:
        if VERBOSE:
            y = 0
        else:
            y = x
        return y + 1
    """, WIDE)


def test_local_assigned_after_a_guard_that_raises():
    # The guard-clause shape: the raising branch assigns nothing.
    source = """
    class RateError(Exception):
        pass

    def f(x: int) -> int:
        if x < 0:
            raise RateError
        else:
            rate = x * 2
        return rate
    """
    t = check_agrees(source, WIDE)
    assert raised(t, grid(WIDE), t.fn.__globals__["RateError"])


def test_local_assigned_on_some_branches_of_an_elif_chain():
    t = check_agrees("""
    def f(x: int, y: int) -> int:
        if x > 0:
            z = x
        elif y > 0:
            z = y
        elif x == y:
            return 0
        return z * 2
    """, WIDE)
    assert raised(t, grid(WIDE, WIDE), UnboundLocalError)


# ---------------------------------------------------------------- comparisons

@pytest.mark.parametrize("ops", [("<", "<"), ("<", "<="), (">=", ">"), ("==", "!="),
                                 ("<", ">"), ("!=", "==")])
def test_comparison_chains(ops):
    a, b = ops
    check_agrees(f"""
    def f(x: int, y: int, z: int) -> bool:
        return x {a} y {b} z
    """, SMALL)


def test_chain_evaluates_the_middle_operand_once():
    # Python Language Reference, 6.10 "Comparisons": `a < b < c` is `a < b and b < c`
    # except that b is evaluated only once. Without side effects other than
    # raising, twice would look the same; what must hold is that the middle's
    # ZeroDivisionError is an outcome exactly where its divisor is zero and that
    # both links see the same value.
    t = check_agrees("""
    def f(x: int, y: int) -> bool:
        return 0 <= x // y < 3
    """, WIDE)
    assert raised(t, grid(WIDE, WIDE), ZeroDivisionError) == [(x, 0) for x in WIDE]


def test_later_links_are_evaluated_only_while_the_chain_holds():
    # Python Language Reference, 6.10 "Comparisons": `x < y < 4 > 12 // x` is
    # `x < y and y < 4 and 4 > 12 // x`, so 12 // 0 is reached only when both
    # earlier links hold.
    t = check_agrees("""
    def f(x: int, y: int) -> bool:
        return x < y < 4 > 12 // x
    """, WIDE)
    assert raised(t, grid(WIDE, WIDE), ZeroDivisionError) == [
        (0, y) for y in WIDE if 0 < y < 4]


def test_chain_link_raising_only_when_the_first_link_holds():
    t = check_agrees("""
    def f(x: int, y: int) -> bool:
        return x > 0 < 5 // y
    """, WIDE)
    inputs = grid(WIDE, WIDE)
    assert raised(t, inputs, ZeroDivisionError) == [(x, 0) for x in WIDE if x > 0]


def test_tuple_comparison_is_lexicographic():
    # Python Language Reference, 6.10.1 "Value comparisons": sequences compare
    # lexicographically by their first unequal elements; if one is a prefix of
    # the other, the shorter one is less.
    for op in ("<", "<=", ">", ">=", "==", "!="):
        check_agrees(f"""
        def f(x: int, y: int, z: int) -> tuple:
            return ((x, y) {op} (y, z), (x,) {op} (x, y), (x, (y, z)) {op} (x, (z, y)),
                    () {op} (z,), (x, y, z) {op} (x, y))
        """, SMALL)


def test_tuple_comparison_with_none_items():
    # Python Language Reference, 6.10.1 "Value comparisons": the items are first
    # compared for equality; only the first unequal pair is ordered. So
    # (None, x) < (None, y) orders x and y and never asks whether None < None,
    # and (x, None) < (y, None) raises TypeError only when x == y.
    t = check_agrees("""
    def f(x: int, y: int) -> tuple:
        return (None, x) < (None, y), (x, None) <= (y, None) if x != y else True
    """, SMALL)
    assert t.run(1, 2) == ("returned", (True, True))


def test_tuple_ordering_on_equal_none_items_never_orders_them():
    # None items that are equal (None == None) are passed over: when x == y the
    # tuples are equal and `<` is False; None is never ordered, so no TypeError
    # (checked against CPython 3.11: (1, None) < (1, None) is False).
    t = check_agrees("""
    def f(x: int, y: int) -> bool:
        return (x, None) < (y, None)
    """, SMALL)
    assert raised(t, grid(SMALL, SMALL), TypeError) == []


def test_tuple_ordering_reaches_mismatched_items_only_past_equal_ones():
    # Same rule with a nested tuple facing an int: (x, (1,)) < (y, 2) is x < y
    # when x != y, and a TypeError only when x == y.
    t = check_agrees("""
    def f(x: int, y: int) -> bool:
        return (x, (1,)) < (y, 2)
    """, SMALL)
    assert raised(t, grid(SMALL, SMALL), TypeError) == [(v, v) for v in SMALL]


def test_ordering_none_raises_typeerror_and_equality_does_not():
    t = check_agrees("""
    def f(x: int) -> bool:
        if x > 0:
            return None < x
        return None == x or None != None
    """, WIDE)
    assert raised(t, grid(WIDE), TypeError)


def test_in_on_tuple_literals():
    check_agrees("""
    def f(x: int, y: int) -> tuple:
        return (x in (1, 2, y), x not in (y, -y), x in (), (x, y) in ((1, 2), (y, x)),
                None in (x, None), x in ((x,), y))
    """, WIDE)


def test_is_none_and_is_not_none():
    t = check_agrees("""
    def f(x: int) -> tuple:
        nothing = None
        if x > 0:
            got = x
        else:
            got = -x
        return nothing is None, got is None, got is not None, None is not nothing
    """, WIDE)
    assert t.run(3) == ("returned", (True, False, True, False))


# ---------------------------------------------------------------- boolean operators

def test_and_or_short_circuit_the_raising_operand():
    t = check_agrees("""
    def f(x: int, y: int) -> bool:
        return (y != 0 and x // y > 1) or (x == 0 or 7 % x == 1)
    """, WIDE)
    assert not raised(t, grid(WIDE, WIDE), ZeroDivisionError)


def test_right_operand_raises_only_when_reached():
    t = check_agrees("""
    def f(x: int, y: int) -> bool:
        return x > 0 and 10 // y > 0 or x < -2 and 10 % y == 0
    """, WIDE)
    zero_div = raised(t, grid(WIDE, WIDE), ZeroDivisionError)
    assert zero_div and {y for _, y in zero_div} == {0}
    assert all(x > 0 or x < -2 for x, _ in zero_div)
    assert t.run(0, 0) == ("returned", False)


def test_and_or_return_an_operand():
    # Python Language Reference, 6.11 "Boolean operations": `x and y` evaluates
    # to x if x is false, else to y; `x or y` to x if x is true, else to y.
    t = check_agrees("""
    def f(x: int, y: int, z: int) -> tuple:
        return x and y, x or y, x and y or z, (x or y) and z, x or y or z, x and y and z
    """, SMALL)
    assert t.run(0, 5, 6) == ("returned", (0, 5, 6, 6, 5, 0))


def test_and_or_mixing_bools_and_ints():
    check_agrees("""
    def f(x: int, b: bool) -> tuple:
        return b and x, x or b, (x > 0) or x, b or False, not b and x - 1
    """, WIDE)


def test_not():
    check_agrees("""
    def f(x: int, b: bool) -> tuple:
        return not x, not b, not not x, not (x and b), not (), not (x,), not None
    """, WIDE)


def test_conditional_expressions():
    t = check_agrees("""
    def f(x: int, y: int) -> int:
        a = 10 // x if x else -1
        b = (y if y > a else a) if x > 0 else (x if y else 2 * y)
        return a + b if a < b else a - b if a > b + 1 else a * b
    """, WIDE)
    assert not raised(t, grid(WIDE, WIDE), ZeroDivisionError)


def test_conditional_expression_raises_only_in_the_branch_taken():
    t = check_agrees("""
    def f(x: int, y: int) -> int:
        return x // y if x > 0 else y // x
    """, WIDE)
    zero_div = raised(t, grid(WIDE, WIDE), ZeroDivisionError)
    assert zero_div == [(x, y) for x, y in grid(WIDE, WIDE)
                        if (x > 0 and y == 0) or (x <= 0 and x == 0)]


def test_truth_of_tuples_and_none():
    check_agrees("""
    def f(x: int) -> int:
        t = ()
        r = 0
        if (x,):
            r = r + 1
        if not t:
            r = r + 2
        if None:
            r = r + 4
        return r if None is None else 0
    """, WIDE)


def test_and_or_on_tuples_and_none_pick_the_operand_python_picks():
    # The truth of a tuple display or None is known without the inputs, so only
    # one operand can be the value: `() or None` is None, `(x,) and x > 0` is
    # x > 0 (Python Language Reference, 6.11 "Boolean operations").
    check_agrees("""
    def f(x: int) -> int:
        t = ()
        if (x,) and x > 0:
            return 1
        if t or None:
            return 2
        return 3
    """, WIDE)


# ---------------------------------------------------------------- builtins

def test_abs():
    check_agrees("""
    def f(x: int, b: bool) -> tuple:
        return abs(x), abs(-x), abs(x - 3), abs(b), abs(-b)
    """, WIDE)


def test_min_max_values():
    check_agrees("""
    def f(x: int, y: int, z: int) -> tuple:
        return (min(x, y), max(x, y), min(x, y, z), max(x, y, z), min(x, x),
                max(z, y, x, 0), min(x - y, y - z, z - x))
    """, SMALL)


def test_min_max_with_ties_and_bools():
    # CPython's min/max return the first of the extreme items (the library
    # reference for min says "If multiple items are minimal, the function returns
    # the first one encountered" -- recalled from memory). Among ints and bools equal items compare
    # equal, so the value is what can be checked here; with only bools the
    # result is a bool.
    t = check_agrees("""
    def f(a: bool, b: bool, x: int) -> tuple:
        return min(a, b), max(a, b, a), min(a, x), max(x, b), min(True, x, b)
    """, (-1, 0, 1, 2))
    assert t.predict(True, True, 0) == t.run(True, True, 0)
    assert isinstance(t.predict(True, False, 1)[1][0], bool)


def test_int_and_bool_calls():
    check_agrees("""
    def f(x: int, b: bool) -> tuple:
        return int(b), int(x), bool(x), bool(b), bool(), int(x > 2) + int(not b)
    """, WIDE)


def test_power_with_constant_exponent():
    check_agrees("""
    def f(x: int, b: bool) -> tuple:
        return x ** 0, x ** 1, x ** 2, x ** 3, (x - 1) ** 5, x ** 13, b ** 2, 2 ** 64, (-x) ** 7
    """, WIDE)


def test_unary_minus_plus_invert():
    check_agrees("""
    def f(x: int, b: bool) -> tuple:
        return -x, +x, ~x, -(-x), ~~x, -b, +b, ~b, -(x - 3), ~(x * 2)
    """, WIDE)


def test_bool_arithmetic():
    # Python Language Reference, 3.2 "The standard type hierarchy": bools behave
    # like 0 and 1 in arithmetic, so True + 1 == 2.
    t = check_agrees("""
    def f(a: bool, b: bool, x: int) -> tuple:
        return (True + 1, a + b, a * 3, a - b, x * a, x // (a + 1), a % 2, a + a + a,
                a & b, a | b, a ^ b, (x > 0) + (x > 1), True * True)
    """, (-2, 0, 3))
    assert t.run(True, True, 0)[1][0] == 2


# ---------------------------------------------------------------- tuples

def test_tuple_indexing_with_constant_indexes():
    check_agrees("""
    def f(x: int, y: int) -> tuple:
        t = (x, y, x + y)
        return t[0], t[-1], t[-3], t[2], t[True], (t, x)[0][1]
    """, SMALL)


@pytest.mark.parametrize("index", ["3", "-4", "10**30"])
def test_tuple_index_out_of_range_raises_indexerror(index):
    t = check_agrees(f"""
    def f(x: int) -> int:
        if x > 0:
            return (x, x, x)[{index}]
        return x
    """, WIDE)
    assert raised(t, grid(WIDE), IndexError)


def test_tuple_indexing_with_a_symbolic_index():
    t = check_agrees("""
    def f(i: int, x: int) -> int:
        return (x, x + 1, x * 3)[i] + (7, 8)[i - 1]
    """, tuple(range(-5, 6)))
    inputs = grid(range(-5, 6), range(-5, 6))
    assert raised(t, inputs, IndexError)
    assert any(r[0] == "returned" for r in results(t, inputs))


def test_out_of_range_constant_index_on_one_branch():
    # Python raises IndexError only on the branch that indexes; the other
    # branch's value is the result.
    t = check_agrees("""
    def f(x: int) -> int:
        return (x, 1)[5] if x > 0 else -x
    """, WIDE)
    assert raised(t, grid(WIDE), IndexError)


def test_tuple_slices_and_repetition():
    check_agrees("""
    def f(x: int, y: int) -> tuple:
        t = (x, y, x - y, 4)
        return t[1:], t[:-1], t[::2], t[::-1], t[5:], (x,) * 3, 2 * (x, y), (y,) * -1
    """, SMALL)


def test_returning_tuples_of_different_lengths():
    check_agrees("""
    def f(x: int) -> tuple:
        if x > 0:
            return (x,)
        if x == 0:
            return ()
        return (x, (x, -x))
    """, WIDE)


# ---------------------------------------------------------------- division

def test_floor_division_and_modulo_of_mixed_signs():
    # Python Language Reference, 6.7 "Binary arithmetic operations": the result of
    # // is floored and % takes the sign of the divisor.
    t = check_agrees("""
    def f(x: int, y: int) -> tuple:
        return x // y, x % y, -x // y, x % -y, (x + 1) // (y - 1)
    """, WIDE)
    assert raised(t, grid(WIDE, WIDE), ZeroDivisionError)


def test_division_by_zero_order_of_evaluation():
    # Statements run in order: on (0, 1) the first division raises before the
    # assert is reached; on (1, 1) the assert fails before the second division.
    t = check_agrees("""
    def f(x: int, y: int) -> int:
        a = 100 // x
        assert y != 1
        return a + 100 // y
    """, WIDE)
    inputs = grid(WIDE, WIDE)
    assert (0, 1) in raised(t, inputs, ZeroDivisionError)
    assert (1, 1) in raised(t, inputs, AssertionError)


# ---------------------------------------------------------------- not translated

UNSUPPORTED = [
    ("with", "statement", """
    def f(n: int) -> int:
        total = 0
        with LOCK:
            total += n
        return total
    """, "with LOCK"),
    ("del", "statement", """
    def f(n: int) -> int:
        m = n
        del m
        return n
    """, "del m"),
    ("try", "statement", """
    def f(x: int) -> int:
        y = x + 1
        try:
            return 10 // x
        except ZeroDivisionError:
            return 0
    """, "try:"),
    ("float-power", "operator", """
    def f(x: float) -> float:
        half = x + 1.0
        return half ** 0.5
    """, "half ** 0.5"),
    ("matmul", "operator", """
    def f(x: int) -> int:
        if x > 0:
            return x @ 7
        return 0
    """, "x @ 7"),
    ("unannotated-call", "opaque-type", """
    def helper(v):
        return v

    def f(x: int) -> int:
        y = x * 2
        return helper(y)
    """, "helper(y)"),
    ("sorted-call", "call", """
    def f(x: int) -> int:
        return sorted((x, x))[0]
    """, "sorted("),
    ("variable-exponent", "power", """
    def f(x: int, n: int) -> int:
        y = x
        return y ** n
    """, "y ** n"),
    ("negative-exponent", "power", """
    def f(x: int) -> int:
        return x ** -1
    """, "x ** -1"),
    ("complex-constant", "value", """
    def f(x: int) -> int:
        if x > 1:
            return x + 2j
        return x
    """, "2j"),
    ("bytes-constant", "value", """
    def f(x: int) -> int:
        return x * b"ab"
    """, 'b"ab"'),
    ("str-above-constant-alphabet", "value", """
    def f(x: int) -> int:
        return len("\U0002A6A5" * x)
    """, "return len("),
    ("str-method-not-modelled", "method", """
    def f(s: str) -> bytes:
        return s.encode()
    """, "s.encode()"),
    ("empty-list-display", "expression", """
    def f(x: int) -> int:
        return len([])
    """, "[]"),
    ("float-in-list-of-floats", "operator", """
    def f(x: float) -> bool:
        return x in [x]
    """, "x in [x]"),
    ("bytes-module-constant", "name", """
    GRADE = b"6a+"

    def f(x: int) -> int:
        return x * GRADE
    """, "x * GRADE"),
]


@pytest.mark.parametrize("key, source, fragment",
                         [u[1:] for u in UNSUPPORTED], ids=[u[0] for u in UNSUPPORTED])
def test_unsupported_constructs_raise_untranslatable(key, source, fragment):
    with pytest.raises(Untranslatable) as info:
        translated(source)
    assert (info.value.key, info.value.line) == (key, line_of(source, fragment)), (
        info.value.text)
    assert info.value.text and info.value.hint is not None


def test_unsupported_construct_inside_a_branch_is_reported_with_its_line():
    source = """
    def f(x: int) -> int:
        if x > 0:
            return x
        else:
            return x @ 2
    """
    with pytest.raises(Untranslatable) as info:
        translated(source)
    assert info.value.key == "operator" and info.value.line == line_of(source, "x @ 2")


def test_exception_messages_that_cannot_raise_are_accepted():
    # The message's value never matters to a spec; building it must not raise.
    check_agrees('''
    def f(x: int, y: int) -> int:
        if x < 0:
            raise ValueError("negative: " + str(x) + f" (limit {y})")
        assert y != 3, ("three", repr(y))
        return x
    ''', SMALL)


def test_min_of_a_single_int_raises_typeerror_as_python_does():
    t = check_agrees('''
    def f(x: int) -> int:
        if x > 3:
            return max(x)
        return min((x, 2))
    ''', SMALL)
    assert raised(t, grid(SMALL), TypeError)
