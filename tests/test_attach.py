"""Specs for code you cannot edit: ``attach`` on standard-library functions.

The specs below state published rules, and the functions are real code
nobody here wrote; each check names its source.
"""

import pytest

from refines import attach
from refines.verdict import ERROR, PROVED, REFUTED, TESTED

from helpers import check_one, check_source

CALENDAR = "import bisect\nimport calendar\nimport math\nfrom refines import attach\n\n"


def test_calendar_isleap_is_proved_to_follow_the_gregorian_rule(tmp_path):
    # The Gregorian leap-year rule as ISO 8601-1:2019 adopts it (recalled from
    # memory): every fourth year, except centuries not divisible by 400.
    # calendar.isleap is pure Python, so with a type for `year` it is translated.
    r = check_one(tmp_path, '''
        attach(calendar.isleap,
               lambda year, result: result == (year % 400 == 0 or
                                               (year % 4 == 0 and year % 100 != 0)),
               hints={"year": int})
        ''', header=CALENDAR)
    assert r.verdict == PROVED, (r.reason, r.counterexample)
    assert r.function == "calendar.isleap"


def test_a_julian_rule_is_refuted_on_a_century(tmp_path):
    r = check_one(tmp_path, '''
        attach(calendar.isleap, lambda year, result: result == (year % 4 == 0),
               hints={"year": int})
        ''', header=CALENDAR)
    assert r.verdict == REFUTED
    year = int(r.counterexample.inputs["year"])
    assert year % 100 == 0 and year % 400 != 0  # 1900 is no leap year
    assert r.counterexample.regression_test.startswith("def test_isleap_counterexample")
    assert "from calendar import isleap" in r.counterexample.regression_test


def test_calendar_leapdays_counts_the_leap_years_in_a_range(tmp_path):
    # Python Library Reference, calendar.leapdays: "the number of leap years in
    # the range [y1, y2)". The spec counts them with the Gregorian rule; the
    # count (a generator) is not translated, so it is tested.
    r = check_one(tmp_path, '''
        attach(calendar.leapdays,
               lambda y1, y2, result: result == sum(
                   1 for y in range(y1, y2)
                   if y % 400 == 0 or (y % 4 == 0 and y % 100 != 0)),
               assuming=lambda y1, y2: 0 <= y2 - y1 <= 2000,
               hints={"y1": int, "y2": int})
        ''', header=CALENDAR)
    assert r.verdict == TESTED
    assert r.testing.examples >= 100 and r.testing.from_solver > 0


def test_february_has_29_days_exactly_in_leap_years(tmp_path):
    # Gregorian calendar (ISO 8601-1:2019, recalled from memory): February has
    # 29 days in a leap year and 28 otherwise. calendar.monthrange goes through
    # datetime, which is not translated: tested, over the years datetime allows
    # (Python Library Reference, datetime.MINYEAR and MAXYEAR: 1 and 9999).
    r = check_one(tmp_path, '''
        attach(calendar.monthrange,
               lambda year, month, result: result[1] == (
                   29 if year % 400 == 0 or (year % 4 == 0 and year % 100 != 0) else 28),
               assuming=lambda year, month: 1 <= year <= 9999 and month == 2,
               hints={"year": int, "month": int})
        ''', header=CALENDAR)
    assert r.verdict == TESTED, (r.reason, r.counterexample)
    assert r.testing.rejected == 0  # the bounds in assuming shape the draws


def test_a_builtin_written_in_c_is_tested_and_called_positionally(tmp_path):
    # Python Library Reference, math.isqrt: "the floor of the exact square root
    # of n, or equivalently the greatest integer a such that a**2 <= n";
    # a negative n raises ValueError.
    r = check_one(tmp_path, '''
        attach(math.isqrt,
               lambda n, result: result * result <= n < (result + 1) * (result + 1),
               raises={ValueError: lambda n: n < 0}, hints={"n": int})
        ''', header=CALENDAR)
    assert r.verdict == TESTED
    assert "has no Python source" in r.reason and "built into the interpreter" in r.reason
    assert r.function == "math.isqrt"


def test_bisect_left_meets_its_documented_partition(tmp_path):
    # Python Library Reference, bisect.bisect_left: the insertion point ip
    # partitions a so that all(elem < x for elem in a[lo:ip]) and
    # all(elem >= x for elem in a[ip:hi]); a must be sorted.
    r = check_one(tmp_path, '''
        attach(bisect.bisect_left,
               lambda a, x, result: all(e < x for e in a[:result])
                                    and all(e >= x for e in a[result:]),
               assuming=lambda a, x: all(a[i] <= a[i + 1] for i in range(len(a) - 1)),
               hints={"a": list[int], "x": int})
        ''', header=CALENDAR)
    assert r.verdict == TESTED, (r.reason, r.counterexample)


def test_a_wrong_spec_on_a_builtin_is_refuted_by_testing(tmp_path):
    r = check_one(tmp_path, '''
        attach(abs, lambda x, result: result > 0, hints={"x": int})
        ''', header="from refines import attach\n\n")
    assert r.verdict == REFUTED
    assert r.counterexample.call == "abs(0)"  # positional-only: abs(x, /)
    assert r.counterexample.found_by == "testing"
    assert r.function == "builtins.abs"


def test_hints_must_name_parameters(tmp_path):
    r = check_one(tmp_path, '''
        attach(calendar.isleap, lambda year, result: True, hints={"yr": int})
        ''', header=CALENDAR)
    assert r.verdict == ERROR
    assert "`yr`" in r.reason and "year" in r.hint


def test_the_relation_must_use_the_targets_parameter_names(tmp_path):
    r = check_one(tmp_path, '''
        attach(calendar.isleap, lambda y, result: True, hints={"year": int})
        ''', header=CALENDAR)
    assert r.verdict == ERROR
    assert "`y`" in r.reason


def test_attach_outside_module_level_is_refused_at_once():
    with pytest.raises(TypeError, match="must be called at module level"):
        attach(abs, lambda x, result: True)


def test_attach_checks_its_arguments_like_refines():
    with pytest.raises(TypeError, match="attach expects a function"):
        attach(3, lambda result: True)
    with pytest.raises(TypeError, match="keys must be exception classes"):
        attach(abs, lambda x, result: True, raises={"ValueError": lambda x: True})


def test_several_specs_on_one_target_are_separate_obligations(tmp_path):
    results = check_source(tmp_path, '''
        attach(calendar.isleap, lambda year, result: isinstance(result, bool),
               hints={"year": int})
        attach(calendar.isleap, lambda year, result: result == (year % 4 == 0),
               hints={"year": int})
        ''', header=CALENDAR)
    assert [r.verdict for r in results] == [PROVED, REFUTED]
