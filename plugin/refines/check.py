"""One obligation, from the declared spec to its verdict: prove it, and test
what the proof leaves undecided.

``prove`` answers with a verdict (proved, refuted with a confirmed
counterexample, error) or with what it could not decide and why (a construct
it does not translate, a solver that ran out of budget, a counterexample that
depends on an untranslated part). Whatever it could not decide, and the
function can be called, ``fallback`` tests. Only what can be neither proved
nor called ends ``unknown``.
"""

from __future__ import annotations

import inspect
import time
from typing import Callable

from refines.plugin import DEFAULT_EXAMPLES
from refines.verdict import ERROR, Result, Undecided


def check(ob, timeout: float, examples: int = DEFAULT_EXAMPLES,
          explain: bool = False) -> Result:
    """The verdict on one obligation: ``timeout`` seconds of solving, then
    ``examples`` drawn examples if the solver leaves it undecided. With
    ``explain``, the result carries what the translation believes the body does."""
    from refines import fallback, prove

    start = time.perf_counter()
    outcome = prove.prove(ob, timeout, explain=explain)
    if isinstance(outcome, Undecided):
        explanation = outcome.explanation
        try:
            outcome = fallback.test(ob, outcome, examples)
        except Exception as exc:  # noqa: BLE001 -- never crash the session
            result = Result(verdict=ERROR, function=ob.function, path=ob.show(ob.path),
                            line=ob.line)
            prove._record(result, exc, ob.path, ob.show, f"testing {ob.function}", ob.line)
            outcome = result
        outcome.explanation = explanation
    outcome.seconds = time.perf_counter() - start
    outcome.assuming_text = ob.assuming.text if ob.assuming is not None else None
    return outcome


def check_function(fn, index: int, path: str, module: str, timeout: float,
                   show: Callable[[str], str] = str,
                   examples: int = DEFAULT_EXAMPLES, explain: bool = False) -> Result:
    """Read the ``index``-th spec of ``fn`` from source and check it.

    ``show`` turns file paths into the form the report uses.
    """
    from refines.source import read_obligation

    written = inspect.unwrap(fn)
    base = Result(verdict=ERROR, function=f"{module}.{written.__qualname__}", path=show(path),
                  line=written.__code__.co_firstlineno)
    return _read_then_check(lambda: read_obligation(fn, index, path, module, show), base,
                            path, show, timeout, examples, explain)


def check_attached(att, globals_: dict, timeout: float, show: Callable[[str], str] = str,
                   examples: int = DEFAULT_EXAMPLES, explain: bool = False) -> Result:
    """Check a spec attached with ``attach`` (``globals_``: the attaching module's)."""
    from refines.source import read_attached

    base = Result(verdict=ERROR, function=att.function, path=show(att.path), line=att.line)
    return _read_then_check(lambda: read_attached(att, globals_, show), base, att.path, show,
                            timeout, examples, explain)


def _read_then_check(read, base: Result, path: str, show, timeout: float,
                     examples: int, explain: bool = False) -> Result:
    from refines.prove import _record

    start = time.perf_counter()
    try:
        ob = read()
    except Exception as exc:  # noqa: BLE001 -- never crash the session
        _record(base, exc, path, show, f"reading the spec of {base.function}", base.line)
        base.seconds = time.perf_counter() - start
        return base
    return check(ob, timeout, examples, explain)
