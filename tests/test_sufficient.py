"""Simpler sufficient preconditions (refines.sufficient): what is offered,
that each one is as wide as it can be, and the order of doubles it searches.

The semantic check of every offered condition against running the function
is in test_suggestions.py (over the whole corpus); here the focus is on the
search: the interval found is the widest one (one step further breaks the
spec), an interval equivalent to the exact precondition replaces its printed
form, and nothing is offered when the exact precondition is already simple.
"""

import math
import random
import struct

from refines import sufficient
from refines.verdict import REFUTED

from helpers import check_one


def test_an_interval_on_one_parameter_is_offered_and_is_the_widest(tmp_path):
    r = check_one(tmp_path, """
        @refines(lambda kg, result: result <= 60)
        def compost_points(kg: int) -> int:
            return kg * 2 if kg % 2 == 0 else kg // 3
        """)
    assert r.verdict == REFUTED
    assert "%" in r.exact_precondition  # complicated: worth a simpler one
    assert "kg <= 31" in r.sufficient_preconditions
    # Widest: every kg up to 31 meets the spec, 32 does not (Python's // and %,
    # Language Reference, "Binary arithmetic operations").
    points = lambda kg: kg * 2 if kg % 2 == 0 else kg // 3  # noqa: E731
    assert all(points(k) <= 60 for k in range(-500, 32)) and points(32) > 60


def test_a_simple_precondition_of_two_cases_gets_no_alternatives(tmp_path):
    r = check_one(tmp_path, """
        @refines(lambda kg, organic, result: result <= 60)
        def harvest_points(kg: int, organic: bool) -> int:
            return kg * 2 if organic else kg % 7
        """)
    assert r.exact_precondition == "kg <= 30 or not organic"
    assert r.sufficient_preconditions == []


def test_a_division_by_a_parameter_gets_a_simple_sign_condition(tmp_path):
    # With Python's floor division, (total // people) * people <= total holds for
    # every positive divisor; a negative one needs a multiple (Language
    # Reference, "Binary arithmetic operations"), and zero raises.
    r = check_one(tmp_path, """
        @refines(lambda total, people, result: result * people <= total)
        def share(total: int, people: int) -> int:
            return total // people
        """)
    assert r.sufficient_preconditions == ["people > 0"]
    assert "people != 0" in r.exact_precondition
    for total in range(-30, 31):
        for people in range(1, 12):
            assert (total // people) * people <= total


def test_an_interval_equivalent_to_the_exact_precondition_replaces_it(tmp_path):
    # (7.0 - ph) * 2.0 is within [-6.0, 6.0] exactly for ph in [4.0, 10.0]:
    # the ends are exact in binary64, and the next double beyond either end
    # leaves the range (IEEE 754-2019, round to nearest, ties to even).
    r = check_one(tmp_path, """
        @refines(lambda ph, result: -6.0 <= result <= 6.0)
        def lime_units(ph: float) -> float:
            return (7.0 - ph) * 2.0
        """)
    assert r.exact_precondition == "4.0 <= ph <= 10.0"
    assert r.sufficient_preconditions == []
    assert (7.0 - 10.0) * 2.0 == -6.0 and (7.0 - 4.0) * 2.0 == 6.0
    assert (7.0 - math.nextafter(10.0, math.inf)) * 2.0 < -6.0
    assert (7.0 - math.nextafter(4.0, -math.inf)) * 2.0 > 6.0


def test_a_length_interval_for_a_str(tmp_path):
    r = check_one(tmp_path, """
        @refines(lambda code, result: len(result) <= 8)
        def row_code(code: str) -> str:
            return "RW-" + code + code[0] if code else "NONE"
        """)
    assert r.exact_precondition == "len(code) <= 4"
    assert len("RW-" + "abcd" + "a") == 8 and len("RW-" + "abcde" + "a") == 9


def test_nothing_is_offered_when_the_exact_precondition_is_simple(tmp_path):
    r = check_one(tmp_path, """
        @refines(lambda gardeners, result: 0 <= result <= 10,
                 assuming=lambda gardeners: gardeners >= 0)
        def plots_needed(gardeners: int) -> int:
            return (gardeners + 3) // 4
        """)
    assert r.exact_precondition == "-3 <= gardeners <= 40"
    assert r.sufficient_preconditions == []


def test_cases_of_a_disjunction_are_offered_when_no_interval_covers_more(tmp_path):
    r = check_one(tmp_path, """
        @refines(lambda spare, shed, result: shed == old(shed) + old(spare)
                 and spare == old(spare))
        def store_tools(spare: list[int], shed: list[int]) -> None:
            shed.extend(spare)
        """)
    assert r.exact_precondition == "shed + spare == spare or shed is not spare"
    assert r.sufficient_preconditions[0] == "shed is not spare"  # it allows the most
    assert len(r.sufficient_preconditions) <= sufficient.MAX_SHOWN


def test_doubles_in_order():
    # The search walks doubles in their numeric order: the key is monotone,
    # makes -0.0 and 0.0 one point, and round-trips every other double.
    rng = random.Random(7)
    values = [0.0, -0.0, 5e-324, -5e-324, 1.0, -1.0, math.inf, -math.inf, 1e308, -1e308]
    values += [struct.unpack("<d", struct.pack("<Q", rng.getrandbits(64)))[0] for _ in range(300)]
    values = [v for v in values if v == v]
    for v in values:
        assert sufficient._unkey(sufficient._key(v)) == v
    ordered = sorted(values)
    keys = [sufficient._key(v) for v in ordered]
    assert keys == sorted(keys)
    assert sufficient._key(-0.0) == sufficient._key(0.0)
    assert sufficient._key(math.nextafter(1.0, 2.0)) == sufficient._key(1.0) + 1


def test_the_nicest_end_stays_inside_the_interval():
    assert sufficient._nicest(9.5, 10.000000000000002) == 10.0
    assert sufficient._nicest(-3.25, -3.2500000000000004) in (-3.25, -3.2500000000000004)
    assert sufficient._nicest(0.1, 0.30000000000000004) == 0.3
    for inner, outer in ((1.5, 1.7), (2.0, 2.0), (-7.1, -9.9)):
        got = sufficient._nicest(inner, outer)
        assert min(inner, outer) <= got <= max(inner, outer)


def test_short_decimals_between_two_doubles_come_in_order():
    got = sufficient._short_decimals(9.000000000000002, 12.0)
    assert 10.0 in got and 11.5 in got and 9.5 in got
    assert got == sorted(got) and all(9.000000000000002 < v < 12.0 for v in got)
    down = sufficient._short_decimals(-2.5, -7.0)
    assert down == sorted(down, reverse=True) and -5.0 in down
    assert sufficient._short_decimals(1.0, 1.0) == []
    assert sufficient._short_decimals(0.0, math.inf) == []
