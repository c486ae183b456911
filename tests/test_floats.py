"""Floats end to end: IEEE 754 binary64 exactly as CPython computes it.

Corner cases are from IEEE 754-2019 (binary64 arithmetic, round to nearest,
ties to even; §4.3, §6.2 on NaN, §6.3 on the sign of zero) and the Python
documentation (Language Reference 6.7 "Binary arithmetic operations" and 6.10
"Comparisons"; the `math` module). Expected values were checked by running
CPython 3.11 here, and agree with the standard as recalled from memory.
"""

import math

import pytest

from refines.verdict import PROVED, REFUTED

from helpers import check_one

IEEE_CASES = [
    # 0.1 + 0.2 rounds to 0.30000000000000004, not to the double nearest 0.3.
    ("sum_of_tenths", "lambda a, b, result: result != 0.3",
     "lambda a, b: a == 0.1 and b == 0.2", "return a + b"),
    # -0.0 == 0.0 (IEEE 754-2019 §5.11: comparisons ignore the sign of zero).
    ("signed_zero", "lambda a, b, result: result",
     "lambda a, b: a == 0.0 and math.copysign(1.0, a) < 0 and b == 0.0", "return a == b"),
    # NaN is unordered: nan != nan and nan == nan is False.
    ("nan_unequal", "lambda a, b, result: result is False or result == 0",
     "lambda a, b: math.isnan(a)", "return a == a"),
    # Overflow rounds to infinity (no exception for *): 1e308 * 10 == inf.
    ("overflow_to_inf", "lambda a, b, result: result == float('inf')",
     "lambda a, b: a == 1e308 and b == 10.0", "return a * b"),
    # The smallest subnormal halved rounds (ties to even) to 0.0.
    ("underflow_to_zero", "lambda a, b, result: result == 0.0",
     "lambda a, b: a == 5e-324 and b == 2.0", "return a / b"),
    # Ties to even: 2**53 + 1 is halfway between two doubles; it rounds to 2**53.
    ("ties_to_even", "lambda a, b, result: result == 2.0 ** 53",
     "lambda a, b: a == 2.0 ** 53 and b == 1.0", "return a + b"),
]


@pytest.mark.parametrize("name,relation,assuming,body", IEEE_CASES,
                         ids=[c[0] for c in IEEE_CASES])
def test_ieee_754_corner_cases_are_proved(tmp_path, name, relation, assuming, body):
    r = check_one(tmp_path, f'''
        import math

        @refines({relation}, assuming={assuming})
        def f(a: float, b: float):
            {body}
        ''')
    assert r.verdict == PROVED, r.reason or r.counterexample


def test_the_opposite_claims_are_refuted(tmp_path):
    # The same facts, stated wrongly, must fail: 0.1 + 0.2 == 0.3 is refuted.
    r = check_one(tmp_path, '''
        @refines(lambda a, b, result: result == 0.3,
                 assuming=lambda a, b: a == 0.1 and b == 0.2)
        def add(a: float, b: float) -> float:
            return a + b
        ''')
    assert r.verdict == REFUTED
    assert r.counterexample.outcome == {"returned": "0.30000000000000004"}


def test_nan_slips_through_a_clamp_and_the_precondition_names_it(tmp_path):
    # max(min(x, 1.0), 0.0) keeps NaN: min(nan, 1.0) is nan (1.0 < nan is false)
    # and max(nan, 0.0) is nan, so the range claim fails only for NaN.
    r = check_one(tmp_path, '''
        @refines(lambda x, result: 0.0 <= result <= 1.0)
        def clamp(x: float) -> float:
            return max(min(x, 1.0), 0.0)
        ''')
    assert r.verdict == REFUTED
    assert r.counterexample.call == "clamp(x=float('nan'))"
    assert r.exact_precondition == "not math.isnan(x)"


def test_int_of_a_float_raises_on_infinity(tmp_path):
    r = check_one(tmp_path, '''
        @refines(lambda euros, result: result >= 0, assuming=lambda euros: euros >= 0.0)
        def to_cents(euros: float) -> int:
            return int(euros * 100)
        ''')
    assert r.verdict == REFUTED
    # Either euros is inf, or euros * 100 overflows to inf; int(inf) raises.
    assert r.counterexample.outcome == {"raised": "OverflowError"}
    assert float(r.counterexample.inputs["euros"]) * 100 == math.inf


def test_float_of_an_int_overflows_exactly_where_cpython_does(tmp_path):
    # float(n) raises OverflowError from 2**1024 - 2**970 on (the first integer
    # that rounds beyond the largest double); a spec that says 2**1024 is wrong.
    wrong = check_one(tmp_path, '''
        @refines(lambda n, result: True, raises={OverflowError: lambda n: abs(n) >= 2 ** 1024})
        def as_float(n: int) -> float:
            return float(n)
        ''')
    assert wrong.verdict == REFUTED
    n = int(wrong.counterexample.inputs["n"])
    with pytest.raises(OverflowError):
        float(n)
    assert abs(n) < 2 ** 1024
    right = check_one(tmp_path, '''
        @refines(lambda n, result: True,
                 raises={OverflowError: lambda n: abs(n) >= 2 ** 1024 - 2 ** 970})
        def as_float(n: int) -> float:
            return float(n)
        ''')
    assert right.verdict == PROVED


def test_sqrt_domain_error_is_an_outcome(tmp_path):
    r = check_one(tmp_path, '''
        import math

        @refines(lambda x, result: result >= 0.0 or math.isnan(result),
                 raises={ValueError: lambda x: x < 0.0})
        def root(x: float) -> float:
            return math.sqrt(x)
        ''')
    assert r.verdict == PROVED


def test_division_by_float_zero_raises_even_for_nan(tmp_path):
    r = check_one(tmp_path, '''
        @refines(lambda x, y, result: True, raises={ZeroDivisionError: lambda x, y: y == 0.0})
        def ratio(x: float, y: float) -> float:
            return x / y
        ''')
    assert r.verdict == PROVED


def test_int_and_float_compare_exactly(tmp_path):
    # 2**53 + 1 is not equal to float(2**53), although float(2**53 + 1) is.
    r = check_one(tmp_path, '''
        @refines(lambda n, x, result: result is False,
                 assuming=lambda n, x: n == 2 ** 53 + 1 and x == 2.0 ** 53)
        def same(n: int, x: float) -> bool:
            return n == x
        ''')
    assert r.verdict == PROVED


def test_exact_precondition_over_floats_is_valid_python(tmp_path):
    r = check_one(tmp_path, '''
        @refines(lambda x, result: result > 5.0)
        def shift(x: float) -> float:
            return x + 1.0
        ''')
    assert r.verdict == REFUTED
    for x in (4.0, 4.000000000000001, 3.9999999999999996, 1e300, -1.0, math.inf):
        assert eval(r.exact_precondition, {"math": math}, {"x": x}) == (x + 1.0 > 5.0)
    assert eval(r.exact_precondition, {"math": math}, {"x": math.nan}) is False


def test_copysign_from_a_nan_is_not_proved(tmp_path):
    # CPython reads the sign bit of a NaN (-float('nan') is negative); the
    # solver's NaN has none, so a proof must not cover that case.
    r = check_one(tmp_path, '''
        import math

        @refines(lambda x, s, result: result >= 0.0 or result < 0.0 or math.isnan(result))
        def signed(x: float, s: float) -> float:
            return math.copysign(x, s)
        ''')
    # Not proved; the tester runs it instead (every float meets this spec).
    assert r.verdict == "tested"
    assert "NaN" in r.reason and "signed(" in r.reason
    assert r.testing.examples > 0
    excluded = check_one(tmp_path, '''
        import math

        @refines(lambda x, s, result: abs(result) == abs(x) or math.isnan(x),
                 assuming=lambda x, s: not math.isnan(s))
        def signed(x: float, s: float) -> float:
            return math.copysign(x, s)
        ''')
    assert excluded.verdict == PROVED
