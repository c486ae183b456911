"""The tester against plain hypothesis on the same properties.

Eight invented functions with specs (a ski school, a café's loyalty card, a
chairlift, a ferry's boarding codes, a pool, a sauna, a ticket office, gear
hire), each in two versions: correct, and with a planted boundary bug. Every
body holds something the translator does not model (a ``try:``/``finally:``
or a ``while`` loop), so the obligation reaches the tester; the script checks
that the verdict came from testing and says so when the solver decided one.

* *ours*: ``refines.check.check_function`` on the module written to a temp
  dir, with ``examples=N`` (default 100): the solver's attempt, its inputs,
  boundary values from the constants, hypothesis draws within the bounds of
  ``assuming``, shrinking and the regression test. It is deterministic, so one
  result per case; its time is the median over ``--repeats`` runs. The
  same check is also timed in two parts: *solver*, ``refines.prove.prove``
  (the attempt, and the inputs it offers), and *testing*,
  ``refines.fallback.test`` on the ``Undecided`` that it returned.
* *plain hypothesis*: ``@given(**{p: st.from_type(hint)})``, ``assume`` of the
  spec's ``assuming``, a call, and an assert of the spec's relation (and of its
  ``raises`` rule) with the spec's own lambdas. Default settings except
  ``database=None`` (no replay of an earlier run's failure) and
  ``deadline=None`` (timing noise must not fail a run); one run per seed
  (``@seed``), ``--seeds`` seeds.

Measured: (a) examples per second on the correct versions, examples being the
inputs judged against the spec (inside ``assuming``), and (b) on the buggy
versions, whether the bug was found, the time to the first failing run and
the time until the run ended (shrinking included), and the smallest example
reported. A and B are interleaved, case by case, in every round. Both sides
draw from hypothesis's pool of constants of the user's modules; the plugin's
own modules are left out of it, as for a plugin installed from a wheel (see
``leave_plugin_out_of_hypothesis_constants``; ``--plugin-constants`` keeps
them).

Run: ``.venv/bin/python tests/benchmarks/bench_fallback.py [--repeats 5]
[--seeds 20] [--examples 100] [--cases stamps,lift_open] [--plugin-constants]
[--quick]`` (about 80 s). It measures and prints; it asserts nothing. Results:
docs/performance.md ("The tester against plain hypothesis").
"""

from __future__ import annotations

import argparse
import collections
import contextlib
import inspect
import io
import statistics
import sys
import tempfile
import time
import typing
from dataclasses import dataclass, field
from pathlib import Path
from string import Template
from typing import Any, Callable, Dict, List, Optional, Sequence

from hypothesis import assume, given, seed, settings
from hypothesis import configuration as hypothesis_configuration
from hypothesis import errors as hypothesis_errors
from hypothesis import strategies as st

import refines.fallback
import refines.prove
from bench_overhead import load_source, patched
from refines.check import check_function
from refines.declare import SPECS_ATTRIBUTE
from refines.source import read_obligation
from refines.verdict import Undecided

TIMEOUT = 10.0  # the solver budget handed to check_function (the plugin's default)
EXAMPLES = 100  # --refines-examples's default

# ---------------------------------------------------------------- the cases

# $-placeholders are filled with the correct or the buggy fragment of each case.
SOURCE = Template('''
from refines import refines

GROUP_SIZE = 8            # a group lesson needs at least this many skiers
STAMP_CENTS = 1000        # one loyalty stamp per full 1000 cents spent
MAX_WIND_KMH = 60.0       # the chairlift runs up to and including this wind speed
PRIORITY_PREFIX = "VIP-"  # boarding codes with this prefix board first
LANE_CAP = 6              # swimmers one lane takes
CAPACITY = 40             # places in one sauna session
BULK_TICKETS = 500        # bundles of at least this many tickets get the bulk price
WEEK_DAYS = 7             # gear hire: a late fee from the second full week on


@refines(lambda skiers, result: result == (15 if skiers >= GROUP_SIZE else 0),
         raises={ValueError: lambda skiers: skiers < 1})
def lesson_discount(skiers: int) -> int:
    """Percent off a ski lesson: groups of GROUP_SIZE or more get 15 %."""
    try:
        if skiers < 1:
            raise ValueError("a lesson needs at least one skier")
        if skiers $lesson GROUP_SIZE:
            return 15
        return 0
    finally:
        pass  # stands for clean-up the translator does not model


@refines(lambda spent_cents, result: result == spent_cents // STAMP_CENTS,
         assuming=lambda spent_cents: 0 <= spent_cents <= 100_000)
def stamps(spent_cents: int) -> int:
    """Loyalty stamps: one per full STAMP_CENTS spent, counted in a loop."""
    count = 0
    left = spent_cents
    while left $stamps STAMP_CENTS:
        left -= STAMP_CENTS
        count += 1
    return count


@refines(lambda wind_kmh, result: result == (wind_kmh <= MAX_WIND_KMH))
def lift_open(wind_kmh: float) -> bool:
    """The chairlift runs while the wind is at most MAX_WIND_KMH."""
    try:
        return wind_kmh $lift MAX_WIND_KMH
    finally:
        pass


@refines(lambda code, result: result == code.startswith(PRIORITY_PREFIX))
def boards_first(code: str) -> bool:
    """Ferry boarding: codes that start with PRIORITY_PREFIX board first."""
    try:
        return $prefix code.startswith(PRIORITY_PREFIX)
    finally:
        pass


@refines(lambda swimmers, result: result == (len(swimmers) < LANE_CAP))
def lane_has_room(swimmers: list[int]) -> bool:
    """Can one more swimmer join a lane that holds ``swimmers``?"""
    try:
        return len(swimmers) $lane LANE_CAP
    finally:
        pass


@refines(lambda booked, party, result: result == (booked + party <= CAPACITY),
         assuming=lambda booked, party: booked >= 0 and party >= 1)
def session_fits(booked: int, party: int) -> bool:
    """Does a party of ``party`` fit into a sauna session with ``booked`` places taken?"""
    try:
        return booked + party $sauna CAPACITY
    finally:
        pass


@refines(lambda tickets, result: result == tickets * (9 if tickets >= BULK_TICKETS else 10),
         assuming=lambda tickets: tickets > 0 and tickets % 100 == 0)
def bundle_price(tickets: int) -> int:
    """Ticket bundles come in hundreds; from BULK_TICKETS on, a ticket costs 9, not 10."""
    try:
        if tickets $bundle BULK_TICKETS:
            return tickets * 9
        return tickets * 10
    finally:
        pass


@refines(lambda days, result: result == (days >= 2 * WEEK_DAYS),
         assuming=lambda days: days >= 0)
def late_fee_due(days: int) -> bool:
    """Gear hire: a late fee is due from two full weeks on (a derived threshold)."""
    try:
        return days // WEEK_DAYS $late 2
    finally:
        pass
''')


@dataclass(frozen=True)
class Case:
    label: str  # what the planted bug is
    name: str  # the function
    correct: str  # the fragment of the correct version
    buggy: str  # the fragment of the buggy version
    key: str  # its placeholder in SOURCE
    fails_on: str  # where the buggy version breaks its spec


CASES = (
    Case("int `>` for `>=` at 8, raises", "lesson_discount", ">=", ">", "lesson",
         "skiers == 8"),
    Case("int loop off by one at 1000", "stamps", ">=", ">", "stamps",
         "spent_cents = 1000, 2000, ... (100 of 100,001)"),
    Case("float `<` for `<=` at 60.0", "lift_open", "<=", "<", "lift", "wind_kmh == 60.0"),
    Case("str prefix, length edge", "boards_first", "", "len(code) > len(PRIORITY_PREFIX) and",
         "prefix", 'code == "VIP-"'),
    Case("list length `<=` for `<` at 6", "lane_has_room", "<", "<=", "lane",
         "len(swimmers) == 6"),
    Case("two ints, sum `<` for `<=` at 40", "session_fits", "<=", "<", "sauna",
         "booked + party == 40"),
    Case("narrow assuming n % 100 == 0, at 500", "bundle_price", ">=", ">", "bundle",
         "tickets == 500"),
    Case("derived threshold 2 * 7", "late_fee_due", ">=", ">", "late", "days in 14..20"),
)


def source(version: str) -> str:
    return SOURCE.substitute({c.key: getattr(c, version) for c in CASES})


# ---------------------------------------------------------------- side A: ours


@dataclass
class OursRun:
    verdict: str
    seconds: float  # the whole check_function call
    examples: int  # Result.testing.examples (judged; counting stops at a failure)
    first_fail: Optional[float]  # seconds from the start to the first failing run
    example: str  # the counterexample's call ("" if none)
    by: str  # "testing", or what decided it otherwise
    origin: str = ""  # where the first failing input came from: solver, boundary, drawn


class _Clock:
    """The moment of the first failing run of the tester, seen by wrapping
    ``Tester.example`` (costs one comparison per example)."""

    def __init__(self) -> None:
        self.first: Optional[float] = None
        self.origin = ""

    def wrap(self, original: Callable) -> Callable:
        clock = self

        def example(tester, inputs, origin=""):
            outcome = original(tester, inputs, origin)
            if outcome == "fail" and clock.first is None:
                clock.first = time.perf_counter()
                clock.origin = origin or "drawn"
            return outcome

        return example


def decided_by(result) -> str:
    """Where a verdict came from: "testing", or why it did not."""
    if result.counterexample is not None:
        return result.counterexample.found_by
    if result.testing is not None:
        return "testing"
    return f"solver ({result.verdict})" if result.verdict in ("proved", "refuted") else \
        f"neither ({result.verdict}: {result.reason})"


def run_ours(fn, path: str, module: str, examples: int, clock: _Clock) -> OursRun:
    clock.first, clock.origin = None, ""
    start = time.perf_counter()
    result = check_function(fn, 0, path, module, TIMEOUT, examples=examples)
    seconds = time.perf_counter() - start
    cx = result.counterexample
    return OursRun(result.verdict, seconds,
                   result.testing.examples if result.testing else 0,
                   None if clock.first is None else clock.first - start,
                   cx.call if cx else "", decided_by(result), clock.origin if cx else "")


def run_split(fn, path: str, module: str, examples: int) -> Optional[tuple]:
    """``(solver seconds, testing seconds, examples)``: ``prove.prove`` and
    then ``fallback.test`` on the ``Undecided`` it returned, timed apart
    (reading the obligation, cheap with the parse cache, is outside both
    clocks); None if the solver decided the obligation."""
    ob = read_obligation(fn, 0, path, module, str)
    start = time.perf_counter()
    outcome = refines.prove.prove(ob, TIMEOUT)
    solver = time.perf_counter() - start
    if not isinstance(outcome, Undecided):
        return None
    start = time.perf_counter()
    result = refines.fallback.test(ob, outcome, examples)
    return solver, time.perf_counter() - start, result.testing.examples if result.testing else 0


# ---------------------------------------------------------------- side B: plain hypothesis


@dataclass
class PlainRun:
    outcome: str  # "found", "passed", or the exception that stopped hypothesis
    seconds: float  # the whole run of the @given test
    judged: int  # calls inside assuming (the property was judged)
    calls: int  # calls of the test body (assume included)
    first_fail: Optional[float] = None
    example: str = ""  # the last failing call: the shrunk example hypothesis reports


def _binder(part: Callable) -> Callable[[Dict[str, Any]], Any]:
    names = list(inspect.signature(part).parameters)
    return lambda values: part(**{n: values[n] for n in names})


def plain_test(fn, seed_value: int, record: PlainRun, start: List[float]):
    """The property a hypothesis user would write from the spec, with
    type-based strategies and default settings (no database, no deadline)."""
    spec = getattr(fn, SPECS_ATTRIBUTE)[0]
    hints = typing.get_type_hints(fn)
    names = list(inspect.signature(fn).parameters)
    relation = _binder(spec.relation)
    assuming = _binder(spec.assuming) if spec.assuming is not None else None
    raises = [(cls, _binder(cond)) for cls, cond in spec.raises.items()]

    def fail(kw, why):
        if record.first_fail is None:
            record.first_fail = time.perf_counter() - start[0]
        record.example = f"{fn.__name__}(" + ", ".join(f"{n}={kw[n]!r}" for n in names) + ")"
        raise AssertionError(why)

    @settings(database=None, deadline=None)
    @seed(seed_value)
    @given(**{p: st.from_type(hints[p]) for p in names})
    def prop(**kw):
        record.calls += 1
        if assuming is not None:
            assume(assuming(kw))
        record.judged += 1
        required = [cls for cls, cond in raises if cond(kw)]
        try:
            result = fn(**kw)
        except Exception as exc:  # noqa: BLE001 -- the raises rule judges it
            if required and isinstance(exc, tuple(required)):
                return
            fail(kw, f"raised {type(exc).__name__}")
        if required:
            fail(kw, f"returned instead of raising {required[0].__name__}")
        try:
            holds = relation(dict(kw, result=result))
        except Exception:  # noqa: BLE001 -- a relation that raises does not hold
            holds = False
        if not holds:
            fail(kw, "the relation does not hold")

    return prop


def run_plain(fn, seed_value: int) -> PlainRun:
    record = PlainRun("passed", 0.0, 0, 0)
    start = [0.0]
    test = plain_test(fn, seed_value, record, start)
    out = io.StringIO()
    start[0] = time.perf_counter()
    try:
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(out):
            test()
    except AssertionError:
        record.outcome = "found"
    except hypothesis_errors.FailedHealthCheck as exc:
        record.outcome = "health check: " + _health_check(exc)
    except hypothesis_errors.HypothesisException as exc:
        record.outcome = type(exc).__name__
    record.seconds = time.perf_counter() - start[0]
    return record


def _health_check(exc: BaseException) -> str:
    for check in ("filter_too_much", "too_slow", "large_base_example", "data_too_large"):
        if check in str(exc):
            return check
    return "failed"


# ---------------------------------------------------------------- the measurement


@dataclass
class Row:
    case: Case
    ours_ok: List[OursRun] = field(default_factory=list)
    ours_bug: List[OursRun] = field(default_factory=list)
    split: List[tuple] = field(default_factory=list)  # (solver s, testing s, examples)
    plain_ok: List[PlainRun] = field(default_factory=list)
    plain_bug: List[PlainRun] = field(default_factory=list)


def median(xs: Sequence[float]) -> float:
    return statistics.median(xs) if xs else float("nan")


def ms(seconds: Optional[float]) -> str:
    if seconds is None or seconds != seconds:
        return "-"
    return f"{seconds * 1000:.1f}" if seconds < 10 else f"{seconds * 1000:.0f}"


# Hypothesis 6.x draws about 5 % of its choices from the constants of the
# modules it counts as the user's own: every imported module outside
# site-packages, the standard library and test folders, scanned once, when it
# first needs them. Installed editable (as in this repository's .venv), the
# plugin is such a module, and its constants (some 560 short strings and 30
# numbers) dilute the pool; installed from a wheel, it is not. So that the
# pool is the one a user's project gives (here: the case modules), the
# plugin's modules are marked as scanned before the first draw, through a
# private attribute of hypothesis 6.170. --plugin-constants keeps them.


def leave_plugin_out_of_hypothesis_constants() -> str:
    """Mark the plugin's modules as already scanned; say what was done."""
    import importlib
    import pkgutil

    import refines

    try:
        from hypothesis.internal.conjecture import providers

        seen = providers._seen_modules
    except (ImportError, AttributeError):
        return "not changed (this hypothesis version has no _seen_modules)"
    for info in pkgutil.iter_modules(refines.__path__):
        importlib.import_module(f"refines.{info.name}")
    plugin = [m for name, m in list(sys.modules.items())
              if name == "refines" or name.startswith("refines.")]
    if any(id(m) in seen for m in plugin) and not getattr(providers, "_bench_marked", False):
        return "not changed: hypothesis had already scanned the plugin's modules"
    seen.update(id(m) for m in plugin)
    providers._bench_marked = True
    return "the plugin's own modules left out, as for a plugin installed from a wheel"


def hypothesis_constants() -> str:
    """The size of hypothesis's pool of local constants, and which of the
    cases' constants are in it."""
    try:
        from hypothesis.internal.conjecture import providers

        pool = providers._get_local_constants()
    except Exception:  # noqa: BLE001 -- an internal detail of one hypothesis version
        return "unknown"
    have = [repr(v) for v, s in ((8, pool.integers), (1000, pool.integers),
                                 (60.0, pool.floats), ("VIP-", pool.strings),
                                 (500, pool.integers), (40, pool.integers))
            if v in s]
    return (f"{len(pool.integers)} ints, {len(pool.floats)} floats, {len(pool.strings)} "
            f"strs; the cases' own among them: {', '.join(have) or 'none'}")


def run(repeats: int = 5, seeds: int = 20, examples: int = EXAMPLES,
        out=print, only: Optional[Sequence[str]] = None,
        plugin_constants: bool = False) -> Dict[str, object]:
    """Measure both sides on every case (or the ``only`` ones) and print the tables."""
    if not plugin_constants:
        out(f"hypothesis's pool of local constants: "
            f"{leave_plugin_out_of_hypothesis_constants()}")
    key = "__hypothesis_home_directory"
    home = vars(hypothesis_configuration).get(key)
    with tempfile.TemporaryDirectory(prefix="bench-fallback-") as folder:
        # Keep hypothesis's files (its cache of module constants) out of the repository.
        hypothesis_configuration.set_hypothesis_home_dir(Path(folder) / "hypothesis")
        try:
            rows = _measure(Path(folder), repeats, seeds, examples, out, only)
        finally:
            vars(hypothesis_configuration)[key] = home
    return {"rows": rows, "summary": report(rows, repeats, seeds, examples, out)}


def _measure(folder: Path, repeats: int, seeds: int, examples: int, out,
             only: Optional[Sequence[str]]) -> List[Row]:
    good, good_path = load_source(source("correct"), folder, "fallback_correct")
    bad, bad_path = load_source(source("buggy"), folder, "fallback_buggy")
    rows = [Row(c) for c in CASES if not only or c.name in only]
    clock = _Clock()

    with patched(refines.fallback.Tester, "example", clock.wrap):
        for row in rows:  # warm-up: parses, imports, hypothesis's constant scan
            c = row.case
            run_ours(getattr(good, c.name), good_path, good.__name__, examples, clock)
            run_ours(getattr(bad, c.name), bad_path, bad.__name__, examples, clock)
            run_plain(getattr(good, c.name), 0)
            run_plain(getattr(bad, c.name), 0)
            run_split(getattr(good, c.name), good_path, good.__name__, examples)
        out(f"hypothesis's pool of local constants after the warm-up: {hypothesis_constants()}")
        rounds = max(repeats, seeds)
        for i in range(rounds):
            for row in rows:
                c = row.case
                ok_fn, bug_fn = getattr(good, c.name), getattr(bad, c.name)
                steps = []
                if i < repeats:
                    steps.append(lambda: row.ours_ok.append(
                        run_ours(ok_fn, good_path, good.__name__, examples, clock)))
                    steps.append(lambda: row.split.append(
                        run_split(ok_fn, good_path, good.__name__, examples)))
                    steps.append(lambda: row.ours_bug.append(
                        run_ours(bug_fn, bad_path, bad.__name__, examples, clock)))
                if i < seeds:
                    steps.append(lambda: row.plain_ok.append(run_plain(ok_fn, i)))
                    steps.append(lambda: row.plain_bug.append(run_plain(bug_fn, i)))
                if i % 2:
                    steps.reverse()  # neither side always runs first
                for step in steps:
                    step()
            if (i + 1) % 5 == 0 or i + 1 == rounds:
                print(f"  round {i + 1}/{rounds} done", file=sys.stderr)
    return rows


def _one(values: List[Any], what: str) -> str:
    distinct = sorted(set(map(str, values)))
    return distinct[0] if len(distinct) == 1 else f"{what} varied: {', '.join(distinct)}"


def _ratio(a: float, b: float) -> str:
    return f"{a / b:.1f}x" if a == a and b == b and b > 0 else "-"


def report(rows: List[Row], repeats: int, seeds: int, examples: int, out=print) -> dict:
    """Print the two tables; return their numbers."""
    summary: Dict[str, Any] = {"rate": {}, "find": {}}
    out("")
    out(f"(a) examples per second on the correct versions. ours: median of {repeats} runs, "
        f"examples={examples}; plain hypothesis: median over {seeds} seeds, max_examples 100")
    out(f"{'case':<40}{'ours':>8}{'ex':>5}{'full ms':>9}{'ex/s':>7}{'solver':>8}"
        f"{'testing':>9}{'ex/s':>7} |{'plain ex':>9}{'ms':>7}{'ex/s':>7} |"
        f"{'plain/ours ex/s':>16}{'(testing)':>10}")
    tot = collections.Counter()
    for row in rows:
        c = row.case
        verdict = _one([r.verdict for r in row.ours_ok], "verdict")
        ex = median([r.examples for r in row.ours_ok])
        sec = median([r.seconds for r in row.ours_ok])
        split = [s for s in row.split if s is not None]
        solver = median([s[0] for s in split])
        t_sec = median([s[1] for s in split])
        t_ex = median([s[2] for s in split])
        rate, t_rate = ex / sec, (t_ex / t_sec if split else float("nan"))
        p_ex = median([p.judged for p in row.plain_ok])
        p_sec = median([p.seconds for p in row.plain_ok])
        p_rate = median([p.judged / p.seconds for p in row.plain_ok])
        odd = collections.Counter(p.outcome for p in row.plain_ok if p.outcome != "passed")
        # A plain run that a health check stopped judged next to nothing: no rate to compare.
        stopped = sum(odd.values()) * 2 > len(row.plain_ok)
        out(f"{c.label:<40}{verdict:>8}{ex:>5.0f}{ms(sec):>9}{rate:>7.0f}{ms(solver):>8}"
            f"{ms(t_sec):>9}{t_rate:>7.0f} |{p_ex:>9.0f}{ms(p_sec):>7}{p_rate:>7.0f} |"
            + (f"{'-':>16}{'-':>10}" if stopped else
               f"{_ratio(p_rate, rate):>16}{_ratio(p_rate, t_rate):>10}"))
        if odd:
            out(f"    plain hypothesis stopped: {dict(odd)} (of {len(row.plain_ok)} seeds)"
                + ("; left out of the totals below" if stopped else ""))
        calls = median([p.calls for p in row.plain_ok])
        if calls > p_ex:
            out(f"    plain hypothesis called the test {calls:.0f} times (median) to judge "
                f"{p_ex:.0f} examples: `assume` rejected the rest")
        counts = sorted({r.examples for r in row.ours_ok})
        if len(counts) > 1:
            out(f"    ours: the number of examples varied between runs: {counts}")
        by = {r.by for r in row.ours_ok} - {"testing"}
        if by or len(split) < len(row.split):
            out(f"    ! not decided by testing: {', '.join(sorted(by)) or 'the solver'}")
        summary["rate"][c.name] = {"ours": rate, "testing": t_rate, "plain": p_rate,
                                   "ours_examples": ex, "plain_examples": p_ex,
                                   "plain_stopped": stopped}
        if stopped:
            continue
        tot.update(ours_ex=ex, ours_s=sec, test_ex=t_ex, test_s=t_sec,
                   plain_ex=sum(p.judged for p in row.plain_ok),
                   plain_s=sum(p.seconds for p in row.plain_ok))
    rates = [r for r in summary["rate"].values() if not r["plain_stopped"]]
    full_ratio = median([r["plain"] / r["ours"] for r in rates])
    test_ratio = median([r["plain"] / r["testing"] for r in rates if r["testing"] == r["testing"]])
    out(f"{'median of the per-case ratios':<40}{'':>8}{'':>5}{'':>9}{'':>7}{'':>8}{'':>9}{'':>7} |"
        f"{'':>9}{'':>7}{'':>7} |{full_ratio:>15.1f}x{test_ratio:>9.1f}x")
    o = tot["ours_ex"] / tot["ours_s"]
    t = tot["test_ex"] / tot["test_s"] if tot["test_s"] else float("nan")
    p = tot["plain_ex"] / tot["plain_s"]
    out(f"{'sum of examples / sum of seconds':<40}{'':>8}{'':>5}{'':>9}{o:>7.0f}{'':>8}"
        f"{'':>9}{t:>7.0f} |{'':>9}{'':>7}{p:>7.0f} |{_ratio(p, o):>16}{_ratio(p, t):>10}")
    summary["rate_all"] = {"ours": o, "testing": t, "plain": p, "median_ratio": full_ratio,
                           "median_ratio_testing": test_ratio}

    out("")
    out("(b) time to find the planted bug, ms. ours: found in k of its runs (deterministic), "
        "where the first failing input came from, medians; plain hypothesis: found with k "
        "of the seeds, medians over the seeds that found it. 1st = the first failing run; "
        "done = the run ended (shrinking included)")
    out(f"{'case':<40}{'ours':>6}{'from':>10}{'1st':>8}{'done':>8} |{'plain':>7}{'1st':>8}"
        f"{'done':>8} |{'plain/ours 1st':>15}{'done':>7}")
    for row in rows:
        c = row.case
        found = [r for r in row.ours_bug if r.verdict == "refuted"]
        o_first = median([r.first_fail for r in found if r.first_fail is not None])
        o_done = median([r.seconds for r in found])
        origin = _one([r.origin for r in found], "origin") if found else "-"
        hits = [p for p in row.plain_bug if p.outcome == "found"]
        p_first = median([p.first_fail for p in hits])
        p_done = median([p.seconds for p in hits])
        out(f"{c.label:<40}{len(found):>3}/{len(row.ours_bug):<2}{origin:>10}{ms(o_first):>8}"
            f"{ms(o_done):>8} |{len(hits):>4}/{len(row.plain_bug):<2}{ms(p_first):>8}"
            f"{ms(p_done):>8} |{_ratio(p_first, o_first):>15}{_ratio(p_done, o_done):>7}")
        common = collections.Counter(p.example for p in hits).most_common(2)
        plain_ex = "; ".join(f"{e} ({n}x)" for e, n in common) or "-"
        counts = sorted({r.examples for r in row.ours_bug})
        if len(counts) > 1:
            out(f"    ours: the examples run before the failure varied: {counts}")
        ours_ex = _one([r.example for r in found], "example") if found else \
            f"not found ({median([r.seconds for r in row.ours_bug]) * 1000:.0f} ms, " \
            f"{median([r.examples for r in row.ours_bug]):.0f} examples)"
        out(f"    breaks on {c.fails_on}. ours: {ours_ex}. plain shrunk to: {plain_ex}")
        misses = [p for p in row.plain_bug if p.outcome != "found"]
        if misses:
            kinds = collections.Counter(p.outcome for p in misses)
            out(f"    plain hypothesis missed it with {len(misses)} seeds: {dict(kinds)}, median "
                f"{ms(median([p.seconds for p in misses]))} ms and "
                f"{median([p.judged for p in misses]):.0f} examples judged")
        by = {r.by for r in row.ours_bug} - {"testing"}
        if by:
            out(f"    ! not decided by testing: {', '.join(sorted(by))}")
        summary["find"][c.name] = {
            "ours_found": (len(found), len(row.ours_bug)), "ours_first": o_first,
            "ours_done": o_done, "plain_found": (len(hits), len(row.plain_bug)),
            "plain_first": p_first, "plain_done": p_done}
    return summary


def main(argv: Optional[Sequence[str]] = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=5, help="runs of ours per case (median)")
    parser.add_argument("--seeds", type=int, default=20, help="hypothesis seeds per case")
    parser.add_argument("--examples", type=int, default=EXAMPLES,
                        help="ours: examples=N of check_function (plain hypothesis keeps "
                             "its default max_examples, 100)")
    parser.add_argument("--cases", default="",
                        help="comma-separated function names (default: all eight)")
    parser.add_argument("--plugin-constants", action="store_true",
                        help="let hypothesis draw from the constants of the plugin's own "
                             "source too (as it does when the plugin is installed editable)")
    parser.add_argument("--quick", action="store_true", help="2 repeats, 3 seeds: a smoke run")
    args = parser.parse_args(argv)
    repeats, seeds = (2, 3) if args.quick else (args.repeats, args.seeds)
    run(repeats, seeds, args.examples, only=[n for n in args.cases.split(",") if n],
        plugin_constants=args.plugin_constants)
    return 0


if __name__ == "__main__":
    sys.exit(main())
