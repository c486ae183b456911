"""The loop the on-demand differential runners share (run_str_fuzz.py,
run_heap_fuzz.py): hand seeded pieces of programs to worker processes until
there are enough cases, add up what each piece found, and print the tally.

A piece function takes ``(start, stop, random_inputs)`` and returns
``(programs, cases, mismatched cases, unmodelled cases, mismatch texts,
refusal texts, crash texts, {CPython outcome kind: count})``; each text
starts with ``--- seed N``.
"""

from __future__ import annotations

import multiprocessing
import time
from dataclasses import dataclass, field
from typing import Callable, Dict, List


@dataclass
class Totals:
    programs: int = 0
    cases: int = 0
    bad_cases: int = 0
    unmodelled: int = 0
    mismatches: List[str] = field(default_factory=list)
    refused: List[str] = field(default_factory=list)
    crashed: List[str] = field(default_factory=list)
    outcomes: Dict[str, int] = field(default_factory=dict)
    seeds: int = 0  # programs handed out (seed base .. base + seeds - 1)
    seconds: float = 0.0


def run(piece: Callable, wanted: int, per_program: int, random_inputs: int, jobs: int,
        size: int) -> Totals:
    totals = Totals()
    started = time.perf_counter()
    # A refused or crashing program gives no cases: top up until there are enough.
    while totals.cases < wanted:
        more = -(-(wanted - totals.cases) // per_program)
        done = totals.seeds
        pieces = [(lo, min(lo + size, done + more), random_inputs)
                  for lo in range(done, done + more, size)]
        totals.seeds += more
        if jobs == 1:
            results = list(map(piece, pieces))
        else:
            with multiprocessing.get_context("spawn").Pool(jobs) as pool:
                results = list(pool.imap_unordered(piece, pieces))
        for p, c, b, u, m, r, x, o in results:
            totals.programs += p
            totals.cases += c
            totals.bad_cases += b
            totals.unmodelled += u
            totals.mismatches.extend(m)
            totals.refused.extend(r)
            totals.crashed.extend(x)
            for kind, count in o.items():
                totals.outcomes[kind] = totals.outcomes.get(kind, 0) + count
    totals.seconds = time.perf_counter() - started
    return totals


def seed_of(text: str) -> int:
    return int(text.split()[2])  # "--- seed N"


def report(totals: Totals, problems: List[str], show: int, jobs: int, per_program: int,
           seed_base: int) -> None:
    for text in problems[:show]:
        print(text, end="\n\n")
    print(f"jobs: {jobs}; inputs per program: {per_program}; "
          f"seeds {seed_base}..{seed_base + totals.seeds - 1}")
    print("CPython outcomes: " + ", ".join(
        f"{kind} {count}" for kind, count in sorted(totals.outcomes.items(),
                                                    key=lambda kv: -kv[1])))
    print(f"cases: {totals.cases}  programs: {totals.programs}  mismatches: "
          f"{totals.bad_cases} (in {len(totals.mismatches)} programs)  refused: "
          f"{len(totals.refused)}  crashed: {len(totals.crashed)}  unmodelled: "
          f"{totals.unmodelled}  time: {totals.seconds:.1f} s")
