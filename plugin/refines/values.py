"""The values of locals across paths, and fresh values of a given shape.

A local may be bound on some paths only (``MaybeUnbound``), or hold values of
different shapes on different paths (``Conflict``, an error only if read);
``merge`` joins the values two paths give a local. ``fresh_like`` makes a new
unconstrained value of the same shape as a given one: what an untranslated
part of a body (a loop, a call that is not modelled) leaves in a variable.
"""

from __future__ import annotations

from dataclasses import dataclass

from refines import heap, ir
from refines.compare import optional_parts


@dataclass
class MaybeUnbound:
    """A local assigned on some paths only: reading it where ``bound`` is false
    raises UnboundLocalError, as Python does."""

    value: ir.Value
    bound: ir.Term


@dataclass
class Conflict:
    """A local whose shape differs between paths; an error only if read."""

    shapes: str


def shape(v: ir.Value) -> str:
    if isinstance(v, ir.Ref):
        return heap.describe(v.kind)
    if isinstance(v, ir.Opt):
        return f"Optional[{shape(v.value)}]"
    if isinstance(v, ir.Tup):
        return "tuple(" + ", ".join(shape(i) for i in v.items) + ")"
    if v is ir.NONE:
        return "None"
    return {ir.FLOAT: "float", ir.STR: "str"}.get(v.sort, "int/bool")


_kind = heap._kind  # terms of one kind merge into one if-then-else


def merge(cond: ir.Term, a, b):
    """The value that is ``a`` where ``cond`` holds and ``b`` elsewhere."""
    if a is b or ir.is_true(cond):
        return a
    if ir.is_false(cond):
        return b
    if isinstance(a, Conflict) or isinstance(b, Conflict):
        return a if isinstance(a, Conflict) else b
    if isinstance(a, MaybeUnbound) or isinstance(b, MaybeUnbound):
        av, ab = (a.value, a.bound) if isinstance(a, MaybeUnbound) else (a, ir.TRUE)
        bv, bb = (b.value, b.bound) if isinstance(b, MaybeUnbound) else (b, ir.TRUE)
        bound = ir.ite(cond, ab, bb)
        # Where a side is never bound its value is never read: take the other.
        if ir.is_false(ab):
            return MaybeUnbound(bv, bound)
        if ir.is_false(bb):
            return MaybeUnbound(av, bound)
        return MaybeUnbound(merge(cond, av, bv), bound)
    if a is ir.NONE and b is ir.NONE:
        return ir.NONE
    if isinstance(a, ir.Ref) and isinstance(b, ir.Ref) and a.kind == b.kind:
        return ir.Ref(ir.ite(cond, a.ref, b.ref), a.kind)
    if isinstance(a, (ir.Term, ir.Opt, ir.NoneValue)) and isinstance(b, (ir.Term, ir.Opt, ir.NoneValue)):
        # None on some paths and a number or str on the others: an Opt.
        if isinstance(a, ir.Term) and isinstance(b, ir.Term):
            if _kind(a) != _kind(b):
                return Conflict(f"{shape(a)} and {shape(b)}")  # e.g. int or float
            return ir.ite(cond, a, b)
        an, av = optional_parts(a)
        bn, bv = optional_parts(b)
        if av is None or bv is None:
            value = av if bv is None else bv
        elif _kind(av) != _kind(bv):
            return Conflict(f"{shape(a)} and {shape(b)}")
        else:
            value = ir.ite(cond, av, bv)
        return ir.Opt(ir.ite(cond, an, bn), value)
    if isinstance(a, ir.Tup) and isinstance(b, ir.Tup) and len(a.items) == len(b.items):
        items = tuple(merge(cond, x, y) for x, y in zip(a.items, b.items))
        if any(isinstance(i, Conflict) for i in items):
            return Conflict(f"{shape(a)} and {shape(b)}")
        return ir.Tup(items)
    return Conflict(f"{shape(a)} and {shape(b)}")


def fresh_int() -> ir.Term:
    """An unknown int: Python's bool is an int subclass, so where an int is
    expected a bool may arrive (``True`` for ``-> int``); the value records
    where it is a bool (``ir.is_bool``), which ``str()`` and ``is`` read."""
    return ir.ite(ir.opaque(ir.BOOL), ir.opaque(ir.BOOL), ir.opaque(ir.INT))


def fresh_like(v):
    """A new value of the same shape as ``v``, about which nothing is known:
    each number, str, flag of an optional value, and reference is a new
    opaque term. A reference may then be any object of its kind, a parameter
    or an object made during the call. A local that may be unbound stays so,
    under a new condition."""
    if isinstance(v, Conflict):
        return v
    if isinstance(v, MaybeUnbound):
        return MaybeUnbound(fresh_like(v.value), ir.opaque(ir.BOOL))
    if v is ir.NONE:
        return ir.NONE
    if isinstance(v, ir.Opt):
        return ir.Opt(ir.opaque(ir.BOOL), fresh_like(v.value))
    if isinstance(v, ir.Tup):
        return ir.Tup(tuple(fresh_like(i) for i in v.items))
    if isinstance(v, ir.Ref):
        return ir.Ref(ir.opaque(ir.REF), v.kind)
    if v.sort == ir.INT and not ir.is_false(ir.is_bool(v)):
        return fresh_int()  # an int that may hold a bool
    return ir.opaque(v.sort)


def signature(v) -> str:
    """The shape of a value as text, fine enough that two values with the
    same signature give ``fresh_like`` values of one shape (a bool merged into
    an int counts: ``int?bool``)."""
    if v is None:
        return "absent"
    if isinstance(v, Conflict):
        return "conflict"
    if isinstance(v, MaybeUnbound):
        return "absent" if ir.is_false(v.bound) else f"maybe({signature(v.value)})"
    if v is ir.NONE:
        return "None"
    if isinstance(v, ir.Opt):
        return f"opt({signature(v.value)})"
    if isinstance(v, ir.Tup):
        return "(" + ",".join(signature(i) for i in v.items) + ")"
    if isinstance(v, ir.Ref):
        return v.kind
    if v.sort == ir.INT and not ir.is_false(ir.is_bool(v)):
        return "int?bool"
    return v.sort
