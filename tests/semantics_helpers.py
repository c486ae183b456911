"""Shared helpers for the semantic tests: translate real source, run it both ways.

``translated(source)`` writes the source to a fresh module file, imports it,
reads the function through the same path the plugin uses
(``source.find_function`` -> ``source.read_params`` -> ``translate.Scope`` ->
``translate.translate_body``) and returns a ``Translated`` that can be asked,
for concrete inputs, what the translation predicts (``predict``) and what
CPython actually does (``run``). Both answers are ``("returned", value)`` or
``("raised", exception class)`` so tests compare them directly.

Predictions are computed in a private ``z3.Context`` per translated function:
every z3 object of one evaluation comes from that context (mixing contexts can
crash the interpreter).
"""

from __future__ import annotations

import atexit
import importlib.util
import itertools
import operator
import os
import shutil
import sys
import tempfile
import textwrap
from dataclasses import dataclass
from typing import Any, Callable, List, Optional, Sequence, Tuple

import z3

from refines import ir
from refines.lower import Lowering
from refines.source import find_function, read_params
from refines.translate import Scope, translate_body

Result = Tuple[str, Any]  # ("returned", value) or ("raised", exception class)

_DIR: Optional[str] = None
_COUNTER = itertools.count()


def _scratch_dir() -> str:
    global _DIR
    if _DIR is None:
        _DIR = tempfile.mkdtemp(prefix="refines-semantics-")
        atexit.register(shutil.rmtree, _DIR, True)
    return _DIR


def load_module(source: str, directory: Optional[str] = None):
    """Write ``source`` as a new module file and import it (a unique name each time)."""
    name = f"refines_semantics_{os.getpid()}_{next(_COUNTER)}"
    path = os.path.join(directory or _scratch_dir(), name + ".py")
    with open(path, "w", encoding="utf-8") as fh:
        fh.write(textwrap.dedent(source))
    spec = importlib.util.spec_from_file_location(name, path)
    module = importlib.util.module_from_spec(spec)
    sys.modules[name] = module
    spec.loader.exec_module(module)
    return module, path


def run_python(fn: Callable, args: Sequence[Any]) -> Result:
    """What CPython does on ``fn(*args)``."""
    try:
        return ("returned", fn(*args))
    except Exception as exc:  # every exception is an outcome to compare
        return ("raised", type(exc))


class Evaluator:
    """Evaluate a behaviour's outcomes on concrete inputs, in one z3 context."""

    def __init__(self, behaviour: ir.Behaviour) -> None:
        self.behaviour = behaviour
        self.ctx = z3.Context()
        self.lower = Lowering(self.ctx)
        self.vars = [self.lower.var(p.name, p.sort) for p in behaviour.params]
        self.guards = [self.lower(o.guard) for o in behaviour.outcomes]
        self.values = [None if not o.returns else self._lower_value(o.value)
                       for o in behaviour.outcomes]

    def _lower_value(self, v: ir.Value):
        if isinstance(v, ir.Tup):
            return ("tuple", [self._lower_value(i) for i in v.items])
        if v is ir.NONE:
            return ("none", None)
        assert isinstance(v, ir.Term), f"outcome value is not a value: {v!r}"
        return (v.sort, self.lower(v))

    def _constant(self, value: Any, sort: str):
        if sort == ir.BOOL:
            return z3.BoolVal(bool(value), self.ctx)
        return z3.IntVal(int(value), self.ctx)

    def substitution(self, args: Sequence[Any]):
        return [(var, self._constant(a, p.sort))
                for var, a, p in zip(self.vars, args, self.behaviour.params)]

    def concrete(self, e: z3.ExprRef, subst) -> Any:
        """The Python value of ``e`` once the parameters are replaced by ``subst``."""
        e = z3.simplify(z3.substitute(e, *subst)) if subst else z3.simplify(e)
        if z3.is_true(e):
            return True
        if z3.is_false(e):
            return False
        if z3.is_int_value(e):
            return e.as_long()
        raise AssertionError(f"did not evaluate to a constant: {e}")

    def _value(self, lowered, subst) -> Any:
        kind, payload = lowered
        if kind == "tuple":
            return tuple(self._value(i, subst) for i in payload)
        if kind == "none":
            return None
        v = self.concrete(payload, subst)
        return bool(v) if kind == ir.BOOL else int(v)

    def holding(self, args: Sequence[Any]) -> List[int]:
        """Indexes of the outcomes whose guard holds on ``args``."""
        subst = self.substitution(args)
        return [i for i, g in enumerate(self.guards) if self.concrete(g, subst) is True]

    def predict(self, args: Sequence[Any]) -> Result:
        """The single outcome the translation predicts on ``args``.

        Fails if no guard or more than one guard holds: a behaviour's guards are
        documented to be disjoint and to cover every pre-state.
        """
        hits = self.holding(args)
        assert len(hits) == 1, (
            f"on {tuple(args)!r}: {len(hits)} outcome guards hold (expected exactly 1)\n"
            f"{self.behaviour!r}")
        o = self.behaviour.outcomes[hits[0]]
        if not o.returns:
            return ("raised", o.exception)
        return ("returned", self._value(self.values[hits[0]], self.substitution(args)))


@dataclass
class Translated:
    fn: Callable
    behaviour: ir.Behaviour
    path: str
    evaluator: Evaluator

    def predict(self, *args: Any) -> Result:
        return self.evaluator.predict(args)

    def run(self, *args: Any) -> Result:
        return run_python(self.fn, args)

    def mismatch(self, *args: Any) -> Optional[str]:
        """``None`` if translation and CPython agree on ``args``, else a description."""
        expected = self.run(*args)
        try:
            got = self.predict(*args)
        except AssertionError as exc:  # no single outcome, or no constant value
            return f"{self.fn.__name__}{tuple(args)!r}: CPython {expected}, translation: {exc}"
        if same(expected, got):
            return None
        return f"{self.fn.__name__}{tuple(args)!r}: CPython {expected}, translation {got}"

    def agrees(self, *inputs: Sequence[Any]) -> List[str]:
        """The mismatches over several input tuples (empty when all agree)."""
        return [m for m in (self.mismatch(*args) for args in inputs) if m is not None]


def same(expected: Result, got: Result) -> bool:
    """Outcomes agree: same exception class, or equal values of the same shape.

    Python's bool is an int (``True == 1``), and the translation models it so:
    scalars compare with ``==``; tuples and ``None`` must match in shape. One
    direction of typing is checked too: where the translation says the value is
    a bool, CPython's must be one (``True + 1`` is the int 2, not a bool). The
    other direction is allowed -- a value that is a bool on one path and an int
    on another (``b and x``) is modelled as an int.
    """
    if expected[0] != got[0]:
        return False
    if expected[0] == "raised":
        return expected[1] is got[1]
    return _same_value(expected[1], got[1])


def _same_value(a: Any, b: Any) -> bool:
    if isinstance(a, tuple) or isinstance(b, tuple):
        return (isinstance(a, tuple) and isinstance(b, tuple) and len(a) == len(b)
                and all(_same_value(x, y) for x, y in zip(a, b)))
    if a is None or b is None:
        return a is b
    if type(a) not in (int, bool) or type(b) not in (int, bool):
        return False
    if type(b) is bool and type(a) is not bool:
        return False
    return a == b


def translated(source: str, name: str = "f", directory: Optional[str] = None) -> Translated:
    """Translate function ``name`` of the module ``source`` the way the plugin does."""
    module, path = load_module(source, directory)
    fn = getattr(module, name)
    fn_node, _ = find_function(fn, path)
    params, _ = read_params(fn_node, fn.__globals__)
    scope = Scope(fn.__globals__, list(fn_node.locals))
    behaviour = translate_body(fn_node, params, scope)
    return Translated(fn, behaviour, path, Evaluator(behaviour))


def line_of(source: str, fragment: str) -> int:
    """The 1-based line of the first line of ``source`` containing ``fragment``."""
    for number, text in enumerate(textwrap.dedent(source).splitlines(), start=1):
        if fragment in text:
            return number
    raise ValueError(f"{fragment!r} not in source")


def grid(*axes: Sequence[Any]) -> List[Tuple[Any, ...]]:
    """Every combination of the given axis values (a small exhaustive input set)."""
    return list(itertools.product(*axes))


SMALL = (-3, -1, 0, 1, 2, 4)
BOOLS = (False, True)


def inputs_for(params: Sequence[ir.Var], ints: Sequence[int] = SMALL) -> List[Tuple]:
    """All combinations of small values for the parameters' sorts."""
    axes = [BOOLS if p.sort == ir.BOOL else ints for p in params]
    return grid(*axes)


def check_agrees(source: str, ints: Sequence[int] = SMALL, name: str = "f") -> Translated:
    """Translate ``source`` and assert it agrees with CPython on a grid of inputs."""
    t = translated(source, name)
    bad = t.agrees(*inputs_for(t.behaviour.params, ints))
    assert not bad, "\n".join(bad[:10]) + f"\n{len(bad)} mismatches\n{t.behaviour!r}"
    return t


# ---- a reference evaluator for IR terms, with CPython's own operators

ARITH = {"+": operator.add, "-": operator.sub, "*": operator.mul,
          "//": operator.floordiv, "%": operator.mod}
CMP = {"<": operator.lt, "<=": operator.le, ">": operator.gt, ">=": operator.ge,
        "==": operator.eq, "!=": operator.ne}


def py_eval(t: ir.Term, env: dict):
    """CPython's value of a term (Python's operators; short-circuit and/or/ite)."""
    if isinstance(t, ir.Var):
        return env[t.name]
    if isinstance(t, ir.Const):
        return t.value
    if isinstance(t, ir.Arith):
        return ARITH[t.op](py_eval(t.left, env), py_eval(t.right, env))
    if isinstance(t, ir.Neg):
        return -py_eval(t.arg, env)
    if isinstance(t, ir.ToInt):
        return int(py_eval(t.arg, env))
    if isinstance(t, ir.Cmp):
        return CMP[t.op](py_eval(t.left, env), py_eval(t.right, env))
    if isinstance(t, ir.Not):
        return not py_eval(t.arg, env)
    if isinstance(t, (ir.And, ir.Or)):
        stop_on = isinstance(t, ir.Or)
        value = not stop_on
        for a in t.args:
            value = py_eval(a, env)
            if bool(value) == stop_on:
                return value
        return value
    if isinstance(t, ir.Ite):
        return py_eval(t.then, env) if py_eval(t.cond, env) else py_eval(t.orelse, env)
    raise TypeError(t)
