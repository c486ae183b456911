"""The long differential run for Optional values, lists and objects: 100,000+
cases, on demand.

A case is one input tuple run through one translated program: the outcome the
translation predicts (a value of the exact type, object for object, or an
exception class) and, for a return, the post-state of every list and object
argument, against calling the function in CPython on a deep copy of the
arguments (aliasing kept). The programs come from the seeded generator of
``tests/test_heap_differential.py`` (``f(xs, ys, n, w, k)``), cycling through
functions of depth 3 and 4, each run on the fixed inputs plus
``--random-inputs`` seeded ones. Same arguments, same programs.

From the repository root::

    .venv/bin/python tests/benchmarks/run_heap_fuzz.py                 # 100,000 cases, 2 processes
    .venv/bin/python tests/benchmarks/run_heap_fuzz.py --cases 20000 --jobs 1
    .venv/bin/python tests/benchmarks/run_heap_fuzz.py --out problems.txt

The expected result is zero mismatches. Programs the translator refuses are
counted (they make no claim); mismatching and crashing programs are printed
(the first few) or written to ``--out``, each with its seed. It asserts
nothing; it exits 1 when a program disagrees or crashes the translator. The
last lines are the tally and the outcomes CPython gave, by kind.
"""

from __future__ import annotations

import argparse
import multiprocessing
import os
import sys
import time

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, os.path.dirname(HERE))  # tests/: the generator and the helpers

SHAPES = ("functions3", "functions4")
SEED_BASE = 9_000_000
PIECE = 25  # programs per work item


def make_source(shape: str):
    import test_heap_differential as T

    return {"functions3": T.functions(3), "functions4": T.functions(4)}[shape]


def run_piece(job):
    """Programs ``start`` to ``stop - 1`` (program i has seed SEED_BASE + i):
    what their Tally found, as plain data."""
    start, stop, random_inputs = job
    import test_heap_differential as T

    tally = T.Tally()
    for i in range(start, stop):
        tally.merge(T.run_batch([SEED_BASE + i], make_source(SHAPES[i % len(SHAPES)]),
                                count=random_inputs))
    return (tally.programs, tally.cases, tally.mismatched_cases, tally.unmodelled_cases,
            tally.problems[T.MISMATCH], tally.problems[T.REFUSED], tally.problems[T.CRASHED],
            tally.outcomes)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--cases", type=int, default=100_000, help="at least this many cases")
    ap.add_argument("--jobs", type=int, default=2, help="worker processes")
    ap.add_argument("--random-inputs", type=int, default=16,
                    help="seeded random inputs per program, besides the fixed ones")
    ap.add_argument("--show", type=int, default=3, help="problems to print")
    ap.add_argument("--out", help="write every problem (refusals too) to this file")
    args = ap.parse_args(argv)

    fixed = 8  # test_heap_differential.inputs_for: the fixed inputs
    per_program = fixed + args.random_inputs
    jobs = max(1, args.jobs)
    started = time.perf_counter()
    programs = cases = bad_cases = unmodelled = 0
    mismatches, refused, crashed = [], [], []
    outcomes: dict = {}
    done = 0
    # A refused program gives no cases: top up until there are enough.
    while cases < args.cases:
        more = -(-(args.cases - cases) // per_program)
        pieces = [(lo, min(lo + PIECE, done + more), args.random_inputs)
                  for lo in range(done, done + more, PIECE)]
        done += more
        if jobs == 1:
            results = list(map(run_piece, pieces))
        else:
            with multiprocessing.get_context("spawn").Pool(jobs) as pool:
                results = list(pool.imap_unordered(run_piece, pieces))
        for p, c, b, u, m, r, x, o in results:
            programs, cases, bad_cases, unmodelled = (programs + p, cases + c,
                                                      bad_cases + b, unmodelled + u)
            mismatches.extend(m)
            refused.extend(r)
            crashed.extend(x)
            for kind, count in o.items():
                outcomes[kind] = outcomes.get(kind, 0) + count
    elapsed = time.perf_counter() - started

    def seed(text):
        return int(text.split()[2])  # "--- seed N"

    problems = sorted(mismatches + crashed, key=seed)
    for text in problems[:args.show]:
        print(text, end="\n\n")
    if args.out:
        with open(args.out, "w", encoding="utf-8") as fh:
            fh.write("\n\n".join(sorted(problems + refused, key=seed)) + "\n")
    print(f"jobs: {jobs}; inputs per program: {per_program}; "
          f"seeds {SEED_BASE}..{SEED_BASE + done - 1}")
    print("CPython outcomes: " + ", ".join(
        f"{kind} {count}" for kind, count in sorted(outcomes.items(), key=lambda kv: -kv[1])))
    print(f"cases: {cases}  programs: {programs}  mismatches: {bad_cases} "
          f"(in {len(mismatches)} programs)  refused: {len(refused)}  crashed: {len(crashed)}  "
          f"unmodelled: {unmodelled}  time: {elapsed:.1f} s")
    return 1 if problems else 0


if __name__ == "__main__":
    sys.exit(main())
