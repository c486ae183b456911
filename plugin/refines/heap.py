"""Lists and objects: values that live on a heap and can change.

A list or an object is a reference (``ir.Ref``); what it holds lives in heap
fields, one per kind of list (``list:int``: reference -> contents) and one per
attribute of a class (``obj:Account.balance``: reference -> value). The
translator keeps the current value of every field as a term: a write is an
``ir.store``, a read an ``ir.select``, which pushes itself through the writes
so that every read ends on a pre-state field. Aliasing needs nothing more:
two parameters of one kind are two references that may be equal, and a write
through one is seen through the other exactly when they are.

Objects made during the call (a list display, ``xs + ys``, a slice) get
references of their own (``ir.fresh_ref``), distinct from every parameter's.

This module is a mixin of ``translate.Translator`` (it uses its ``expr``,
``raise_when``, ``refuse`` and ``heap``) and holds the kind
registry that ``source`` fills from type hints.
"""

from __future__ import annotations

import dataclasses
import itertools
import typing
from typing import Dict, Optional

from refines import ir

# Element and attribute types modelled on the heap, by the sort they get.
_FIELD_SORTS = {int: ir.INT, bool: ir.BOOL, str: ir.STR, float: ir.FLOAT,
                "int": ir.INT, "bool": ir.BOOL, "str": ir.STR, "float": ir.FLOAT}
LIST_ELEMENTS = {int: ir.INT, bool: ir.BOOL, str: ir.STR, float: ir.FLOAT}


@dataclasses.dataclass
class ClassInfo:
    """A class whose instances are modelled: its annotated attributes."""

    cls: type
    fields: Dict[str, str]  # attribute -> sort; attributes of other types are absent
    skipped: Dict[str, str]  # attribute -> its hint, for the message


KINDS: Dict[str, ClassInfo] = {}  # "obj:<qualname>" -> info


def class_kind(cls: type) -> Optional[str]:
    """The kind of instances of ``cls``, registering it; None when it has no
    annotated attributes or defines truth or equality of its own."""
    try:
        hints = typing.get_type_hints(cls)
    except Exception:  # noqa: BLE001 -- unresolvable hints: fall back to the raw ones
        hints = dict(getattr(cls, "__annotations__", {}))
    if not hints:
        return None
    kind = f"obj:{cls.__module__}.{cls.__qualname__}"
    fields, skipped = {}, {}
    for name, hint in hints.items():
        if typing.get_origin(hint) is typing.ClassVar:
            continue
        sort = _FIELD_SORTS.get(hint) if isinstance(hint, (type, str)) else None
        if sort is None:
            skipped[name] = getattr(hint, "__name__", str(hint))
        else:
            fields[name] = sort
    KINDS[kind] = ClassInfo(cls, fields, skipped)
    return kind


def list_kind(elem_sort: str) -> str:
    return "list:" + elem_sort


def elem_sort(kind: str) -> str:
    return kind[len("list:"):]


def field_key(kind: str, attr: Optional[str] = None) -> str:
    return kind if attr is None else f"{kind}.{attr}"


def field_sort(key: str) -> str:
    """The sort of the values one heap field holds."""
    if key.startswith("list:"):
        return ir.seq_sort(elem_sort(key))
    kind, attr = key.rsplit(".", 1)
    return KINDS[kind].fields[attr]


_INITIAL: Dict[str, ir.Var] = {}
# Numbers for the objects a call or a spec makes: one sequence for the whole
# process, so that objects made by the body and by the spec reading its
# post-state never share a number.
_ALLOCATIONS = itertools.count()


def initial_field(key: str) -> ir.Var:
    """The pre-state array of one field (one term per key)."""
    if key not in _INITIAL:
        _INITIAL[key] = ir.Var(ir.HEAP_PREFIX + key, ir.arr_sort(field_sort(key)))
    return _INITIAL[key]


def initial_contents(v: ir.Ref) -> ir.Term:
    """What the list ``v`` (a parameter's) holds on entry."""
    return ir.select(initial_field(field_key(v.kind)), v.ref)


def describe(kind: str) -> str:
    if kind.startswith("list:"):
        return f"list[{elem_sort(kind)}]"
    return KINDS[kind].cls.__qualname__


class Heap:
    """Translator methods for lists and objects."""

    heap: Dict[str, ir.Term]

    # ------------------------------------------------------------ fields

    def field(self, key: str) -> ir.Term:
        return self.heap.get(key) or initial_field(key)

    def read_field(self, key: str, ref: ir.Term) -> ir.Term:
        return ir.select(self.field(key), ref)

    def write_field(self, key: str, ref: ir.Term, value: ir.Term) -> None:
        self.heap[key] = ir.store(self.field(key), ref, value)

    def contents(self, v: ir.Ref) -> ir.Term:
        return self.read_field(field_key(v.kind), v.ref)

    def new_list(self, kind: str, contents: ir.Term) -> ir.Ref:
        ref = ir.fresh_ref(next(_ALLOCATIONS))
        self.write_field(field_key(kind), ref, contents)
        return ir.Ref(ref, kind)

    def snapshot(self, v: ir.Ref, heap: Dict[str, ir.Term]) -> ir.Ref:
        """``old(v)``: a new object holding what ``v`` held in ``heap``."""
        ref = ir.fresh_ref(next(_ALLOCATIONS))
        keys = ([field_key(v.kind)] if v.kind.startswith("list:")
                else [field_key(v.kind, a) for a in KINDS[v.kind].fields])
        for key in keys:
            before = ir.select(heap.get(key) or initial_field(key), v.ref)
            self.write_field(key, ref, before)
        return ir.Ref(ref, v.kind)

    def merge_heaps(self, cond: ir.Term, a: Dict[str, ir.Term],
                    b: Dict[str, ir.Term]) -> Dict[str, ir.Term]:
        out = {}
        for key in set(a) | set(b):
            x, y = a.get(key) or initial_field(key), b.get(key) or initial_field(key)
            out[key] = x if x is y else ir.ite(cond, x, y)
        return out

    # ------------------------------------------------------------ objects

    def attribute(self, v: ir.Value, attr: str, node) -> ir.Value:
        if not (isinstance(v, ir.Ref) and v.kind.startswith("obj:")):
            return self.refuse("expression", node.lineno,
                               {"construct": "attribute access " + node.as_string()})
        info = KINDS[v.kind]
        if attr not in info.fields:
            return self.refuse("attribute", node.lineno, {
                "attr": attr, "cls": info.cls.__qualname__,
                "why": (f"its hint `{info.skipped[attr]}` is not modelled" if attr in info.skipped
                        else "it is not an annotated attribute of the class")})
        return self.read_field(field_key(v.kind, attr), v.ref)

    def assign_attribute(self, target, value: ir.Value, obj: Optional[ir.Value] = None) -> None:
        obj = self.expr(target.expr) if obj is None else obj
        if not (isinstance(obj, ir.Ref) and obj.kind.startswith("obj:")):
            self.refuse("expression", target.lineno,
                        {"construct": "assignment to " + target.as_string()})
            return
        current = self.attribute(obj, target.attrname, target)
        if not isinstance(value, ir.Term) or _kind(value) != _kind(current):
            self.refuse("mixed", target.lineno, {
                "construct": target.as_string(),
                "shapes": f"its hint and the value assigned ({ir.render_value(value)})"})
            return
        params = getattr(KINDS[obj.kind].cls, "__dataclass_params__", None)
        if params is not None and params.frozen:
            self.raise_when(ir.TRUE, dataclasses.FrozenInstanceError, target.lineno,
                            f"cannot assign to field '{target.attrname}'")
            return
        if current.sort != ir.BOOL and value.sort == ir.BOOL:
            value = ir.as_int(value)
        self.write_field(field_key(obj.kind, target.attrname), obj.ref, value)

    # ------------------------------------------------------------ lists

    def list_display(self, items, node) -> ir.Value:
        if not items:
            return self.refuse("expression", node.lineno, {
                "construct": "empty list display [] (its element type is not known "
                             "where it is made)"})
        sorts = {_kind(i) if isinstance(i, ir.Term) else None for i in items}
        if len(sorts) != 1 or None in sorts:
            return self.refuse("expression", node.lineno, {
                "construct": "list display " + node.as_string() + " (lists of one of "
                             "int, bool, float, str are modelled)"})
        sort = ir.BOOL if all(i.sort == ir.BOOL for i in items) else sorts.pop()
        contents = None
        for i in items:
            i = i if sort != ir.INT else ir.as_int(i)
            unit = ir.op("seq_unit", i, sort=ir.seq_sort(sort))
            contents = unit if contents is None else ir.arith("+", contents, unit)
        return self.new_list(list_kind(sort), contents)

    def list_item(self, v: ir.Ref, index: ir.Value, node) -> ir.Value:
        items = self.contents(v)
        if not (isinstance(index, ir.Term) and index.sort in (ir.INT, ir.BOOL)):
            self.raise_when(ir.TRUE, TypeError, node.lineno,
                            "list indices must be integers or slices")
            return ir.const(0)
        index = ir.as_int(index)
        n = ir.op("len", items, sort=ir.INT)
        self.raise_when(ir.not_(ir.index_ok(index, n)),
                        IndexError, node.lineno, "list index out of range")
        return ir.op("nth", items, index, sort=elem_sort(v.kind))

    def slice_contents(self, v: ir.Ref, lower, upper) -> ir.Term:
        """What ``v[lower:upper]`` holds (None for an omitted bound)."""
        items = self.contents(v)
        if lower is None and upper is None:
            return items
        if lower is None:
            return ir.op("slice_to", items, upper, sort=items.sort)
        if upper is None:
            return ir.op("slice_from", items, lower, sort=items.sort)
        return ir.op("slice", items, lower, upper, sort=items.sort)

    def set_item(self, v: ir.Ref, index: ir.Value, value: ir.Value, node) -> None:
        items = self.contents(v)
        sort = elem_sort(v.kind)
        if not (isinstance(index, ir.Term) and index.sort in (ir.INT, ir.BOOL)):
            self.raise_when(ir.TRUE, TypeError, node.lineno,
                            "list indices must be integers or slices")
            return
        if not isinstance(value, ir.Term) or _kind(value) != _kind_of_sort(sort) or (
                sort == ir.BOOL and value.sort != ir.BOOL):
            self.refuse("mixed", node.lineno, {
                "construct": node.as_string(),
                "shapes": f"a {describe(v.kind)} and the value stored"})
            return
        index = ir.as_int(index)
        n = ir.op("len", items, sort=ir.INT)
        self.raise_when(ir.not_(ir.index_ok(index, n)),
                        IndexError, node.lineno, "list assignment index out of range")
        at = ir.ite(ir.cmp("<", index, ir.const(0)), ir.arith("+", n, index), index)
        value = value if sort != ir.INT else ir.as_int(value)
        self.write_field(field_key(v.kind), v.ref,
                         ir.op("seq_update", items, at, value, sort=items.sort))

    def list_method(self, v: ir.Ref, name: str, args, node) -> Optional[ir.Value]:
        """``xs.append(x)``, ``xs.extend(ys)``, ``xs.pop()``, ``xs.pop(i)``
        (list documentation, "Mutable Sequence Types")."""
        items = self.contents(v)
        sort = elem_sort(v.kind)
        key = field_key(v.kind)
        if name == "append" and len(args) == 1:
            x = args[0]
            if not isinstance(x, ir.Term) or _kind(x) != _kind_of_sort(sort) or (
                    sort == ir.BOOL and x.sort != ir.BOOL):
                return self.refuse("mixed", node.lineno, {
                    "construct": node.as_string(),
                    "shapes": f"a {describe(v.kind)} and the value appended"})
            x = x if sort != ir.INT else ir.as_int(x)
            self.write_field(key, v.ref, ir.arith("+", items, ir.op(
                "seq_unit", x, sort=items.sort)))
            return ir.NONE
        if name == "extend" and len(args) == 1:
            other = args[0]
            if not (isinstance(other, ir.Ref) and other.kind == v.kind):
                return None
            self.write_field(key, v.ref, ir.arith("+", items, self.contents(other)))
            return ir.NONE
        if name == "pop" and len(args) <= 1:
            n = ir.op("len", items, sort=ir.INT)
            index = ir.as_int(args[0]) if args and isinstance(args[0], ir.Term) \
                and args[0].sort in (ir.INT, ir.BOOL) else (None if args else ir.const(-1))
            if index is None:
                return None
            self.raise_when(ir.cmp("==", n, ir.const(0)), IndexError, node.lineno,
                            "pop from empty list")
            self.raise_when(ir.not_(ir.index_ok(index, n)),
                            IndexError, node.lineno, "pop index out of range")
            at = ir.ite(ir.cmp("<", index, ir.const(0)), ir.arith("+", n, index), index)
            value = ir.op("nth", items, at, sort=sort)
            rest = ir.arith("+", ir.op("slice_to", items, at, sort=items.sort),
                            ir.op("slice_from", items, ir.arith("+", at, ir.const(1)),
                                  sort=items.sort))
            self.write_field(key, v.ref, rest)
            return value
        return None


def _kind_of_sort(sort: str) -> str:
    """Sorts that merge into one if-then-else have one kind (bool and int do)."""
    return sort if sort in (ir.FLOAT, ir.STR) else ir.INT


def _kind(t: ir.Term) -> str:
    return _kind_of_sort(t.sort)
