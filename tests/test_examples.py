"""What the tester draws: bounds read from assuming, boundary values, strategies."""

import math
import struct
import sys
from typing import Optional

import pytest
from hypothesis import HealthCheck, given, settings

from refines import examples
from refines.examples import Bounds, Constants, boundary_values, strategy_for

from helpers import load_module


def _assuming_of(tmp_path, source: str, name: str = "f"):
    from refines.source import read_obligation

    module, path = load_module(tmp_path, source)
    fn = getattr(module, name)
    return read_obligation(fn, 0, str(path), module.__name__)


@pytest.mark.parametrize("assuming, param, expected", [
    ("0 <= x < 60", "x", dict(lo=0, hi=60, hi_strict=True)),
    ("x > LIMIT", "x", dict(lo=12, lo_strict=True)),
    ("2 * LIMIT >= x and x != 3", "x", dict(hi=24)),
    ("len(s) > 0", "s", dict(min_len=1)),
    ("0 < len(s) <= 8", "s", dict(min_len=1, max_len=8)),
    ("code in ('A', 'B')", "code", dict(choices=("'A'", "'B'"))),
    ("y is not None", "y", dict(not_none=True)),
    ("not math.isnan(z)", "z", dict(not_nan=True)),
    ("math.isfinite(z)", "z", dict(finite=True)),
    ("x >= 0 and x >= 5", "x", dict(lo=5)),  # the tighter of two bounds
    ("-1.5 < x", "x", dict(lo=-1.5, lo_strict=True)),
])
def test_bounds_are_read_from_simple_conjuncts(tmp_path, assuming, param, expected):
    ob = _assuming_of(tmp_path, f'''
        import math
        from typing import Optional
        LIMIT = 12

        @refines(lambda x, s, code, y, z, result: True,
                 assuming=lambda x, s, code, y, z: {assuming})
        def f(x: int, s: str, code: str, y: Optional[int], z: float) -> int:
            return 0
        ''')
    b = examples.bounds(ob.assuming)[param]
    for key, value in expected.items():
        got = getattr(b, key)
        if key == "choices":
            got = tuple(repr(c) for c in got)
        assert got == value, (key, got)


@pytest.mark.parametrize("assuming", [
    "x % 7 == 0",  # not a bound: left to the run-time check (and the solver)
    "x > y",  # two parameters
    "f_helper(x) > 0",  # a call is not evaluated while reading bounds
    "x > 0 or x < -10",  # a disjunction is not one interval
])
def test_what_is_not_a_simple_bound_is_left_alone(tmp_path, assuming):
    ob = _assuming_of(tmp_path, f'''
        def f_helper(v):
            return v

        @refines(lambda x, y, result: True, assuming=lambda x, y: {assuming})
        def f(x: int, y: int) -> int:
            return 0
        ''')
    bounds = examples.bounds(ob.assuming)
    assert all(b == Bounds() for b in bounds.values()), bounds


def test_binary64_edges_are_the_ieee_values():
    # IEEE 754-2019, 3.3/3.4: binary64 has p = 53 and emin = -1022, so the
    # smallest subnormal is 2**-1074, the smallest normal 2**-1022 and the
    # largest finite value (2 - 2**-52) * 2**1023. sys.float_info agrees.
    edges = examples.FLOAT_EDGES
    assert 2.0 ** -1074 in edges and 2.0 ** -1022 in edges
    assert math.nextafter(2.0 ** -1022, 0.0) in edges  # the largest subnormal
    assert (2 - 2 ** -52) * 2.0 ** 1023 in edges
    assert sys.float_info.min in edges and sys.float_info.max in edges
    assert any(math.isnan(e) for e in edges) and math.inf in edges and -math.inf in edges
    signs = {struct.pack(">d", e)[0] >> 7 for e in edges if e == 0.0}
    assert signs == {0, 1}  # both zeros


def test_int_boundaries_are_each_constant_and_its_neighbours():
    values = boundary_values(int, Constants(numbers=[14, 2.5]))
    assert values[:3] == [14, 13, 15]
    assert {2, 1, 3} <= set(values) and {0, 1, -1} <= set(values)


def test_float_boundaries_are_the_adjacent_doubles():
    values = boundary_values(float, Constants(numbers=[0.1]))
    assert values[:3] == [0.1, math.nextafter(0.1, -math.inf), math.nextafter(0.1, math.inf)]
    assert values[1] < 0.1 < values[2]


def test_str_and_list_and_optional_boundaries():
    strs = boundary_values(str, Constants(texts=["GYM-"]))
    assert strs[:3] == ["GYM-", "GYM", "GYM--"] and "" in strs and "ß" in strs
    assert boundary_values(Optional[int], Constants(numbers=[3]))[0] is None
    lists = boundary_values(list[int], Constants(numbers=[3]))
    assert lists[0] == [] and [3] in lists and [3, 3] in lists


@pytest.mark.parametrize("hint, b, check", [
    (int, Bounds(lo=0, hi=60, hi_strict=True), lambda v: 0 <= v < 60),
    (int, Bounds(lo=-1.5, lo_strict=True), lambda v: v >= -1),
    (int, Bounds(hi=2.5), lambda v: v <= 2),
    (float, Bounds(lo=0.0, lo_strict=True, hi=1.0), lambda v: 0.0 < v <= 1.0),
    (float, Bounds(not_nan=True), lambda v: not math.isnan(v)),
    (float, Bounds(finite=True), lambda v: math.isfinite(v)),
    (str, Bounds(min_len=2, max_len=3), lambda v: 2 <= len(v) <= 3),
    (Optional[int], Bounds(not_none=True, lo=5), lambda v: v is not None and v >= 5),
    (list[int], Bounds(min_len=1), lambda v: len(v) >= 1),
    (str, Bounds(choices=("A", "B")), lambda v: v in ("A", "B")),
])
def test_strategies_stay_inside_their_bounds(hint, b, check):
    strategy = strategy_for(hint, b, "p")

    @settings(max_examples=200, database=None, derandomize=True,
              suppress_health_check=list(HealthCheck))
    @given(strategy)
    def inside(v):
        assert check(v), v

    inside()


def test_contradictory_int_bounds_cannot_be_drawn():
    with pytest.raises(examples.CannotDraw, match="no int"):
        strategy_for(int, Bounds(lo=5, hi=4), "qty")


def test_a_hint_that_says_nothing_cannot_be_drawn():
    from typing import Any

    with pytest.raises(examples.CannotDraw, match="`p`"):
        strategy_for(Any, Bounds(), "p")


def test_objects_without_init_get_their_annotated_attributes(tmp_path):
    module, _ = load_module(tmp_path, '''
        class Hold:
            colour: str
            size: int
        ''')
    values = []

    @settings(max_examples=30, database=None, derandomize=True)
    @given(strategy_for(module.Hold, Bounds(), "h", Constants(numbers=[7])))
    def collect(h):
        values.append(h)

    collect()
    assert all(type(h) is module.Hold and isinstance(h.colour, str)
               and isinstance(h.size, int) for h in values)


def test_constants_come_from_the_spec_and_the_body(tmp_path):
    ob = _assuming_of(tmp_path, '''
        SMALL_GROUP = 6

        @refines(lambda people, result: result <= 40.5)
        def fee(people: int) -> float:
            if people < SMALL_GROUP:
                return 12.5 * people
            return -3 + 2.0 * people
        ''', name="fee")
    consts = examples.constants(ob)
    assert {40.5, 6, 12.5, -3, 2.0} <= set(consts.numbers)


def test_same_typed_mutable_parameters_may_be_one_object(tmp_path):
    ob = _assuming_of(tmp_path, '''
        @refines(lambda a, b, n, m, result: True)
        def f(a: list[int], b: list[int], n: int, m: int) -> None:
            pass
        ''')
    plan = examples.plan(ob)
    assert plan.shares == {"b": "a"}  # ints are never aliased: nothing can change them
