"""Strings in the translator: constants, ``+`` and ``*``, indexing and slicing.

A mixin of ``translate.Translator``; the solver side of each operation is in
``strmath``. The Python rules are the Language Reference's ("Subscriptions",
"Slicings") and the str documentation's ("Common Sequence Operations").
"""

from __future__ import annotations

from astroid import nodes

from refines import ir, strmath
from refines.errors import Untranslatable

str_len = ir.str_len


def str_const(text: str, line: int) -> ir.Term:
    """A string constant; code points from the top of the solver's alphabet
    up are refused, since the model could not tell inputs apart from them."""
    if any(ord(ch) > strmath.MAX_CONSTANT_CODE_POINT for ch in text):
        raise Untranslatable("value", line, {
            "construct": repr(text), "type": "str with code points above U+1FFFF"})
    return ir.const(text)


class Strings:
    """Translator methods for str values."""

    def str_binop(self, op: str, left: ir.Term, right: ir.Term, node) -> ir.Term:
        if op == "+" and left.sort == right.sort:
            return ir.arith("+", left, right)
        if op == "*" and ir.FLOAT not in (left.sort, right.sort) and left.sort != right.sort:
            s, n = (left, right) if left.sort == ir.STR else (right, left)
            n = ir.as_int(n)
            # CPython takes the count as a C ssize_t: |n| >= 2**63 raises
            # OverflowError even for '' or a negative n, and so does a result
            # longer than 2**63 - 1 (64-bit builds). Memory is taken to be
            # enough (MemoryError is not modelled, as for huge ints: docs/cautions).
            big = 2 ** 63
            self.raise_when(ir.or_(ir.cmp(">=", n, ir.const(big)), ir.cmp("<", n, ir.const(-big))),
                            OverflowError, node.lineno,
                            "cannot fit 'int' into an index-sized integer")
            total = ir.arith("*", str_len(s), n)
            self.raise_when(ir.cmp(">", total, ir.const(big - 1)), OverflowError, node.lineno,
                            "repeated string is too long")
            if ir.is_false(self.live):
                return ir.const("")
            if isinstance(s, ir.Const) and isinstance(n, ir.Const):
                if len(s.value) * max(n.value, 0) > 10_000:
                    return self.refuse("value", node.lineno, {
                        "construct": node.as_string(), "type": "str longer than 10,000"})
                return ir.const(s.value * max(int(n.value), 0))
            return ir.op("repeat", s, n, sort=ir.STR)
        if op == "%" and left.sort == ir.STR:
            return self.refuse("operator", node.lineno, {
                "op": op, "types": "str", "hint": "printf-style formatting is not modelled"})
        kinds = " and ".join(f"'{'int' if t.sort == ir.BOOL else t.sort}'" for t in (left, right))
        self.raise_when(ir.TRUE, TypeError, node.lineno,
                        f"unsupported operand types for {op}: {kinds}")
        return ir.const("")

    def str_subscript(self, s: ir.Term, node: nodes.Subscript) -> ir.Value:
        # Language Reference, "Subscriptions" and "Slicings"; str documentation,
        # "Common Sequence Operations" (notes 3 and 4 on negative and clamped bounds).
        if isinstance(node.slice, nodes.Slice):
            value = None
            for cond, (lower, upper, step) in self.slice_cases(node):
                part = self.str_slice(s, lower, upper, step, node, cond)
                value = part if value is None else ir.ite(cond, part, value)
            return ir.const("") if value is None else value  # None: every case raised
        index = self.index_value(node.slice, node)
        if not (isinstance(index, ir.Term) and index.sort in (ir.INT, ir.BOOL)):
            self.raise_when(ir.TRUE, TypeError, node.lineno, "string indices must be integers")
            return ir.const("")
        index = ir.as_int(index)
        n = str_len(s)
        self.raise_when(ir.not_(ir.index_ok(index, n)),
                        IndexError, node.lineno, "string index out of range")
        if isinstance(s, ir.Const) and isinstance(index, ir.Const):
            in_range = -len(s.value) <= index.value < len(s.value)
            return ir.const(s.value[index.value] if in_range else "")
        return ir.op("getitem", s, index, sort=ir.STR)

    def str_slice(self, s: ir.Term, lower, upper, step, node,
                  cond: ir.Term = ir.TRUE) -> ir.Term:
        """``s[lower:upper:step]`` in one case of ``slice_cases``."""
        if step is not None:
            if not isinstance(step, ir.Const):
                return self.refuse("expression", node.lineno,
                                   {"construct": "str slice with a variable step"})
            if step.value == 0:
                self.raise_when(cond, ValueError, node.lineno, "slice step cannot be zero")
                return ir.const("")
            if step.value != 1:
                if isinstance(s, ir.Const) and all(
                        isinstance(b, (ir.Const, type(None))) for b in (lower, upper)):
                    return ir.const(s.value[slice(
                        *[None if b is None else b.value for b in (lower, upper, step)])])
                return self.refuse("expression", node.lineno,
                                   {"construct": "str slice with a step other than 1"})
        if isinstance(s, ir.Const) and all(isinstance(b, (ir.Const, type(None)))
                                           for b in (lower, upper)):
            return ir.const(s.value[None if lower is None else lower.value:
                                    None if upper is None else upper.value])
        if lower is None and upper is None:
            return s
        if lower is None:
            return ir.op("slice_to", s, upper, sort=ir.STR)
        if upper is None:
            return ir.op("slice_from", s, lower, sort=ir.STR)
        return ir.op("slice", s, lower, upper, sort=ir.STR)
