"""What a check finds: plain, JSON-able values (no z3 objects in here).

Stages return these; ``report`` alone turns them into text and JSON.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Dict, List, Optional

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

    def to_json(self) -> dict:
        return {"inputs": dict(self.inputs), "call": self.call, "outcome": dict(self.outcome),
                "confirmed": self.confirmed, "violated": self.violated}


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
    message_key: Optional[str] = None  # the errors.MESSAGES row, for unknown/error
    notes: List[str] = field(default_factory=list)

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
            "suggested_assuming": self.suggested_assuming,
            # Assumptions, aliasing and other notes; not internal tracebacks.
            "notes": [n for n in self.notes if not n.startswith("Traceback")],
        }
