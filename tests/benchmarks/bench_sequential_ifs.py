"""Time and formula size against the number k of sequential ``if`` statements.

Generated functions, each with a true spec (the verdict must be ``proved``):

* ``updates``: k ifs in a row, each updating one variable (a clamp, or a +2/+1
  step); spec ``result >= x``;
* ``early returns``: the same, with every fourth if returning early;
* ``counters``: each if increments one of two counters; spec
  ``0 <= result <= k``. The solver has to count here, which it does badly: this
  family shows how much of the growth belongs to the spec rather than to k.

For each (family, k): the median wall time of one full check (warm parse cache;
the astroid parse of the generated file is shown apart), split into the
plugin's own work and z3's ``check()``, and the size of the proving query (IR
nodes and links reachable from it, z3 nodes and links after lowering). Then
time/k, the growth ratio t(2k)/t(k) (linear: about 2, quadratic: about 4) and a
least-squares line t = a + b*k.

Run: ``python tests/benchmarks/bench_sequential_ifs.py [--ks 5,10,20,40,80,160]``;
``--profile FAMILY K`` prints a cProfile of one check.
"""

from __future__ import annotations

import argparse
import cProfile
import io
import math
import pstats
import sys
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Dict, List, Optional, Sequence

import refines.source
from bench_overhead import (Instrumented, clear_parse_cache, ir_size, load_source, median,
                            ms, run_check)

DEFAULT_KS = (5, 10, 20, 40, 80, 160)
COUNTERS_MAX_K = 40  # beyond this the solver, not the plugin, takes seconds
FAMILIES = ("updates", "early returns", "counters")


# ---------------------------------------------------------------- generated functions


def generate(family: str, k: int) -> str:
    """A module with one function of ``k`` sequential ifs and a true spec."""
    if family == "counters":
        return _counters(k)
    returns = family == "early returns"
    lines = ["from refines import refines", "", "",
             "@refines(lambda x, y, result: result >= x)",
             "def lift_level(x: int, y: int) -> int:",
             "    level = x"]
    for i in range(k):
        if returns and i % 4 == 2:
            lines += [f"    if y == {i}:", "        return level + 1"]
        elif i % 2 == 0:
            lines += [f"    if level < {7 * i}:", f"        level = {7 * i}"]
        else:
            lines += [f"    if y > {i}:", "        level = level + 2",
                      "    else:", "        level = level + 1"]
    lines += ["    return level", ""]
    return "\n".join(lines)


def _counters(k: int) -> str:
    lines = ["from refines import refines", "", "",
             f"@refines(lambda result: 0 <= result <= {k})",
             "def count_hits(x: int, y: int) -> int:",
             "    hits = 0", "    misses = 0"]
    for i in range(k):
        if i % 4 == 0:
            lines += [f"    if x > {3 * i}:", "        hits += 1",
                      "    else:", "        misses += 1"]
        elif i % 4 == 1:
            lines += [f"    if y < {2 * i}:", "        hits += 1"]
        elif i % 4 == 2:
            lines += [f"    if x + y == {5 * i}:", "        return hits"]
        else:
            lines += [f"    if y > x - {i}:", "        misses += 1",
                      "    else:", "        hits += 1"]
    lines += ["    return hits + misses", ""]
    return "\n".join(lines)


FUNCTION = {"updates": "lift_level", "early returns": "lift_level",
            "counters": "count_hits"}


# ---------------------------------------------------------------- measuring


@dataclass
class Point:
    family: str
    k: int
    verdict: str
    runs: int
    total: float  # median wall time of one check (warm), seconds
    z3_check: float  # of which in z3's check()
    plugin: float  # the rest (median of total - z3 per run)
    translate: float
    lower: float
    parse: float  # astroid parse of the generated file (cold), seconds
    outcomes: int
    ir_nodes: int
    ir_links: int
    z3_nodes: int
    z3_links: int


def measure(family: str, k: int, folder: Path, repeats: int, budget: float) -> Point:
    module, path = load_source(generate(family, k), folder, f"seq_{k}")
    fn = getattr(module, FUNCTION[family])

    clear_parse_cache()
    start = time.perf_counter()
    refines.source.parse_file(path)
    parse = time.perf_counter() - start

    inst = Instrumented(capture=True)
    with inst.active():
        _, result, _ = inst.timed_check(fn, path, module.__name__)  # warm-up + capture
        main = [q for q in inst.queries if q.phase == "main"]
        inst.capture = False
        runs = []
        began = time.perf_counter()
        while len(runs) < repeats and (len(runs) < 3 or time.perf_counter() - began < budget):
            seconds, result, phases = inst.timed_check(fn, path, module.__name__)
            runs.append((seconds, phases))

    from refines.source import read_obligation  # the behaviour, for its outcome count
    from refines.translate import Scope, translate_body

    ob = read_obligation(fn, 0, path, module.__name__)
    behaviour = translate_body(ob.fn_node, ob.params,
                               Scope(ob.fn.__globals__, list(ob.fn_node.locals)))
    terms = [t for q in main for t in q.terms]
    nodes, links = ir_size(terms)
    return Point(
        family, k, result.verdict, len(runs),
        total=median([s for s, _ in runs]),
        z3_check=median([p.get("z3 check()", 0.0) for _, p in runs]),
        plugin=median([s - p.get("z3 check()", 0.0) for s, p in runs]),
        translate=median([p.get("translate", 0.0) for _, p in runs]),
        lower=median([p.get("lower + build query", 0.0) for _, p in runs]),
        parse=parse, outcomes=len(behaviour.outcomes), ir_nodes=nodes, ir_links=links,
        z3_nodes=sum(q.z3_nodes for q in main), z3_links=sum(q.z3_edges for q in main))


def fit_line(ks: Sequence[int], ts: Sequence[float]):
    """Least squares t = a + b*k; returns (a, b, worst relative residual)."""
    n = len(ks)
    mk, mt = sum(ks) / n, sum(ts) / n
    var = sum((k - mk) ** 2 for k in ks)
    b = sum((k - mk) * (t - mt) for k, t in zip(ks, ts)) / var if var else 0.0
    a = mt - b * mk
    worst = max(abs(t - (a + b * k)) / t for k, t in zip(ks, ts)) if ts else 0.0
    return a, b, worst


def growth(points: List[Point], attr: str) -> List[str]:
    """t(k_i)/t(k_{i-1}) and the local exponent log(ratio)/log(k ratio)."""
    out = ["-"]
    for prev, cur in zip(points, points[1:]):
        r = getattr(cur, attr) / getattr(prev, attr)
        e = math.log(r) / math.log(cur.k / prev.k)
        out.append(f"{r:.2f} (^{e:.1f})")
    return out


def report(family: str, points: List[Point], out=print) -> Dict[str, object]:
    out(f"family: {family}  (medians, milliseconds; growth = t(k)/t(previous k), "
        f"^ = local exponent: 1 linear, 2 quadratic)")
    head = (f"{'k':>4}{'verdict':>8}{'runs':>5}{'total':>9}{'plugin':>9}{'z3 check':>10}"
            f"{'transl':>8}{'lower':>8}{'parse':>7}{'total/k':>9}"
            f"{'growth total':>15}{'growth plugin':>15}{'growth z3':>15}"
            f"{'outc':>6}{'IR n/links':>13}{'z3 n/links':>13}")
    out(head)
    out("-" * len(head))
    g_total, g_plugin, g_z3 = (growth(points, a) for a in ("total", "plugin", "z3_check"))
    for i, p in enumerate(points):
        out(f"{p.k:>4}{p.verdict:>8}{p.runs:>5}{ms(p.total):>9}{ms(p.plugin):>9}"
            f"{ms(p.z3_check):>10}{ms(p.translate):>8}{ms(p.lower):>8}{ms(p.parse):>7}"
            f"{p.total / p.k * 1000:>9.3f}{g_total[i]:>15}{g_plugin[i]:>15}{g_z3[i]:>15}"
            f"{p.outcomes:>6}{f'{p.ir_nodes}/{p.ir_links}':>13}"
            f"{f'{p.z3_nodes}/{p.z3_links}':>13}")
    ks = [p.k for p in points]
    summary: Dict[str, object] = {"family": family, "points": points}
    fits = [("total", ks), ("plugin", ks)]
    if max(ks) > 40 and len([k for k in ks if k <= 40]) >= 2:
        fits.insert(1, ("total", [k for k in ks if k <= 40]))
    for attr, fks in fits:
        ts = [getattr(p, attr) for p in points if p.k in fks]
        a, b, worst = fit_line(fks, ts)
        key = f"fit_{attr}" + ("" if fks == ks else "_to_40")
        summary[key] = (a, b, worst)
        span = f"k {min(fks)}..{max(fks)}"
        out(f"  line fit, {attr:<6} ({span:<9}): t = {ms(a)} ms + {b * 1e6:.1f} us * k  "
            f"(worst point off the line by {worst:.0%})")
    not_proved = [p.k for p in points if p.verdict != "proved"]
    if not_proved:
        out(f"  NOT proved at k = {not_proved}: see the verdicts above")
    out("")
    return summary


SCALING_KS = (160, 320, 640, 1280)


def plugin_scaling(ks: Sequence[int] = SCALING_KS, repeats: int = 3,
                   out=print) -> Dict[str, List[tuple]]:
    """The plugin's own work at large k, without solving: translating the body
    and spec into the proving query, and lowering it into a z3 solver.

    At these sizes z3's check() takes seconds and would hide the plugin's own
    growth; here nothing is solved.
    """
    import z3

    import refines.prove
    from refines import ir
    from refines.lower import Lowering
    from refines.source import read_obligation
    from refines.translate import Scope

    rows: Dict[str, List[tuple]] = {}
    out("the plugin's own work at large k, nothing solved (medians, ms)")
    head = (f"{'family':<15}{'k':>6}{'translate':>11}{'growth':>8}{'lower+assert':>14}"
            f"{'growth':>8}{'IR links':>10}{'growth':>8}")
    out(head)
    out("-" * len(head))
    with tempfile.TemporaryDirectory(prefix="refines-bench-") as tmp:
        for family in ("updates", "early returns"):
            prev = None
            for k in ks:
                module, path = load_source(generate(family, k), Path(tmp), f"big_{k}")
                fn = getattr(module, FUNCTION[family])
                ob = read_obligation(fn, 0, path, module.__name__)
                scope = Scope(fn.__globals__, list(ob.fn_node.locals))
                t_tr, t_lo = [], []
                for _ in range(repeats):
                    start = time.perf_counter()
                    behaviour = refines.prove.translate_body(ob.fn_node, ob.params, scope)
                    spec = refines.prove.translate_spec_for(ob)
                    found = refines.prove.violations(behaviour, spec)
                    query = ir.or_(*(v.term for v in found))
                    mid = time.perf_counter()
                    ctx = z3.Context()
                    solver = z3.Solver(ctx=ctx)
                    lower = Lowering(ctx)
                    solver.add(lower(spec.assuming.holds), lower(query))
                    end = time.perf_counter()
                    del solver, lower, ctx  # keep no z3 object past its use
                    t_tr.append(mid - start)
                    t_lo.append(end - mid)
                links = ir_size([query])[1]
                row = (k, median(t_tr), median(t_lo), links)
                rows.setdefault(family, []).append(row)
                g = (lambda i: f"{row[i] / prev[i]:.2f}" if prev else "-")
                out(f"{family:<15}{k:>6}{ms(row[1]):>11}{g(1):>8}{ms(row[2]):>14}{g(2):>8}"
                    f"{links:>10}{g(3):>8}")
                prev = row
    out("  translate = body, spec and the proving query as IR; lower+assert = into a "
        "fresh z3 context and solver (no check)")
    out("")
    return rows


def run(ks: Sequence[int] = DEFAULT_KS, repeats: int = 15, budget: float = 6.0,
        counters_max_k: int = COUNTERS_MAX_K, scaling_ks: Sequence[int] = SCALING_KS,
        out=print) -> Dict[str, object]:
    summaries = []
    with tempfile.TemporaryDirectory(prefix="refines-bench-") as tmp:
        measure("updates", 5, Path(tmp), 3, budget)  # warm-up: first parse, first z3 use
        for family in FAMILIES:
            fks = [k for k in ks if family != "counters" or k <= counters_max_k]
            points = [measure(family, k, Path(tmp), repeats, budget) for k in fks]
            summaries.append(report(family, points, out))
    out("  total  = one full check_function call, parse cache warm (stages wrapped for "
        "timing: a few us per wrapped call)")
    out("  plugin = total minus the time inside z3's check(): translating, lowering, "
        "building queries, context, replay")
    out("  IR n/links = distinct IR nodes / child links reachable from the proving query;"
        " z3 n/links = the same after lowering")
    out("")
    scaling = plugin_scaling(scaling_ks, out=out) if scaling_ks else {}
    return {"families": summaries, "scaling": scaling}


def profile(family: str, k: int, out=print) -> None:
    """cProfile one warm check and print where the time goes."""
    with tempfile.TemporaryDirectory(prefix="refines-bench-") as tmp:
        module, path = load_source(generate(family, k), Path(tmp), f"seq_{k}")
        fn = getattr(module, FUNCTION[family])
        run_check(fn, path, module.__name__)
        prof = cProfile.Profile()
        prof.enable()
        _, result = run_check(fn, path, module.__name__)
        prof.disable()
    buf = io.StringIO()
    stats = pstats.Stats(prof, stream=buf)
    stats.sort_stats("tottime").print_stats(15)
    stats.sort_stats("cumulative").print_stats(r"refines", 25)
    out(f"{family}, k={k}: {result.verdict}")
    out(buf.getvalue())


def main(argv: Optional[Sequence[str]] = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--ks", default=",".join(map(str, DEFAULT_KS)),
                        help="comma-separated values of k")
    parser.add_argument("--repeats", type=int, default=15)
    parser.add_argument("--budget", type=float, default=6.0,
                        help="seconds per (family, k) after which repeats stop (min 3 runs)")
    parser.add_argument("--counters-max-k", type=int, default=COUNTERS_MAX_K)
    parser.add_argument("--scaling-ks", default=",".join(map(str, SCALING_KS)),
                        help="k values for the plugin-only scaling table ('' to skip)")
    parser.add_argument("--profile", nargs=2, metavar=("FAMILY", "K"),
                        help=f"profile one check instead; FAMILY in {FAMILIES}")
    args = parser.parse_args(argv)
    if args.profile:
        family = args.profile[0].replace("-", " ").replace("_", " ")
        if family not in FAMILIES:
            parser.error(f"FAMILY must be one of {FAMILIES}, not {args.profile[0]!r}")
        profile(family, int(args.profile[1]))
        return 0
    ks = sorted(int(k) for k in args.ks.split(","))
    scaling = [int(k) for k in args.scaling_ks.split(",") if k.strip()]
    run(ks, args.repeats, args.budget, args.counters_max_k, scaling)
    return 0


if __name__ == "__main__":
    sys.exit(main())
