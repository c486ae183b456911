"""Testing what the solver could not decide.

When the body cannot be translated, or the solver runs out of budget, or a
counterexample goes through a part that was not translated, the obligation
is still checked: by running the function on many inputs and judging each
run with the spec's own callables, exactly as a counterexample is replayed
(``replay.judge``: ``assuming``, ``raises`` and ``old(...)`` on copies taken
before the call, the relation after it).

The inputs come, in this order, from the solver (inputs that satisfy
``assuming``, and inputs on which an untranslated part could break the spec),
from boundary values (the constants of the spec and the body and their
neighbours, the edges of each type), and from hypothesis, drawing within the
bounds ``assuming`` states and shrinking a failure to a small one. The run is
deterministic: the same inputs every time for the same obligation.

No failure means ``tested``, never ``proved``; a failure is ``refuted``,
confirmed by construction (it is a real run), with a regression test to paste.
"""

from __future__ import annotations

import contextlib
import copy
import os
import tempfile
import zlib
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Dict, List, Optional, Tuple

from refines import examples, replay
from refines.regression import refute
from refines.plugin import DEFAULT_EXAMPLES
from refines.source import Obligation
from refines.verdict import ERROR, TESTED, UNKNOWN, Result, Testing, Undecided

# Seconds one run (the call and the judging of it) may take before the
# watchdog stops it; runs stopped count as neither passing nor failing.
RUN_LIMIT = 0.25
# After this many stopped runs, the tester stops drawing: the function is
# slow on the inputs drawn, and more of them would only cost time.
MAX_OVERRUNS = 5
# The draws made before deciding whether drawing is worth it, and the share of
# them that `assuming` may reject before the solver is asked for inputs instead.
PROBE_DRAWS = 20
REJECTED_SHARE = 0.9


@dataclass
class _Failure:
    pre: Dict[str, Any]  # the inputs as they were before the call
    run: replay.Run
    judgement: replay.Judgement


class _SpecRaised(Exception):
    """``assuming`` or a ``raises`` condition raised: the spec is ill-formed."""

    def __init__(self, text: str) -> None:
        super().__init__(text)
        self.text = text


class Tester:
    """Runs and judges examples of one obligation, and counts them."""

    def __init__(self, ob: Obligation, limit: Optional[float] = RUN_LIMIT) -> None:
        self.ob = ob
        self.limit = limit
        self.stats = Testing(seed=zlib.crc32(f"{ob.function}:{ob.line}".encode()))
        self.failure: Optional[_Failure] = None  # the latest failing run
        self.counting = True  # until the first failure (shrinking replays examples)
        self.spec_error: Optional[str] = None
        self.slow_size: Optional[int] = None  # the smallest size of a stopped run

    @property
    def stopped(self) -> bool:
        return (self.spec_error is not None or self.stats.overran >= MAX_OVERRUNS)

    def example(self, inputs: Dict[str, Any], origin: str = "") -> str:
        """Run and judge one example: "pass", "fail", "reject" (outside
        assuming), "overrun" or "stopped" (nothing is run any more)."""
        if self.stopped:
            return "stopped"
        size = _size(inputs)
        if self.slow_size is not None and size >= self.slow_size:
            # At least as large as an input whose run was stopped (a loop over
            # range(n), say): not run, so one slow input costs one time limit.
            self.stats.skipped += 1
            return "skipped"
        try:
            pre = replay.before(inputs)
        except Exception:  # noqa: BLE001 -- an uncopyable argument: judge on the originals
            pre = inputs
        try:
            with replay.watchdog(self.limit):
                try:
                    if not replay.assuming_holds(self.ob, pre):
                        self.stats.rejected += 1
                        return "reject"
                except replay.Overrun:
                    raise
                except Exception as exc:  # noqa: BLE001 -- the spec itself raised
                    raise _SpecRaised(f"`assuming` raised {type(exc).__name__}: {exc}") from None
                run = replay.run(self.ob, inputs)
                try:
                    judgement = replay.judge(self.ob, inputs, run, pre)
                except replay.Overrun:
                    raise
                except Exception as exc:  # noqa: BLE001 -- a raises condition raised
                    raise _SpecRaised(f"a `raises` condition raised {type(exc).__name__}: "
                                      f"{exc}") from None
        except replay.Overrun:
            self.stats.overran += 1
            self.slow_size = size if self.slow_size is None else min(self.slow_size, size)
            return "overrun"
        except _SpecRaised as exc:
            self.spec_error = f"{exc.text} for {replay.call_text(self.ob, pre)}"
            return "stopped"
        if judgement.holds:
            if self.counting:
                self.stats.examples += 1
                if origin == "solver":
                    self.stats.from_solver += 1
                elif origin == "boundary":
                    self.stats.boundary += 1
            return "pass"
        self.failure = _Failure(pre, run, judgement)
        self.counting = False
        return "fail"

    def draw(self, plan: examples.Plan, count: int, seed_offset: int = 0,
             first: bool = False) -> bool:
        """Up to ``count`` examples drawn by hypothesis; a failure is shrunk.
        In the ``first`` round, hypothesis's own check that its draws are not
        mostly filtered out stays on, and stops the round early; the answer
        says whether it did."""
        from hypothesis import HealthCheck, Phase, Verbosity, given, reject, seed, settings
        from hypothesis import strategies as st

        tester = self

        class Failed(Exception):
            pass

        def probe(case, **share):
            inputs = dict(case)
            for q, shared in share.get("share", {}).items():
                if shared:
                    inputs[q] = inputs[plan.shares[q]]  # one object passed twice
            outcome = tester.example(inputs)
            if outcome == "fail":
                raise Failed()
            if outcome != "pass":
                reject()

        strategies = {"case": st.fixed_dictionaries(plan.strategies)}
        if plan.shares:  # only then: an empty dictionary strategy costs draws too
            strategies["share"] = st.fixed_dictionaries({q: st.booleans() for q in plan.shares})
        quiet = [h for h in HealthCheck if not (first and h == HealthCheck.filter_too_much)]
        probe = settings(max_examples=count, database=None, deadline=None, derandomize=False,
                         phases=[Phase.generate, Phase.shrink], verbosity=Verbosity.quiet,
                         suppress_health_check=quiet, report_multiple_bugs=False,
                         print_blob=False)(seed(self.stats.seed + seed_offset)(
                             given(**strategies)(probe)))
        with _settled_hypothesis():
            try:
                probe()  # the smallest failure is replayed last: self.failure
            except Failed:
                pass
            except Exception as exc:  # noqa: BLE001 -- hypothesis's own ways to stop
                if self.failure is None and type(exc).__name__ == "FailedHealthCheck":
                    return True
                if self.failure is None and type(exc).__name__ != "Unsatisfiable":
                    raise
        return False


@contextlib.contextmanager
def _settled_hypothesis():
    """Run hypothesis so that it writes nothing in the user's folders and
    draws the same way whatever else is imported.

    Its caches go to the temporary folder (it would otherwise create
    ``.hypothesis/`` in the working directory). And it does not draw from its
    pool of constants of the modules imported so far: that pool grows with
    every module pytest imports, so the inputs would depend on ``-k`` or on
    how xdist splits the run. The tester's own boundary values take the
    constants of the spec and the body instead. The pool is reached through
    hypothesis internals; where they differ (another version), it is left as is.
    """
    from hypothesis import configuration

    key = "__hypothesis_home_directory"
    before = vars(configuration).get(key)
    user = os.getuid() if hasattr(os, "getuid") else "user"
    configuration.set_hypothesis_home_dir(
        Path(tempfile.gettempdir()) / f"pytest-refines-{user}" / "hypothesis")
    providers = pool = None
    try:
        from hypothesis.internal.conjecture import providers

        pool = providers._get_local_constants
        providers._get_local_constants = _no_constants
        providers.CONSTANTS_CACHE.cache.clear()
    except (ImportError, AttributeError):
        providers = None
    try:
        yield
    finally:
        vars(configuration)[key] = before
        if providers is not None:
            providers._get_local_constants = pool
            providers.CONSTANTS_CACHE.cache.clear()


def _no_constants():
    from hypothesis.internal.conjecture import providers

    return providers.Constants()


def test(ob: Obligation, undecided: Undecided, count: int = DEFAULT_EXAMPLES,
         limit: Optional[float] = RUN_LIMIT) -> Result:
    """The verdict of testing ``ob`` on about ``count`` drawn examples (plus
    the solver's inputs and the boundary values), given why no proof came out."""
    result = Result(verdict=TESTED, function=ob.function, path=ob.show(ob.path), line=ob.line,
                    hint=undecided.hint, message_key=undecided.message_key)
    why = undecided.reason
    if ob.untestable:
        return _unknown(result, why, f"it cannot be called with drawn arguments: {ob.untestable}")
    try:
        plan = examples.plan(ob)
    except examples.CannotDraw as exc:
        return _unknown(result, why, str(exc))
    tester = Tester(ob, limit)
    result.testing = tester.stats
    for origin, inputs in _explicit(ob, undecided.seeds, plan, count):
        if tester.example(inputs, origin) in ("fail", "stopped"):
            break
    if tester.failure is None and not tester.stopped:
        _draw(tester, plan, count, undecided)
    if tester.spec_error is not None:
        result.verdict = ERROR
        result.reason = f"{ob.where(ob.relation.path, ob.line)}: the spec itself raises: " \
                        f"{tester.spec_error}"
        result.hint = "guard it, e.g. `y != 0 and x // y > 1` (and/or short-circuit as in Python)"
        return result
    if tester.failure is not None:
        result.notes.insert(0, f"tested, not proved, because: {why}")
        return _refuted(ob, result, tester, limit, undecided)
    if tester.stats.examples == 0:
        detail = ("every drawn input was outside `assuming`" if tester.stats.rejected
                  else "every run was stopped by the time limit" if tester.stats.overran
                  else "no input could be drawn")
        return _unknown(result, why, f"no example could be judged: {detail}")
    result.reason = f"not proved: {why}"
    if tester.stats.overran >= MAX_OVERRUNS:
        result.notes.append(f"testing stopped early: {tester.stats.overran} runs took longer "
                            f"than {limit:g} s each")
    return result


def _draw(tester: Tester, plan: examples.Plan, count: int, undecided: Undecided) -> None:
    """Draw ``count`` examples: a first few, and the rest only if ``assuming``
    lets most draws through. When it rejects nearly all (``n % 1000 == 0``),
    drawing more would take seconds for a handful of examples: the solver,
    which satisfies ``assuming`` by construction, is asked for more inputs
    instead."""
    first = min(PROBE_DRAWS, count)
    before = (tester.stats.examples, tester.stats.rejected)
    filtered = tester.draw(plan, first, first=True)
    judged = tester.stats.examples - before[0]
    rejected = tester.stats.rejected - before[1]
    if tester.failure is not None or tester.stopped:
        return
    if filtered or rejected > REJECTED_SHARE * (judged + rejected):
        tester.stats.narrow = True
        if undecided.more is not None:
            for inputs in undecided.more(count - judged):
                if tester.example(inputs, "solver") in ("fail", "stopped"):
                    return
        return
    if count > first:
        tester.draw(plan, count - first, seed_offset=1)


def _unknown(result: Result, why: str, untested: str) -> Result:
    result.verdict = UNKNOWN
    result.testing = None
    result.reason = f"not proved: {why}; not tested: {untested}"
    return result


def _explicit(ob: Obligation, seeds, plan: examples.Plan, count: int
              ) -> List[Tuple[str, Dict[str, Any]]]:
    """The examples run before any is drawn: the solver's inputs, then each
    boundary value of each parameter with the others at a plain value."""
    out: List[Tuple[str, Dict[str, Any]]] = []
    seen = set()
    for origin, inputs in seeds:
        key = _key(inputs)
        if key not in seen and set(inputs) >= set(ob.names):
            seen.add(key)
            out.append(("solver", {n: inputs[n] for n in ob.names}))
    if all(plan.boundary.get(n) for n in ob.names):
        base = {n: plan.boundary[n][0] for n in ob.names}
        if seeds:
            base.update({n: v for n, v in seeds[0][1].items() if n in base})
        budget = max(count // 2, 2 * len(ob.names))
        for name in ob.names:
            for value in plan.boundary[name]:
                inputs = dict(base, **{name: value})
                key = _key(inputs)
                if key not in seen and budget > 0:
                    seen.add(key)
                    budget -= 1
                    out.append(("boundary", copy.deepcopy(inputs)))
    return out


def _size(inputs: Dict[str, Any]) -> int:
    """How large an input is, for the watchdog's lesson: the largest magnitude
    of an int, or length of a str or container, among the arguments."""
    out = 0
    for v in inputs.values():
        if isinstance(v, bool):
            continue
        if isinstance(v, int):
            out = max(out, abs(v))
        elif isinstance(v, float) and v == v and abs(v) != float("inf"):
            out = max(out, int(abs(v)))
        elif isinstance(v, (str, bytes, list, tuple, dict, set, frozenset)):
            out = max(out, len(v))
    return out


def _key(inputs: Dict[str, Any]) -> str:
    return repr(sorted((k, type(v).__name__, repr(v)) for k, v in inputs.items()))


def _refuted(ob: Obligation, result: Result, tester: Tester, limit,
             undecided: Undecided) -> Result:
    failure = tester.failure
    result.reason = None
    result.hint = None
    refute(result, ob, failure.pre, failure.run, failure.judgement, "testing", limit)
    if undecided.preconditions is None:
        result.precondition_note = ("not computed: the body is not translated, so there is "
                                    "no behaviour to compute it from")
        return result
    from refines import precondition

    precondition.fill(result, ob, undecided.preconditions(failure.pre))
    return result
