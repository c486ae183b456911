"""Run the benchmarks and print a plain-text summary (``make bench``).

Run from the repository root: ``python tests/benchmarks/run_all.py``;
``--quick`` takes fewer repeats (a smoke run, not numbers to quote).
"""

from __future__ import annotations

import argparse
import os
import platform
import statistics
import sys
import time
from typing import Optional, Sequence

import z3

import bench_fallback
import bench_overhead
import bench_preconditions
import bench_rlimit
import bench_sequential_ifs
import bench_solver_strategy
import bench_string_strategy
from bench_overhead import ms


def machine() -> str:
    try:
        load = "load average %.2f %.2f %.2f" % os.getloadavg()
    except OSError:
        load = "load average unknown"
    return (f"{platform.platform()}, {os.cpu_count()} CPUs, {load}, Python "
            f"{platform.python_version()}, z3 {z3.get_version_string()}")


def main(argv: Optional[Sequence[str]] = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="few repeats: a smoke run")
    parser.add_argument("--no-strategy", action="store_true",
                        help="skip the float solver strategy benchmark (the longest, ~10 min)")
    parser.add_argument("--no-fallback", action="store_true",
                        help="skip the tester against plain hypothesis (~2 min)")
    args = parser.parse_args(argv)
    overhead_repeats, seq_repeats, rl_repeats = (3, 3, 1) if args.quick else (20, 15, 3)

    if not args.no_fallback:
        # Before any hypothesis draw, so that its pool of constants is a user's
        # (see bench_fallback); the other benchmarks draw only in the tester.
        bench_fallback.leave_plugin_out_of_hypothesis_constants()
    print(f"machine: {machine()}")
    print("(times on a shared, noisy machine: compare medians, not single runs)\n")
    started = time.perf_counter()

    print("=" * 30, "1. overhead: full check vs raw solver", "=" * 30)
    overhead = bench_overhead.run(overhead_repeats)
    print()
    print("=" * 30, "2. sequential ifs", "=" * 30)
    sequential = bench_sequential_ifs.run(repeats=seq_repeats)
    print()
    print("=" * 30, "3. rlimit units per second", "=" * 30)
    rlimit = bench_rlimit.run(repeats=rl_repeats)
    print()
    strategy = None
    if not args.no_strategy:
        print("=" * 30, "4. solver strategy for floats", "=" * 30)
        strategy = bench_solver_strategy.run(quick=args.quick)
        print()
        print("=" * 30, "5. string encodings", "=" * 30)
        string_runs = 1 if args.quick else 3
        strings = bench_string_strategy.run(string_runs, bench_string_strategy.BUDGET)
        bench_string_strategy.table(strings, string_runs, bench_string_strategy.BUDGET)
        print()
    fallback = None
    if not args.no_fallback:
        print("=" * 30, "6. the tester against plain hypothesis", "=" * 30)
        fallback = bench_fallback.run(*((2, 3) if args.quick else (5, 20)))["summary"]
        print()

    print("=" * 30, "7. preconditions of the suggestion corpus", "=" * 30)
    preconditions = bench_preconditions.run(2 if args.quick else 5)
    bench_preconditions.report(preconditions)
    print()

    print("=" * 30, "summary", "=" * 30)
    ratios = overhead["ratio_per_case_warm"]
    print(f"overhead ratio, full check / raw z3 check(), all cases: "
          f"{overhead['overhead_ratio_warm']:.1f}x warm, "
          f"{overhead['overhead_ratio_cold']:.1f}x cold")
    for label, ratio in ratios.items():
        print(f"  {label:<26} {ratio:.1f}x")
    print()
    print("time against k (medians, ms; growth = t(k)/t(previous k), 2.0 = linear):")
    for summary in sequential["families"]:
        points = summary["points"]
        print(f"  {summary['family']}:")
        print(f"    {'k':>5}{'total':>10}{'growth':>8}{'plugin':>10}{'growth':>8}"
              f"{'z3':>10}{'growth':>8}")
        prev = None
        for p in points:
            g = (lambda a: f"{getattr(p, a) / getattr(prev, a):.2f}" if prev else "-")
            print(f"    {p.k:>5}{ms(p.total):>10}{g('total'):>8}{ms(p.plugin):>10}"
                  f"{g('plugin'):>8}{ms(p.z3_check):>10}{g('z3_check'):>8}"
                  + ("" if p.verdict == "proved" else f"  ({p.verdict})"))
            prev = p
        if "fit_total_to_40" in summary:
            a, b, worst = summary["fit_total_to_40"]
            print(f"    total line, k <= 40: {ms(a)} ms + {b * 1e6:.1f} us/if (worst point "
                  f"off by {worst:.0%})")
        a, b, worst = summary["fit_plugin"]
        print(f"    plugin line: {ms(a)} ms + {b * 1e6:.1f} us/if (worst point off by "
              f"{worst:.0%})")
    if sequential["scaling"]:
        print("  the plugin alone at large k, nothing solved (translate ms, lower ms, IR links;"
              " growth per doubling):")
        for family, rows in sequential["scaling"].items():
            cells = []
            for i, (k, tr, lo, links) in enumerate(rows):
                if i == 0:
                    cells.append(f"k={k}: {ms(tr)}, {ms(lo)}, {links}")
                else:
                    _, ptr, plo, plinks = rows[i - 1]
                    cells.append(f"k={k}: x{tr / ptr:.1f}, x{lo / plo:.1f}, x{links / plinks:.1f}")
            print(f"    {family:<14} " + "; ".join(cells))
    print()
    print("rlimit units per second (median of runs stopped by the timeout):")
    for kind, rate in rlimit["by_kind"].items():
        print(f"  {kind:<13} {rate:>14,.0f}")
    print(f"  {'all':<13} {rlimit['overall']:>14,.0f}   (slowest run "
          f"{rlimit['slowest']:,.0f}; prove.RLIMIT_PER_SECOND = {rlimit['current']:,})")
    if strategy is not None:
        print()
        print("solver strategy, full check at 10 s (median seconds, verdict): "
              "z3 alone -> chosen strategy")
        for case, alone, mine, _ in strategy["rows"]:
            print(f"  {case.label:<22} {alone.verdict_text():<20}"
                  f"{statistics.median(alone.seconds):>7.2f} -> "
                  f"{mine.verdict_text():<20}{statistics.median(mine.seconds):>7.2f}")
    if fallback is not None:
        print()
        print("the tester against plain hypothesis (examples/s on the correct version; planted "
              "bug: found in runs, median ms to the first failing run)")
        for name, rate in fallback["rate"].items():
            find = fallback["find"][name]
            plain = "-" if rate["plain_stopped"] else f"{rate['plain']:.0f}"
            print(f"  {name:<16} ours {rate['ours']:>5.0f}, plain {plain:>5} ex/s;  ours "
                  f"{find['ours_found'][0]}/{find['ours_found'][1]} in "
                  f"{bench_fallback.ms(find['ours_first'])}, plain {find['plain_found'][0]}/"
                  f"{find['plain_found'][1]} in {bench_fallback.ms(find['plain_first'])}")
    print(f"\ntotal benchmark time: {time.perf_counter() - started:.0f} s")
    return 0


if __name__ == "__main__":
    sys.exit(main())
