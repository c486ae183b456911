"""Untranslated parts of a body: opaque values, and the calls that make them.

A mixin of ``translate.Translator``. Where the body calls something the
translator does not model -- a function of the user's, a class, a method of an
object -- the call is not translated but abstracted, soundly:

* its arguments are translated exactly first (they can raise);
* it may raise anything: an *unmodelled* outcome under a fresh condition, which
  can never refute, and which keeps a proof from going through wherever it is
  reachable;
* it may change anything it can reach: every heap field in play is replaced by
  a fresh array (objects can be reachable from globals, so the arguments are
  not the limit);
* it returns a fresh value (``ir.opaque``) of the shape its return annotation
  names. The annotation is taken at its word, and the behaviour says so
  (``Translator.assume``).

A value of unknown shape (no annotation, ``Any``, a dict) may only be
discarded: ``audit(x)`` on its own line is fine, ``y = audit(x)`` is refused
(``opaque-type``). An opaque value must never reach an operator under a shape
it does not have.

Int bitwise operators (``& | ^ << >>``) live here too: exact where that is
easy, otherwise a fresh int with facts that hold for every pair of operands.

Facts about a fresh value narrow the path condition where the value is made
(``constrain``). Each fact must be satisfiable for every pre-state, since the
real value satisfies it; a fact that is not removes pre-states from every
query and proves things that are false.
"""

from __future__ import annotations

import inspect
import types
import typing
from typing import Iterable, Optional

from astroid import nodes

from refines import heap, ir
from refines.errors import Untranslatable
from refines.values import MaybeUnbound, fresh_int, fresh_like

# Shapes a return annotation can name: ("int",), ("bool",), ("float",),
# ("str",), ("none",), ("opt", scalar), ("tuple", (shapes...)), ("list", kind),
# ("obj", kind).
_SCALARS = {int: "int", bool: "bool", float: "float", str: "str"}
_SORTS = {"int": ir.INT, "bool": ir.BOOL, "float": ir.FLOAT, "str": ir.STR}
# C's Py_ssize_t: arguments CPython converts to it raise OverflowError outside it.
SSIZE = 2 ** 63
# How an untranslated call's unmodelled outcome ends: it stands for the call
# raising (any exception), which the function does not catch.
MAY_RAISE = "may raise an exception (not translated)"


def hint_shape(hint) -> Optional[tuple]:
    """The shape of the values a type hint admits, or None if the translator
    cannot hold such a value (``Any``, dicts, ``tuple[int, ...]``, a class
    with subclasses: an instance of one would not be told apart)."""
    if hint is None or hint is type(None):
        return ("none",)
    if hint in _SCALARS:
        return (_SCALARS[hint],)
    origin, args = typing.get_origin(hint), typing.get_args(hint)
    if origin in (typing.Union, types.UnionType):
        members = [a for a in args if a is not type(None)]
        if len(members) == 1 and len(members) < len(args):
            inner = hint_shape(members[0])
            if inner is not None and inner[0] in _SORTS:
                return ("opt", inner)
        return None
    if origin is tuple:
        if Ellipsis in args:
            return None
        items = tuple(hint_shape(a) for a in args)
        return None if None in items else ("tuple", items)
    if origin is list:
        if len(args) == 1 and args[0] in heap.LIST_ELEMENTS:
            return ("list", heap.list_kind(heap.LIST_ELEMENTS[args[0]]))
        return None
    if isinstance(hint, type) and hint.__module__ not in ("builtins", "typing"):
        if hint.__subclasses__():
            return None
        kind = heap.class_kind(hint)
        return None if kind is None else ("obj", kind)
    return None


def return_hint(fn) -> tuple:
    """``(found, hint)``: the return annotation of ``fn``, resolved."""
    try:
        hints = typing.get_type_hints(fn)
    except Exception:  # noqa: BLE001 -- an unresolvable hint is no hint
        return False, None
    if "return" not in hints:
        return False, None
    return True, hints["return"]


def hint_text(hint) -> str:
    if hint is type(None) or hint is None:
        return "None"
    return getattr(hint, "__qualname__", None) if isinstance(hint, type) \
        else str(hint).replace("typing.", "")


def plain_class(cls: type) -> bool:
    """Whether calling ``cls`` surely makes a new object (no ``__new__`` or
    metaclass of its own that could hand back an existing one)."""
    return type(cls) is type and all(
        "__new__" not in vars(c) for c in cls.__mro__ if c is not object)


class Opaque:
    """Translator methods for the parts of a body that are not translated."""

    # ------------------------------------------------------------ bookkeeping

    def untranslated_part(self, what: str, refusal: Optional[tuple] = None) -> None:
        """Record a part abstracted by opaque values (on a path that runs).
        Only a body is abstracted: in a spec, which testing evaluates at run
        time, the part is refused with ``refusal`` (a key and its fields)."""
        if ir.is_false(self.live):
            return
        if self.role != "body":
            key, fields = refusal or ("expression", {"construct": what})
            raise Untranslatable(key, self.line, fields)
        if what not in self.untranslated:
            self.untranslated.append(what)

    def constrain(self, fact: ir.Term) -> None:
        """Narrow the path with a fact about values just made. The fact must
        hold for the real value on every pre-state that reaches here."""
        if ir.is_true(fact) or ir.is_false(self.live):
            return
        self.live = ir.conj(self.live, fact)
        self.cuts += 1

    def fields_in_play(self, extra: Iterable = ()) -> set:
        """Every heap field the body can observe: those written so far, and
        those of every kind of parameter, of every value held in a local, and
        of the values in ``extra`` (kinds or values)."""
        kinds = set(self.param_kinds)
        stack = list(self.env.values()) + list(extra)
        while stack:
            v = stack.pop()
            if isinstance(v, str):
                kinds.add(v)
            elif isinstance(v, MaybeUnbound):
                stack.append(v.value)
            elif isinstance(v, ir.Tup):
                stack.extend(v.items)
            elif isinstance(v, ir.Ref):
                kinds.add(v.kind)
        keys = set(self.heap)
        for kind in kinds:
            if kind.startswith("list:"):
                keys.add(heap.field_key(kind))
            else:
                keys.update(heap.field_key(kind, a) for a in heap.KINDS[kind].fields)
        return keys

    def after_calls(self, name: str, value: ir.Value) -> ir.Value:
        """A module constant read after an untranslated call, which may have
        rebound it (``global`` in the callee): a fresh value of its type,
        the same for every read until the next call. Calls are translated in
        one pass over the body, so this also covers paths where no call ran,
        and reads in a loop whose body calls: sound, if less precise. (A
        constant rebound to a value of another type is not considered.)"""
        if self.rebound is None or not isinstance(value, ir.Term):
            return value
        if name not in self.rebound:
            self.rebound[name] = fresh_like(value)
        return self.rebound[name]

    def havoc(self, keys: Iterable[str]) -> None:
        """Forget what the fields hold: each becomes a fresh array."""
        for key in sorted(keys):
            self.heap[key] = ir.opaque(ir.arr_sort(heap.field_sort(key)))

    # ------------------------------------------------------------ values

    def opaque_value(self, shape: tuple, new_object: bool = False) -> ir.Value:
        """A fresh value of ``shape``; ``new_object`` for an object surely made
        by the call (a constructor), which is none of the existing ones."""
        kind = shape[0]
        if kind == "none":
            return ir.NONE
        if kind == "int":
            return fresh_int()
        if kind in _SORTS:
            return ir.opaque(_SORTS[kind])
        if kind == "opt":
            return ir.Opt(ir.opaque(ir.BOOL), self.opaque_value(shape[1]))
        if kind == "tuple":
            return ir.Tup(tuple(self.opaque_value(s) for s in shape[1]))
        ref = ir.fresh_ref(next(heap._ALLOCATIONS)) if new_object else ir.opaque(ir.REF)
        return ir.Ref(ref, shape[1])

    def other_list_kind(self, kind: str) -> Optional[str]:
        """A list kind in play other than ``kind``: one list may be both
        (``[]`` is a list[int] and a list[str]), which the heap cannot show."""
        for key in sorted(self.fields_in_play()):
            if key.startswith("list:") and key != kind:
                return key
        return None

    # ------------------------------------------------------------ calls

    def call_text(self, node: nodes.Call) -> str:
        text = node.as_string()
        return text if len(text) <= 60 else text[:57] + "..."

    def unmodelled_call(self, node: nodes.Call, fn, args: list,
                        new_object: Optional[type] = None) -> ir.Value:
        """A call to ``fn`` that is not translated, after its arguments
        (``args``, already translated) were evaluated. ``new_object``: the
        class, when the call constructs an instance of it."""
        text = self.call_text(node)
        discarded = isinstance(node.parent, nodes.Expr)
        shape, annotation = None, None
        if not discarded:
            if new_object is not None:
                kind = heap.class_kind(new_object)
                shape = None if kind is None else ("obj", kind)
                annotation = new_object.__qualname__
            else:
                found, hint = return_hint(fn)
                shape = hint_shape(hint) if found else None
                annotation = hint_text(hint) if found else None
            why = ("it has no return annotation" if annotation is None and new_object is None
                   else f"`{annotation}` is not a shape the translator holds")
            if shape is None:
                return self.refuse("opaque-type", node.lineno, {"construct": text, "why": why})
            if shape[0] == "list":
                other = self.other_list_kind(shape[1])
                if other is not None:
                    return self.refuse("opaque-type", node.lineno, {
                        "construct": text,
                        "why": f"a {heap.describe(shape[1])} may be the same list as a "
                               f"{heap.describe(other)} in use here"})
        if ir.is_false(self.live):
            return ir.const(0)
        self.untranslated_part(f"the call `{text}` (line {node.lineno})")
        self.unmodelled_when(ir.opaque(ir.BOOL), node.lineno,
                             f"`{text}` {MAY_RAISE}")
        extra = list(args) + ([shape[1]] if shape and shape[0] in ("list", "obj") else [])
        self.havoc(self.fields_in_play(extra))
        self.rebound = {}  # module constants read from now on may have been rebound
        if discarded:
            return ir.NONE  # never read
        if new_object is None:
            # PEP 484's numeric tower: a float hint admits an int too.
            note = ("; an int, which a float hint also admits, is not considered"
                    if "float" in repr(shape) else "")
            self.assume(f"`{getattr(fn, '__qualname__', text)}` returns what its annotation "
                        f"says (`{annotation}`){note}")
        return self.opaque_value(shape, new_object=new_object is not None
                                 and plain_class(new_object))

    def call_of_object(self, node: nodes.Call, callee, args: list) -> Optional[ir.Value]:
        """A call to a module-level callee that is not modelled: a function or
        a class of the user's (their value is what the annotation says), or
        any other callable whose result is discarded. None: refuse."""
        if isinstance(callee, type) and callee.__module__ != "builtins":
            return self.unmodelled_call(node, callee, args, new_object=callee)
        if inspect.isfunction(callee) or inspect.ismethod(callee):
            return self.unmodelled_call(node, callee, args)
        if callable(callee) and isinstance(node.parent, nodes.Expr):
            return self.unmodelled_call(node, callee, args)
        return None

    def call_method_of_object(self, node: nodes.Call, subject: ir.Ref, name: str,
                              args: list) -> Optional[ir.Value]:
        """``obj.name(...)`` for an object of a modelled class: the method is
        looked up on the class, and called as an untranslated function."""
        cls = heap.KINDS[subject.kind].cls
        attr = inspect.getattr_static(cls, name, None)
        if isinstance(attr, (staticmethod, classmethod)):
            attr = attr.__func__
        if not inspect.isfunction(attr):
            return None  # a property, a field, or nothing: not a method
        return self.unmodelled_call(node, attr, [subject] + args)

    # ------------------------------------------------------------ bitwise

    def int_bitwise(self, op: str, left: ir.Term, right: ir.Term, node) -> ir.Value:
        """``& | ^ << >>`` on ints and bools (Language Reference, 6.7 Binary
        bitwise operations and 6.8 Shifting operations): Python's ints behave
        as two's complement with infinitely many sign bits; ``bool & bool``
        (and ``|``, ``^``) is a bool, any other mix is an int; a negative
        shift count raises ValueError."""
        if ir.FLOAT in (left.sort, right.sort):
            self.raise_when(ir.TRUE, TypeError, node.lineno,
                            f"unsupported operand type(s) for {op}: float")
            return ir.const(0)
        a, b = ir.as_int(left), ir.as_int(right)
        if op in ("<<", ">>"):
            self.raise_when(ir.cmp("<", b, ir.const(0)), ValueError, node.lineno,
                            "negative shift count")
            if ir.is_false(self.live):
                return ir.const(0)
            return self.shift(op, a, b, node)
        value = self.bitwise(op, a, b, node)
        both_bool = ir.and_(ir.is_bool(left), ir.is_bool(right))
        if ir.is_false(both_bool):
            return value
        t, u = ir.truth(left), ir.truth(right)
        as_bool = {"&": ir.and_(t, u), "|": ir.or_(t, u), "^": ir.cmp("!=", t, u)}[op]
        return ir.ite(both_bool, as_bool, value)

    def bitwise(self, op: str, a: ir.Term, b: ir.Term, node) -> ir.Term:
        if isinstance(a, ir.Const) and isinstance(b, ir.Const):
            x, y = int(a.value), int(b.value)
            return ir.const({"&": x & y, "|": x | y, "^": x ^ y}[op])
        for x, c in ((a, b), (b, a)):
            if isinstance(c, ir.Const):
                k = int(c.value)
                if k == 0:
                    return ir.const(0) if op == "&" else x
                if k == -1:
                    return {"&": x, "|": ir.const(-1), "^": ir.arith("-", ir.neg(x),
                                                                      ir.const(1))}[op]
                if op == "&" and k > 0 and k & (k + 1) == 0:
                    return ir.arith("%", x, ir.const(k + 1))  # a mask of the low bits
        r = self.fresh_result(f"the operator `{node.as_string()}`", node)
        zero = ir.const(0)
        a_neg, b_neg = ir.cmp("<", a, zero), ir.cmp("<", b, zero)
        r_neg = ir.cmp("<", r, zero)
        if op == "&":
            self.constrain(ir.and_(
                ir.cmp("==", r_neg, ir.and_(a_neg, b_neg)),
                ir.implies(ir.not_(a_neg), ir.cmp("<=", r, a)),
                ir.implies(ir.not_(b_neg), ir.cmp("<=", r, b)),
                ir.implies(ir.and_(a_neg, b_neg),
                           ir.and_(ir.cmp("<=", r, a), ir.cmp("<=", r, b)))))
        elif op == "|":
            self.constrain(ir.and_(
                ir.cmp("==", r_neg, ir.or_(a_neg, b_neg)),
                ir.implies(a_neg, ir.cmp(">=", r, a)),
                ir.implies(b_neg, ir.cmp(">=", r, b)),
                ir.implies(ir.and_(ir.not_(a_neg), ir.not_(b_neg)),
                           ir.and_(ir.cmp(">=", r, a), ir.cmp(">=", r, b)))))
        else:
            self.constrain(ir.cmp("==", r_neg, ir.cmp("!=", a_neg, b_neg)))
        return r

    def shift(self, op: str, a: ir.Term, b: ir.Term, node) -> ir.Term:
        """``a << b`` and ``a >> b`` for ``b >= 0``: ``a * 2**b`` and
        ``a // 2**b`` exactly (Language Reference 6.8), for a constant count."""
        if isinstance(b, ir.Const) and b.value <= 10_000:
            scale = ir.const(2 ** int(b.value))
            return ir.arith("*" if op == "<<" else "//", a, scale)
        r = self.fresh_result(f"the operator `{node.as_string()}`", node)
        zero = ir.const(0)
        if op == "<<":
            self.constrain(ir.and_(
                ir.cmp("==", ir.cmp("==", r, zero), ir.cmp("==", a, zero)),
                ir.implies(ir.cmp(">", a, zero), ir.cmp(">=", r, a)),
                ir.implies(ir.cmp("<", a, zero), ir.cmp("<=", r, a))))
        else:
            self.constrain(ir.and_(
                ir.implies(ir.cmp(">=", a, zero),
                           ir.and_(ir.cmp(">=", r, zero), ir.cmp("<=", r, a))),
                ir.implies(ir.cmp("<", a, zero),
                           ir.and_(ir.cmp(">=", r, a), ir.cmp("<", r, zero)))))
        return r

    def fresh_result(self, what: str, node) -> ir.Term:
        self.untranslated_part(f"{what} (line {node.lineno})", ("operator", {
            "op": node.op, "types": "int operands in a spec",
            "hint": "bitwise operators on ints are abstracted in function bodies only "
                    "(exactly: by a constant shift count, or with 0, -1 or a low-bit mask)"}))
        return ir.opaque(ir.INT)
