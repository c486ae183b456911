"""What a check finds: plain, JSON-able values (no z3 objects in here).

Stages return these; ``report`` alone turns them into text and JSON.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Callable, Dict, List, Optional, Tuple

PROVED = "proved"
REFUTED = "refuted"
TESTED = "tested"
UNKNOWN = "unknown"
ERROR = "error"
VERDICTS = (PROVED, REFUTED, TESTED, UNKNOWN, ERROR)


@dataclass
class Counterexample:
    """Inputs on which the function does not meet its spec."""

    inputs: Dict[str, str]  # parameter -> repr of the value
    call: str  # the call to paste, e.g. ``fare(age=3, pets=-1)``
    outcome: Dict[str, str]  # {"returned": repr} or {"raised": class name}
    confirmed: bool  # running the real function reproduced the violation
    violated: str  # the part of the spec that fails, as source text
    violated_at: str = ""  # "path:line" of that part
    detail: str = ""  # e.g. the exception message, or the raising statement
    found_by: str = "solver"  # "solver" or "testing"
    regression_test: str = ""  # a pytest function that fails on it ("" if none was made)

    def to_json(self) -> dict:
        return {"inputs": dict(self.inputs), "call": self.call, "outcome": dict(self.outcome),
                "confirmed": self.confirmed, "violated": self.violated,
                "found_by": self.found_by, "regression_test": self.regression_test or None}


@dataclass
class Testing:
    """What the tester ran: the examples judged, and where they came from."""

    examples: int = 0  # inputs that met `assuming` and were judged against the spec
    from_solver: int = 0  # of them: inputs the solver produced
    boundary: int = 0  # of them: boundary values from the constants and the types
    rejected: int = 0  # drawn inputs outside `assuming`, not judged
    overran: int = 0  # runs stopped by the watchdog, not judged
    skipped: int = 0  # inputs not run: as large as one whose run was stopped
    narrow: bool = False  # assuming rejected nearly every draw: drawing stopped early
    seed: int = 0  # the random seed (the run is deterministic)

    def to_json(self) -> dict:
        return dict(self.__dict__)

    def describe(self) -> str:
        parts = [f"{self.from_solver} from the solver"] if self.from_solver else []
        if self.boundary:
            parts.append(f"{self.boundary} boundary values")
        text = f"{self.examples} examples"
        if parts:
            text += " (" + ", ".join(parts) + ")"
        extra = []
        if self.rejected:
            extra.append(f"{self.rejected} drawn inputs were outside assuming")
        if self.overran:
            extra.append(f"{self.overran} runs were stopped after the per-run time limit")
        if self.skipped:
            extra.append(f"{self.skipped} inputs at least as large as those were not run")
        if self.narrow:
            extra.append("assuming rejected nearly every drawn input, so the solver's "
                         "inputs were run instead of more draws")
        return text + ("; " + "; ".join(extra) if extra else "")


@dataclass
class Undecided:
    """What the solver leaves open: why no proof (nor a confirmed refutation)
    came out, and inputs it offers the tester. Internal: it holds Python
    values, and becomes a Result once the tester has run."""

    reason: str  # why it is not proved, e.g. "not translated: ... (fees.py:12)"
    hint: Optional[str] = None
    message_key: Optional[str] = None
    seeds: List[Tuple[str, Dict[str, Any]]] = field(default_factory=list)  # (origin, inputs)
    # More inputs that satisfy `assuming`, from the solver (n -> up to n of them),
    # when it can produce them; a narrow precondition asks for them.
    more: Optional[Callable[[int], List[Dict[str, Any]]]] = None
    # The preconditions for a counterexample found by testing (its inputs
    # before the call -> precondition.Preconditions), when the body was translated.
    preconditions: Optional[Callable[[Dict[str, Any]], Any]] = None
    explanation: Optional[dict] = None  # with --refines-explain


@dataclass
class Result:
    """The verdict on one obligation, with everything the report shows."""

    verdict: str
    function: str
    path: str
    line: int
    seconds: float = 0.0
    reason: Optional[str] = None
    hint: Optional[str] = None
    counterexample: Optional[Counterexample] = None
    exact_precondition: Optional[str] = None
    suggested_assuming: Optional[str] = None
    precondition_note: Optional[str] = None  # why no precondition is shown
    # "function": exact_precondition is exact for the function; "translation":
    # for the translation, whose untranslated parts may do anything (then it is
    # sufficient for the function, not necessarily the weakest).
    precondition_scope: Optional[str] = None
    # Simpler preconditions that imply the exact one (stronger than necessary).
    sufficient_preconditions: List[str] = field(default_factory=list)
    message_key: Optional[str] = None  # the errors.MESSAGES row, for unknown/error/tested
    notes: List[str] = field(default_factory=list)
    testing: Optional[Testing] = None  # set when the tester ran
    # With --refines-explain: what the translation believes the body does
    # (explain.Explanation as JSON), or {"note": why there is none}.
    explanation: Optional[dict] = None
    # The assuming expression as checked (None: there was none); a rewrite of
    # the source checks that it is still the same.
    assuming_text: Optional[str] = None

    def to_json(self, nodeid: str, path: str) -> dict:
        return {
            "nodeid": nodeid,
            "function": self.function,
            "path": path,
            "line": self.line,
            "verdict": self.verdict,
            "seconds": round(self.seconds, 6),
            "reason": self.reason,
            "counterexample": self.counterexample.to_json() if self.counterexample else None,
            "exact_precondition": self.exact_precondition,
            "precondition_scope": self.precondition_scope,
            "sufficient_preconditions": list(self.sufficient_preconditions),
            "suggested_assuming": self.suggested_assuming,
            "precondition_note": self.precondition_note,
            "testing": self.testing.to_json() if self.testing else None,
            "explanation": self.explanation,
            # Assumptions, aliasing and other notes; not internal tracebacks.
            "notes": [n for n in self.notes if not n.startswith("Traceback")],
        }
