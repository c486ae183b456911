"""Comparisons: ``==``, ordering, ``is``, ``in`` and ``isinstance``.

A mixin of ``translate.Translator``. The rules are the Language Reference's
("Comparisons", "Value comparisons", "Membership test operations",
"Identity comparisons"): sequences compare item by item, with items checked
for identity first; None equals only None; ordering across unrelated types
raises TypeError; a list never equals a tuple.
"""

from __future__ import annotations

import dataclasses
from typing import Optional

from astroid import nodes

from refines import heap, ir


def optional_parts(v):
    """``(is None, value)`` of a scalar that may be None; value None for None."""
    if v is ir.NONE:
        return ir.TRUE, None
    if isinstance(v, ir.Opt):
        return v.none, v.value
    return ir.FALSE, v


def same_object(a: ir.Term, b: ir.Term) -> ir.Term:
    """Whether ``a`` and ``b`` are one Python object. A value flows through
    assignments and branches unchanged, while each arithmetic operation makes a
    new object; distinct parameters are taken to be distinct objects."""
    if a is b:
        return ir.TRUE
    if ir.is_opaque(a) or ir.is_opaque(b):
        # What an untranslated part returned may be any object, this one too.
        return ir.opaque(ir.BOOL)
    if isinstance(a, ir.Ite):
        return ir.ite(a.cond, same_object(a.then, b), same_object(a.orelse, b))
    if isinstance(b, ir.Ite):
        return ir.ite(b.cond, same_object(a, b.then), same_object(a, b.orelse))
    return ir.FALSE


class Comparisons:
    """Translator methods for comparing values."""

    def compare(self, op: str, a: ir.Value, b: ir.Value, node) -> ir.Term:
        if op in ("is", "is not") and (isinstance(a, ir.Ref) or isinstance(b, ir.Ref)):
            same = (ir.cmp("==", a.ref, b.ref) if isinstance(a, ir.Ref) and isinstance(b, ir.Ref)
                    and a.kind == b.kind else ir.FALSE)
            if isinstance(a, ir.Opt) or isinstance(b, ir.Opt):
                other = a if isinstance(a, ir.Opt) else b
                same = ir.FALSE if not ir.is_false(same) else ir.and_(ir.FALSE, other.none)
            return same if op == "is" else ir.not_(same)
        if op in ("is", "is not"):
            if a is ir.NONE or b is ir.NONE:
                other = b if a is ir.NONE else a
                same = (other.none if isinstance(other, ir.Opt)
                        else ir.const(other is ir.NONE))
                return same if op == "is" else ir.not_(same)
            same = self.identical_bools(a, b)
            if same is not None:
                return same if op == "is" else ir.not_(same)
            return self.refuse("operator", node.lineno, {
                "op": op, "types": "numbers or strs",
                "hint": "`is` between them depends on object identity; use =="})
        if op in ("in", "not in"):
            if isinstance(b, ir.Opt):
                b = self.scalar(b, node, op)  # `x in None` raises TypeError
            if isinstance(b, ir.Ref) and b.kind.startswith("list:"):
                sort = heap.elem_sort(b.kind)
                if sort == ir.FLOAT:
                    # Items compare by identity first: a NaN object is `in` its
                    # own list. Element identity is not modelled for lists.
                    return self.refuse("operator", node.lineno, {
                        "op": op, "types": "a list of floats",
                        "hint": "item identity (a NaN equals itself inside a list) "
                                "is not modelled for lists yet"})
                if isinstance(a, ir.Term) and (a.sort == ir.STR) == (sort == ir.STR) \
                        and a.sort != ir.FLOAT:
                    item = a if sort != ir.INT else ir.as_int(a)
                    if sort == ir.BOOL and a.sort != ir.BOOL:
                        return self.refuse("mixed", node.lineno, {
                            "construct": node.as_string(), "shapes": "int in list[bool]"})
                    found = ir.op("seq_contains", item, self.contents(b), sort=ir.BOOL)
                elif isinstance(a, ir.Term) and a.sort == ir.FLOAT and sort != ir.STR:
                    return self.refuse("mixed", node.lineno, {
                        "construct": node.as_string(), "shapes": "a float in a list of ints"})
                elif isinstance(a, (ir.Ref, ir.Tup, ir.Opt)):
                    return self.refuse("mixed", node.lineno, {
                        "construct": node.as_string(), "shapes": "this value in a list"})
                else:
                    found = ir.FALSE  # a str in a list of ints (or the reverse), None
                return found if op == "in" else ir.not_(found)
            if isinstance(b, ir.Term) and b.sort == ir.STR:
                if not (isinstance(a, ir.Term) and a.sort == ir.STR):
                    self.raise_when(ir.TRUE, TypeError, node.lineno,
                                    "'in <string>' requires string as left operand")
                    return ir.FALSE
                found = (ir.const(a.value in b.value)
                         if isinstance(a, ir.Const) and isinstance(b, ir.Const)
                         else ir.op("contains", a, b, sort=ir.BOOL))
                return found if op == "in" else ir.not_(found)
            if not isinstance(b, ir.Tup):
                return self.refuse("operator", node.lineno, {
                    "op": op, "types": "this right-hand side",
                    "hint": "`in` is modelled for tuples and strs"})
            found = ir.or_(*(self.equal(a, item, True) for item in b.items))
            return found if op == "in" else ir.not_(found)
        if op in ("==", "!="):
            same = self.equal(a, b)
            return same if op == "==" else ir.not_(same)
        if isinstance(a, ir.Tup) and isinstance(b, ir.Tup):
            return self.lexicographic(op, list(a.items), list(b.items), node)
        if isinstance(a, ir.Ref) or isinstance(b, ir.Ref):
            return self.refuse("operator", node.lineno, {
                "op": op, "types": "lists and objects",
                "hint": "ordering lists (and objects) is not modelled yet"})
        a, b = self.scalar(a, node, op), self.scalar(b, node, op)
        if (a.sort == ir.STR) != (b.sort == ir.STR):
            # Ordering a str against a number raises (Language Reference,
            # "Value comparisons"); the value returned is never used.
            self.raise_when(ir.TRUE, TypeError, node.lineno,
                            f"'{op}' not supported between a str and a number")
            return ir.FALSE
        return ir.cmp(op, a, b)

    @staticmethod
    def identical_bools(a: ir.Value, b: ir.Value) -> Optional[ir.Term]:
        """``a is True``/``a is False``: True and False are singletons, so for a
        bool this is equality; a float or a tuple is never one of them. None
        when it cannot be decided (an int-sorted term may hold a bool)."""
        for x, y in ((a, b), (b, a)):
            if isinstance(y, ir.Const) and y.sort == ir.BOOL:
                if isinstance(x, ir.Tup) or (isinstance(x, ir.Term)
                                             and x.sort in (ir.FLOAT, ir.STR)):
                    return ir.FALSE
                if isinstance(x, ir.Term) and x.sort == ir.BOOL:
                    return ir.cmp("==", x, y)
                if isinstance(x, ir.Term) and x.sort == ir.INT:
                    # True only where x holds the bool object (not the int 1)
                    return ir.and_(ir.is_bool(x), ir.cmp("==", x, ir.as_int(y)))
        return None

    def equal(self, a: ir.Value, b: ir.Value, item: bool = False) -> ir.Term:
        """``a == b``; ``item`` for the items of tuples and ``in``, which Python
        compares by identity first (a NaN object equals itself there)."""
        if isinstance(a, ir.Ref) or isinstance(b, ir.Ref):
            if isinstance(a, ir.Ref) and isinstance(b, ir.Ref) and a.kind != b.kind:
                # [] == [] and [1] == [True] hold across kinds; objects may
                # define __eq__ across classes: not modelled.
                return self.refuse("mixed", 0, {
                    "construct": "== between different kinds of lists or objects",
                    "shapes": f"{heap.describe(a.kind)} and {heap.describe(b.kind)}"})
            if not (isinstance(a, ir.Ref) and isinstance(b, ir.Ref)):
                return ir.FALSE  # a list never equals a tuple, None or a number
            if a.kind.startswith("list:"):
                if heap.elem_sort(a.kind) == ir.FLOAT:
                    return self.refuse("operator", 0, {
                        "op": "==", "types": "lists of floats",
                        "hint": "item identity (a NaN equals itself inside a list) "
                                "is not modelled for lists yet"})
                return ir.cmp("==", self.contents(a), self.contents(b))
            info = heap.KINDS[a.kind]
            params = getattr(info.cls, "__dataclass_params__", None)
            generated = getattr(getattr(info.cls.__eq__, "__code__", None), "co_filename",
                                "") == "<string>"
            if params is not None and params.eq and generated and all(
                    f.compare for f in dataclasses.fields(info.cls)):
                fields = [f.name for f in dataclasses.fields(info.cls)]
                if any(f not in info.fields for f in fields):
                    return self.refuse("mixed", 0, {
                        "construct": f"== between {info.cls.__qualname__} objects",
                        "shapes": "fields whose types are not modelled"})
                # A dataclass compares its fields as a tuple (dataclasses documentation).
                same = ir.cmp("==", a.ref, b.ref)
                return ir.or_(same, ir.and_(*(self.equal(
                    self.read_field(heap.field_key(a.kind, f), a.ref),
                    self.read_field(heap.field_key(a.kind, f), b.ref), True) for f in fields)))
            if info.cls.__eq__ is not object.__eq__:
                return self.refuse("call", 0, {"callee": info.cls.__qualname__ + ".__eq__"})
            return ir.cmp("==", a.ref, b.ref)  # object's == is identity
        if isinstance(a, ir.Opt) or isinstance(b, ir.Opt):
            # None equals only None; otherwise compare the values.
            an, av = optional_parts(a)
            bn, bv = optional_parts(b)
            both_none = ir.and_(an, bn)
            if av is None or bv is None or not isinstance(av, ir.Term) \
                    or not isinstance(bv, ir.Term):
                return both_none if not isinstance(a, ir.Tup) and not isinstance(b, ir.Tup) \
                    else ir.FALSE
            return ir.or_(both_none, ir.and_(ir.not_(an), ir.not_(bn),
                                             self.equal(av, bv, item)))
        if isinstance(a, ir.Term) and isinstance(b, ir.Term):
            if (a.sort == ir.STR) != (b.sort == ir.STR):
                return ir.FALSE  # a str never equals a number
            if item and ir.FLOAT in (a.sort, b.sort) and any(
                    isinstance(x, ir.Op) and x.name == "nth" for x in (a, b)):
                # Two reads of one list item are one object (a NaN equals
                # itself there); identity of list items is not modelled.
                return self.refuse("operator", 0, {
                    "op": "==", "types": "floats read from a list, inside a tuple",
                    "hint": "item identity of lists is not modelled yet"})
            if item and ir.FLOAT in (a.sort, b.sort):
                return ir.or_(same_object(a, b), ir.cmp("==", a, b))
            return ir.cmp("==", a, b)
        if isinstance(a, ir.Tup) and isinstance(b, ir.Tup):
            if len(a.items) != len(b.items):
                return ir.FALSE
            return ir.and_(*(self.equal(x, y, True) for x, y in zip(a.items, b.items)))
        return ir.const(a is b)  # None == None; None is unequal to ints and tuples

    def lexicographic(self, op, a, b, node) -> ir.Term:
        # Sequence comparison (Language Reference, "Value comparisons"): the
        # first pair that is not equal decides, by `op` on that pair alone
        # (which may raise, e.g. None < 1); later items are never compared.
        # If one is a prefix of the other, the shorter is less.
        if not a or not b:
            la, lb = len(a), len(b)
            return ir.const({"<": la < lb, "<=": la <= lb, ">": la > lb,
                             ">=": la >= lb}[op])
        same = self.equal(a[0], b[0], True)
        rest, first = self.branches(same, lambda: self.lexicographic(op, a[1:], b[1:], node),
                                    lambda: self.compare(op, a[0], b[0], node))
        return ir.ite(same, rest, first)

    def call_isinstance(self, v: ir.Value, types_node: nodes.NodeNG, node) -> ir.Term:
        """``isinstance(v, T)`` for T among int, bool, float, str, tuple and
        type(None), or a tuple of them (Python's bool is a subclass of int)."""
        elts = types_node.elts if isinstance(types_node, nodes.Tuple) else [types_node]
        classes = []
        for e in elts:
            if (isinstance(e, nodes.Call) and self.scope.resolve(e.func) is type
                    and len(e.args) == 1 and isinstance(e.args[0], nodes.Const)
                    and e.args[0].value is None):
                classes.append(type(None))
                continue
            cls = self.scope.resolve(e)
            if isinstance(cls, type) and cls not in (int, bool, float, str, tuple, list,
                                                     type(None), object):
                heap.class_kind(cls)  # registered here too: no order dependence
            if not isinstance(cls, type) or (
                    cls not in (int, bool, float, str, tuple, list, type(None), object)
                    and not any(info.cls is cls for info in heap.KINDS.values())):
                return self.refuse("call", node.lineno, {
                    "callee": f"isinstance(..., {e.as_string()})"})
            classes.append(cls)
        none, value = optional_parts(v) if not isinstance(v, ir.Tup) else (ir.FALSE, v)
        tests = []
        for cls in classes:
            if cls is object:
                return ir.TRUE
            if cls is type(None):
                tests.append(none)
                continue
            if value is None:
                continue
            if isinstance(value, ir.Tup):
                tests.append(ir.const(cls is tuple))
                continue
            if isinstance(value, ir.Ref):
                if value.kind.startswith("list:"):
                    tests.append(ir.const(cls is list))
                else:
                    tests.append(ir.const(issubclass(heap.KINDS[value.kind].cls, cls)))
                continue
            if cls is list or cls not in (int, bool, float, str, tuple):
                tests.append(ir.FALSE)  # a number or str is no list or modelled class
                continue
            sort = value.sort
            if cls is bool and sort == ir.INT:
                # an int term may hold a bool merged into it (True if c else 1)
                tests.append(ir.and_(ir.not_(none), ir.is_bool(value)))
                continue
            hit = {int: sort in (ir.INT, ir.BOOL), bool: sort == ir.BOOL,
                   float: sort == ir.FLOAT, str: sort == ir.STR, tuple: False}[cls]
            tests.append(ir.and_(ir.not_(none), ir.const(hit)))
        return ir.or_(*tests)
