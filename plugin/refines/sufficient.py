"""Simpler sufficient preconditions: conditions that imply the exact one.

When the exact precondition is complicated (``complicated``: many cases or
comparisons, or comparisons that are not simple), one or two simpler
conditions often say nearly as much: one case of it, or an interval on one
parameter.
They are *stronger than necessary* -- every input they allow meets the spec,
but some inputs that meet it are left out -- and the report says so.

Candidates:

* each case (cube) of the printed exact precondition, when it has several;
* for each parameter, the widest interval around a point where the spec is
  met, on the parameter itself (an int, or a float: first over values worked
  out from the constants in the condition, then short decimals and doubles
  beyond) or on its length (a str or a list), found by galloping and
  bisection with one solver query per step;
* a single test: a bool parameter or its negation, ``x is not None``.

Each candidate is kept only if the solver shows that it implies the exact
precondition (read back from its printed text, so it cannot raise either),
that it is not equivalent to it, and that some input the current
``assuming`` allows satisfies it. They are ranked by how many of a sample of
inputs meeting the spec (diverse solver models) they allow, then by length,
and an interval is among those shown when there is one. An interval that is
*equivalent* to the exact precondition is returned apart: it prints it.
"""

from __future__ import annotations

import math
import struct
from typing import Callable, Dict, List, Optional, Sequence, Tuple

import z3

from refines import ir
from refines.readable import Printed, evaluate, implies, print_cube

MAX_SHOWN = 2
# Parameters whose intervals are searched, and seed points tried for each.
MAX_PARAMS = 6
MAX_SEEDS = 6
MAX_FLOAT_CONSTANTS = 6  # float constants whose products and quotients are tried
# Models of "assuming and the exact precondition" that rank the candidates.
SAMPLE = 12
# A precondition this long or longer is complicated even if linear.
LONG_TEXT = 60
# The share of the obligation's budget the search may spend.
SHARE = 0.25


def complicated(shown: Printed) -> bool:
    """Whether a printed precondition is worth simpler alternatives: more than
    two cases, more than three comparisons, ``LONG_TEXT`` characters or more,
    or a comparison that is not simple (see ``_simple``)."""
    if shown.cubes is None:
        return True
    literals = [lit for cube in shown.cubes for lit in cube]
    return (len(shown.cubes) > 2 or len(literals) > 3 or any(len(c) > 2 for c in shown.cubes)
            or len(shown.text) >= LONG_TEXT or not all(_simple(lit) for lit in literals))


_TESTS = {"isnan", "isinf", "isfinite"}


def _simple(lit: ir.Term) -> bool:
    """A comparison of plain things: parameters, constants, lengths, attributes,
    and sums or multiples of at most two of them (``climbers > 3 * belayers``),
    or a float test of one; not ``//``, ``%``, products, division, or a list or
    str built from others (``waiting + moved == moved``)."""
    if isinstance(lit, ir.Not):
        return _simple(lit.arg)
    if isinstance(lit, ir.Var) or (isinstance(lit, ir.Op) and lit.name in _TESTS):
        return True
    if not isinstance(lit, ir.Cmp):
        return False
    return all(_plain(side) for side in (lit.left, lit.right)) and len(
        [v for v in ir.variables(lit) if not v.name.startswith(ir.HEAP_PREFIX)]) <= 2


def _plain(t: ir.Term) -> bool:
    if isinstance(t, (ir.Var, ir.Const)):
        return True
    if isinstance(t, ir.Op):
        return t.name in ("len", "select") and ir.printed_size(t) <= 4
    if isinstance(t, ir.Neg):
        return _plain(t.arg)
    if isinstance(t, ir.Arith) and t.sort == ir.INT:
        if t.op == "*":
            return (isinstance(t.left, ir.Const) and _plain(t.right)) or (
                isinstance(t.right, ir.Const) and _plain(t.left))
        return t.op in ("+", "-") and _plain(t.left) and _plain(t.right)
    return False


def alternatives(target: ir.Term, shown: Printed, assuming: ir.Term,
                 params: Sequence[ir.Var], solver) -> Tuple[List[str], Optional[str]]:
    """Up to ``MAX_SHOWN`` checked texts, each implying ``target``; and an
    interval found to be *equivalent* to ``target``, if one is (a simpler way
    to print the exact precondition: ``-100.0 <= t <= 50.0``), else None."""
    if not complicated(shown) or shown.text in ("True", "False"):
        return [], None
    floor = solver.budget.units - int(SHARE * solver.budget.seconds * _units_per_second())

    def affordable() -> bool:
        return solver.budget.units > floor and solver.budget.remaining() > 0

    intervals: List[str] = []
    for p in list(params)[:MAX_PARAMS]:
        if not affordable():
            break
        interval = _interval(p, target, assuming, solver, affordable)
        if interval is not None:
            intervals.append(interval)
    others: List[str] = []
    if shown.cubes and len(shown.cubes) > 1:
        others.extend(print_cube(c) for c in shown.cubes)
    others.extend(_single_tests(params))

    same: List[str] = []  # equivalent to the target, by the checks below
    read: Dict[str, object] = {}  # text -> the condition read back (a SpecValue)

    def useful(texts: List[str]) -> List[str]:
        kept = []
        for text in dict.fromkeys(texts):
            if not affordable():
                break
            value = None if text == shown.text else implies(text, target, ir.TRUE, params,
                                                            solver)
            if value is None:
                continue
            if solver.check(target, ir.not_(value.holds))[0] == z3.unsat:
                same.append(text)  # the exact one, in other words
                continue
            if solver.check(assuming, value.holds)[0] != z3.sat:
                continue  # nothing the current assuming allows: no help
            read[text] = value
            kept.append(text)
        return kept

    ranged = useful(intervals)
    simpler = min((t for t in same if len(t) < len(shown.text)), key=len, default=None)
    if simpler is not None:
        return [], simpler  # the exact precondition is that simple: nothing to add
    # The ones that allow most first; an interval among them if there is one.
    ranked = _ranked(ranged + useful(others), read, target, assuming, params, solver)
    chosen = ranked[:MAX_SHOWN]
    best_interval = next((t for t in ranked if t in ranged), None)
    if best_interval is not None and best_interval not in chosen:
        chosen = chosen[:MAX_SHOWN - 1] + [best_interval]
    return chosen, None


def _units_per_second() -> int:
    from refines.prove import RLIMIT_PER_SECOND

    return RLIMIT_PER_SECOND


def _ranked(texts: List[str], read: Dict[str, object], target: ir.Term, assuming: ir.Term,
            params: Sequence[ir.Var], solver) -> List[str]:
    """By how many sampled inputs that meet the spec each allows, then length;
    of two equivalent texts the first is kept (``read``: each text read back)."""
    if len(texts) <= 1:
        return texts
    from refines.prove import diverse

    try:
        sample = diverse(solver, params, [assuming, target], SAMPLE)
    except Exception:  # noqa: BLE001 -- ranking is an aid
        sample = []

    def covered(text: str) -> int:
        return sum(bool(evaluate(text, inputs)) for inputs in sample)

    out: List[str] = []
    for text in sorted(texts, key=lambda t: (-covered(t), len(t), t)):
        if not any(solver.check(ir.not_(ir.cmp("==", read[text].holds, read[o].holds)))[0]
                   == z3.unsat for o in out):
            out.append(text)
    return out


# ---------------------------------------------------------------- intervals


def _interval(p: ir.Var, target: ir.Term, assuming: ir.Term, solver,
              affordable: Callable[[], bool]) -> Optional[str]:
    """The widest interval on ``p`` (or on its length) around a point where
    it implies ``target`` for every value of the other parameters."""
    if p.optional:
        return None
    if p.sort == ir.INT:
        measure, domain = p, _Ints(None)
    elif p.sort == ir.STR or (p.sort == ir.REF and p.kind.startswith("list:")):
        measure, domain = _length(p), _Ints(0)
    elif p.sort == ir.FLOAT:
        measure, domain = p, _Floats(_float_constants(target))
    else:
        return None

    def holds_on(lo, hi) -> bool:
        return _implied(measure, None if lo is None else domain.term(lo),
                        None if hi is None else domain.term(hi), target, solver, affordable)

    seed = None
    for v in domain.seeds(_seed_values(measure, target, assuming, solver)):
        if holds_on(v, v):
            seed = v
            break
    if seed is None:
        return None
    hi = _widest(seed, domain.up, domain.top, lambda k: holds_on(seed, k))
    lo = _widest(seed, domain.down, domain.bottom, lambda k: holds_on(k, seed))
    lo = None if lo == domain.bottom else lo
    hi = None if hi == domain.top else hi
    if lo is None and hi is None:
        if p.sort == ir.FLOAT:  # between the infinities: any float but a NaN
            return f"not math.isnan({p.name})"
        return None  # no bound at all: the target holds everywhere
    if p.sort == ir.FLOAT:
        return _float_interval(measure, domain, seed, lo, hi, target, solver, affordable)
    return domain.text(ir.render(measure), lo, hi, _int_constants(target))


def _float_interval(measure, domain: "_Floats", seed: int, lo: Optional[int],
                    hi: Optional[int], target: ir.Term, solver, affordable) -> str:
    """The float interval's ends, from the candidate points out to the last
    double that still implies ``target`` (bisection over the doubles in
    order), then the shortest decimal between the two (``10.0``, not
    ``10.000000000000002``): any point inside is still sufficient."""
    points = domain.points

    def ok(low: Optional[float], high: Optional[float]) -> bool:
        return _implied(measure, None if low is None else ir.const(low),
                        None if high is None else ir.const(high), target, solver, affordable)

    centre = points[seed]
    high = None if hi is None else _nicest(points[hi], _last_good(
        points[hi], points[hi + 1], lambda v: ok(centre, v)))
    low = None if lo is None else _nicest(points[lo], _last_good(
        points[lo], points[lo - 1], lambda v: ok(v, centre)))
    return domain.text_values(ir.render(measure), low, high)


def _key(f: float) -> int:
    """Doubles in order as integers (-0.0 and 0.0 are one point)."""
    bits = struct.unpack("<q", struct.pack("<d", f))[0]
    return bits if bits >= 0 else -(bits & 0x7FFFFFFFFFFFFFFF)


def _unkey(k: int) -> float:
    bits = k if k >= 0 else (-k) | -0x8000000000000000
    return struct.unpack("<d", struct.pack("<q", bits))[0]


def _last_good(good: float, bad: float, ok: Callable[[float], bool]) -> float:
    """The last double from ``good`` towards ``bad`` for which ``ok`` holds.

    Short decimals in between are tried first (by bisection over them), since
    the end is often one (``10.0``): when the double just past the best of them
    fails, that is the end, in a handful of queries instead of one per bit."""
    nice = _short_decimals(good, bad)
    if nice:
        low, high = -1, len(nice)  # ok holds at good (index -1), fails at bad
        while high - low > 1:
            mid = (low + high) // 2
            if ok(nice[mid]):
                low = mid
            else:
                high = mid
        if low >= 0:
            good = nice[low]
            past = math.nextafter(good, bad)
            if not ok(past):
                return good
        if high < len(nice):
            bad = nice[high]
    g, b = _key(good), _key(bad)
    while abs(b - g) > 1:
        mid = (g + b) // 2
        if ok(_unkey(mid)):
            g = mid
        else:
            b = mid
    return _unkey(g)


def _short_decimals(a: float, b: float, digits: int = 3, most: int = 2000) -> List[float]:
    """Decimals of up to ``digits`` significant digits strictly between ``a`` and
    ``b``, in order from ``a`` towards ``b``."""
    low, high = min(a, b), max(a, b)
    if not (math.isfinite(low) and math.isfinite(high)) or low == high:
        return []
    top = max(abs(low), abs(high))
    out = set()
    for d in range(1, digits + 1):
        step = 10.0 ** (math.floor(math.log10(top)) - d + 1) if top else 0.0
        if not step or (high - low) / step > most:
            continue
        k = math.floor(low / step) + 1
        while k * step < high:
            v = float(f"{k * step:.{d + 2}g}")
            if low < v < high:
                out.add(v)
            k += 1
    return sorted(out, reverse=a > b)


def _nicest(inner: float, outer: float) -> float:
    """The float with the shortest decimal form between ``inner`` and ``outer``."""
    low, high = min(inner, outer), max(inner, outer)
    for digits in range(1, 18):
        candidate = float(f"{outer:.{digits}g}")
        if low <= candidate <= high:
            return candidate
    return outer


def _implied(measure: ir.Term, low: Optional[ir.Term], high: Optional[ir.Term],
             target: ir.Term, solver, affordable: Callable[[], bool]) -> bool:
    """Whether ``low <= measure <= high`` (None: no bound) implies ``target``
    for every value of everything else, by the solver within the budget."""
    if not affordable():
        return False
    parts = [ir.not_(target)]
    if low is not None:
        parts.append(ir.cmp(">=", measure, low))
    if high is not None:
        parts.append(ir.cmp("<=", measure, high))
    return solver.check(*parts)[0] == z3.unsat


def _widest(seed, step: Callable, end, ok: Callable) -> Optional[object]:
    """The farthest point from ``seed`` (moving by ``step(point, n)``) for
    which ``ok`` holds, given that it holds at ``seed``; ``end`` (None: no
    end) when it holds there."""
    if ok(end):
        return end
    good, n = seed, 1
    bad = None
    for _ in range(64):  # gallop
        probe = step(seed, n)
        if ok(probe):
            good, n = probe, n * 2
        else:
            bad = probe
            break
    if bad is None:
        return good
    lo_n, hi_n = n // 2, n  # good at lo_n steps (0: the seed), bad at hi_n
    while hi_n - lo_n > 1:  # bisect
        mid = (lo_n + hi_n) // 2
        probe = step(seed, mid)
        if ok(probe):
            lo_n, good = mid, probe
        else:
            hi_n = mid
    return good


class _Ints:
    """Integers (from ``bottom`` up, when given): the interval's points."""

    top = None

    def __init__(self, bottom: Optional[int]) -> None:
        self.bottom = bottom

    def term(self, k: int) -> ir.Term:
        return ir.const(k)

    def up(self, k: int, n: int) -> int:
        return k + n

    def down(self, k: int, n: int) -> int:
        out = k - n
        return out if self.bottom is None or out >= self.bottom else self.bottom

    def seeds(self, values: List[int]) -> List[int]:
        out = [v for v in values if self.bottom is None or v >= self.bottom]
        return list(dict.fromkeys(out))[:MAX_SEEDS]

    def text(self, name: str, lo: Optional[int], hi: Optional[int], constants: set) -> str:
        # Keep the condition's own constants where a strict bound shows them:
        # `age < 14` rather than `age <= 13`.
        if lo is None and hi is not None and hi == self.bottom:
            lo = hi  # a length of at most 0 is a length of 0
        if lo is not None and hi is not None:
            if lo == hi:
                return f"{name} == {lo}"
            return f"{lo} <= {name} <= {hi}"
        if lo is not None:
            return f"{name} > {lo - 1}" if lo - 1 in constants and lo - 1 != -1 else \
                f"{name} >= {lo}"
        return f"{name} < {hi + 1}" if hi + 1 in constants and hi + 1 != 1 else \
            f"{name} <= {hi}"


class _Floats:
    """Floats: candidate ends are the constants of the condition and values
    worked out from them, their neighbours, 0.0, 1.0 and the infinities
    (sorted); ``_float_interval`` then refines the ends found between them."""

    def __init__(self, constants: List[float]) -> None:
        points = {0.0, 1.0, -1.0, math.inf, -math.inf}
        finite = [c for c in constants if math.isfinite(c)][:MAX_FLOAT_CONSTANTS]
        # Bounds are often worked out from the constants: 100.0 / 2.0, 7.0 + 3.0.
        derived = set(finite) | {-c for c in finite}
        for a in finite:
            for b in finite:
                derived.update((a + b, a - b, a * b))
                if b:
                    derived.add(a / b)
        for c in derived:
            if math.isfinite(c):
                points.update({c, -c, math.nextafter(c, math.inf), math.nextafter(c, -math.inf)})
        self.points = sorted(points)
        self.bottom, self.top = 0, len(self.points) - 1

    def term(self, i: int) -> ir.Term:
        return ir.const(self.points[i])

    def up(self, i: int, n: int) -> int:
        return min(i + n, self.top)

    def down(self, i: int, n: int) -> int:
        return max(i - n, self.bottom)

    def seeds(self, values: List[float]) -> List[int]:
        out = []
        for v in values:
            if isinstance(v, float) and v == v:
                out.append(min(range(len(self.points)), key=lambda i: abs(self.points[i] - v)
                               if math.isfinite(self.points[i] - v) else math.inf))
        out.extend(i for i, c in enumerate(self.points) if math.isfinite(c))
        return list(dict.fromkeys(out))[:MAX_SEEDS]

    def text_values(self, name: str, lo: Optional[float], hi: Optional[float]) -> str:
        show = lambda v: ir.render(ir.const(v))  # noqa: E731
        if lo is not None and hi is not None:
            return f"{show(lo)} <= {name} <= {show(hi)}"
        if lo is not None:
            return f"{name} >= {show(lo)}"
        return f"{name} <= {show(hi)}"


def _length(p: ir.Var) -> ir.Term:
    v = ir.initial(p)
    if isinstance(v, ir.Ref):
        from refines import heap

        return ir.op("len", heap.initial_contents(v), sort=ir.INT)
    return ir.str_len(p)


def _seed_values(measure: ir.Term, target: ir.Term, assuming: ir.Term, solver) -> list:
    """Points to start from: the measure in a model of ``assuming and
    target`` (then of ``target``), and the constants of the condition."""
    out = []
    for terms in ((assuming, target), (target,)):
        status, model, _ = solver.check(*terms)
        if status == z3.sat:
            out.append(solver.value(model, measure))
    if measure.sort == ir.INT:
        consts = sorted(_int_constants(target) | {0, 1}, key=lambda c: (abs(c), c))
        for c in consts:
            out.extend((c, c - 1, c + 1))
    return out


def _int_constants(t: ir.Term) -> set:
    return ir.constants(t)


def _float_constants(t: ir.Term) -> List[float]:
    return sorted(ir.constants(t, (ir.FLOAT,)))


def _single_tests(params: Sequence[ir.Var]) -> List[str]:
    """One-literal candidates: a bool parameter, ``x is not None``."""
    out = []
    for p in params:
        if p.optional:
            out.extend([f"{p.name} is not None", f"{p.name} is None"])
        elif p.sort == ir.BOOL:
            out.extend([p.name, f"not {p.name}"])
    return out
