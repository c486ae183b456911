"""Translating Python (astroid nodes) into before/after relations.

The translator executes the body symbolically, one statement after another,
keeping

* ``env``: the current value of every local, as a term over the parameters;
* ``live``: the condition under which execution reaches the current point;
* ``outcomes``: every way the body has ended so far (returned a value or raised
  an exception), each guarded by the condition under which it happens.

Statements are handled by the laws of the refinement calculus: an assignment
substitutes the new value into later uses (the substitution law), a sequence
threads the environment through, and an ``if`` runs both branches and merges
their environments into if-then-else terms -- so the formula grows linearly
with the number of sequential ``if`` statements, with no path enumeration.

Every operation that Python can make raise (``//`` by zero, a failing
``assert``, unpacking the wrong number of values, ...) adds a raising outcome
and narrows ``live``, so the guards of a behaviour's outcomes are disjoint and
cover all pre-states.

One visitor method per node kind; anything else raises ``Untranslatable``,
the only road to an ``unknown`` verdict. The operations on particular kinds
of value live in mixins: ``calls`` (builtins, ``math``, str methods),
``compare`` (==, ordering, ``is``, ``in``, ``isinstance``), ``strings`` (str
operators, indexing, slicing) and ``heap`` (lists and objects). Parts of a
body that are not translated but abstracted by opaque values live in
``opaque`` (calls that are not modelled, int bitwise operators), ``methods``
(the table of further str and list methods) and ``loops`` (``for``,
``while``); ``values`` holds what locals can be across paths.
"""

from __future__ import annotations

import builtins
import types
from dataclasses import dataclass
from typing import Callable, Dict, List, Optional, Sequence, Tuple

import astroid
from astroid import nodes

from refines import heap, ir
from refines.calls import _CALLS, Calls
from refines.compare import Comparisons
from refines.errors import SpecError, Untranslatable
from refines.heap import Heap
from refines.loops import Loops
from refines.methods import Methods
from refines.opaque import Opaque
from refines.strings import Strings, str_const
from refines.values import Conflict, MaybeUnbound, merge

# Python statement keywords for the node kinds we do not translate yet.
_STATEMENT_NAMES = {
    "AsyncFor": "async for", "Try": "try",
    "TryStar": "try", "With": "with", "AsyncWith": "async with",
    "Import": "import", "ImportFrom": "from ... import", "Delete": "del",
    "Global": "global", "Nonlocal": "nonlocal", "FunctionDef": "def",
    "AsyncFunctionDef": "async def", "ClassDef": "class", "Match": "match",
}
_EXPRESSION_NAMES = {
    "ListComp": "list comprehension", "SetComp": "set comprehension",
    "DictComp": "dict comprehension", "GeneratorExp": "generator expression",
    "Lambda": "lambda", "JoinedStr": "f-string", "Attribute": "attribute access",
    "List": "list display", "Set": "set display", "Dict": "dict display",
    "NamedExpr": "assignment expression (:=)", "Await": "await",
    "Yield": "yield", "YieldFrom": "yield from", "Starred": "starred",
    "Slice": "slice",
}

_CMP = {"<", "<=", ">", ">=", "==", "!="}
_MAX_POWER = 64


truthy = ir.truth


class Scope:
    """What names mean where an expression is read."""

    def __init__(self, globals_: dict, locals_: Sequence[str] = ()) -> None:
        self.globals = globals_
        # Names assigned anywhere in the function are local throughout it.
        self.function_locals = set(locals_)
        # One term per global name: every read of a module constant is the same
        # object, which matters for identity (a NaN constant `in` a tuple).
        self._constants: dict = {}

    def global_value(self, name: str, line: int):
        if name in self.globals:
            value = self.globals[name]
        elif hasattr(builtins, name):
            value = getattr(builtins, name)
        else:
            raise Untranslatable("name", line, {"name": name})
        return self.constant(value, line, name)

    def constant(self, value, line: int, name: str = ""):
        """The term of a module-level value (or an attribute of a module)."""
        # Python's bool is an int subclass; both are modelled exactly, as are floats.
        # Keyed by the object: two names bound to one NaN are one object.
        if isinstance(value, (bool, int, float, str)):
            if id(value) not in self._constants:
                self._constants[id(value)] = (
                    str_const(value, line) if isinstance(value, str)
                    else ir.Const(value, ir.FLOAT) if isinstance(value, float)
                    else ir.const(value))
            return self._constants[id(value)]
        if value is None:
            return ir.NONE
        raise Untranslatable("name", line, {"name": name or repr(value)})

    def resolve(self, func: nodes.NodeNG):
        """The object a callee names (``abs``, ``math.sqrt``, ``isnan`` imported
        from math), looked up as Python would; None if it is not a global."""
        dotted = []
        cur = func
        while isinstance(cur, nodes.Attribute):
            dotted.append(cur.attrname)
            cur = cur.expr
        if not isinstance(cur, nodes.Name) or cur.name in self.function_locals:
            return None
        obj = self.globals.get(cur.name, getattr(builtins, cur.name, None))
        for attr in reversed(dotted):
            obj = getattr(obj, attr, None)
        return obj

    def is_namespace(self, node: nodes.NodeNG) -> bool:
        """Whether ``node`` names a module or a class (``math``, ``os.path``),
        whose attributes are looked up, rather than a value whose methods are."""
        while isinstance(node, nodes.Attribute):
            node = node.expr
        if not isinstance(node, nodes.Name) or node.name in self.function_locals:
            return False
        obj = self.globals.get(node.name, getattr(builtins, node.name, None))
        return isinstance(obj, (type, types.ModuleType))

    def is_old(self, func: nodes.NodeNG) -> bool:
        """Whether ``func`` names ``refines.old`` (by name or as ``refines.old``)."""
        from refines.declare import old

        if isinstance(func, nodes.Name):
            return (func.name not in self.function_locals
                    and self.globals.get(func.name) is old)
        if isinstance(func, nodes.Attribute) and func.attrname == "old":
            base = func.expr
            return (isinstance(base, nodes.Name)
                    and getattr(self.globals.get(base.name), "old", None) is old)
        return False

    def is_builtin(self, name: str, fn) -> bool:
        return (name not in self.function_locals
                and self.globals.get(name, getattr(builtins, name, None)) is fn)


class Translator(Calls, Heap, Comparisons, Strings, Methods, Opaque, Loops):
    """Symbolic execution of one body or spec expression."""

    def __init__(self, scope: Scope, env: Dict[str, ir.Value],
                 old_env: Optional[Dict[str, ir.Value]] = None,
                 role: str = "body", heap_state: Optional[dict] = None) -> None:
        self.scope = scope
        self.env: Dict[str, object] = dict(env)
        self.heap: Dict[str, ir.Term] = dict(heap_state or {})
        self.assumptions: List[str] = []
        self.line = 0  # the line of the expression being translated
        self.old_env = old_env  # set only while reading a relation
        self.role = role
        self.live: ir.Term = ir.TRUE
        self.outcomes: List[ir.Outcome] = []
        # Parts abstracted by opaque values (opaque.py, loops.py), for the report.
        self.untranslated: List[str] = []
        # How often the path was cut other than by an outcome: a break or a
        # continue, or a fact about a fresh value (see ``branches``).
        self.cuts = 0
        self.loops: list = []  # the loops being translated, innermost last
        self.param_kinds: set = set()  # kinds of list and object parameters
        # Module constants as an untranslated call may have rebound them (None
        # until a call is translated): see ``Opaque.after_calls``.
        self.rebound: Optional[dict] = None

    # ------------------------------------------------------------ outcomes

    def raise_when(self, cond: ir.Term, exc: type, line: int, cause: str) -> None:
        """Python raises ``exc`` here exactly when ``cond`` holds."""
        guard = ir.conj(self.live, cond)
        if ir.is_false(guard):
            return
        self.outcomes.append(ir.Outcome(guard, exception=exc, line=line, cause=cause))
        self.live = ir.conj(self.live, ir.not_(cond))

    def assume(self, what: str) -> None:
        """Record something taken for granted beyond the modelled semantics."""
        if not ir.is_false(self.live) and what not in self.assumptions:
            self.assumptions.append(what)

    def unmodelled_when(self, cond: ir.Term, line: int, why: str) -> None:
        """Where ``cond`` holds, what Python does here is not modelled."""
        guard = ir.conj(self.live, cond)
        if ir.is_false(guard):
            return
        self.outcomes.append(ir.Outcome(guard, line=line, unmodelled=why))
        self.live = ir.conj(self.live, ir.not_(cond))

    def finish(self, value: ir.Value, line: int) -> None:
        if not ir.is_false(self.live):
            self.outcomes.append(ir.Outcome(self.live, value=value, line=line,
                                            heap=dict(self.heap)))
        self.live = ir.FALSE

    # ------------------------------------------------------------ statements

    def block(self, body: Sequence[nodes.NodeNG]) -> None:
        for stmt in body:
            if ir.is_false(self.live):
                return  # the rest is unreachable: Python never runs it
            self.statement(stmt)

    def statement(self, node: nodes.NodeNG) -> None:
        method = getattr(self, "stmt_" + type(node).__name__, None)
        if method is None:
            kind = type(node).__name__
            raise Untranslatable("statement", node.lineno,
                                 {"construct": _STATEMENT_NAMES.get(kind, kind)})
        method(node)

    def stmt_Pass(self, node: nodes.Pass) -> None:
        pass

    def stmt_Expr(self, node: nodes.Expr) -> None:
        if isinstance(node.value, nodes.Const) and isinstance(node.value.value, str):
            return  # a docstring or a bare string: no effect
        self.expr(node.value)

    def stmt_Assign(self, node: nodes.Assign) -> None:
        value = self.expr(node.value)
        for target in node.targets:
            self.assign(target, value)

    def stmt_AnnAssign(self, node: nodes.AnnAssign) -> None:
        if node.value is not None:
            self.assign(node.target, self.expr(node.value))

    def stmt_AugAssign(self, node: nodes.AugAssign) -> None:
        if isinstance(node.target, nodes.AssignAttr):
            obj = self.expr(node.target.expr)
            current = self.attribute(obj, node.target.attrname, node.target)
            value = self.binop(node.op[:-1], current, self.expr(node.value), node)
            if not ir.is_false(self.live):
                self.assign_attribute(node.target, value, obj)  # the object read once
            return
        if not isinstance(node.target, nodes.AssignName):
            raise Untranslatable("expression", node.lineno,
                                 {"construct": node.target.as_string() + " " + node.op})
        current = self.read(node.target.name, node.lineno)
        if isinstance(current, ir.Ref):
            other = self.expr(node.value)
            # `xs += ys` extends xs in place (list.__iadd__): the caller sees it.
            if node.op == "+=" and current.kind.startswith("list:") and \
                    self.list_method(current, "extend", [other], node) is not None:
                return
            self.refuse("operator", node.lineno, {
                "op": node.op, "types": "lists and objects",
                "hint": "`+=` with a list of the same kind is modelled"})
            return
        value = self.binop(node.op[:-1], current, self.expr(node.value), node)
        self.assign(node.target, value)

    def assign(self, target: nodes.NodeNG, value: ir.Value) -> None:
        if isinstance(target, nodes.AssignName):
            self.env[target.name] = value
            return
        if isinstance(target, (nodes.Tuple, nodes.List)):
            if any(isinstance(e, nodes.Starred) for e in target.elts):
                raise Untranslatable("expression", target.lineno,
                                     {"construct": "starred assignment"})
            if not isinstance(value, ir.Tup):
                value = self.unpacked(value, len(target.elts), target)
                if value is None:
                    return
            if len(value.items) != len(target.elts):
                self.raise_when(ir.TRUE, ValueError, target.lineno,
                                f"unpacking {len(value.items)} values into "
                                f"{len(target.elts)} names")
                return
            for elt, item in zip(target.elts, value.items):
                self.assign(elt, item)
            return
        if isinstance(target, nodes.AssignAttr):
            self.assign_attribute(target, value)
            return
        if isinstance(target, nodes.Subscript) and not isinstance(target.slice, nodes.Slice):
            container = self.expr(target.value)
            index = self.index_value(target.slice, target)
            if isinstance(container, ir.Ref) and container.kind.startswith("list:"):
                self.set_item(container, index, value, target)
                return
        raise Untranslatable("expression", target.lineno,
                             {"construct": "assignment to " + target.as_string()})

    def stmt_Return(self, node: nodes.Return) -> None:
        value = ir.NONE if node.value is None else self.expr(node.value)
        self.finish(value, node.lineno)

    def stmt_Raise(self, node: nodes.Raise) -> None:
        if node.exc is None:
            raise Untranslatable("statement", node.lineno, {"construct": "bare raise"})
        exc_node = node.exc
        args: Sequence[nodes.NodeNG] = ()
        if isinstance(exc_node, nodes.Call):
            args = list(exc_node.args) + [k.value for k in exc_node.keywords or ()]
            exc_node = exc_node.func
        cls = self.exception_class(exc_node)
        for arg in args:
            self.harmless(arg)
        self.raise_when(ir.TRUE, cls, node.lineno, node.as_string())

    def stmt_Assert(self, node: nodes.Assert) -> None:
        ok = self.truth(self.expr(node.test))
        if node.fail is not None:
            self.harmless(node.fail)
        self.raise_when(ir.not_(ok), AssertionError, node.lineno,
                        "assert " + node.test.as_string())

    def stmt_If(self, node: nodes.If) -> None:
        cond = self.truth(self.expr(node.test))
        self.branches(cond, lambda: self.block(node.body),
                      lambda: self.block(node.orelse))

    def branches(self, cond: ir.Term, then: Callable[[], object],
                 orelse: Callable[[], object]):
        """Run both branches from the current state and merge them."""
        start_env, start_live, start_count = self.env, self.live, len(self.outcomes)
        start_heap = self.heap

        self.env, self.live = dict(start_env), ir.conj(start_live, cond)
        self.heap = dict(start_heap)
        start_cuts = self.cuts
        then_value = then()
        then_env, then_live, then_heap = self.env, self.live, self.heap
        # A branch narrowed its path if it added an outcome, or jumped out of
        # a loop, or learned a fact about a fresh value: its end condition is
        # then not the branch condition any more.
        then_ended = len(self.outcomes) != start_count or self.cuts != start_cuts

        mid_count, mid_cuts = len(self.outcomes), self.cuts
        self.env, self.live = dict(start_env), ir.conj(start_live, ir.not_(cond))
        self.heap = dict(start_heap)
        else_value = orelse()
        else_env, else_live, else_heap = self.env, self.live, self.heap
        else_ended = len(self.outcomes) != mid_count or self.cuts != mid_cuts

        if not then_ended and not else_ended:
            self.live = start_live  # neither branch can end early
        else:
            self.live = ir.or_(then_live, else_live)
        # A branch that cannot fall through contributes nothing to what
        # follows: continue with the other branch's state alone.
        if ir.is_false(then_live) and not ir.is_false(else_live):
            self.env, self.heap = else_env, else_heap
            return else_value, else_value
        if ir.is_false(else_live) and not ir.is_false(then_live):
            self.env, self.heap = then_env, then_heap
            return then_value, then_value
        self.heap = self.merge_heaps(cond, then_heap, else_heap)
        merged = {}
        for name in set(then_env) | set(else_env):
            if name in then_env and name in else_env:
                merged[name] = merge(cond, then_env[name], else_env[name])
            elif name in then_env:
                merged[name] = merge(cond, then_env[name], MaybeUnbound(ir.NONE, ir.FALSE))
            else:
                merged[name] = merge(cond, MaybeUnbound(ir.NONE, ir.FALSE), else_env[name])
        self.env = merged
        return then_value, else_value

    # ------------------------------------------------------------ expressions

    def refuse(self, key: str, line: int, fields: dict) -> ir.Value:
        """Give up on a construct -- unless it is unreachable, as after an
        operation that always raises: Python never runs it, so neither do we."""
        if ir.is_false(self.live):
            return ir.const(0)
        raise Untranslatable(key, line or self.line, fields)

    def expr(self, node: nodes.NodeNG) -> ir.Value:
        if ir.is_false(self.live):
            return ir.const(0)  # unreachable (e.g. after a certain raise): never runs
        self.line = node.lineno or self.line  # for refusals deep inside an operation
        method = getattr(self, "expr_" + type(node).__name__, None)
        if method is None:
            kind = type(node).__name__
            return self.refuse("expression", node.lineno,
                                 {"construct": _EXPRESSION_NAMES.get(kind, kind)})
        return method(node)

    def expr_Const(self, node: nodes.Const) -> ir.Value:
        if node.value is None:
            return ir.NONE
        if isinstance(node.value, (bool, int, float)):
            return ir.const(node.value)
        if isinstance(node.value, str):
            return str_const(node.value, node.lineno)
        return self.refuse("value", node.lineno,
                             {"construct": node.as_string(),
                              "type": type(node.value).__name__})

    def expr_Name(self, node: nodes.Name) -> ir.Value:
        return self.read(node.name, node.lineno)

    def read(self, name: str, line: int) -> ir.Value:
        if name in self.env:
            value = self.env[name]
            if isinstance(value, Conflict):
                return self.refuse("mixed", line,
                                     {"construct": name, "shapes": value.shapes})
            if isinstance(value, MaybeUnbound):
                self.raise_when(ir.not_(value.bound), UnboundLocalError, line,
                                f"`{name}` is read before it is assigned")
                return value.value
            return value
        if name in self.scope.function_locals:
            self.raise_when(ir.TRUE, UnboundLocalError, line,
                            f"`{name}` is read before it is assigned")
            return ir.NONE
        return self.after_calls(name, self.scope.global_value(name, line))

    def truth(self, v: ir.Value) -> ir.Term:
        """Python's truth value of ``v``; a list is true when not empty, an
        object is true (unless its class says otherwise, which is refused)."""
        if isinstance(v, ir.Ref):
            if v.kind.startswith("list:"):
                return ir.cmp(">", ir.op("len", self.contents(v), sort=ir.INT), ir.const(0))
            cls = heap.KINDS[v.kind].cls
            if hasattr(cls, "__bool__") or hasattr(cls, "__len__"):
                return self.refuse("expression", 0, {
                    "construct": f"truth of a {cls.__qualname__} (it defines __bool__ or __len__)"})
            return ir.TRUE
        return ir.truth(v)

    def expr_List(self, node: nodes.List) -> ir.Value:
        if any(isinstance(e, nodes.Starred) for e in node.elts):
            return self.refuse("expression", node.lineno, {"construct": "starred"})
        return self.list_display([self.expr(e) for e in node.elts], node)

    def expr_Attribute(self, node: nodes.Attribute) -> ir.Value:
        if self.scope.is_namespace(node.expr):
            value = self.scope.resolve(node)  # math.pi, a class constant
            if isinstance(value, (bool, int, float, str)) or value is None:
                return self.after_calls(node.as_string(),
                                        self.scope.constant(value, node.lineno))
            return self.refuse("expression", node.lineno,
                               {"construct": "attribute access " + node.as_string()})
        obj = self.expr(node.expr)
        if isinstance(obj, ir.Opt):
            self.raise_when(obj.none, AttributeError, node.lineno,
                            f"'NoneType' object has no attribute '{node.attrname}'")
            obj = obj.value
        return self.attribute(obj, node.attrname, node)

    def expr_Tuple(self, node: nodes.Tuple) -> ir.Value:
        if any(isinstance(e, nodes.Starred) for e in node.elts):
            return self.refuse("expression", node.lineno, {"construct": "starred"})
        return ir.Tup(tuple(self.expr(e) for e in node.elts))

    def expr_UnaryOp(self, node: nodes.UnaryOp) -> ir.Value:
        operand = self.expr(node.operand)
        if node.op == "not":
            return ir.not_(self.truth(operand))
        operand = self.scalar(operand, node, node.op)
        if operand.sort == ir.STR:
            self.raise_when(ir.TRUE, TypeError, node.lineno,
                            f"bad operand type for unary {node.op}: 'str'")
            return ir.const(0)
        if node.op == "-":
            return ir.neg(operand)
        if node.op == "+":
            return operand if operand.sort == ir.FLOAT else ir.as_int(operand)
        if node.op == "~" and operand.sort == ir.FLOAT:
            self.raise_when(ir.TRUE, TypeError, node.lineno, "bad operand type for unary ~")
            return ir.const(0)
        if node.op == "~":  # ~x == -x - 1 for Python's unbounded ints
            return ir.arith("-", ir.neg(operand), ir.const(1))
        return self.refuse("operator", node.lineno,
                             {"op": node.op, "types": "int", "hint": ""})

    def expr_BinOp(self, node: nodes.BinOp) -> ir.Value:
        left = self.expr(node.left)
        right = self.expr(node.right)
        return self.binop(node.op, left, right, node)

    def binop(self, op: str, left: ir.Value, right: ir.Value,
              node: nodes.NodeNG) -> ir.Value:
        if isinstance(left, ir.Ref) or isinstance(right, ir.Ref):
            if (op == "+" and isinstance(left, ir.Ref) and isinstance(right, ir.Ref)
                    and left.kind == right.kind and left.kind.startswith("list:")):
                return self.new_list(left.kind, ir.arith("+", self.contents(left),
                                                         self.contents(right)))
            return self.refuse("operator", node.lineno, {
                "op": op, "types": "lists and objects",
                "hint": "lists support + with a list of the same kind"})
        if isinstance(left, ir.Tup) or isinstance(right, ir.Tup):
            return self.tuple_binop(op, left, right, node)
        left = self.scalar(left, node, op)
        right = self.scalar(right, node, op)
        if ir.STR in (left.sort, right.sort):
            return self.str_binop(op, left, right, node)
        if op in ("&", "|", "^", "<<", ">>") and not (
                op in ("&", "|", "^") and left.sort == ir.BOOL and right.sort == ir.BOOL):
            return self.int_bitwise(op, left, right, node)
        if ir.FLOAT in (left.sort, right.sort):
            return self.float_binop(op, left, right, node)
        if op == "/":
            return self.int_truediv(left, right, node)
        if op in ("+", "-", "*"):
            return ir.arith(op, left, right)
        if op in ("//", "%"):
            # Python raises where the solver's division is merely unconstrained.
            self.raise_when(ir.cmp("==", right, ir.const(0)), ZeroDivisionError,
                            node.lineno, "integer division or modulo by zero")
            return ir.arith(op, left, right)
        if op == "**":
            return self.power(left, right, node)
        if op in ("&", "|", "^") and left.sort == ir.BOOL and right.sort == ir.BOOL:
            if op == "&":
                return ir.and_(left, right)
            if op == "|":
                return ir.or_(left, right)
            return ir.cmp("!=", left, right)
        return self.refuse("operator", node.lineno, {
            "op": op, "types": "int operands",
            "hint": "`@` is not defined for ints"})

    def to_float(self, v: ir.Term, line: int) -> ir.Term:
        """An int operand of a float operation: Python converts it with one
        rounding, and raises OverflowError past the largest float."""
        if v.sort == ir.FLOAT:
            return v
        if isinstance(v, ir.Const):
            try:
                return ir.const(float(int(v.value)))
            except OverflowError:
                self.raise_when(ir.TRUE, OverflowError, line, "int too large to convert to float")
                return ir.const(0.0)
        n = ir.as_int(v)
        self.raise_when(ir.op("float_overflows", n, sort=ir.BOOL), OverflowError, line,
                        "int too large to convert to float")
        return ir.op("float", n, sort=ir.FLOAT)

    def float_binop(self, op: str, left: ir.Term, right: ir.Term, node) -> ir.Term:
        if op == "**" and isinstance(left, ir.Const) and isinstance(right, ir.Const):
            # Constant powers are computed by CPython itself, errors included.
            try:
                value = float(left.value) ** float(right.value) if left.sort == ir.FLOAT \
                    else left.value ** right.value
            except (OverflowError, ZeroDivisionError) as exc:
                self.raise_when(ir.TRUE, type(exc), node.lineno, str(exc))
                return ir.const(0.0)
            if isinstance(value, complex):
                return self.refuse("value", node.lineno,
                                   {"construct": node.as_string(), "type": "complex"})
            return ir.Const(float(value), ir.FLOAT)
        if op not in ("+", "-", "*", "/", "//", "%"):
            return self.refuse("operator", node.lineno, {
                "op": op, "types": "float operands",
                "hint": "floats support + - * / // % and comparisons"})
        left = self.to_float(left, node.lineno)
        right = self.to_float(right, node.lineno)
        if op in ("/", "//", "%"):
            # Python raises even for nan / 0.0, where IEEE 754 gives nan.
            self.raise_when(ir.cmp("==", right, ir.const(0.0)), ZeroDivisionError,
                            node.lineno, "float division by zero")
        return ir.arith(op, left, right)

    def int_truediv(self, left: ir.Term, right: ir.Term, node) -> ir.Term:
        """int / int: one rounding of the exact quotient (not float(p) / float(q))."""
        p, q = ir.as_int(left), ir.as_int(right)
        self.raise_when(ir.cmp("==", q, ir.const(0)), ZeroDivisionError, node.lineno,
                        "division by zero")
        self.raise_when(ir.op("int_truediv_overflows", p, q, sort=ir.BOOL), OverflowError,
                        node.lineno, "integer division result too large for a float")
        return ir.op("int_truediv", p, q, sort=ir.FLOAT)

    def power(self, base: ir.Term, exponent: ir.Term, node: nodes.NodeNG) -> ir.Term:
        if (isinstance(base, ir.Const) and isinstance(exponent, ir.Const)
                and base.sort != ir.FLOAT and 0 <= exponent.value <= 10_000):
            return ir.const(int(base.value) ** int(exponent.value))  # e.g. 2 ** 1024
        if (isinstance(base, ir.Const) and isinstance(exponent, ir.Const)
                and base.sort != ir.FLOAT and exponent.value < 0):
            return self.float_binop("**", base, exponent, node)  # 2 ** -1 is 0.5
        if not (isinstance(exponent, ir.Const) and exponent.sort == ir.INT
                and 0 <= exponent.value <= _MAX_POWER):
            return self.refuse("power", node.lineno, {"construct": node.as_string()})
        # Square-and-multiply keeps the term small and shares the squares.
        result: ir.Term = ir.const(1)
        square, e = ir.as_int(base), int(exponent.value)
        while e:
            if e & 1:
                result = ir.arith("*", result, square)
            e >>= 1
            if e:
                square = ir.arith("*", square, square)
        return result

    def tuple_binop(self, op, left, right, node) -> ir.Value:
        if op == "+" and isinstance(left, ir.Tup) and isinstance(right, ir.Tup):
            return ir.Tup(left.items + right.items)
        if op == "*":
            tup, count = (left, right) if isinstance(left, ir.Tup) else (right, left)
            if isinstance(count, ir.Const) and count.sort == ir.INT:
                return ir.Tup(tup.items * max(count.value, 0))
        return self.refuse("operator", node.lineno, {
            "op": op, "types": "tuples",
            "hint": "tuples support + with a tuple and * by a constant int"})


    def scalar(self, v: ir.Value, node: nodes.NodeNG, op: str) -> ir.Term:
        if isinstance(v, ir.Term):
            return v
        if isinstance(v, ir.Opt):
            # Where it is None, Python raises TypeError; elsewhere it is a number or str.
            self.raise_when(v.none, TypeError, node.lineno,
                            f"`{op}` is not defined for None in Python")
            return v.value
        # Python raises TypeError for arithmetic or ordering on None, and for
        # mixing a tuple with an int: an outcome like any other. The value
        # returned is never used, since nothing runs after the raise.
        kind = "None" if v is ir.NONE else "a tuple"
        self.raise_when(ir.TRUE, TypeError, node.lineno,
                        f"`{op}` is not defined for {kind} in Python")
        return ir.const(0)

    def expr_BoolOp(self, node: nodes.BoolOp) -> ir.Value:
        return self.boolop(node.op, list(node.values), node)

    def boolop(self, op: str, values: list, node: nodes.BoolOp) -> ir.Value:
        # `a and b` is `a` if `a` is falsy, else `b`; `b` runs only when needed.
        first = self.expr(values[0])
        if len(values) == 1:
            return first
        t = self.truth(first)
        stop = ir.not_(t) if op == "and" else t
        a, b = self.branches(stop, lambda: first,
                             lambda: self.boolop(op, values[1:], node))
        return self.merged(stop, a, b, node)

    def merged(self, cond: ir.Term, a: ir.Value, b: ir.Value, node) -> ir.Value:
        value = merge(cond, a, b)
        if isinstance(value, Conflict):
            return self.refuse("mixed", node.lineno,
                                 {"construct": node.as_string(), "shapes": value.shapes})
        return value

    def expr_IfExp(self, node: nodes.IfExp) -> ir.Value:
        cond = self.truth(self.expr(node.test))
        a, b = self.branches(cond, lambda: self.expr(node.body),
                             lambda: self.expr(node.orelse))
        return self.merged(cond, a, b, node)

    def expr_Compare(self, node: nodes.Compare) -> ir.Value:
        # `a < b < c` is `a < b and b < c` with b evaluated once, and only
        # while the chain has held so far.
        left = self.expr(node.left)
        holds: Optional[ir.Term] = None
        for op, right_node in node.ops:
            if holds is None:
                right = self.expr(right_node)
                holds = self.compare(op, left, right, node)
            else:
                seen = {}

                def link(op=op, right_node=right_node, left=left):
                    seen["right"] = self.expr(right_node)
                    return self.compare(op, left, seen["right"], node)

                rest, _ = self.branches(holds, link, lambda: ir.FALSE)
                right = seen["right"]
                holds = ir.and_(holds, rest)
            left = right
        return holds


    def expr_Subscript(self, node: nodes.Subscript) -> ir.Value:
        container = self.expr(node.value)
        if isinstance(container, ir.Opt):
            self.raise_when(container.none, TypeError, node.lineno,
                            "'NoneType' object is not subscriptable")
            container = container.value
        if isinstance(container, ir.Ref) and container.kind.startswith("list:"):
            if not isinstance(node.slice, nodes.Slice):
                return self.list_item(container, self.index_value(node.slice, node), node)
            contents = None
            for cond, (lower, upper, step) in self.slice_cases(node):
                if step is not None and not (isinstance(step, ir.Const) and step.value == 1):
                    return self.refuse("expression", node.lineno,
                                       {"construct": "list slice with a step other than 1"})
                part = self.slice_contents(container, lower, upper)
                contents = part if contents is None else ir.ite(cond, part, contents)
            if contents is None:
                return ir.NONE  # every case raised
            return self.new_list(container.kind, contents)
        if isinstance(container, ir.Term) and container.sort == ir.STR:
            return self.str_subscript(container, node)
        if not isinstance(container, ir.Tup):
            return self.refuse("expression", node.lineno,
                                 {"construct": "subscript of a non-tuple"})
        if isinstance(node.slice, nodes.Slice):
            bounds = []
            for part in (node.slice.lower, node.slice.upper, node.slice.step):
                if part is None:
                    bounds.append(None)
                    continue
                v = self.expr(part)
                if not isinstance(v, ir.Const):
                    return self.refuse("expression", node.lineno,
                                         {"construct": "tuple slice with variable bounds"})
                bounds.append(int(v.value))
            if bounds[2] == 0:
                self.raise_when(ir.TRUE, ValueError, node.lineno, "slice step cannot be zero")
                return ir.Tup(())
            return ir.Tup(container.items[slice(*bounds)])
        index = self.scalar(self.expr(node.slice), node, "[]")
        if index.sort in (ir.FLOAT, ir.STR):
            self.raise_when(ir.TRUE, TypeError, node.lineno,
                            f"tuple indices must be integers or slices, not {index.sort}")
            return ir.const(0)
        n = len(container.items)
        if isinstance(index, ir.Const):
            if -n <= index.value < n:
                return container.items[int(index.value)]
            self.raise_when(ir.TRUE, IndexError, node.lineno, "tuple index out of range")
            return ir.NONE
        in_range = ir.and_(ir.cmp(">=", index, ir.const(-n)), ir.cmp("<", index, ir.const(n)))
        self.raise_when(ir.not_(in_range), IndexError, node.lineno,
                        "tuple index out of range")
        value = container.items[n - 1]
        for i in range(n - 2, -1, -1):
            hit = ir.or_(ir.cmp("==", index, ir.const(i)), ir.cmp("==", index, ir.const(i - n)))
            value = merge(hit, container.items[i], value)
        if isinstance(value, Conflict):
            return self.refuse("mixed", node.lineno,
                                 {"construct": node.as_string(), "shapes": value.shapes})
        return value

    def index_value(self, index_node: nodes.NodeNG, node) -> ir.Value:
        """A subscript's index; an optional one raises TypeError where it is None."""
        index = self.expr(index_node)
        if isinstance(index, ir.Opt):
            self.raise_when(index.none, TypeError, node.lineno,
                            "indices must be integers or slices, not NoneType")
            index = index.value
        return index

    def slice_cases(self, node: nodes.Subscript):
        """The parts of a slice as ``(condition, (lower, upper, step))`` cases:
        all three are evaluated first, as Python does; a part that may be None
        splits into a case where it is omitted and one where it is a number;
        a part of another type raises TypeError."""
        parts = [None if p is None else self.expr(p)
                 for p in (node.slice.lower, node.slice.upper, node.slice.step)]
        cases = [(ir.TRUE, [None if p is ir.NONE else p for p in parts])]
        for i in range(3):
            split = []
            for cond, ps in cases:
                p = ps[i]
                if isinstance(p, ir.Opt):
                    split.append((ir.and_(cond, p.none), ps[:i] + [None] + ps[i + 1:]))
                    split.append((ir.and_(cond, ir.not_(p.none)), ps[:i] + [p.value] + ps[i + 1:]))
                else:
                    split.append((cond, ps))
            cases = split
        out = []
        for cond, ps in cases:
            if any(p is not None and not (isinstance(p, ir.Term) and p.sort in (ir.INT, ir.BOOL))
                   for p in ps):
                self.raise_when(cond, TypeError, node.lineno,
                                "slice indices must be integers or None")
                continue
            out.append((cond, tuple(None if p is None else ir.as_int(p) for p in ps)))
        return out


    def expr_Call(self, node: nodes.Call) -> ir.Value:
        func = node.func
        if self.scope.is_old(func):
            if self.old_env is None or len(node.args) != 1 or node.keywords:
                raise SpecError("spec-old", node.lineno)
            inner = Translator(self.scope, self.old_env, None, self.role)
            inner.live = self.live
            value = inner.expr(node.args[0])
            self.outcomes.extend(inner.outcomes)
            self.live = inner.live
            if isinstance(value, ir.Ref):
                return self.snapshot(value, inner.heap)  # what it held before the call
            return value
        keywords = node.keywords or []
        if any(isinstance(a, nodes.Starred) for a in node.args) or \
                any(k.arg is None for k in keywords):
            return self.refuse("call", node.lineno, {"callee": func.as_string()})
        if isinstance(func, nodes.Attribute) and self.is_value(func.expr):
            return self.method_call(node)
        callee = self.scope.resolve(func)
        if keywords:
            # Only functions that are not modelled take keywords here.
            if self.role == "body" and (id(callee) not in _CALLS and callee is not isinstance):
                args = [self.expr(a) for a in node.args] + [self.expr(k.value) for k in keywords]
                result = self.call_of_object(node, callee, args)
                if result is not None:
                    return result
            return self.refuse("call", node.lineno, {"callee": func.as_string()})
        if callee is isinstance and len(node.args) == 2:
            return self.call_isinstance(self.expr(node.args[0]), node.args[1], node)
        handler = _CALLS.get(id(callee))
        if handler is not None:
            method, fn_name = handler
            if (fn_name == "float" and len(node.args) == 1 and isinstance(node.args[0], nodes.Const)
                    and isinstance(node.args[0].value, str)):
                return self.float_of_text(node.args[0].value, node)
            args = [self.expr(a) for a in node.args]
            if fn_name not in ("bool", "str"):
                # None is no number, str or sequence: these all raise TypeError for it.
                args = [self.scalar(a, node, fn_name + "()") if isinstance(a, ir.Opt) else a
                        for a in args]
            result = getattr(self, method)(fn_name, args, node)
            if result is not None:
                return result
            return self.refuse("call", node.lineno, {"callee": func.as_string()})
        if self.role == "body" and callee is not None:
            result = self.call_of_object(node, callee, [self.expr(a) for a in node.args])
            if result is not None:
                return result
        return self.refuse("call", node.lineno, {"callee": func.as_string()})

    # ------------------------------------------------------------ helpers


    def is_value(self, node: nodes.NodeNG) -> bool:
        """Whether a method's subject is a value (``name.find``) rather than a
        namespace (``math.sqrt``)."""
        if isinstance(node, nodes.Name) and node.name in self.env:
            return True
        return not self.scope.is_namespace(node)

    def exception_class(self, node: nodes.NodeNG) -> type:
        """The exception class a ``raise`` names, looked up as Python would."""
        dotted = []
        cur = node
        while isinstance(cur, nodes.Attribute):
            dotted.append(cur.attrname)
            cur = cur.expr
        if not isinstance(cur, nodes.Name) or cur.name in self.scope.function_locals:
            raise Untranslatable("statement", node.lineno,
                                 {"construct": "raise " + node.as_string()})
        obj = self.scope.globals.get(cur.name, getattr(builtins, cur.name, None))
        for attr in reversed(dotted):
            obj = getattr(obj, attr, None)
        if not (isinstance(obj, type) and issubclass(obj, BaseException)):
            raise Untranslatable("statement", node.lineno,
                                 {"construct": "raise " + node.as_string()})
        return obj

    def harmless(self, node: nodes.NodeNG) -> None:
        """Accept exception arguments and assert messages that cannot raise
        while being built; their value never matters to a spec."""
        if not self._harmless(node):
            raise Untranslatable("expression", node.lineno,
                                 {"construct": "exception message " + node.as_string()})

    def _harmless(self, node: nodes.NodeNG) -> bool:
        if isinstance(node, nodes.Const):
            return True
        if isinstance(node, nodes.Name):
            return self._bound(node.name)
        if isinstance(node, nodes.Tuple):
            return all(self._harmless(e) for e in node.elts)
        return self._text(node)

    def _text(self, node: nodes.NodeNG) -> bool:
        """A str built without any way to raise: literals, f-strings without
        format specs, str()/repr() of harmless values, and + between them."""
        if isinstance(node, nodes.Const):
            return isinstance(node.value, str)
        if isinstance(node, nodes.JoinedStr):
            return all(not isinstance(p, nodes.FormattedValue)
                       or (p.format_spec is None and self._harmless(p.value))
                       for p in node.values)
        if isinstance(node, nodes.BinOp) and node.op == "+":
            return self._text(node.left) and self._text(node.right)
        if (isinstance(node, nodes.Call) and isinstance(node.func, nodes.Name)
                and node.func.name in ("str", "repr") and len(node.args) == 1
                and not node.keywords):
            return (self.scope.is_builtin(node.func.name, getattr(builtins, node.func.name))
                    and self._harmless(node.args[0]))
        return False

    def _bound(self, name: str) -> bool:
        if name in self.env:
            return not isinstance(self.env[name], (MaybeUnbound, Conflict))
        return name not in self.scope.function_locals and (
            name in self.scope.globals or hasattr(builtins, name))


# ---------------------------------------------------------------- entry points


def translate_body(fn_node: nodes.FunctionDef, params: Sequence[ir.Var],
                   scope: Scope) -> ir.Behaviour:
    """The behaviour of a function body over its parameters."""
    env = {p.name: ir.initial(p) for p in params}
    t = Translator(scope, env, role="body")
    t.param_kinds = {p.kind for p in params if p.sort == ir.REF}
    t.block(fn_node.body)
    last = fn_node.body[-1] if fn_node.body else fn_node
    t.finish(ir.NONE, getattr(last, "end_lineno", None) or fn_node.lineno)
    return ir.Behaviour(tuple(params), tuple(t.outcomes), tuple(t.assumptions),
                        tuple(t.untranslated))


@dataclass
class SpecValue:
    """A spec expression read in one state: its truth, and where it raises."""

    holds: ir.Term  # truth value where it does not raise
    defined: ir.Term  # where evaluating it does not raise
    raising: Tuple[ir.Outcome, ...]


def translate_spec(body: nodes.NodeNG, env: Dict[str, ir.Value], scope: Scope,
                   role: str, old_env: Optional[Dict[str, ir.Value]] = None,
                   heap_state: Optional[dict] = None) -> SpecValue:
    """Translate a spec expression; ``heap_state`` is the heap it reads (the
    post-state one for a relation, where ``old(...)`` reads the pre-state)."""
    t = Translator(scope, env, old_env=old_env, role=role, heap_state=heap_state)
    value = t.expr(body)
    if isinstance(value, (ir.Tup, ir.Ref)) or value is ir.NONE:
        raise SpecError("spec-value", body.lineno,
                        {"role": role, "construct": body.as_string()})
    return SpecValue(holds=ir.and_(t.live, truthy(value)), defined=t.live,
                     raising=tuple(t.outcomes))


def parse_expression(text: str) -> nodes.NodeNG:
    """Parse a standalone Python expression (used to re-check printed output)."""
    module = astroid.parse("__refines_expr__ = (" + text + ")\n")
    return module.body[0].value
