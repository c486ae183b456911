"""Running the real function on a counterexample, and reading the spec at run time.

A counterexample is only reported as a refutation when running the function
reproduces the violation. The spec callables are called as written, so this
is an independent check of what the translator predicted.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Dict, List, Optional, Tuple

from astroid import nodes

from refines.source import Obligation, SpecPart, node_text, parse_file


@dataclass
class Run:
    """What happened when the function was called."""

    returned: Any = None
    raised: Optional[BaseException] = None

    @property
    def outcome(self) -> Dict[str, str]:
        if self.raised is not None:
            return {"raised": type(self.raised).__name__}
        return {"returned": repr(self.returned)}

    def describe(self) -> str:
        if self.raised is not None:
            msg = str(self.raised)
            return f"raised {type(self.raised).__name__}" + (f": {msg}" if msg else "")
        return f"returned {self.returned!r}"


@dataclass
class Judgement:
    """The spec read at run time against one run."""

    holds: bool
    violated: str = ""
    violated_at: str = ""
    detail: str = ""


def call_args(ob: Obligation, inputs: Dict[str, Any]) -> Tuple[list, dict]:
    args, kwargs = [], {}
    for p, kind in zip(ob.params, ob.kinds):
        if kind in ("positional-only", "positional"):
            args.append(inputs[p.name])
        else:
            kwargs[p.name] = inputs[p.name]
    return args, kwargs


def literal(value: Any) -> str:
    """Python source for ``value``: repr, except for the floats whose repr is
    not valid Python (nan, inf)."""
    if isinstance(value, float) and (value != value or value in (math.inf, -math.inf)):
        return "float('nan')" if value != value else (
            "float('inf')" if value > 0 else "-float('inf')")
    if isinstance(value, tuple):
        inner = ", ".join(literal(v) for v in value)
        return f"({inner},)" if len(value) == 1 else f"({inner})"
    return repr(value)


def call_text(ob: Obligation, inputs: Dict[str, Any]) -> str:
    """The call as a user would paste it."""
    parts = [literal(inputs[p.name]) if kind == "positional-only"
             else f"{p.name}={literal(inputs[p.name])}"
             for p, kind in zip(ob.params, ob.kinds)]
    return f"{ob.fn.__name__}({', '.join(parts)})"


def run(ob: Obligation, inputs: Dict[str, Any]) -> Run:
    args, kwargs = call_args(ob, inputs)
    try:
        return Run(returned=ob.fn(*args, **kwargs))
    except KeyboardInterrupt:
        raise
    except BaseException as exc:  # noqa: BLE001 -- every exception is an outcome
        return Run(raised=exc)


def _call_part(part: SpecPart, values: Dict[str, Any]) -> Any:
    return part.runtime(*[values[name] for name in part.params])


def judge(ob: Obligation, inputs: Dict[str, Any], outcome: Run) -> Judgement:
    """Does this run meet the spec? Evaluated by calling the spec's own lambdas."""
    required: List[Tuple[type, SpecPart]] = []
    for cls, part in ob.raises:
        if _call_part(part, inputs):
            required.append((cls, part))
    if required:
        if outcome.raised is not None and any(isinstance(outcome.raised, cls)
                                              for cls, _ in required):
            return Judgement(True)
        cls, part = required[0]
        return Judgement(False, f"raises {cls.__name__} when {part.text}", ob.where(part.path, part.line))
    if outcome.raised is not None:
        exc = type(outcome.raised).__name__
        return Judgement(False, f"no raises= entry allows {exc}",
                         ob.where(ob.relation.path, ob.relation.line), detail=str(outcome.raised))
    values = dict(inputs, result=outcome.returned)
    rel = ob.relation
    try:
        if _call_part(rel, values):
            return Judgement(True)
    except Exception as exc:  # noqa: BLE001 -- a relation that raises does not hold
        return Judgement(False, rel.text, ob.where(rel.path, rel.line),
                         detail=f"the relation raised {type(exc).__name__}: {exc}")
    text, line = failing_conjunct(rel, values)
    return Judgement(False, text, ob.where(rel.path, line))


def conjuncts(node: nodes.NodeNG, lines: List[bytes]) -> List[Tuple[str, int]]:
    """The top-level ``and`` operands of a condition, with the links of a
    comparison chain (``0 <= r < n`` is ``0 <= r`` and ``r < n``) apart."""
    if isinstance(node, nodes.BoolOp) and node.op == "and":
        out: List[Tuple[str, int]] = []
        for v in node.values:
            out.extend(conjuncts(v, lines))
        return out
    if isinstance(node, nodes.Compare) and len(node.ops) > 1:
        links, left = [], node.left
        for op, right in node.ops:
            links.append((f"{node_text(left, lines)} {op} {node_text(right, lines)}",
                          left.lineno))
            left = right
        return links
    return [(node_text(node, lines), node.lineno)]


def failing_conjunct(part: SpecPart, values: Dict[str, Any]) -> Tuple[str, int]:
    """The first conjunct of the relation that is false on these values."""
    _, lines = parse_file(part.path)
    parts = conjuncts(part.body, lines)
    if len(parts) == 1:
        return part.text, part.line
    for text, line in parts:
        fn = eval(f"lambda {', '.join(part.params)}: (\n{text}\n)", part.globals)
        try:
            if not fn(*[values[n] for n in part.params]):
                return text, line
        except Exception:  # noqa: BLE001
            return text, line
    return part.text, part.line


def assuming_holds(ob: Obligation, inputs: Dict[str, Any]) -> bool:
    return ob.assuming is None or bool(_call_part(ob.assuming, inputs))
