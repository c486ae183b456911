"""Per-obligation wall time against the raw solver time for the same formulas.

For each case below this measures

* the full check, ``refines.check.check_function``: reading the source with
  astroid, translating, solving, replaying, the exact precondition. "warm" is
  the usual case in a session (the module is parsed once per file and shared
  by its obligations); "cold" clears the parse cache first, so the whole
  module's parse is charged to this one obligation;
* the raw solver time: every query the check sent to z3 is captured as
  SMT-LIB text, re-read into a fresh ``z3.Context`` and only ``check()`` is
  timed -- the floor no prover on top of z3 can go below;
* where the full time goes (exclusive time per stage, from wrapping the
  pipeline's functions in an instrumented run).

Run: ``python tests/benchmarks/bench_overhead.py [--repeats N]``.

The module also holds the helpers the other benchmarks share (loading
generated source, capturing queries, timing phases, sizes of formulas).
"""

from __future__ import annotations

import argparse
import contextlib
import dataclasses
import importlib.util
import itertools
import statistics
import sys
import tempfile
import textwrap
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Callable, Dict, Iterator, List, Optional, Sequence, Tuple

import z3

import refines.precondition
import refines.check
import refines.prove
import refines.replay
import refines.source
from refines import ir

TIMEOUT = 20.0  # the solver budget handed to check_function (seconds)

# ---------------------------------------------------------------- the cases

# Invented scenarios, one per kind of obligation the issue names.
CASES_SOURCE = '''
from refines import refines


@refines(lambda cars, vans, result: result == 2 * cars + 5 * vans + 3 and result >= 3,
         assuming=lambda cars, vans: cars >= 0 and vans >= 0)
def ferry_load(cars: int, vans: int) -> int:
    """Straight-line: tonnes on the ferry, crew included."""
    weight = cars * 2
    weight = weight + vans * 5
    weight = weight + 3
    return weight


@refines(lambda litres, result: result >= litres and result <= 4 * litres + 100,
         assuming=lambda litres: litres >= 0)
def water_bill(litres: int) -> int:
    """Branching: tiered water pricing."""
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
    """Floor division with raises: each person's share, rounded down."""
    if people < 0:
        raise ValueError("people must not be negative")
    return total // people


@refines(lambda stock, reserved, result: result >= 0,
         assuming=lambda stock, reserved: stock >= 0)
def free_bikes(stock: int, reserved: int) -> int:
    """Refuted: more reservations than bikes gives a negative count."""
    if reserved < 0:
        return stock
    return stock - reserved
'''

CASES = (
    ("straight-line", "ferry_load", "proved"),
    ("branching", "water_bill", "proved"),
    ("floor division + raises", "share_of_bill", "proved"),
    ("refuted + precondition", "free_bikes", "refuted"),
)

# ---------------------------------------------------------------- shared helpers

_modules = itertools.count()


def load_source(source: str, folder: Path, stem: str = "bench_case"):
    """Write ``source`` as a module under ``folder`` and import it."""
    name = f"{stem}_{next(_modules)}"
    path = folder / f"{name}.py"
    path.write_text(textwrap.dedent(source), encoding="utf-8")
    spec = importlib.util.spec_from_file_location(name, path)
    module = importlib.util.module_from_spec(spec)
    sys.modules[name] = module
    spec.loader.exec_module(module)
    return module, str(path)


def clear_parse_cache() -> None:
    """Forget parsed modules, so the next check parses its file again."""
    cache = getattr(refines.source, "_MODULE_CACHE", None)
    if cache is not None:
        cache.clear()


def run_check(fn, path: str, module: str, cold: bool = False):
    """One full check of the first spec of ``fn``; ``(seconds, result)``."""
    if cold:
        clear_parse_cache()
    start = time.perf_counter()
    result = refines.check.check_function(fn, 0, path, module, TIMEOUT)
    return time.perf_counter() - start, result


def median(xs: Sequence[float]) -> float:
    return statistics.median(xs) if xs else float("nan")


def ms(seconds: float) -> str:
    return f"{seconds * 1000:.2f}"


@contextlib.contextmanager
def patched(owner, name: str, make: Callable[[Callable], Callable]) -> Iterator[bool]:
    """Replace ``owner.name`` by ``make(original)`` for the block (if it exists)."""
    original = getattr(owner, name, None)
    if original is None:
        yield False
        return
    setattr(owner, name, make(original))
    try:
        yield True
    finally:
        setattr(owner, name, original)


@dataclass
class Query:
    """One solver query of a check, as the solver received it."""

    phase: str  # the pipeline stage that asked it
    smt2: str  # declarations and assertions (SMT-LIB)
    terms: Tuple[ir.Term, ...]  # the IR terms it was built from
    z3_nodes: int = 0  # distinct z3 nodes of the lowered assertions
    z3_edges: int = 0  # and their child links


# The stages, as (owner, attribute, phase name). Time is charged to the
# innermost stage running (exclusive time), so the phases add up to the total.
def _stages():
    return [
        (refines.source, "parse_file", "parse (astroid)"),
        (refines.source, "read_obligation", "read spec"),
        (refines.prove, "translate_body", "translate"),
        (refines.prove, "translate_spec_for", "translate"),
        (refines.prove, "violations", "translate"),
        (refines.prove.Solver, "__init__", "new z3 context"),
        (refines.prove, "_ill_formed", "spec well-formed"),
        (refines.prove.Solver, "check", "lower + build query"),
        (z3.Solver, "check", "z3 check()"),
        (refines.replay, "run", "replay"),
        (refines.replay, "judge", "replay"),
        (refines.replay, "assuming_holds", "replay"),
        (refines.precondition, "compute", "precondition"),
    ]


PHASES = ("parse (astroid)", "read spec", "translate", "new z3 context",
          "spec well-formed", "lower + build query", "z3 check()", "replay",
          "precondition", "other")


class Instrumented:
    """Exclusive time per stage, and the captured queries, of checks run inside."""

    def __init__(self, capture: bool = False) -> None:
        self.capture = capture
        self.times: Dict[str, float] = {}
        self.queries: List[Query] = []
        self._stack: List[List] = []  # [phase, start, child time]

    def reset(self) -> None:
        self.times = {}
        self.queries = []

    def _wrap(self, phase: str, fn: Callable) -> Callable:
        inst = self

        def wrapper(*args, **kwargs):
            frame = [phase, time.perf_counter(), 0.0]
            inst._stack.append(frame)
            try:
                return fn(*args, **kwargs)
            finally:
                inst._stack.pop()
                spent = time.perf_counter() - frame[1]
                inst.times[phase] = inst.times.get(phase, 0.0) + spent - frame[2]
                if inst._stack:
                    inst._stack[-1][2] += spent

        return wrapper

    def _capturing_check(self, fn: Callable) -> Callable:
        inst = self

        def check(solver, *terms):
            if inst.capture:
                lowered = [solver.lower(t) for t in terms]
                s = z3.Solver(ctx=solver.ctx)
                s.add(*lowered)
                outer = [f[0] for f in inst._stack[:-1]]
                phase = next((p for p in reversed(outer)
                              if p in ("precondition", "spec well-formed")), "main")
                # Only text and numbers are kept: a z3 object outliving its
                # context's check makes every later z3.Context() ~10x slower.
                nodes, edges = z3_size(lowered)
                inst.queries.append(Query(phase, s.sexpr(), tuple(terms), nodes, edges))
                del s, lowered
            return fn(solver, *terms)

        return check

    @contextlib.contextmanager
    def active(self) -> Iterator["Instrumented"]:
        with contextlib.ExitStack() as stack:
            for owner, name, phase in _stages():
                if owner is refines.prove.Solver and name == "check":
                    def make(f, phase=phase):
                        return self._wrap(phase, self._capturing_check(f))
                else:
                    def make(f, phase=phase):
                        return self._wrap(phase, f)
                stack.enter_context(patched(owner, name, make))
            yield self

    def timed_check(self, fn, path: str, module: str, cold: bool = False,
                    timeout: float = TIMEOUT):
        """A full check with every stage timed; ``(seconds, result, phases)``."""
        self.reset()
        if cold:
            clear_parse_cache()
        outer = self._wrap("other", refines.check.check_function)
        start = time.perf_counter()
        result = outer(fn, 0, path, module, timeout)
        seconds = time.perf_counter() - start
        return seconds, result, dict(self.times)


def raw_solve(queries: Sequence[Query]) -> Tuple[float, List[str]]:
    """Time only ``check()`` of each query, each in a fresh context."""
    total, statuses = 0.0, []
    for q in queries:
        ctx = z3.Context()
        s = z3.Solver(ctx=ctx)
        s.from_string(q.smt2)
        start = time.perf_counter()
        status = s.check()
        total += time.perf_counter() - start
        statuses.append(str(status))
    return total, statuses


def ir_size(terms: Sequence[ir.Term]) -> Tuple[int, int]:
    """Distinct IR nodes (the DAG) and their child links, reachable from ``terms``."""
    seen, edges, stack = set(), 0, list(terms)
    while stack:
        t = stack.pop()
        if id(t) in seen:
            continue
        seen.add(id(t))
        kids = _ir_children(t)
        edges += len(kids)
        stack.extend(kids)
    return len(seen), edges


def _ir_children(t: ir.Term) -> List[ir.Term]:
    # Generic over the term dataclasses: a sub-term is a field holding a Term,
    # or a tuple of them (And/Or arguments).
    kids: List[ir.Term] = []
    for f in dataclasses.fields(t):
        v = getattr(t, f.name)
        if isinstance(v, ir.Term):
            kids.append(v)
        elif isinstance(v, tuple):
            kids.extend(i for i in v if isinstance(i, ir.Term))
    return kids


def z3_size(exprs: Sequence[z3.ExprRef]) -> Tuple[int, int]:
    """Distinct z3 nodes and their child links, reachable from ``exprs``."""
    seen, edges, stack = set(), 0, list(exprs)
    while stack:
        e = stack.pop()
        key = e.get_id()
        if key in seen:
            continue
        seen.add(key)
        kids = e.children() if z3.is_app(e) else []
        edges += len(kids)
        stack.extend(kids)
    return len(seen), edges


# ---------------------------------------------------------------- the benchmark


@dataclass
class CaseResult:
    label: str
    verdict: str
    expected: str
    queries: int
    main_queries: int
    full_warm: float
    full_cold: float
    raw_all: float
    raw_main: float
    paired_ratio: float  # median over runs of (full warm / raw all) of the same run
    phases: Dict[str, float]
    note: str = ""


def measure_case(label: str, fn, path: str, module: str, expected: str,
                 repeats: int) -> CaseResult:
    # Warm-up: imports, the parse cache, z3's first-use costs.
    _, result = run_check(fn, path, module)
    inst = Instrumented(capture=True)
    with inst.active():
        inst.timed_check(fn, path, module)
    queries = list(inst.queries)
    main = [q for q in queries if q.phase == "main"]
    inst.capture = False

    # Interleaved, so that load from other processes hits every measure alike.
    warm, cold, raw_all, raw_main, phase_runs = [], [], [], [], []
    for _ in range(repeats):
        warm.append(run_check(fn, path, module)[0])
        cold.append(run_check(fn, path, module, cold=True)[0])
        raw_all.append(raw_solve(queries)[0])
        raw_main.append(raw_solve(main)[0])
        with inst.active():
            phase_runs.append(inst.timed_check(fn, path, module)[2])
    phases = {p: median([r.get(p, 0.0) for r in phase_runs]) for p in PHASES}

    note = ""
    if result.verdict != expected:
        note = f"expected {expected}, got {result.verdict}: {result.reason}"
    elif result.verdict == "refuted":
        ce = result.counterexample
        note = (f"counterexample {ce.call if ce else '?'}; exact precondition "
                f"{result.exact_precondition}; suggested {result.suggested_assuming}")
    return CaseResult(label, result.verdict, expected, len(queries), len(main),
                      median(warm), median(cold), median(raw_all), median(raw_main),
                      median([w / r for w, r in zip(warm, raw_all)]), phases, note)


def run(repeats: int = 20, out=print) -> Dict[str, object]:
    """Measure every case; print the tables; return the numbers."""
    results: List[CaseResult] = []
    with tempfile.TemporaryDirectory(prefix="refines-bench-") as tmp:
        module, path = load_source(CASES_SOURCE, Path(tmp), "overhead_cases")
        for label, name, expected in CASES:
            results.append(measure_case(label, getattr(module, name), path,
                                        module.__name__, expected, repeats))

    out(f"Per-obligation wall time vs raw z3 check() time "
        f"(medians of {repeats} runs, milliseconds)")
    head = (f"{'case':<26}{'verdict':<9}{'queries':>8}{'full warm':>11}{'full cold':>11}"
            f"{'raw all':>9}{'raw main':>10}{'warm-raw':>10}{'warm/raw':>10}{'cold/raw':>10}")
    out(head)
    out("-" * len(head))
    for r in results:
        out(f"{r.label:<26}{r.verdict:<9}{r.queries:>8}{ms(r.full_warm):>11}"
            f"{ms(r.full_cold):>11}{ms(r.raw_all):>9}{ms(r.raw_main):>10}"
            f"{ms(r.full_warm - r.raw_all):>10}"
            f"{r.paired_ratio:>10.1f}{r.full_cold / r.raw_all:>10.1f}")
    total_warm = sum(r.full_warm for r in results)
    total_cold = sum(r.full_cold for r in results)
    total_raw = sum(r.raw_all for r in results)
    ratios = [r.paired_ratio for r in results]
    out(f"{'all cases':<26}{'':<9}{sum(r.queries for r in results):>8}{ms(total_warm):>11}"
        f"{ms(total_cold):>11}{ms(total_raw):>9}{'':>10}{ms(total_warm - total_raw):>10}"
        f"{total_warm / total_raw:>10.1f}{total_cold / total_raw:>10.1f}")
    for r in results:
        if r.note:
            out(f"  {r.label}: {r.note}")
    out("")
    out("  raw all  = every query of the check, each re-read in a fresh context, check() only")
    out("  raw main = the proving query alone (no well-formedness or precondition queries)")
    out("  warm/raw = median over runs of the ratio within one run (interleaved runs)")
    out("  warm = parse cache hit (a session parses each file once); "
        "cold = this obligation pays the module's parse")
    out("")
    out("Where the warm time goes (exclusive time per stage, medians, milliseconds)")
    head = f"{'stage':<22}" + "".join(f"{r.label[:14]:>16}" for r in results)
    out(head)
    out("-" * len(head))
    for p in PHASES:
        out(f"{p:<22}" + "".join(f"{ms(r.phases.get(p, 0.0)):>16}" for r in results))
    out(f"{'sum of stages':<22}" + "".join(f"{ms(sum(r.phases.values())):>16}"
                                            for r in results))
    out("  (stage times come from an instrumented run: wrapping adds a few "
        "microseconds per call)")
    summary = {
        "overhead_ratio_warm": total_warm / total_raw,
        "overhead_ratio_cold": total_cold / total_raw,
        "ratio_per_case_warm": dict(zip((r.label for r in results), ratios)),
        "cases": results,
    }
    out("")
    out(f"overhead ratio (sum of full warm / sum of raw, all cases): "
        f"{summary['overhead_ratio_warm']:.1f}x; cold: {summary['overhead_ratio_cold']:.1f}x; "
        f"per case (warm): {min(ratios):.1f}x to {max(ratios):.1f}x")
    return summary


def main(argv: Optional[Sequence[str]] = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=20)
    args = parser.parse_args(argv)
    run(args.repeats)
    return 0


if __name__ == "__main__":
    sys.exit(main())
