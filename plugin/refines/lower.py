"""Lowering terms to z3 formulas, with Python's semantics.

Every obligation gets its own ``z3.Context`` (see ``prove``): results then do
not depend on what was solved before in the same process. All z3 objects
here are built in that context explicitly.
"""

from __future__ import annotations

import sys
from typing import Dict

import z3

from refines import fpmath, ir, strmath

# How each ir.Op lowers: a function of the context and the lowered arguments.
OPS = {
    "float": lambda ctx, a: fpmath.from_int(a, ctx)[0],
    "float_overflows": lambda ctx, a: fpmath.from_int(a, ctx)[1],
    "int_truediv": lambda ctx, p, q: fpmath.int_true_div(p, q, ctx)[0],
    "int_truediv_overflows": lambda ctx, p, q: fpmath.int_true_div(p, q, ctx)[1],
    "fabs": lambda ctx, a: fpmath.fabs(a, ctx),
    "sqrt": lambda ctx, a: fpmath.sqrt(a, ctx)[0],
    "copysign": lambda ctx, a, b: fpmath.copysign(a, b, ctx),
    "isnan": lambda ctx, a: fpmath.isnan(a, ctx),
    "isinf": lambda ctx, a: fpmath.isinf(a, ctx),
    "isfinite": lambda ctx, a: fpmath.isfinite(a, ctx),
    "trunc": lambda ctx, a: fpmath.trunc_to_int(a, ctx)[0],
    "floor": lambda ctx, a: fpmath.floor_to_int(a, ctx)[0],
    "ceil": lambda ctx, a: fpmath.ceil_to_int(a, ctx)[0],
    # str
    "len": lambda ctx, s: strmath.length(s, ctx),
    "getitem": lambda ctx, s, i: strmath.getitem(s, i, ctx),
    "slice": lambda ctx, s, a, b: strmath.slice_(s, a, b, ctx),
    "slice_from": lambda ctx, s, a: strmath.slice_(s, a, None, ctx),
    "slice_to": lambda ctx, s, b: strmath.slice_(s, None, b, ctx),
    "contains": lambda ctx, needle, hay: strmath.contains(hay, needle, ctx),
    "startswith": lambda ctx, s, p: strmath.startswith(s, p, ctx),
    "endswith": lambda ctx, s, p: strmath.endswith(s, p, ctx),
    "repeat": lambda ctx, s, n: strmath.repeat(s, n, ctx),
    "replace": lambda ctx, s, old, new: strmath.replace(s, old, new, ctx),
    "str_of_int": lambda ctx, n: strmath.of_int(n, ctx),
    # lists and the heap
    "nth": lambda ctx, s, i: s[z3.If(i < z3.IntVal(0, ctx), z3.Length(s) + i, i)],
    "seq_contains": lambda ctx, x, s: z3.Contains(s, z3.Unit(x)),
    "seq_unit": lambda ctx, x: z3.Unit(x),
    "seq_update": lambda ctx, s, i, x: _seq_update(s, i, x, ctx),
    "select": lambda ctx, a, r: z3.Select(a, r),
    "store": lambda ctx, a, r, v: z3.Store(a, r, v),
}


def int_val(value: int, ctx: z3.Context) -> z3.IntNumRef:
    """An int constant of any size: z3 reads it through str(), which CPython
    3.11+ refuses past sys.get_int_max_str_digits() digits."""
    limit = getattr(sys, "get_int_max_str_digits", None)
    if limit is None or not limit() or abs(value) < 10 ** 4000:
        return z3.IntVal(value, ctx)
    saved = limit()
    sys.set_int_max_str_digits(0)
    try:
        return z3.IntVal(value, ctx)
    finally:
        sys.set_int_max_str_digits(saved)


def read_int(z: z3.IntNumRef) -> int:
    """The Python int of a z3 int value of any size (see ``int_val``)."""
    limit = getattr(sys, "get_int_max_str_digits", None)
    if limit is None or not limit():
        return z.as_long()
    saved = limit()
    sys.set_int_max_str_digits(0)
    try:
        return z.as_long()
    finally:
        sys.set_int_max_str_digits(saved)


def _seq_update(s, i, x, ctx):
    """``s`` with item ``i`` (already normalised to 0 <= i < len(s)) replaced."""
    one = z3.IntVal(1, ctx)
    return z3.Concat(z3.SubSeq(s, z3.IntVal(0, ctx), i), z3.Unit(x),
                     z3.SubSeq(s, i + one, z3.Length(s) - i - one))


def z3_sort(sort: str, ctx: z3.Context) -> z3.SortRef:
    if sort in (ir.INT, ir.REF):
        return z3.IntSort(ctx)
    if sort == ir.BOOL:
        return z3.BoolSort(ctx)
    if sort == ir.FLOAT:
        return fpmath.sort(ctx)
    if sort == ir.STR:
        return z3.StringSort(ctx)
    if sort.startswith("seq:"):
        return z3.SeqSort(z3_sort(sort[4:], ctx))
    if sort.startswith("arr:"):
        return z3.ArraySort(z3.IntSort(ctx), z3_sort(sort[4:], ctx))
    raise TypeError(f"no solver sort for {sort!r}")


# Ops lowered to a fresh constant plus a definition of it (see ``definitions``).
_DEFINED = {"find", "rfind"}
_FLOAT_ARITH = {"+": fpmath.add, "-": fpmath.sub, "*": fpmath.mul, "/": fpmath.div,
                "//": fpmath.floordiv, "%": fpmath.mod}


class Lowering:
    """Translate terms into one z3 context, sharing common sub-terms."""

    def __init__(self, ctx: z3.Context) -> None:
        self.ctx = ctx
        self._memo: Dict[int, z3.ExprRef] = {}
        self._keep: list = []  # keeps memoised terms alive so ids stay unique
        self.vars: Dict[str, z3.ExprRef] = {}
        # Definitions of the fresh constants some ops lower to. Each pins its
        # constant to one value for every pre-state, so adding all of them to
        # every query changes no answer; a query must include them.
        self.definitions: list = []

    def var(self, name: str, sort: str) -> z3.ExprRef:
        key = f"{name}:{sort}"
        if key not in self.vars:
            self.vars[key] = z3.Const(name, z3_sort(sort, self.ctx))
            if sort == ir.REF and not name.startswith(ir.OPAQUE_PREFIX):
                # Parameters' objects are numbered from 0; the objects a call
                # makes are the negative numbers (ir.fresh_ref). An opaque
                # reference may be either: no definition.
                self.definitions.append(self.vars[key] >= z3.IntVal(0, self.ctx))
        return self.vars[key]

    def __call__(self, t: ir.Term) -> z3.ExprRef:
        # Iterative post-order walk: terms from long bodies are deep DAGs.
        stack = [(t, False)]
        memo = self._memo
        while stack:
            node, ready = stack.pop()
            if id(node) in memo:
                continue
            kids = ir.children(node)
            if ready or not kids:
                memo[id(node)] = self._node(node)
                self._keep.append(node)
            else:
                stack.append((node, True))
                stack.extend((k, False) for k in kids if id(k) not in memo)
        return memo[id(t)]

    def _node(self, t: ir.Term) -> z3.ExprRef:
        m = self._memo
        ctx = self.ctx
        if isinstance(t, ir.Var):
            return self.var(t.name, t.sort)
        if isinstance(t, ir.Const):
            if t.sort == ir.BOOL:
                return z3.BoolVal(bool(t.value), ctx)
            if t.sort == ir.FLOAT:
                return fpmath.const(float(t.value), ctx)
            if t.sort == ir.STR:
                return strmath.const(t.value, ctx)
            if t.sort == ir.REF:
                return z3.IntVal(int(t.value), ctx)
            if t.sort.startswith("seq:"):
                return z3.Empty(z3_sort(t.sort, ctx))  # the only list constant
            return int_val(int(t.value), ctx)
        if isinstance(t, ir.Op) and t.name in _DEFINED:
            args = [m[id(a)] for a in t.args]
            s, sub, window = args[0], args[1], args[2:] + [None] * (4 - len(args))
            fresh = z3.Int(f"{t.name}!{len(self.definitions)}", ctx)
            value, definition = strmath.find(s, sub, window[0], window[1], ctx, fresh,
                                             last=t.name == "rfind")
            self.definitions.append(definition)
            return value
        if isinstance(t, ir.Op):
            return OPS[t.name](ctx, *[m[id(a)] for a in t.args])
        if isinstance(t, ir.Arith) and t.sort == ir.FLOAT:
            return _FLOAT_ARITH[t.op](m[id(t.left)], m[id(t.right)], ctx)
        if isinstance(t, ir.Neg) and t.sort == ir.FLOAT:
            return fpmath.neg(m[id(t.arg)], ctx)
        if isinstance(t, ir.Arith) and (t.sort == ir.STR or t.sort.startswith("seq:")):
            return z3.Concat(m[id(t.left)], m[id(t.right)])
        if isinstance(t, ir.Cmp) and (t.left.sort.startswith("seq:") or t.left.sort == ir.REF):
            a, b = m[id(t.left)], m[id(t.right)]
            return a == b if t.op == "==" else a != b
        if isinstance(t, ir.Cmp) and t.left.sort == ir.STR:
            return strmath.compare(t.op, m[id(t.left)], m[id(t.right)])
        if isinstance(t, ir.Cmp) and ir.FLOAT in (t.left.sort, t.right.sort):
            a, b = m[id(t.left)], m[id(t.right)]
            if t.left.sort == ir.FLOAT and t.right.sort == ir.FLOAT:
                return fpmath.compare(t.op, a, b)
            if t.left.sort == ir.FLOAT:  # float <op> int is int <flipped op> float
                return fpmath.compare_int_float(ir.FLIPPED[t.op], b, a, ctx)
            return fpmath.compare_int_float(t.op, a, b, ctx)
        if isinstance(t, ir.Arith):
            a, b = m[id(t.left)], m[id(t.right)]
            if t.op == "+":
                return a + b
            if t.op == "-":
                return a - b
            if t.op == "*":
                return a * b
            return floor_divmod(a, b, ctx)[0 if t.op == "//" else 1]
        if isinstance(t, ir.Neg):
            return -m[id(t.arg)]
        if isinstance(t, ir.ToInt):
            return z3.If(m[id(t.arg)], z3.IntVal(1, ctx), z3.IntVal(0, ctx))
        if isinstance(t, ir.Cmp):
            a, b = m[id(t.left)], m[id(t.right)]
            return {"<": lambda: a < b, "<=": lambda: a <= b, ">": lambda: a > b,
                    ">=": lambda: a >= b, "==": lambda: a == b,
                    "!=": lambda: a != b}[t.op]()
        if isinstance(t, ir.Not):
            return z3.Not(m[id(t.arg)])
        if isinstance(t, ir.And):
            return z3.And([m[id(a)] for a in t.args])
        if isinstance(t, ir.Or):
            return z3.Or([m[id(a)] for a in t.args])
        if isinstance(t, ir.Ite):
            return z3.If(m[id(t.cond)], m[id(t.then)], m[id(t.orelse)])
        raise TypeError(f"cannot lower {t!r}")


def floor_divmod(a: z3.ArithRef, b: z3.ArithRef, ctx: z3.Context):
    """Python's ``a // b`` and ``a % b`` for b != 0.

    z3's integer ``/`` and ``%`` are Euclidean: the remainder is never
    negative. Python rounds the quotient toward minus infinity, so the
    remainder takes the divisor's sign (Language Reference, "Binary arithmetic
    operations"). The two agree when b > 0 or the division is exact; for
    b < 0 with a non-zero Euclidean remainder r, Python's pair is (q - 1, r + b).
    Both results are built from the same native pair: building them from
    different but equivalent forms leaves the solver unable to relate them.
    The value at b == 0 is irrelevant: division by zero is a raising outcome.
    """
    q = a / b
    r = a % b
    fix = z3.And(b < 0, r != 0)
    one = z3.IntVal(1, ctx)
    return z3.If(fix, q - one, q), z3.If(fix, r + b, r)
