"""Solver strategy for float queries: z3 alone (the code before solve.py) against
the chosen strategy (``refines.solve.DEFAULT``), and the candidates it was chosen from.

Two sections, both at the default budget of 10 s (``--budget``):

1. **Full pipeline.** Every case below is checked with ``check_function``
   (translation, solving, replay, exact precondition), once per z3 seed for
   "z3 alone" (seed ``default`` is the code before solve.py exactly; other
   seeds set z3's ``random_seed``) and ``--runs`` times with the chosen
   strategy, interleaved case by case so that machine load hits both alike.
   Per case it prints the verdicts, the median and max wall time, and the
   ratio of the medians; and how far past the wall-clock backstop
   (``BACKSTOP`` x budget) any check ended.
2. **Candidates on the proving queries.** The main query of each float case
   is captured as SMT-LIB2, read into a fresh context, and given to each
   candidate strategy (``solve.Runner`` with a fresh 10 s budget): z3 with
   its default solver, with a bit-blasting tactic pipeline, with three seeds
   splitting the budget, bitwuzla alone, bitwuzla then z3 on a reserve, z3
   on a slice then bitwuzla. It prints status and time, and the work rates
   (z3 units and bitwuzla polls per second) of the steps that a limit
   stopped, which calibrate ``solve.BITWUZLA_POLLS_PER_SECOND``.

Run: ``python tests/benchmarks/bench_solver_strategy.py [--runs 3] [--seeds default,1,2]
[--budget 10] [--no-candidates] [--alternatives] [--quick]``. ``--alternatives`` also
runs ``ALTERNATIVES`` (other whole strategies) through the full pipeline, once each. A
full run takes about 15-20 minutes (z3 alone spends the whole backstop, 20 s, on every
query it cannot decide); ``--quick`` checks each case once and skips the candidates.
"""

from __future__ import annotations

import argparse
import statistics
import sys
import tempfile
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Dict, List, Optional, Sequence, Tuple

import z3

import refines.check
import refines.prove
import refines.solve as solve
from bench_overhead import Instrumented, load_source, patched

BUDGET = 10.0  # seconds: the plugin's default --refines-timeout

# ---------------------------------------------------------------- the corpus

# Invented scenarios. Hard float cases first, then easy float ones, then
# integer controls (which must keep z3's single fast path).
CASES_SOURCE = '''
import math
from refines import refines


@refines(lambda lo, hi, result: math.isfinite(result),
         assuming=lambda lo, hi: math.isfinite(lo) and math.isfinite(hi))
def sensor_midpoint(lo: float, hi: float) -> float:
    """Centre of a sensor's calibrated range: (lo + hi) overflows for huge bounds."""
    return (lo + hi) / 2


@refines(lambda price, qty, result: result == price,
         assuming=lambda price, qty: math.isfinite(price) and math.isfinite(qty)
         and qty != 0.0)
def unit_price_from_total(price: float, qty: float) -> float:
    """The unit price recovered from an invoice line: rounding breaks the round trip."""
    line_total = price * qty
    return line_total / qty


@refines(lambda t, result: 0.0 <= result <= 1.0, assuming=lambda t: 0.0 <= t <= 1.0)
def thermistor_curve(t: float) -> float:
    """A degree-5 calibration polynomial in Horner form stays within [0, 1]."""
    return ((((0.05 * t - 0.1) * t + 0.2) * t - 0.3) * t + 0.35) * t + 0.3


@refines(lambda r, g, b, result: 0.0 <= result <= 360.0,
         assuming=lambda r, g, b: 0.0 <= r <= 1.0 and 0.0 <= g <= 1.0 and 0.0 <= b <= 1.0)
def led_hue(r: float, g: float, b: float) -> float:
    """Hue in degrees of an LED colour: three divisions, one per sector."""
    mx = max(r, g, b)
    mn = min(r, g, b)
    chroma = mx - mn
    if chroma == 0.0:
        return 0.0
    if mx == r:
        h = (g - b) / chroma
    elif mx == g:
        h = (b - r) / chroma + 2.0
    else:
        h = (r - g) / chroma + 4.0
    h = h * 60.0
    if h < 0.0:
        h = h + 360.0
    return h


@refines(lambda c, result: result > c, assuming=lambda c: -300.0 <= c <= 1e6)
def to_kelvin(c: float) -> float:
    """Easy: a Celsius reading in Kelvin is larger."""
    return c + 273.15


@refines(lambda x, lo, hi, result: lo <= result <= hi, assuming=lambda x, lo, hi: lo <= hi)
def clamp_reading(x: float, lo: float, hi: float) -> float:
    """Easy, refuted: a NaN reading passes through the clamp."""
    if x < lo:
        return lo
    if x > hi:
        return hi
    return x


@refines(lambda measured, expected, result: result >= 0.0 or math.isnan(result))
def abs_error(measured: float, expected: float) -> float:
    """Easy: an absolute error is not negative."""
    return abs(measured - expected)


@refines(lambda total, parts, result: math.isfinite(result),
         assuming=lambda total, parts: math.isfinite(total),
         raises={ZeroDivisionError: lambda parts: parts == 0.0})
def per_part(total: float, parts: float) -> float:
    """Easy, refuted: a tiny divisor overflows the share to inf."""
    return total / parts


@refines(lambda litres, result: result >= litres and result <= 4 * litres + 100,
         assuming=lambda litres: litres >= 0)
def water_bill(litres: int) -> int:
    """Integer control: tiered water pricing."""
    if litres <= 100:
        cost = litres
    elif litres <= 500:
        cost = 100 + 2 * (litres - 100)
    else:
        cost = 900 + 3 * (litres - 500)
    if cost > 4 * litres + 100:
        cost = 4 * litres + 100
    return cost


@refines(lambda total, people, result: people * result <= total < people * (result + 1),
         raises={ValueError: lambda people: people < 0,
                 ZeroDivisionError: lambda people: people == 0})
def share_of_bill(total: int, people: int) -> int:
    """Integer control: floor division with raises."""
    if people < 0:
        raise ValueError("people must not be negative")
    return total // people
'''


@dataclass(frozen=True)
class Case:
    label: str  # the kind of query, as the tables print it
    group: str  # "float hard", "float easy", "int", "str"
    function: str
    source: Optional[str] = None  # None: CASES_SOURCE


CASES: Tuple[Case, ...] = (
    Case("midpoint overflow", "float hard", "sensor_midpoint"),
    Case("x * y / y == x", "float hard", "unit_price_from_total"),
    Case("Horner degree 5", "float hard", "thermistor_curve"),
    Case("hue, 3 divisions", "float hard", "led_hue"),
    Case("c + 273.15 > c", "float easy", "to_kelvin"),
    Case("clamp (NaN)", "float easy", "clamp_reading"),
    Case("abs error >= 0", "float easy", "abs_error"),
    Case("total / parts finite", "float easy", "per_part"),
    Case("int: branching", "int", "water_bill"),
    Case("int: floor division", "int", "share_of_bill"),
)

# String obligations, for when the translator supports str. Each entry is a
# Case with group "str" and its own ``source`` (a module text that imports
# ``refines``); the comparison below iterates over CASES + STRING_CASES, so
# adding entries here is all it takes.
STRING_CASES: List[Case] = []

# The candidates of section 2, as strategies for float-only queries.
CANDIDATES: Tuple[solve.Strategy, ...] = (
    solve.Strategy("z3 (default solver)", floats=(solve.Z3(),)),
    solve.Strategy("z3 bit-blast tactic",
                   floats=(solve.Z3(tactic="simplify;fpa2bv;bit-blast;sat"),)),
    solve.Strategy("z3, 3 seeds, budget split",
                   floats=(solve.Z3(1 / 3, seed=0), solve.Z3(1 / 2, seed=1), solve.Z3(seed=2))),
    solve.Strategy("bitwuzla alone", floats=(solve.Bitwuzla(),)),
    solve.Strategy("bitwuzla 3/4, then z3", floats=(solve.Bitwuzla(0.75), solve.Z3())),
    solve.Strategy("z3 1/8, then bitwuzla", floats=(solve.Z3(0.125), solve.Bitwuzla())),
    solve.QUICK_FIRST,
)

# Whole strategies also compared through the full pipeline (one run each, with
# --alternatives): the chosen one with a quick z3 try first, and z3 alone with
# the corrected budget accounting (a query charged its own work, not the
# context's running total), which separates that fix from the engines.
ALTERNATIVES: Tuple[solve.Strategy, ...] = (solve.QUICK_FIRST, solve.Z3_ALONE)


def z3_alone(seed: Optional[int]) -> solve.Strategy:
    """The code before solve.py (seed None), or the same with z3's random seed set."""
    if seed is None:
        return solve.BEFORE
    step = solve.Z3(seed=seed)
    return solve.Strategy(f"z3 alone, seed {seed}", floats=(step,), other=(step,),
                          charge=solve.BEFORE.charge)


# ---------------------------------------------------------------- section 1


@dataclass
class Runs:
    verdicts: List[str] = field(default_factory=list)
    seconds: List[float] = field(default_factory=list)
    late: List[float] = field(default_factory=list)  # seconds past the backstop

    def add(self, verdict: str, seconds: float, budget: float) -> None:
        self.verdicts.append(verdict)
        self.seconds.append(seconds)
        self.late.append(max(0.0, seconds - budget * refines.prove.BACKSTOP))

    def verdict_text(self) -> str:
        counts: Dict[str, int] = {}
        for v in self.verdicts:
            counts[v] = counts.get(v, 0) + 1
        return ", ".join(f"{v}" + (f" x{n}" if n > 1 else "") for v, n in counts.items())


def check_with(strategy: solve.Strategy, fn, path: str, module: str, budget: float):
    with patched(solve, "DEFAULT", lambda _: strategy):
        start = time.perf_counter()
        result = refines.check.check_function(fn, 0, path, module, budget)
        return result, time.perf_counter() - start


def full_pipeline(cases: Sequence[Case], seeds: Sequence[Optional[int]], runs: int,
                  budget: float, folder: Path, others: Sequence[solve.Strategy] = (),
                  out=print) -> List[Tuple[Case, Runs, Runs, List[Runs]]]:
    modules: Dict[Optional[str], Tuple[object, str]] = {}
    rows = []
    chosen = solve.DEFAULT
    for case in cases:
        if case.source not in modules:
            modules[case.source] = load_source(case.source or CASES_SOURCE, folder,
                                               "strategy_cases")
        module, path = modules[case.source]
        fn = getattr(module, case.function)
        check_with(chosen, fn, path, module.__name__, budget)  # warm-up: parse, imports
        alone, mine = Runs(), Runs()
        # Interleaved: seed i of z3 alone, then run i of the chosen strategy.
        for i in range(max(len(seeds), runs)):
            if i < len(seeds):
                r, s = check_with(z3_alone(seeds[i]), fn, path, module.__name__, budget)
                alone.add(r.verdict, s, budget)
            if i < runs:
                r, s = check_with(chosen, fn, path, module.__name__, budget)
                mine.add(r.verdict, s, budget)
        extra = []
        for strategy in others:
            runs_of = Runs()
            r, s = check_with(strategy, fn, path, module.__name__, budget)
            runs_of.add(r.verdict, s, budget)
            extra.append(runs_of)
        rows.append((case, alone, mine, extra))
        out(f"  {case.label:<22} z3 alone: {alone.verdict_text():<26} "
            f"{chosen.name}: {mine.verdict_text()}", flush=True)
    return rows


def print_full(rows, seeds, runs, budget, out=print) -> None:
    names = ", ".join("default" if s is None else str(s) for s in seeds)
    out(f"Full check at a {budget:g} s budget (backstop {budget * refines.prove.BACKSTOP:g} s); "
        f"z3 alone over seeds [{names}], chosen strategy over {runs} runs; seconds")
    head = (f"{'case':<22}{'group':<12}{'z3 alone: verdicts':<28}{'median':>8}{'max':>8}"
            f"   {'chosen: verdicts':<24}{'median':>8}{'max':>8}{'z3/chosen':>11}")
    out(head)
    out("-" * len(head))
    for case, alone, mine, _ in rows:
        ma, mm = statistics.median(alone.seconds), statistics.median(mine.seconds)
        out(f"{case.label:<22}{case.group:<12}{alone.verdict_text():<28}{ma:>8.2f}"
            f"{max(alone.seconds):>8.2f}   {mine.verdict_text():<24}{mm:>8.2f}"
            f"{max(mine.seconds):>8.2f}{ma / mm:>10.1f}x")
    late_a = max(max(a.late) for _, a, _, _ in rows)
    late_m = max(max(m.late) for _, _, m, _ in rows)
    out(f"  latest end past the backstop: z3 alone {late_a:.2f} s, chosen {late_m:.2f} s")
    out("  z3 alone, seed default = the code before solve.py; other seeds set random_seed")


def print_alternatives(rows, others, budget, out=print) -> None:
    if not others:
        return
    out(f"Alternative strategies through the full pipeline, {budget:g} s budget, one run each "
        f"(chosen = median of its runs above): verdict, seconds")
    head = f"{'case':<22}{'chosen':>22}" + "".join(f"{o.name[:24]:>26}" for o in others)
    out(head)
    out("-" * len(head))
    for case, _, mine, extra in rows:
        cells = [f"{mine.verdicts[0]} {statistics.median(mine.seconds):.2f}"]
        cells += [f"{r.verdicts[0]} {r.seconds[0]:.2f}" for r in extra]
        out(f"{case.label:<22}{cells[0]:>22}" + "".join(f"{c:>26}" for c in cells[1:]))
    sums = [sum(statistics.median(m.seconds) for _, _, m, _ in rows)]
    sums += [sum(e[i].seconds[0] for _, _, _, e in rows) for i in range(len(others))]
    out(f"{'total seconds':<22}{sums[0]:>22.2f}" + "".join(f"{x:>26.2f}" for x in sums[1:]))


# ---------------------------------------------------------------- section 2


def capture_main(cases: Sequence[Case], budget: float, folder: Path) -> List[Tuple[Case, str]]:
    """The proving query of each case, as SMT-LIB2 text."""
    out = []
    inst = Instrumented(capture=True)
    for case in cases:
        module, path = load_source(case.source or CASES_SOURCE, folder, "strategy_capture")
        inst.reset()
        with inst.active():
            inst.timed_check(getattr(module, case.function), path, module.__name__,
                             timeout=0.01)  # only the query is wanted, not its answer
        main = [q for q in inst.queries if q.phase == "main"]
        if main:
            out.append((case, main[0].smt2))
    return out


def run_candidate(strategy: solve.Strategy, text: str, budget: float):
    ctx = z3.Context()
    s = z3.Solver(ctx=ctx)
    s.from_string(text)
    assertions = list(s.assertions())
    b = refines.prove.Budget(budget)
    runner = solve.Runner(ctx, b, refines.prove.RLIMIT_PER_SECOND, strategy)
    start = time.perf_counter()
    status, _, why = runner.check(assertions)
    seconds = time.perf_counter() - start
    log = list(runner.log)
    del runner, s, assertions
    return str(status), seconds, why, log


def candidates(queries, strategies, budget: float, out=print):
    table: Dict[str, Dict[str, Tuple[str, float]]] = {}
    z3_rates: List[float] = []
    bw_rates: List[float] = []
    ratio = solve.BITWUZLA_POLLS_PER_SECOND / refines.prove.RLIMIT_PER_SECOND
    for case, text in queries:
        for strategy in strategies:
            status, seconds, why, log = run_candidate(strategy, text, budget)
            table.setdefault(case.label, {})[strategy.name] = (status, seconds)
            for label, st, secs, spent in log:
                if st == "unknown" and secs > 0.5:
                    if label.startswith("bitwuzla"):
                        bw_rates.append(spent * ratio / secs)
                    else:
                        z3_rates.append(spent / secs)
            out(f"  {case.label:<22} {strategy.name:<28} {status:<8} {seconds:6.2f} s"
                + (f"  ({why})" if why else ""), flush=True)
    return table, z3_rates, bw_rates


def print_candidates(table, strategies, z3_rates, bw_rates, budget, out=print) -> None:
    out(f"Candidates on the proving queries alone, {budget:g} s budget: status, seconds")
    head = f"{'case':<22}" + "".join(f"{s.name[:24]:>26}" for s in strategies)
    out(head)
    out("-" * len(head))
    for label, row in table.items():
        out(f"{label:<22}" + "".join(f"{row[s.name][0] + ' ' + format(row[s.name][1], '.2f'):>26}"
                                     for s in strategies))
    decided = {s.name: sum(row[s.name][0] != "unknown" for row in table.values())
               for s in strategies}
    total = {s.name: sum(row[s.name][1] for row in table.values()) for s in strategies}
    out(f"{'decided':<22}" + "".join(f"{decided[s.name]:>26}" for s in strategies))
    out(f"{'total seconds':<22}" + "".join(f"{total[s.name]:>26.2f}" for s in strategies))

    def rate(xs):
        return (f"median {statistics.median(xs):,.0f}, range {min(xs):,.0f} to {max(xs):,.0f} "
                f"({len(xs)} runs)" if xs else "no run stopped by a limit")
    out(f"  z3 units per second on float queries stopped by a limit: {rate(z3_rates)}")
    out(f"  bitwuzla polls per second, same: {rate(bw_rates)} "
        f"(solve.BITWUZLA_POLLS_PER_SECOND = {solve.BITWUZLA_POLLS_PER_SECOND:,})")


# ---------------------------------------------------------------- main


def run(runs: int = 3, seeds: Sequence[Optional[int]] = (None, 1, 2), budget: float = BUDGET,
        with_candidates: bool = True, quick: bool = False, alternatives: bool = False,
        out=print) -> Dict[str, object]:
    cases = list(CASES) + list(STRING_CASES)
    if quick:
        runs, seeds, with_candidates, alternatives = 1, (None,), False, False
    others = ALTERNATIVES if alternatives else ()
    out(f"bitwuzla {'available' if solve.available() else 'NOT installed'}; "
        f"chosen strategy: {solve.DEFAULT.name}")
    with tempfile.TemporaryDirectory(prefix="refines-bench-") as tmp:
        out("section 1, progress:")
        rows = full_pipeline(cases, seeds, runs, budget, Path(tmp), others)
        table = None
        if with_candidates:
            floats = [c for c in cases if c.group.startswith("float")]
            queries = capture_main(floats, budget, Path(tmp))
            out("section 2, progress:")
            table, z3_rates, bw_rates = candidates(queries, CANDIDATES, budget)
    out("")
    print_full(rows, seeds, runs, budget, out)
    if others:
        out("")
        print_alternatives(rows, others, budget, out)
    if table is not None:
        out("")
        print_candidates(table, CANDIDATES, z3_rates, bw_rates, budget, out)
    return {"rows": rows, "candidates": table}


def main(argv: Optional[Sequence[str]] = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=3)
    parser.add_argument("--seeds", default="default,1,2",
                        help="z3 seeds for 'z3 alone' (default = no seed set, today's code)")
    parser.add_argument("--budget", type=float, default=BUDGET)
    parser.add_argument("--no-candidates", action="store_true")
    parser.add_argument("--alternatives", action="store_true",
                        help="also run ALTERNATIVES through the full pipeline, once each")
    parser.add_argument("--quick", action="store_true", help="one run, no candidates")
    args = parser.parse_args(argv)
    seeds = [None if s == "default" else int(s) for s in args.seeds.split(",")]
    run(args.runs, seeds, args.budget, not args.no_candidates, args.quick, args.alternatives)
    return 0


if __name__ == "__main__":
    sys.exit(main())
