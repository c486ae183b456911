"""z3 terms for CPython's float semantics (IEEE 754 binary64, round-half-even).

Pure functions: each builds a z3 expression and nothing else. Every object is
made in the context ``ctx`` given -- several z3 float helpers silently fall
back to the default context, and mixing contexts can crash the interpreter --
so ``ctx=`` is passed to every helper that takes it.

No exception is raised here. Where CPython raises, the function returns the
value term together with the z3 condition under which CPython raises; the
caller turns those into outcomes. The value term is unspecified where its
raising condition holds.

Sources named in the comments:

* IEEE 754-2019 (the standard; z3's floating-point theory follows it);
* Python Language Reference 6.7 "Binary arithmetic operations" and 6.10
  "Comparisons", and the ``math`` module documentation;
* CPython's ``Objects/floatobject.c`` (``float_richcompare``, ``float_rem``,
  ``_float_div_mod``) and ``Objects/longobject.c`` (``long_true_divide``,
  ``PyLong_AsDouble``), recalled from memory and checked against CPython
  itself by ``tests/test_fpmath.py``.

Exact everywhere except one place: z3 has a single NaN without a sign bit, so
``copysign(a, b)`` cannot know the sign of a NaN ``b`` (see its docstring).

Solver cost, measured with z3 on this machine (exactness is never traded for
it here): ``fp.rem``, which ``%`` and ``//`` need, bit-blasts to a very large
circuit -- with a symbolic divisor, ``|x % y| < |y|`` was undecided after
120 s, while ``0 <= x % 2.0 <= 2.0`` took 0.4 s. Terms bridging ints and floats
are slow once both sides are symbolic: ``int(float(n)) == n`` for
``|n| <= 1000`` was undecided after 60 s (also with a bit-vector bridge), while
``0 < p < q  ->  0.0 <= p / q <= 1.0`` took 9 s and ``int(x) >= 0 <-> x > -1.0``
0.03 s.
"""

from __future__ import annotations

import math
import struct
from typing import Tuple

import z3

__all__ = [
    "sort", "rne", "const", "read", "compare", "compare_int_float", "from_int",
    "int_true_div", "add", "sub", "mul", "div", "floordiv", "mod", "neg", "fabs",
    "py_min", "py_max", "sqrt", "copysign", "isnan", "isinf", "isfinite",
    "trunc_to_int", "floor_to_int", "ceil_to_int", "truthy",
]

# The smallest magnitude whose round-half-even binary64 value is infinite:
# halfway between DBL_MAX = (2**53 - 1) * 2**971 and 2**1024, and the tie goes to
# the even neighbour 2**1024 (IEEE 754-2019 §4.3.1, §7.4). CPython raises
# OverflowError exactly when a correctly rounded int conversion or int / int
# reaches it (PyLong_AsDouble, long_true_divide).
OVERFLOW_THRESHOLD = 2**1024 - 2**970

_OPS = ("<", "<=", ">", ">=", "==", "!=")


# ---------------------------------------------------------------- sorts, values


def sort(ctx: z3.Context) -> z3.FPSortRef:
    """Float64 (IEEE 754 binary64, CPython's ``float``) in ``ctx``."""
    return z3.Float64(ctx=ctx)


def rne(ctx: z3.Context) -> z3.FPRMRef:
    """Round to nearest, ties to even: the rounding of every CPython float op."""
    return z3.RNE(ctx=ctx)


def const(value: float, ctx: z3.Context) -> z3.FPRef:
    """The exact binary64 value of ``value`` (nan, ±inf, -0.0, subnormals).

    Every NaN becomes z3's single NaN (the sign and payload are lost).
    """
    value = float(value)
    s = sort(ctx)
    if math.isnan(value):
        return z3.fpNaN(s)
    # FPVal receives a float as its exact ratio "num/den" (or ±0.0 / ±oo).
    return z3.FPVal(value, None, s, ctx=ctx)


def read(model: z3.ModelRef, term: z3.FPRef) -> float:
    """The Python float a model gives ``term``, exactly (via the bit pattern).

    NaN is read as ``float('nan')``: z3 has one NaN. Everything else goes
    through the IEEE bit pattern, which keeps -0.0, infinities and subnormals
    (printing or ``py_value()`` do not).
    """
    value = model.eval(term, model_completion=True)
    ctx = value.ctx
    if z3.is_true(model.eval(z3.fpIsNaN(value, ctx=ctx), model_completion=True)):
        return math.nan
    bits = z3.simplify(z3.fpToIEEEBV(value, ctx=ctx))
    return struct.unpack("<d", struct.pack("<Q", bits.as_long()))[0]


# ---------------------------------------------------------------- comparisons


def compare(op: str, a: z3.FPRef, b: z3.FPRef) -> z3.BoolRef:
    """``a <op> b`` for two floats, with Python's meaning.

    IEEE 754-2019 §5.11: every ordered comparison with NaN is false, NaN is
    unequal to everything (so ``!=`` is its negation, true with NaN), and
    -0.0 == 0.0. z3's Python ``==`` on float terms is structural identity, so
    only the fp predicates are used.
    """
    ctx = a.ctx
    if op == "<":
        return z3.fpLT(a, b, ctx=ctx)
    if op == "<=":
        return z3.fpLEQ(a, b, ctx=ctx)
    if op == ">":
        return z3.fpGT(a, b, ctx=ctx)
    if op == ">=":
        return z3.fpGEQ(a, b, ctx=ctx)
    if op == "==":
        return z3.fpEQ(a, b, ctx=ctx)
    if op == "!=":
        return z3.Not(z3.fpEQ(a, b, ctx=ctx), ctx=ctx)
    raise ValueError(f"unknown comparison {op!r}; expected one of {_OPS}")


def compare_int_float(op: str, n: z3.ArithRef, x: z3.FPRef,
                      ctx: z3.Context) -> z3.BoolRef:
    """``n <op> x`` for an int ``n`` and a float ``x``, exactly as CPython.

    CPython's ``float_richcompare`` compares the mathematical values, never
    ``float(n)`` (so ``2**53 + 1 != float(2**53)``, and a huge int compares
    without OverflowError). NaN makes every comparison false except ``!=``;
    +inf is above every int and -inf below. For finite ``x`` the value
    ``fp.to_real(x)`` is exact, so the comparison is done in the reals.
    For ``x <op> n`` pass the mirrored operator (``x < n`` is ``n > x``).

    Cost: the int/float bridges (``fp.to_real`` here and in the ``*_to_int``
    functions, ``fp.to_fp`` of a real in ``from_int`` and ``int_true_div``)
    are exact but hard for z3 once both sides are symbolic; see the module
    docstring.
    """
    n = _int(n, ctx)
    nan = z3.fpIsNaN(x, ctx=ctx)
    inf = z3.fpIsInf(x, ctx=ctx)
    pos = z3.fpIsPositive(x, ctx=ctx)
    t, f = z3.BoolVal(True, ctx=ctx), z3.BoolVal(False, ctx=ctx)
    r, v = z3.ToReal(n), z3.fpToReal(x, ctx=ctx)
    table = {
        # op: (result with NaN, with +inf, with -inf, finite)
        "<": (f, t, f, r < v),
        "<=": (f, t, f, r <= v),
        ">": (f, f, t, r > v),
        ">=": (f, f, t, r >= v),
        "==": (f, f, f, r == v),
        "!=": (t, t, t, r != v),
    }
    if op not in table:
        raise ValueError(f"unknown comparison {op!r}; expected one of {_OPS}")
    with_nan, with_pinf, with_ninf, finite = table[op]
    return z3.If(nan, with_nan,
                 z3.If(inf, z3.If(pos, with_pinf, with_ninf), finite))


# ---------------------------------------------------------------- from ints


def from_int(n: z3.ArithRef, ctx: z3.Context) -> Tuple[z3.FPRef, z3.BoolRef]:
    """``float(n)``: the value and the OverflowError condition.

    CPython (``PyLong_AsDouble``) rounds the exact integer once, half to even,
    and raises OverflowError ("int too large to convert to float") when the
    rounded value exceeds DBL_MAX, i.e. when ``|n| >= 2**1024 - 2**970``.
    """
    n = _int(n, ctx)
    value = z3.fpToFP(rne(ctx), z3.ToReal(n), sort(ctx), ctx=ctx)
    return value, _abs_int(n, ctx) >= _int(OVERFLOW_THRESHOLD, ctx)


def int_true_div(p: z3.ArithRef, q: z3.ArithRef,
                 ctx: z3.Context) -> Tuple[z3.FPRef, z3.BoolRef]:
    """``p / q`` for ints (``q != 0`` assumed): the value and OverflowError.

    CPython's ``long_true_divide`` returns the correctly rounded (half to even)
    value of the exact rational, including in the subnormal range -- one
    rounding, not ``float(p) / float(q)``. It raises OverflowError ("integer
    division result too large for a float") when that rounded value would be
    infinite: ``|p| >= (2**1024 - 2**970) * |q|``. A zero result carries the
    sign of the true quotient, so ``0 / -5 == -0.0`` (IEEE 754-2019 §6.3
    for the quotient ``0.0 / -5.0`` that CPython's fast path computes);
    ``fp.to_fp`` of the real 0 alone would give +0.0.
    """
    p, q = _int(p, ctx), _int(q, ctx)
    s = sort(ctx)
    exact = z3.ToReal(p) / z3.ToReal(q)
    rounded = z3.fpToFP(rne(ctx), exact, s, ctx=ctx)
    zero = z3.IntVal(0, ctx=ctx)
    value = z3.If(p == zero,
                  z3.If(q < zero, z3.fpMinusZero(s), z3.fpPlusZero(s)),
                  rounded)
    overflow = _abs_int(p, ctx) >= OVERFLOW_THRESHOLD * _abs_int(q, ctx)
    return value, overflow


# ---------------------------------------------------------------- arithmetic


def add(a: z3.FPRef, b: z3.FPRef, ctx: z3.Context) -> z3.FPRef:
    """``a + b`` (IEEE 754-2019 §5.4.1, round half to even; overflow gives inf)."""
    return z3.fpAdd(rne(ctx), a, b, ctx=ctx)


def sub(a: z3.FPRef, b: z3.FPRef, ctx: z3.Context) -> z3.FPRef:
    """``a - b`` (IEEE 754-2019 §5.4.1)."""
    return z3.fpSub(rne(ctx), a, b, ctx=ctx)


def mul(a: z3.FPRef, b: z3.FPRef, ctx: z3.Context) -> z3.FPRef:
    """``a * b`` (IEEE 754-2019 §5.4.1)."""
    return z3.fpMul(rne(ctx), a, b, ctx=ctx)


def div(a: z3.FPRef, b: z3.FPRef, ctx: z3.Context) -> z3.FPRef:
    """``a / b`` for ``b != ±0`` (IEEE 754-2019 §5.4.1).

    Python raises ZeroDivisionError for any float divided by ±0.0 (even
    ``nan / 0.0``); the caller guards that with ``compare('==', b, 0.0)``.
    """
    return z3.fpDiv(rne(ctx), a, b, ctx=ctx)


def _fmod(x: z3.FPRef, y: z3.FPRef, ctx: z3.Context) -> z3.FPRef:
    """C99 ``fmod(x, y)`` (7.12.10.1): ``x - trunc(x / y) * y``, exact.

    Built from IEEE 754-2019 §5.3.1 ``remainder`` (``fp.rem``: the quotient is
    rounded to nearest, not truncated), ``r = x - n*y`` with ``|r| <= |y|/2``.
    When ``r`` is non-zero with the sign of ``x`` it is the fmod. When the
    signs differ, fmod is ``r + copysign(|y|, x)`` mathematically, and that
    value is representable (fmod is a multiple of the finer of the quanta of
    ``x`` and ``y`` below ``|y|``), so the rounded addition returns it
    unchanged. A zero result takes the sign of ``x`` (C99). The special cases
    coincide: NaN operand, infinite ``x`` or zero ``y`` give NaN, and finite
    ``x`` with infinite ``y`` gives ``x``. Checked by exhaustion in small
    formats against the definition (tests/test_fpmath.py).
    """
    s = x.sort()
    r = z3.fpRem(x, y, ctx=ctx)
    x_neg = z3.fpIsNegative(x, ctx=ctx)
    ay = z3.fpAbs(y, ctx=ctx)
    toward_x = z3.If(x_neg, z3.fpNeg(ay, ctx=ctx), ay)
    return z3.If(
        z3.fpIsZero(r, ctx=ctx),
        z3.If(x_neg, z3.fpMinusZero(s), z3.fpPlusZero(s)),
        z3.If(z3.fpIsNegative(r, ctx=ctx) == x_neg, r,
              z3.fpAdd(rne(ctx), r, toward_x, ctx=ctx)))


def _signs_differ(w: z3.FPRef, m: z3.FPRef, ctx: z3.Context) -> z3.BoolRef:
    # The C test ``(wx < 0) != (mod < 0)``: ordered comparisons, false for NaN.
    zero = z3.fpPlusZero(w.sort())
    return z3.fpLT(w, zero, ctx=ctx) != z3.fpLT(m, zero, ctx=ctx)


def _copysign_zero(x: z3.FPRef, ctx: z3.Context) -> z3.FPRef:
    # ``copysign(0.0, x)`` for a non-NaN x.
    s = x.sort()
    return z3.If(z3.fpIsNegative(x, ctx=ctx), z3.fpMinusZero(s), z3.fpPlusZero(s))


def mod(a: z3.FPRef, b: z3.FPRef, ctx: z3.Context) -> z3.FPRef:
    """``a % b`` for floats, ``b != ±0`` (the caller guards ZeroDivisionError).

    CPython ``float_rem`` (Objects/floatobject.c, recalled from memory)::

        mod = fmod(vx, wx)
        if mod:                      # NaN counts as true
            if (wx < 0) != (mod < 0):
                mod += wx            # a rounded addition: -1e-300 % 1.0 == 1.0
        else:
            mod = copysign(0.0, wx)

    so the result takes the divisor's sign (Language Reference 6.7), and e.g.
    ``5.0 % inf == 5.0``, ``-5.0 % inf == inf``, ``inf % 5.0`` is NaN.
    """
    m = _fmod(a, b, ctx)
    fixed = z3.If(_signs_differ(b, m, ctx), add(m, b, ctx), m)
    return z3.If(z3.fpIsZero(m, ctx=ctx), _copysign_zero(b, ctx), fixed)


def floordiv(a: z3.FPRef, b: z3.FPRef, ctx: z3.Context) -> z3.FPRef:
    """``a // b`` for floats, ``b != ±0`` (the caller guards ZeroDivisionError).

    CPython ``_float_div_mod`` (Objects/floatobject.c, recalled from memory;
    ``float_floor_div`` returns its quotient)::

        mod = fmod(vx, wx)
        div = (vx - mod) / wx        # rounded subtraction and division
        if mod:
            if (wx < 0) != (mod < 0):
                mod += wx
                div -= 1.0
        if div:                      # NaN counts as true
            floordiv = floor(div)
            if div - floordiv > 0.5:
                floordiv += 1.0      # snap to the nearest integral value
        else:
            floordiv = copysign(0.0, vx / wx)

    e.g. ``5.0 // inf == 0.0``, ``-5.0 // inf == -1.0``, ``inf // 5.0`` is NaN.
    The quotient of the exact value is floored, not that of the rounded one:
    ``1.0 // 0.1 == 9.0`` although ``1.0 / 0.1 == 10.0``.
    """
    s = a.sort()
    r = rne(ctx)
    m = _fmod(a, b, ctx)
    quotient = z3.fpDiv(r, z3.fpSub(r, a, m, ctx=ctx), b, ctx=ctx)
    one = z3.FPVal(1.0, None, s, ctx=ctx)
    half = z3.FPVal(0.5, None, s, ctx=ctx)
    adjust = z3.And(z3.Not(z3.fpIsZero(m, ctx=ctx), ctx=ctx), _signs_differ(b, m, ctx), ctx)
    q = z3.If(adjust, z3.fpSub(r, quotient, one, ctx=ctx), quotient)
    fl = z3.fpRoundToIntegral(z3.RTN(ctx=ctx), q, ctx=ctx)
    snapped = z3.If(z3.fpGT(z3.fpSub(r, q, fl, ctx=ctx), half, ctx=ctx),
                    z3.fpAdd(r, fl, one, ctx=ctx), fl)
    # The true quotient a / b is never NaN here: q == 0 needs a finite a.
    return z3.If(z3.fpIsZero(q, ctx=ctx),
                 _copysign_zero(z3.fpDiv(r, a, b, ctx=ctx), ctx), snapped)


def neg(a: z3.FPRef, ctx: z3.Context) -> z3.FPRef:
    """``-a``: flips the sign, ``-(0.0) == -0.0`` (IEEE 754-2019 §5.5.1)."""
    return z3.fpNeg(a, ctx=ctx)


def fabs(a: z3.FPRef, ctx: z3.Context) -> z3.FPRef:
    """``abs(a)`` and ``math.fabs(a)``: clears the sign (IEEE 754-2019 §5.5.1)."""
    return z3.fpAbs(a, ctx=ctx)


def py_min(a: z3.FPRef, b: z3.FPRef, ctx: z3.Context) -> z3.FPRef:
    """Builtin ``min(a, b)``: ``b if b < a else a``.

    CPython's ``min_max`` replaces the kept item only when the new one compares
    strictly less, so the first of equal items (``min(0.0, -0.0) == 0.0``) and
    a NaN first argument are kept (``min(nan, 1.0)`` is NaN, ``min(1.0, nan)``
    is 1.0). z3's ``fp.min`` differs on both.
    """
    return z3.If(z3.fpLT(b, a, ctx=ctx), b, a)


def py_max(a: z3.FPRef, b: z3.FPRef, ctx: z3.Context) -> z3.FPRef:
    """Builtin ``max(a, b)``: ``b if b > a else a`` (see ``py_min``)."""
    return z3.If(z3.fpGT(b, a, ctx=ctx), b, a)


def sqrt(a: z3.FPRef, ctx: z3.Context) -> Tuple[z3.FPRef, z3.BoolRef]:
    """``math.sqrt(a)``: the value and the ValueError condition ``a < 0``.

    IEEE 754-2019 §5.4.1 squareRoot, correctly rounded, with
    ``sqrt(-0.0) == -0.0`` and ``sqrt(inf) == inf``. The ``math`` module raises
    ValueError ("math domain error") for every negative argument including
    -inf, where IEEE returns NaN; ``sqrt(nan)`` is NaN without an error.
    """
    value = z3.fpSqrt(rne(ctx), a, ctx=ctx)
    return value, z3.fpLT(a, z3.fpPlusZero(a.sort()), ctx=ctx)


def copysign(a: z3.FPRef, b: z3.FPRef, ctx: z3.Context) -> z3.FPRef:
    """``math.copysign(a, b)``: ``|a|`` with the sign bit of ``b``.

    Exact whenever ``b`` is not NaN, including ``b == -0.0``.

    NOT exact when ``b`` is NaN: CPython copies the NaN's sign bit, but z3 has
    a single NaN with no sign, and CPython's NaNs carry both signs
    (``float('nan')`` is positive, ``-float('nan')`` negative, and on x86-64
    ``inf - inf`` yields a negative NaN). This returns ``|a|`` for a NaN ``b``
    (as if the NaN were positive); callers needing exactness must treat
    ``isnan(b)`` as outside the exact fragment. (The result's own sign when
    ``a`` is NaN is invisible: a NaN result is just NaN here.)
    """
    ay = z3.fpAbs(a, ctx=ctx)
    return z3.If(z3.fpIsNegative(b, ctx=ctx), z3.fpNeg(ay, ctx=ctx), ay)


# ---------------------------------------------------------------- predicates


def isnan(a: z3.FPRef, ctx: z3.Context) -> z3.BoolRef:
    """``math.isnan(a)``."""
    return z3.fpIsNaN(a, ctx=ctx)


def isinf(a: z3.FPRef, ctx: z3.Context) -> z3.BoolRef:
    """``math.isinf(a)``: ±inf."""
    return z3.fpIsInf(a, ctx=ctx)


def isfinite(a: z3.FPRef, ctx: z3.Context) -> z3.BoolRef:
    """``math.isfinite(a)``: neither infinite nor NaN."""
    return z3.Not(z3.Or(z3.fpIsInf(a, ctx=ctx), z3.fpIsNaN(a, ctx=ctx)), ctx=ctx)


def truthy(a: z3.FPRef, ctx: z3.Context) -> z3.BoolRef:
    """``bool(a)``: false only for ±0.0, NaN is true (Library Reference, Built-in
    Types, "Truth Value Testing": zero of any numeric type is false)."""
    return z3.Not(z3.fpIsZero(a, ctx=ctx), ctx=ctx)


# ---------------------------------------------------------------- to ints


def _to_int(a: z3.FPRef, mode: z3.FPRMRef,
            ctx: z3.Context) -> Tuple[z3.ArithRef, z3.BoolRef, z3.BoolRef]:
    # Round to an integral float first (exact, IEEE 754-2019 §5.3.1), then read
    # its exact real value; ToInt of an integral real is that integer.
    # CPython's PyLong_FromDouble raises OverflowError ("cannot convert float
    # infinity to integer") for ±inf and ValueError ("cannot convert float NaN
    # to integer") for NaN; the value is unspecified in those cases.
    integral = z3.fpRoundToIntegral(mode, a, ctx=ctx)
    value = z3.ToInt(z3.fpToReal(integral, ctx=ctx))
    return value, z3.fpIsInf(a, ctx=ctx), z3.fpIsNaN(a, ctx=ctx)


def trunc_to_int(a: z3.FPRef,
                 ctx: z3.Context) -> Tuple[z3.ArithRef, z3.BoolRef, z3.BoolRef]:
    """``int(a)``: toward zero. Returns (value, OverflowError if ±inf, ValueError if NaN)."""
    return _to_int(a, z3.RTZ(ctx=ctx), ctx)


def floor_to_int(a: z3.FPRef,
                 ctx: z3.Context) -> Tuple[z3.ArithRef, z3.BoolRef, z3.BoolRef]:
    """``math.floor(a)`` (an int): (value, OverflowError if ±inf, ValueError if NaN)."""
    return _to_int(a, z3.RTN(ctx=ctx), ctx)


def ceil_to_int(a: z3.FPRef,
                ctx: z3.Context) -> Tuple[z3.ArithRef, z3.BoolRef, z3.BoolRef]:
    """``math.ceil(a)`` (an int): (value, OverflowError if ±inf, ValueError if NaN)."""
    return _to_int(a, z3.RTP(ctx=ctx), ctx)


# ---------------------------------------------------------------- helpers


def _int(n, ctx: z3.Context) -> z3.ArithRef:
    # Python ints are accepted too (tests and constant folding).
    if isinstance(n, int):
        return z3.IntVal(n, ctx=ctx)
    return n


def _abs_int(n: z3.ArithRef, ctx: z3.Context) -> z3.ArithRef:
    return z3.If(n >= z3.IntVal(0, ctx=ctx), n, -n)
