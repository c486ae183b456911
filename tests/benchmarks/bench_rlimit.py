"""Calibrating ``RLIMIT_PER_SECOND``: z3 resource units spent per second of solving.

The prover turns each obligation's budget in seconds into a z3 resource limit
(``seconds * RLIMIT_PER_SECOND``), because an exhausted resource limit is
reproducible and a timeout is not. This benchmark runs queries z3 cannot
decide, with a wall-clock timeout only, and reads the ``rlimit count``
statistic when the timeout stops them: units per second of solving on this
machine. The queries are of two kinds, because the rate depends on the
theory: nonlinear integer arithmetic, and linear arithmetic with nested
if-then-else terms as the translator produces them (the proving query of the
``counters`` family of bench_sequential_ifs, captured through the plugin).

Run: ``python tests/benchmarks/bench_rlimit.py [--timeouts 1,3] [--repeats 3]``.
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Callable, Dict, List, Optional, Sequence

import z3

import refines.prove
from bench_overhead import Instrumented, load_source, median
from bench_sequential_ifs import FUNCTION, generate

PLUGIN_K = 160  # counters family: undecided within a few seconds


def _cubes(ctx: z3.Context):
    x, y, z = (z3.Int(n, ctx) for n in "xyz")
    return [x > 0, y > 0, z > 0, x * x * x + y * y * y == z * z * z]


def _three_cubes(ctx: z3.Context):
    x, y, z = (z3.Int(n, ctx) for n in "xyz")
    return [x * x * x + y * y * y + z * z * z == 114]


def _factor(ctx: z3.Context):
    x, y = z3.Int("x", ctx), z3.Int("y", ctx)
    return [x > 1, y > 1, x * y == 1_000_000_007 * 1_000_000_009]


@dataclass
class Query:
    name: str
    kind: str  # "nonlinear" or "linear + ite"
    build: Callable[[z3.Context], List[z3.ExprRef]]


def plugin_query(k: int = PLUGIN_K) -> Query:
    """The proving query of a generated function, as the prover builds it."""
    with tempfile.TemporaryDirectory(prefix="refines-bench-") as tmp:
        module, path = load_source(generate("counters", k), Path(tmp), f"rl_{k}")
        fn = getattr(module, FUNCTION["counters"])
        inst = Instrumented(capture=True)
        with inst.active():
            inst.timed_check(fn, path, module.__name__, timeout=0.05)
    text = next(q.smt2 for q in inst.queries if q.phase == "main")

    def build(ctx: z3.Context):
        s = z3.Solver(ctx=ctx)
        s.from_string(text)
        return list(s.assertions())

    return Query(f"counters k={k} (plugin)", "linear + ite", build)


@dataclass
class Sample:
    query: str
    kind: str
    timeout: float
    status: str
    reason: str
    seconds: float
    units: int

    @property
    def rate(self) -> float:
        return self.units / self.seconds


def sample(q: Query, timeout: float) -> Sample:
    ctx = z3.Context()
    s = z3.Solver(ctx=ctx)
    s.set("timeout", int(timeout * 1000))
    s.add(*q.build(ctx))
    start = time.perf_counter()
    status = s.check()
    seconds = time.perf_counter() - start
    units = int(s.statistics().get_key_value("rlimit count"))
    reason = s.reason_unknown() if status == z3.unknown else ""
    return Sample(q.name, q.kind, timeout, str(status), reason, seconds, units)


def run(timeouts: Sequence[float] = (1.0, 3.0), repeats: int = 3,
        out=print) -> Dict[str, object]:
    queries = [Query("x^3 + y^3 == z^3, positive", "nonlinear", _cubes),
               Query("x^3 + y^3 + z^3 == 114", "nonlinear", _three_cubes),
               Query("factor a semiprime", "nonlinear", _factor),
               plugin_query()]
    samples: List[Sample] = []
    for q in queries:
        for timeout in timeouts:
            for _ in range(repeats):
                samples.append(sample(q, timeout))

    current = refines.prove.RLIMIT_PER_SECOND
    out(f"z3 rlimit units per second of solving, stopped by a wall-clock timeout only "
        f"({repeats} runs per timeout; z3 {z3.get_version_string()})")
    head = (f"{'query':<30}{'kind':<14}{'timeout s':>10}{'stopped':>10}"
            f"{'units (median)':>16}{'units/s (median)':>18}{'min..max units/s':>24}")
    out(head)
    out("-" * len(head))
    timed_out = [s for s in samples if s.reason == "timeout"]
    for q in queries:
        for timeout in timeouts:
            group = [s for s in samples if s.query == q.name and s.timeout == timeout]
            stopped = sum(1 for s in group if s.reason == "timeout")
            ok = [s for s in group if s.reason == "timeout"]
            rates = [s.rate for s in ok]
            span = f"{min(rates) / 1e6:.1f}M..{max(rates) / 1e6:.1f}M" if rates else "-"
            out(f"{q.name:<30}{q.kind:<14}{timeout:>10g}{f'{stopped}/{len(group)}':>10}"
                f"{median([s.units for s in ok]) if ok else 0:>16,.0f}"
                f"{median(rates) if rates else 0:>18,.0f}{span:>24}")
    by_kind = {kind: median([s.rate for s in timed_out if s.kind == kind])
               for kind in sorted({q.kind for q in queries})}
    overall = median([s.rate for s in timed_out])
    slowest = min((s.rate for s in timed_out), default=float("nan"))
    out("")
    for kind, rate in by_kind.items():
        out(f"  median units/s, {kind:<13}: {rate:>14,.0f}")
    out(f"  median units/s, all queries  : {overall:>14,.0f}")
    out(f"  slowest run                  : {slowest:>14,.0f}")
    out(f"  RLIMIT_PER_SECOND in prove.py: {current:>14,}")
    for kind, rate in by_kind.items():
        out(f"  with it, a budget of 10 s on a {kind} query ends by the resource limit "
            f"after ~{10 * current / rate:.1f} s of solving")
    not_stopped = [s for s in samples if s.reason != "timeout"]
    if not_stopped:
        out(f"  {len(not_stopped)} run(s) ended before the timeout ({not_stopped[0].status}) "
            f"and are left out of the rates")
    return {"by_kind": by_kind, "overall": overall, "slowest": slowest,
            "current": current, "samples": samples}


def main(argv: Optional[Sequence[str]] = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--timeouts", default="1,3", help="comma-separated seconds")
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args(argv)
    run([float(t) for t in args.timeouts.split(",")], args.repeats)
    return 0


if __name__ == "__main__":
    sys.exit(main())
