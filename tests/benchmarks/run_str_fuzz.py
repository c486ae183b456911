"""The long str differential run: 100,000+ cases, on demand.

A case is one input tuple run through one translated program: the outcome the
translation predicts (a value of the exact type, or an exception class)
against calling the function in CPython. The programs come from the seeded
generator of ``tests/test_str_differential.py``, cycling through four shapes
(functions of depth 3 and 4, single expressions of depth 5, functions that read
locals assigned on some paths only), each run on the fixed inputs plus
``--random-inputs`` seeded ones. Same arguments, same programs.

From the repository root::

    .venv/bin/python tests/benchmarks/run_str_fuzz.py                 # 100,000 cases, 2 processes
    .venv/bin/python tests/benchmarks/run_str_fuzz.py --cases 20000 --jobs 1
    .venv/bin/python tests/benchmarks/run_str_fuzz.py --out problems.txt

Every case is a claim (replace's old string is always a non-empty constant, so
nothing is "not modelled"), and the expected result is zero mismatches.
Mismatching, refused and crashing programs are printed (the first few) or
written to ``--out``, each with its seed. It asserts nothing; it exits 1 when a
program disagrees, is refused or crashes the translator. The last lines are
the tally and the outcomes CPython gave, by kind.
"""

from __future__ import annotations

import argparse
import os
import sys

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, os.path.dirname(HERE))  # tests/: the generator and the helpers
sys.path.insert(0, HERE)

import fuzz_runner  # noqa: E402

SHAPES = ("functions3", "functions4", "expressions5", "flow4")
SEED_BASE = 8_000_000
PIECE = 25  # programs per work item


def make_source(shape: str):
    import test_str_differential as T

    return {"functions3": T.functions(3), "functions4": T.functions(4),
            "expressions5": T.expressions(5), "flow4": T.functions(4, flow=True)}[shape]


def run_piece(job):
    """Programs ``start`` to ``stop - 1`` (program i has seed SEED_BASE + i):
    what their Tally found, as plain data."""
    start, stop, random_inputs = job
    import test_str_differential as T

    tally = T.Tally()
    for i in range(start, stop):
        tally.merge(T.run_batch([SEED_BASE + i], make_source(SHAPES[i % len(SHAPES)]),
                                count=random_inputs))
    return (tally.programs, tally.cases, tally.mismatched_cases, tally.unmodelled_cases,
            tally.problems[T.MISMATCH], tally.problems[T.REFUSED], tally.problems[T.CRASHED],
            tally.outcomes)


def main(argv=None) -> int:
    import test_str_differential as T

    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--cases", type=int, default=100_000, help="at least this many cases")
    ap.add_argument("--jobs", type=int, default=2, help="worker processes")
    ap.add_argument("--random-inputs", type=int, default=16,
                    help="seeded random inputs per program, besides the fixed ones")
    ap.add_argument("--show", type=int, default=3, help="problems to print")
    ap.add_argument("--out", help="write every problem to this file")
    args = ap.parse_args(argv)

    per_program = len(T.FIXED_INPUTS) + args.random_inputs
    jobs = max(1, args.jobs)
    t = fuzz_runner.run(run_piece, args.cases, per_program, args.random_inputs, jobs, PIECE)
    problems = sorted(t.mismatches + t.refused + t.crashed, key=fuzz_runner.seed_of)
    if args.out:
        with open(args.out, "w", encoding="utf-8") as fh:
            fh.write("\n\n".join(problems) + "\n")
    fuzz_runner.report(t, problems, args.show, jobs, per_program, SEED_BASE)
    return 1 if problems else 0


if __name__ == "__main__":
    sys.exit(main())
