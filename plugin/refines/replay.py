"""Running the real function on a counterexample, and reading the spec at run time.

A counterexample is only reported as a refutation when running the function
reproduces the violation. The spec callables are called as written, so this
is an independent check of what the translator predicted.
"""

from __future__ import annotations

import ast
import contextlib
import copy
import math
import signal
import threading
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
    for name, kind in zip(ob.names, ob.kinds):
        if kind in ("positional-only", "positional"):
            args.append(inputs[name])
        else:
            kwargs[name] = inputs[name]
    return args, kwargs


def shown(value: Any) -> str:
    """``repr(value)``, except for ints too long for str() (CPython 3.11+
    limits decimal conversion): those are written in hexadecimal."""
    if isinstance(value, int) and not isinstance(value, bool) and abs(value) > 10 ** 4000:
        return hex(value)
    return repr(value)


def literal(value: Any) -> str:
    """Python source for ``value``: repr, except for the floats whose repr is
    not valid Python (nan, inf)."""
    if isinstance(value, float) and (value != value or value in (math.inf, -math.inf)):
        return "float('nan')" if value != value else (
            "float('inf')" if value > 0 else "-float('inf')")
    if isinstance(value, tuple):
        inner = ", ".join(literal(v) for v in value)
        return f"({inner},)" if len(value) == 1 else f"({inner})"
    return shown(value)


def shared(ob: Obligation, inputs: Dict[str, Any]) -> Dict[str, str]:
    """Parameters that receive the same list or object as an earlier one
    (name -> that earlier name): aliasing, which a repr cannot show."""
    first: Dict[int, str] = {}
    out = {}
    for name in ob.names:
        value = inputs[name]
        if value is None or isinstance(value, _IMMUTABLE):
            continue  # sharing one int or str is not aliasing: nothing can change it
        key = id(value)
        if key in first:
            out[name] = first[key]
        else:
            first[key] = name
    return out


_IMMUTABLE = (bool, int, float, complex, str, bytes, tuple, frozenset, type(Ellipsis))


def call_text(ob: Obligation, inputs: Dict[str, Any]) -> str:
    """The call as a user would paste it; with aliasing, the shared object is
    bound to a name first (``xs = [0]; f(xs=xs, ys=xs)``)."""
    alias = shared(ob, inputs)
    named = set(alias.values())
    parts = []
    for name, kind in zip(ob.names, ob.kinds):
        text = alias.get(name) or (name if name in named else literal(inputs[name]))
        parts.append(text if kind == "positional-only" else f"{name}={text}")
    prefix = "".join(f"{n} = {literal(inputs[n])}; " for n in sorted(named))
    call = f"{ob.call_name}({', '.join(parts)})"
    return f"{prefix}asyncio.run({call})" if ob.is_async else prefix + call


def before(inputs: Dict[str, Any]) -> Dict[str, Any]:
    """Copies of the inputs as they are before the call; one deep copy of all
    of them, so that two names for one object stay one object."""
    return copy.deepcopy(inputs)


class Overrun(BaseException):
    """A run stopped by the watchdog (a BaseException, so that the function's
    own ``except Exception`` cannot swallow it)."""


@contextlib.contextmanager
def watchdog(seconds: Optional[float]):
    """Stop what runs inside after ``seconds`` by raising ``Overrun`` in it.

    A signal timer, so only in the main thread of a platform that has one
    (not Windows); and not when a timer is already set (pytest-timeout's, for
    one), which keeps its own limit. Elsewhere this does nothing: a run that
    never ends then blocks the session, as a test that never ends does."""
    usable = (seconds is not None and hasattr(signal, "setitimer")
              and threading.current_thread() is threading.main_thread()
              and signal.getitimer(signal.ITIMER_REAL)[0] == 0)
    if not usable:
        yield
        return
    armed = [True]

    def alarm(signum, frame):
        if armed[0]:
            raise Overrun()

    previous = signal.signal(signal.SIGALRM, alarm)
    signal.setitimer(signal.ITIMER_REAL, seconds)
    try:
        yield
    finally:
        armed[0] = False
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, previous)


def run(ob: Obligation, inputs: Dict[str, Any]) -> Run:
    args, kwargs = call_args(ob, inputs)
    try:
        if ob.is_async:
            import asyncio

            return Run(returned=asyncio.run(ob.fn(*args, **kwargs)))
        return Run(returned=ob.fn(*args, **kwargs))
    except (KeyboardInterrupt, Overrun):
        raise
    except BaseException as exc:  # noqa: BLE001 -- every exception is an outcome
        return Run(raised=exc)


def _call_part(part: SpecPart, values: Dict[str, Any],
               pre: Optional[Dict[str, Any]] = None) -> Any:
    if pre is not None and "old(" in part.text:
        return evaluate(part.text, part, values, pre)
    return part.runtime(*[values[name] for name in part.params])


class _OldReader(ast.NodeTransformer):
    """Replace each ``old(e)`` by a name bound to ``e`` read in the pre-state."""

    def __init__(self) -> None:
        self.found: List[ast.expr] = []

    def visit_Call(self, node: ast.Call):
        func = node.func
        name = func.id if isinstance(func, ast.Name) else (
            func.attr if isinstance(func, ast.Attribute) else "")
        if name == "old" and len(node.args) == 1 and not node.keywords:
            self.found.append(node.args[0])
            return ast.copy_location(ast.Name(f"__old_{len(self.found) - 1}", ast.Load()), node)
        return self.generic_visit(node)


def evaluate(text: str, part: SpecPart, values: Dict[str, Any],
             pre: Optional[Dict[str, Any]] = None) -> Any:
    """Evaluate a spec expression on ``values``, with ``old(e)`` read on ``pre``
    (the pre-state copies: lists and objects may have changed since)."""
    tree = ast.parse("(\n" + text + "\n)", mode="eval")
    reader = _OldReader()
    tree = ast.fix_missing_locations(reader.visit(tree))
    names = list(part.params)
    olds = []
    for e in reader.found:
        lam = ast.Expression(ast.Lambda(
            ast.arguments(posonlyargs=[], args=[ast.arg(n) for n in names], kwonlyargs=[],
                          kw_defaults=[], defaults=[]), e))
        fn = eval(compile(ast.fix_missing_locations(lam), "<old>", "eval"), part.globals)
        olds.append(fn(*[(pre or values)[n] for n in names]))
    env = dict(part.globals)
    env.update({f"__old_{i}": v for i, v in enumerate(olds)})
    env.update({n: values[n] for n in names})
    return eval(compile(tree, "<spec>", "eval"), env)


def judge(ob: Obligation, inputs: Dict[str, Any], outcome: Run,
          pre: Optional[Dict[str, Any]] = None) -> Judgement:
    """Does this run meet the spec? Evaluated by calling the spec's own lambdas.
    ``inputs`` are the objects passed (changed by the call, if it changes
    them); ``pre`` are copies taken before, for ``raises`` and ``old(...)``."""
    pre = inputs if pre is None else pre
    required: List[Tuple[type, SpecPart]] = []
    for cls, part in ob.raises:
        if _call_part(part, pre):
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
    pre_values = dict(pre, result=outcome.returned)
    rel = ob.relation
    try:
        if _call_part(rel, values, pre_values):
            return Judgement(True)
    except Exception as exc:  # noqa: BLE001 -- a relation that raises does not hold
        return Judgement(False, rel.text, ob.where(rel.path, rel.line),
                         detail=f"the relation raised {type(exc).__name__}: {exc}")
    text, line = failing_conjunct(rel, values, pre_values)
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


def failing_conjunct(part: SpecPart, values: Dict[str, Any],
                     pre: Optional[Dict[str, Any]] = None) -> Tuple[str, int]:
    """The first conjunct of the relation that is false on these values."""
    _, lines = parse_file(part.path)
    parts = conjuncts(part.body, lines)
    if len(parts) == 1:
        return part.text, part.line
    for text, line in parts:
        try:
            if not evaluate(text, part, values, pre):
                return text, line
        except Exception:  # noqa: BLE001
            return text, line
    return part.text, part.line


def assuming_holds(ob: Obligation, inputs: Dict[str, Any]) -> bool:
    return ob.assuming is None or bool(_call_part(ob.assuming, inputs))
