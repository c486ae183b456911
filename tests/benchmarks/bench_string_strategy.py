"""String obligations: the chosen encoding against z3's own string operations.

For strings the engine is z3 in both columns; what differs is how ``find``,
``rfind`` and ``index`` are encoded. *chosen* is today's code: each search is
a fresh constant pinned by a first-occurrence definition (``strmath.find``).
*z3 alone* uses z3's ``IndexOf``/``LastIndexOf`` on the same window, which is
how the translator encoded them before. Every obligation runs through the
whole pipeline (``check_function``: translation, solving, replay and the
exact precondition) at the default budget; runs are interleaved and the table
gives the verdicts and the median and maximum seconds.

    .venv/bin/python tests/benchmarks/bench_string_strategy.py [--runs 3] [--budget 10]

It measures and prints; it asserts nothing. Results: docs/performance.md.
"""

from __future__ import annotations

import argparse
import importlib.util
import statistics
import sys
import tempfile
import time
from contextlib import contextmanager
from pathlib import Path
from typing import Dict, List, Optional, Sequence

import z3

import refines.lower
import refines.check
import refines.prove
from refines import strmath

BUDGET = 10.0

SOURCE = '''
from refines import refines, old


@refines(lambda code, result: result == 0, assuming=lambda code, prefix: code.startswith(prefix))
def prefix_at(code: str, prefix: str) -> int:
    """startswith implies find == 0 (undecided for minutes with IndexOf)."""
    return code.find(prefix)


@refines(lambda ref, result: ref[result] == "-" and "-" not in ref[:result],
         raises={ValueError: lambda ref: "-" not in ref})
def dash_at(ref: str) -> int:
    """index finds the first dash, or raises ValueError."""
    return ref.index("-")


@refines(lambda seat, result: result == -1 or seat[result:result + 1] == "/")
def last_slash(seat: str) -> int:
    """rfind gives -1 or the position of a slash."""
    return seat.rfind("/")


@refines(lambda name, result: len(result) == 1)
def initial(name: str) -> str:
    """Refuted: an empty name raises IndexError; precondition len(name) > 0."""
    return name[0]


@refines(lambda s, k, result: result == s[len(s) - k:] if 0 < k <= len(s)
         else result == (s if k > len(s) or k == 0 else s[-k:]))
def tail(s: str, k: int) -> str:
    """Negative slice bounds, proved."""
    return s[-k:]


@refines(lambda n, result: result[1] != "-")
def label(n: int) -> str:
    """Refuted: str of a negative int; precondition n >= 0."""
    return "L" + str(n)


@refines(lambda label, result: " " not in result)
def slug(label: str) -> str:
    """str.replace: the solver gives up (unknown) in both columns."""
    return label.replace(" ", "_")


@refines(lambda day, result: result == (day in ("Sat", "Sun")))
def weekend(day: str) -> bool:
    """Equality with constants, proved."""
    return day == "Sat" or day == "Sun"
'''

CASES = ("prefix_at", "dash_at", "last_slash", "initial", "tail", "label", "slug", "weekend")


def _native_find(s, sub, start, end, ctx, last):
    """find/rfind with z3's IndexOf/LastIndexOf on the Python window."""
    a, b = strmath._window(s, start, end, ctx)
    window = z3.SubString(s, a, b - a)
    at = z3.LastIndexOf(window, sub) if last else z3.IndexOf(window, sub, z3.IntVal(0, ctx))
    minus_one = z3.IntVal(-1, ctx)
    return z3.If(b - a < z3.Length(sub), minus_one,
                 z3.If(at < z3.IntVal(0, ctx), minus_one, at + a))


@contextmanager
def native_find():
    """Lower find/rfind with z3's own operations instead of the definition."""
    def op(last):
        def lower(ctx, s, sub, *window):
            window = list(window) + [None] * (2 - len(window))
            return _native_find(s, sub, window[0], window[1], ctx, last)
        return lower

    saved = set(refines.lower._DEFINED)
    refines.lower._DEFINED.clear()
    refines.lower.OPS["find"], refines.lower.OPS["rfind"] = op(False), op(True)
    try:
        yield
    finally:
        refines.lower._DEFINED.update(saved)
        del refines.lower.OPS["find"], refines.lower.OPS["rfind"]


def load(folder: Path):
    path = folder / "string_cases.py"
    path.write_text(SOURCE, encoding="utf-8")
    spec = importlib.util.spec_from_file_location("string_cases", path)
    module = importlib.util.module_from_spec(spec)
    sys.modules["string_cases"] = module
    spec.loader.exec_module(module)
    return module, str(path)


def once(module, path: str, name: str, budget: float):
    start = time.perf_counter()
    r = refines.check.check_function(getattr(module, name), 0, path, module.__name__, budget)
    return r.verdict, time.perf_counter() - start, r.exact_precondition


def run(runs: int, budget: float, out=print) -> List[Dict[str, object]]:
    rows = []
    with tempfile.TemporaryDirectory(prefix="refines-str-bench-") as tmp:
        module, path = load(Path(tmp))
        for name in CASES:
            once(module, path, name, budget)  # warm-up: parse, imports
            got: Dict[str, List] = {"chosen": [], "z3 alone": []}
            for _ in range(runs):  # interleaved
                got["chosen"].append(once(module, path, name, budget))
                with native_find():
                    got["z3 alone"].append(once(module, path, name, budget))
            rows.append({"case": name, **got})
            print(f"  {name}: done", file=sys.stderr)
    return rows


def table(rows, runs: int, budget: float, out=print) -> None:
    out(f"String obligations, full pipeline, budget {budget:g} s, {runs} runs each "
        f"(median / max seconds)")
    out("")
    out("| case | z3 alone: verdicts | z3 alone: median / max | chosen: verdicts "
        "| chosen: median / max | ratio |")
    out("|---|---|---:|---|---:|---:|")
    for row in rows:
        cells = []
        medians = []
        for key in ("z3 alone", "chosen"):
            verdicts = [v for v, _, _ in row[key]]
            seconds = [s for _, s, _ in row[key]]
            counts = {v: verdicts.count(v) for v in dict.fromkeys(verdicts)}
            cells.append(", ".join(f"{v} x{n}" if n > 1 else v for v, n in counts.items()))
            med = statistics.median(seconds)
            medians.append(med)
            cells.append(f"{med:.3f} / {max(seconds):.3f}")
        ratio = medians[0] / medians[1] if medians[1] > 0 else float("inf")
        out(f"| {row['case']} | " + " | ".join(cells) + f" | {ratio:.1f}x |")


def main(argv: Optional[Sequence[str]] = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=3)
    parser.add_argument("--budget", type=float, default=BUDGET)
    args = parser.parse_args(argv)
    rows = run(args.runs, args.budget)
    table(rows, args.runs, args.budget)
    return 0


if __name__ == "__main__":
    sys.exit(main())
