"""Python's ``str`` operations as z3 string formulas.

Python strings are sequences of Unicode code points; z3's strings are
sequences of characters ``0 .. 0x2FFFF``. Every function here takes and
returns z3 terms of one context and encodes the Python rule named in its
docstring (the ``str`` documentation and the Language Reference, "Slicings"),
in particular the index arithmetic that the solver's own operations do not
do: ``SubString`` and ``IndexOf`` neither count from the end for a negative
argument nor clamp an argument that lies past the end.

Which code points a string holds is read only through equality and order
(``==``, ``<``, ``in``, ``find``, ...), never numerically, so a pre-state
that needs code points above the solver's alphabet has a counterpart inside
it -- provided the constants leave room above them; ``translate`` refuses
string constants with code points from ``MAX_CONSTANT_CODE_POINT`` up.
"""

from __future__ import annotations

import ctypes

import z3

# The solver's alphabet ends at 0x2FFFF; constants stay below 0x20000, which
# leaves 65,536 code points above every constant for the inputs' own.
SOLVER_MAX_CODE_POINT = 0x2FFFF
MAX_CONSTANT_CODE_POINT = 0x1FFFF


def sort(ctx: z3.Context) -> z3.SeqSortRef:
    return z3.StringSort(ctx)


def const(text: str, ctx: z3.Context) -> z3.SeqRef:
    """A string constant, character for character.

    ``StringVal`` reads escapes such as ``\\u{41}`` inside its argument, so
    everything but printable ASCII (the backslash included) is written as one.
    """
    if any(ord(ch) > SOLVER_MAX_CODE_POINT for ch in text):
        raise ValueError("a code point above the solver's alphabet")
    encoded = "".join(ch if " " <= ch <= "~" and ch != "\\" else "\\u{%x}" % ord(ch)
                      for ch in text)
    return z3.StringVal(encoded, ctx)


def read(model: z3.ModelRef, term: z3.SeqRef) -> str:
    """The Python string a model gives ``term``, code point for code point
    (``as_string`` escapes some characters and cannot be trusted to invert)."""
    value = model.eval(term, model_completion=True)
    ctx = value.ctx
    n = z3.Z3_get_string_length(ctx.ref(), value.as_ast())
    buf = (ctypes.c_uint * n)()
    z3.Z3_get_string_contents(ctx.ref(), value.as_ast(), n, buf)
    return "".join(map(chr, buf))


def _int(v: int, ctx) -> z3.ArithRef:
    return z3.IntVal(v, ctx)


def _bound(k: z3.ArithRef, n: z3.ArithRef, ctx) -> z3.ArithRef:
    """A slice bound as Python normalises it: a negative bound counts from the
    end, and the result is clamped to ``0 .. n``."""
    zero = _int(0, ctx)
    from_end = n + k
    return z3.If(k < zero, z3.If(from_end < zero, zero, from_end), z3.If(k > n, n, k))


def length(s: z3.SeqRef, ctx) -> z3.ArithRef:
    return z3.Length(s)


def index_ok(s: z3.SeqRef, i: z3.ArithRef, ctx) -> z3.BoolRef:
    """``s[i]`` does not raise IndexError: ``-len(s) <= i < len(s)``."""
    n = z3.Length(s)
    return z3.And(-n <= i, i < n)


def getitem(s: z3.SeqRef, i: z3.ArithRef, ctx) -> z3.SeqRef:
    """``s[i]`` where ``index_ok`` holds: a negative index counts from the end.
    ``at`` is used, not ``s[i]``, which z3 leaves unspecified out of range."""
    return s.at(z3.If(i < _int(0, ctx), z3.Length(s) + i, i))


def slice_(s: z3.SeqRef, lower, upper, ctx) -> z3.SeqRef:
    """``s[lower:upper]`` (step 1); ``None`` for an omitted bound."""
    n = z3.Length(s)
    a = _int(0, ctx) if lower is None else _bound(lower, n, ctx)
    b = n if upper is None else _bound(upper, n, ctx)
    return z3.SubString(s, a, z3.If(b > a, b - a, _int(0, ctx)))


def _window(s, start, end, ctx):
    """The search window of ``find``-like methods: ``start`` and ``end`` are
    normalised like slice bounds, except that ``start`` is not clamped to the
    length (``'abc'.find('', 4) == -1`` while ``'abc'.find('', 3) == 3``)."""
    n = z3.Length(s)
    zero = _int(0, ctx)
    if start is None:
        a = zero
    else:
        a = z3.If(start < zero, z3.If(n + start < zero, zero, n + start), start)
    b = n if end is None else _bound(end, n, ctx)
    return a, b


def find(s, sub, start, end, ctx, fresh: z3.ArithRef, last: bool = False):
    """``s.find(sub, start, end)`` (or ``rfind`` with ``last``): the lowest
    (highest) index of ``sub`` inside the window, or -1. CPython answers -1
    as soon as the window is shorter than ``sub``, empty ``sub`` included.

    Returns the value and its definition: ``fresh`` is an integer constant
    that the definition pins to the first (last) occurrence in the window.
    The solver's own ``IndexOf`` leaves simple facts undecided for minutes
    (``s.startswith(t)`` implies ``s.find(t) == 0``); this first-occurrence
    definition decides them in milliseconds. Being a definition (one value of
    ``fresh`` for every pre-state), it may be added to every query.
    """
    a, b = _window(s, start, end, ctx)
    window = z3.SubString(s, a, b - a)
    n, m = z3.Length(window), z3.Length(sub)
    zero, one, minus_one = _int(0, ctx), _int(1, ctx), _int(-1, ctx)
    # The empty string occurs everywhere: first at 0, last at the end. (The
    # general case below would be unsatisfiable for it, since "" is in "".)
    # A definition must be satisfiable for every pre-state, or it would make
    # every query unsatisfiable -- tests/test_strmath.py checks that it is.
    if last:  # no occurrence starts after it
        none_other = z3.Not(z3.Contains(z3.SubString(window, fresh + one, n), sub))
        empty = fresh == n
    else:  # no occurrence ends before it ends
        none_other = z3.Not(z3.Contains(z3.SubString(window, zero, fresh + m - one), sub))
        empty = fresh == zero
    definition = z3.If(m == zero, empty, z3.If(
        z3.Contains(window, sub),
        z3.And(fresh >= zero, fresh + m <= n, z3.SubString(window, fresh, m) == sub,
               none_other),
        fresh == minus_one))
    value = z3.If(b - a < m, minus_one, z3.If(fresh < zero, minus_one, fresh + a))
    return value, definition


def contains(hay: z3.SeqRef, needle: z3.SeqRef, ctx) -> z3.BoolRef:
    """``needle in hay``; the empty string is in every string."""
    return z3.Contains(hay, needle)


def startswith(s, prefix, ctx) -> z3.BoolRef:
    return z3.PrefixOf(prefix, s)


def endswith(s, suffix, ctx) -> z3.BoolRef:
    return z3.SuffixOf(suffix, s)


def repeat(s: z3.SeqRef, n: z3.ArithRef, ctx) -> z3.SeqRef:
    """``s * n``: empty for ``n <= 0``."""
    return z3.SeqPower(s, n)


def replace(s, old, new, ctx) -> z3.SeqRef:
    """``s.replace(old, new)`` for non-empty ``old``: every occurrence, left to
    right, without overlaps. (Python inserts ``new`` around every character
    when ``old`` is empty; the translator keeps that case apart.)"""
    return z3.SeqRef(z3.Z3_mk_seq_replace_all(ctx.ref(), s.as_ast(), old.as_ast(),
                                              new.as_ast()), ctx)


def of_int(n: z3.ArithRef, ctx) -> z3.SeqRef:
    """``str(n)`` for an int: the solver's conversion covers ``n >= 0`` only
    (it gives the empty string below), so the sign is written separately."""
    zero = _int(0, ctx)
    return z3.If(n >= zero, z3.IntToStr(n),
                 z3.Concat(z3.StringVal("-", ctx), z3.IntToStr(-n)))


def compare(op: str, a: z3.SeqRef, b: z3.SeqRef) -> z3.BoolRef:
    """Python orders strings lexicographically by code point, as z3 does."""
    return {"<": lambda: a < b, "<=": lambda: a <= b, ">": lambda: b < a,
            ">=": lambda: b <= a, "==": lambda: a == b, "!=": lambda: a != b}[op]()
