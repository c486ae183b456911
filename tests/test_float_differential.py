"""Differential testing of the float translation against CPython.

A seeded generator writes random functions ``f(x: float, y: float, n: int,
b: bool)`` in the supported float subset, mixed with ints and bools: float
constants (literals, ``float('nan')``, ``float('inf')``, module constants),
``+ - * / // %`` on floats and int/float mixtures, ``int / int``, unary ``-``
and ``+``, comparisons and chains between floats and ints, ``abs``,
``min``/``max`` (all-float or all-int), ``float()``, ``int()``, ``bool()``,
the ``math`` functions ``isnan isinf isfinite fabs sqrt floor ceil copysign``,
constant powers, tuples with float items (displays, a tuple local, indexing
-- a float index raises TypeError --, slices, ``+``, ``in``, ``==``, ordering,
often with the same object on both sides, so NaN identity is exercised),
conditional expressions, ``and``/``or``/``not``, and statements: ``if``/
``elif``/``else``, assignment, augmented assignment, unpacking, early
``return``, ``assert`` and ``raise``. Each function is translated, and the
outcome the translation predicts -- a value, compared bit-exactly, or an
exception class -- is compared with calling it, on inputs drawn from a pool of
IEEE 754 corner cases, random bit patterns and extreme ints.

The Python rules the generated programs exercise, and where they are written
(section numbers recalled from memory; the titles are the reliable part):

* IEEE 754-2019: round to nearest, ties to even (§4.3.1); ``+ - * /`` and
  ``squareRoot`` correctly rounded (§5.4.1); comparisons are false with NaN
  and ignore the sign of zero (§5.11); NaN propagation (§6.2); the sign of a
  zero result (§6.3); overflow to infinity (§7.4).
* Python Language Reference, "Binary arithmetic operations" (6.7): ``//`` and
  ``%`` floor and ``%`` takes the divisor's sign; division by zero raises
  ZeroDivisionError (floats included, so ``nan / 0.0`` raises); an int
  operand is converted to float first. "Value comparisons" (6.10.1): numbers
  of different built-in types compare mathematically, without loss of
  precision; NaN is unordered; built-in containers assume identical objects
  are equal (a NaN object equals itself inside a tuple); sequences compare
  lexicographically. "Membership test operations" (6.10.2): for a tuple,
  ``x in t`` is ``any(x is e or x == e for e in t)``. "Subscriptions" (6.3.2):
  a tuple index must be an int (or a slice).
* Library Reference, "Built-in Functions": ``min``/``max`` return the first
  extreme item met; ``int(x)`` truncates toward zero; ``float(n)`` raises
  OverflowError for an int outside the range of a float. "Built-in Types",
  "Truth Value Testing": zero of any numeric type is false (so NaN is true).
* The ``math`` module documentation: ``floor``/``ceil`` return ints,
  ``sqrt`` of a negative raises ValueError ("math domain error"), ``copysign``
  gives the magnitude of its first argument with the sign of the second
  (``copysign(1.0, -0.0) == -1.0``).

CPython details that are not in those documents were checked by running
CPython 3.11 here (the harness compares with it anyway): ``int(inf)`` raises
OverflowError and ``int(nan)`` ValueError; ``float(x)``, ``+x`` and ``min``
return the very object for a float ``x``, ``abs`` and ``-x`` a new one;
``copysign`` copies the sign bit of a NaN too, and on x86-64 ``inf - inf`` is
a NaN with the sign bit set while ``float('nan')`` has it clear; two foldings
of ``1e999 - 1e999`` in one function are two NaN objects.

Everything is seeded: a failure names the seed and prints the program. The
quick share runs by default (a few seconds), the larger one with ``-m slow``
(about two minutes), and the on-demand run of 100,000+ cases is::

    .venv/bin/python tests/benchmarks/run_float_fuzz.py [--cases N] [--jobs J] [--nan-signs]

whose last line gives the number of cases and mismatches.
"""

from __future__ import annotations

import dataclasses
import math
import random
import struct
from typing import List, Optional, Set, Tuple

import pytest
import z3

from refines import fpmath, ir
from refines.errors import Untranslatable

from semantics_helpers import (CRASHED, MISMATCH, REFUSED,  # noqa: F401
                               UNMODELLED, StatementGenerator, Tally, assert_none,
                               outcome_kind, py_eval, read_float, same, same_float,
                               translated)

HEADER = '''\
import math

LIMIT = 7
ENABLED = True
EPS = 1e-9
BIG = 1e308
TINY = 5e-324
NAN = float('nan')
INF = float('inf')
SAME_NAN = NAN  # one object under two names


class QuotaExceeded(Exception):
    pass


'''

SIGNATURE = "def f(x: float, y: float, n: int, b: bool):\n"

# ---------------------------------------------------------------- inputs

INF, NAN = math.inf, math.nan
DBL_MAX = 1.7976931348623157e308  # largest finite double
DBL_MIN = 2.2250738585072014e-308  # smallest normal
DBL_TRUE_MIN = 5e-324  # smallest subnormal
# The least int magnitude float() refuses: halfway between DBL_MAX and 2**1024,
# where ties-to-even rounds up (recalled; checked by test_the_input_pools_...).
OVERFLOW_INT = 2**1024 - 2**970


def bits_to_float(bits: int) -> float:
    return struct.unpack("<d", struct.pack("<Q", bits))[0]


FLOAT_CORNERS = [
    0.0, -0.0, INF, -INF, NAN, -NAN,
    DBL_TRUE_MIN, -DBL_TRUE_MIN, DBL_MIN, -DBL_MIN, DBL_MAX, -DBL_MAX,
    bits_to_float(0x000FFFFFFFFFFFFF),  # largest subnormal
    0.1, 0.2, 0.3, -0.1, 1.0, -1.0, 0.5, -0.5, 1.5, 2.0, 2.5, -2.5, 3.0, -3.0, 7.0,
    2.0**53, 2.0**53 + 2, -(2.0**53), 2.0**52 + 0.5, 1e16, 1e22, 1e300, 1e308,
    1e-300, -1e-300, 1 / 3, 0.49999999999999994, 1 + 2.0**-52, 4.5, -4.5,
]

INT_CORNERS = [
    0, 1, -1, 2, -2, 3, -3, 7, 10, -10, 2**53, 2**53 + 1, -(2**53 + 1),
    10**16, 2**63, 10**308, -(10**308), 10**400, -(10**400),
    OVERFLOW_INT, -OVERFLOW_INT, OVERFLOW_INT - 1, -(OVERFLOW_INT - 1),
]


def random_float(rnd: random.Random) -> float:
    """A random bit pattern (any exponent, NaN payloads, subnormals), or a
    moderate value, or an integral one (where // and % are interesting)."""
    k = rnd.randrange(4)
    if k == 0:
        return bits_to_float(rnd.getrandbits(64))
    if k == 1:
        return rnd.uniform(-10.0, 10.0)
    if k == 2:
        return float(rnd.randint(-20, 20)) * rnd.choice((1.0, 0.5, 0.1))
    return math.ldexp(rnd.random() - 0.5, rnd.randint(-1080, 1024))  # |mantissa| < 0.5: finite


def random_int(rnd: random.Random) -> int:
    k = rnd.randrange(3)
    if k == 0:
        return rnd.randint(-12, 12)
    return rnd.choice((1, -1)) * rnd.getrandbits(rnd.choice((20, 53, 54, 64, 1023, 1024, 1100)))


def pick_float(rnd: random.Random, other: Optional[float] = None) -> float:
    k = rnd.random()
    if other is not None and k < 0.12:
        # Related to the other argument: equal, opposite, or one ulp away.
        return rnd.choice((other, -other, math.nextafter(other, INF)))
    if k < 0.65:
        return rnd.choice(FLOAT_CORNERS)
    return random_float(rnd)


def pick_int(rnd: random.Random) -> int:
    k = rnd.random()
    if k < 0.4:
        return rnd.randint(-5, 5)
    return rnd.choice(INT_CORNERS) if k < 0.8 else random_int(rnd)


FIXED_INPUTS = [
    (0.0, -0.0, 0, False), (-0.0, 0.0, 1, True), (NAN, 1.0, -1, True), (1.0, NAN, 2, False),
    (INF, -INF, 3, True), (INF, INF, 0, False), (DBL_MAX, DBL_MAX, 10**400, True),
    (DBL_TRUE_MIN, 2.0, -(10**400), False), (0.1, 0.2, 2**53 + 1, True),
    (2.0**53, 1.0, 10**308, False), (-2.5, 0.3, -7, True), (1e-300, 1e16, OVERFLOW_INT, False),
]


def inputs_for(rnd: random.Random, count: int = 8) -> List[Tuple[float, float, int, bool]]:
    """The fixed inputs and ``count`` seeded random ones."""
    out = list(FIXED_INPUTS)
    for _ in range(count):
        x = pick_float(rnd)
        out.append((x, pick_float(rnd, x), pick_int(rnd), rnd.random() < 0.5))
    return out


# ---------------------------------------------------------------- programs

FLOAT_LITERALS = (
    "0.0", "-0.0", "1.0", "-1.0", "0.5", "0.1", "0.3", "2.5", "3.0", "10.0", "1e308",
    "5e-324", "1e-300", "2.0 ** 53", "float('nan')", "float('inf')", "-float('inf')",
    "float('-inf')", "1e999", "EPS", "BIG", "TINY", "NAN", "INF", "float()", "float('2.5')",
)
# Constant powers CPython computes at run time (or folds); the raising ones are
# drawn rarely, since each ends every path through it.
CONSTANT_POWERS = (
    "(2.0 ** 0.5)", "(2 ** 0.5)", "(2.0 ** -1074)", "(0.5 ** 1075)", "(10.0 ** 308)",
    "(8.0 ** 2.0)", "(1.5 ** 2)", "(INF ** 0)", "(NAN ** 0.0)", "(1.0 ** NAN)", "(4 ** 0.5)",
    "((-2.0) ** 3)", "(4 ** -0.5)", "(INF ** -1.5)", "((-8.0) ** 2.0)", "(-0.5 ** 2)",
)
RAISING_POWERS = ("(10.0 ** 309)", "(0.0 ** -1)", "(1e308 ** 2)", "(0.0 ** -2.5)")
CMP_OPS = ("<", "<=", ">", ">=", "==", "!=")
# Division is rarer than the other operators: a zero divisor ends the program.
ARITH_OPS, ARITH_WEIGHTS = ("+", "-", "*", "/", "//", "%"), (3, 3, 3, 2, 1, 1)


class FloatProgramGenerator(StatementGenerator):
    """Random source text of functions ``f(x: float, y: float, n: int, b: bool)``.

    Expressions are generated by type (float, int, bool) so every program is in
    the supported subset: no value is an int on one path and a float on another
    (the translator refuses such merges by design), and ``min``/``max`` never mix
    the two. Locals are typed by name: ``u v w`` hold floats, ``k m`` ints,
    ``t`` a tuple ``(float, int)``.

    ``flow`` as in ``test_semantics_differential``: when set, branches introduce
    locals too and reads sometimes name a local assigned on some paths only
    (CPython raises UnboundLocalError on the others).

    ``nan_signs``: whether ``math.copysign`` may get a NaN second argument.
    Its result then depends on the NaN's sign bit, which z3 does not have, and
    the translation says so with an unmodelled outcome -- no claim to compare.
    So by default the sign argument is replaced by -1.0 where it is NaN, and
    every case is a check. Only the text changes: a seed draws the same
    random numbers either way.
    """

    FLOAT_PARAMS = ("x", "y")
    FLOAT_LOCALS = ("u", "v", "w")
    INT_LOCALS = ("k", "m")
    TUPLE_LOCALS = ("t",)

    def __init__(self, rnd: random.Random, depth: int = 3, flow: bool = False,
                 nan_signs: bool = False) -> None:
        self.rnd = rnd
        self.depth = depth
        self.flow = flow
        self.nan_signs = nan_signs
        self.assigned_anywhere: Set[str] = set()

    # ------------------------------------------------------------ atoms

    def _names(self, pool, defined: Set[str]) -> List[str]:
        names = sorted(n for n in defined if n in pool)
        if self.flow and self.rnd.random() < 0.3:
            names += sorted(n for n in self.assigned_anywhere if n in pool)
        return names

    def float_atom(self, defined: Set[str]) -> str:
        r = self.rnd
        k = r.random()
        if k < 0.6:
            names = list(self.FLOAT_PARAMS) + self._names(self.FLOAT_LOCALS, defined)
            if self._names(self.TUPLE_LOCALS, defined):
                names.append(r.choice(("t[0]", "t[-2]")))
            return r.choice(names)
        if k < 0.95:
            literal = r.choice(FLOAT_LITERALS)
            return "SAME_NAN" if literal == "NAN" and k < 0.8 else literal
        return r.choice(CONSTANT_POWERS if k < 0.99 else RAISING_POWERS)

    def int_atom(self, defined: Set[str]) -> str:
        r = self.rnd
        k = r.random()
        if k < 0.5:
            names = ["n"] + self._names(self.INT_LOCALS, defined)
            if self._names(self.TUPLE_LOCALS, defined):
                names.append(r.choice(("t[1]", "t[-1]")))
            return r.choice(names)
        if k < 0.8:
            return str(r.choice((-3, -1, 0, 1, 2, 3, 7, 10)))
        if k < 0.94:
            return r.choice(("LIMIT", "b", "True", "False", "ENABLED"))
        if k < 0.98:
            return r.choice(("(2 ** 53 + 1)", "10 ** 308", "(2 ** 1024 - 2 ** 970 - 1)"))
        return r.choice(("-(10 ** 400)", "(2 ** 1024 - 2 ** 970)"))  # too large for a float

    # ------------------------------------------------------------ expressions

    def arith_op(self) -> str:
        return self.rnd.choices(ARITH_OPS, ARITH_WEIGHTS)[0]

    def num_expr(self, d: int, defined: Set[str]) -> str:
        """A float or an int operand (mixing converts the int)."""
        if self.rnd.random() < 0.7:
            return self.float_expr(d, defined)
        return self.int_expr(d, defined)

    def float_expr(self, d: int, defined: Set[str]) -> str:
        r = self.rnd
        if d <= 0 or r.random() < 0.2:
            return self.float_atom(defined)
        f = lambda: self.float_expr(d - 1, defined)  # noqa: E731
        num = lambda: self.num_expr(d - 1, defined)  # noqa: E731
        i = lambda: self.int_expr(d - 1, defined)  # noqa: E731
        cond = lambda: self.bool_expr(d - 1, defined)  # noqa: E731
        kind = r.choices(
            ["arith", "mixed", "intdiv", "unary", "abs", "minmax", "float", "math",
             "copysign", "ifexp", "boolop", "index"],
            [8, 4, 2, 2, 1, 2, 1, 3, 1, 2, 1, 1])[0]
        if kind == "arith":
            return f"({f()} {self.arith_op()} {f()})"
        if kind == "mixed":
            op = self.arith_op()
            return f"({f()} {op} {i()})" if r.random() < 0.5 else f"({i()} {op} {f()})"
        if kind == "intdiv":
            return f"({i()} / {i()})"
        if kind == "unary":
            op, operand = r.choice(("-", "+")), f()
            return f"({op}{operand})"
        if kind == "abs":
            return f"abs({f()})"
        if kind == "minmax":
            args = [f() for _ in range(r.choice((2, 2, 3)))]
            name = r.choice(("min", "max"))
            if r.random() < 0.2:
                return f"{name}(({', '.join(args)},))"  # min of a tuple display
            return f"{name}({', '.join(args)})"
        if kind == "float":
            return f"float({num()})"
        if kind == "math":
            return f"math.{r.choice(('fabs', 'sqrt', 'sqrt'))}({num()})"
        if kind == "copysign":
            magnitude, sign = num(), num()
            if not self.nan_signs:
                # z3 has one NaN, without a sign bit: the translation does not
                # model copysign's result for a NaN second argument (see
                # test_copysign_of_a_nan_sign_is_not_modelled). Keep it checkable.
                sign = f"(float({sign}) if not math.isnan({sign}) else -1.0)"
            return f"math.copysign({magnitude}, {sign})"
        if kind == "ifexp":
            return f"({f()} if {cond()} else {f()})"
        if kind == "boolop":
            return f"({f()} {r.choice(('and', 'or'))} {f()})"
        items = [f() for _ in range(r.choice((1, 2, 3)))]
        index = r.choice(("n", "n", "b", str(r.randint(-len(items), len(items) - 1))))
        if r.random() < 0.1:
            index = r.choice(("x", "y"))  # TypeError: tuple indices must be ints
        return f"({', '.join(items)},)[{index}]"

    def same_object(self, text: str, d: int, defined: Set[str]) -> str:
        """An expression whose value is the very object ``text`` evaluates to
        (Python returns its operand from these), or a negated negation of it."""
        r = self.rnd
        other = lambda: self.float_expr(max(d - 1, 0), defined)  # noqa: E731
        form = r.choice(("{t}", "(+{t})", "float({t})", "max(({t},))", "min({t}, {o})",
                         "({t}, {o})[0]", "({t} if {c} else {o})", "({t} or {o})", "(-(-{t}))"))
        return form.format(t=text, o=other() if "{o}" in form else "",
                           c=self.bool_expr(0, defined) if "{c}" in form else "")

    def int_expr(self, d: int, defined: Set[str]) -> str:
        r = self.rnd
        if d <= 0 or r.random() < 0.3:
            return self.int_atom(defined)
        i = lambda: self.int_expr(d - 1, defined)  # noqa: E731
        f = lambda: self.float_expr(d - 1, defined)  # noqa: E731
        cond = lambda: self.bool_expr(d - 1, defined)  # noqa: E731
        kind = r.choices(["arith", "div", "to_int", "unary", "abs", "minmax", "ifexp", "bool"],
                         [3, 1, 3, 1, 1, 1, 1, 1])[0]
        if kind == "arith":
            return f"({i()} {r.choice(('+', '-', '*'))} {i()})"
        if kind == "div":
            return f"({i()} {r.choice(('//', '%'))} {i()})"
        if kind == "to_int":
            fn = r.choice(("int", "math.floor", "math.ceil"))
            arg = f() if r.random() < 0.85 else i()  # math.floor(7) is 7
            return f"{fn}({arg})"
        if kind == "unary":
            return f"(-{i()})"
        if kind == "abs":
            return f"abs({i()})"
        if kind == "minmax":
            return f"{r.choice(('min', 'max'))}({i()}, {i()})"
        if kind == "ifexp":
            return f"({i()} if {cond()} else {i()})"
        return f"int({cond()})"

    def bool_expr(self, d: int, defined: Set[str]) -> str:
        r = self.rnd
        num = lambda: self.num_expr(d - 1, defined)  # noqa: E731
        f = lambda: self.float_expr(d - 1, defined)  # noqa: E731
        if d <= 0 or r.random() < 0.1:
            if r.random() < 0.75:
                return (f"({self.float_atom(defined)} {r.choice(CMP_OPS)} "
                        f"{r.choice((self.float_atom, self.int_atom))(defined)})")
            return r.choice(("b", "(not b)", "ENABLED", "True"))
        cond = lambda: self.bool_expr(d - 1, defined)  # noqa: E731
        tuples = self._names(self.TUPLE_LOCALS, defined)
        kind = r.choices(["cmp", "chain", "not", "boolop", "pred", "bool", "in", "tuple_eq",
                          "tuple_order", "ifexp", "tuple_local"],
                         [6, 2, 1, 3, 3, 1, 2, 1, 1, 1, 2 if tuples else 0])[0]
        if kind == "cmp":
            return f"({f()} {r.choice(CMP_OPS)} {num()})"
        if kind == "chain":
            return f"({num()} {r.choice(CMP_OPS)} {f()} {r.choice(CMP_OPS)} {num()})"
        if kind == "not":
            return f"(not {r.choice((cond, f))()})"
        if kind == "boolop":
            return f"({cond()} {r.choice(('and', 'or'))} {cond()})"
        if kind == "pred":
            return f"math.{r.choice(('isnan', 'isinf', 'isfinite'))}({num()})"
        if kind == "bool":
            return f"bool({num()})"
        if kind == "in":
            # The needle is often a name that is also an item, maybe under a
            # wrapper that returns the same object: identity decides for NaN.
            needle = self.float_atom(defined) if r.random() < 0.5 else f()
            items = [self.same_object(needle, d, defined) if r.random() < 0.4 else num()
                     for _ in range(r.choice((0, 1, 2, 3)))]
            inner = ", ".join(items) + ("," if items else "")
            return f"({needle} {r.choice(('in', 'not in'))} ({inner}))"
        if kind == "tuple_eq":
            left = [f(), num()]
            right = [self.same_object(left[0], d, defined) if r.random() < 0.4 else num(),
                     left[1] if r.random() < 0.4 else num()]
            return f"(({', '.join(left)}) {r.choice(('==', '!='))} ({', '.join(right)}))"
        if kind == "tuple_order":
            left = [f(), num()]
            right = [a if r.random() < 0.4 else num() for a in left]
            return f"(({', '.join(left)}) {r.choice(('<', '<=', '>', '>='))} ({', '.join(right)}))"
        if kind == "tuple_local":
            op = r.choice(("in", "not in", "==", "!=", "<", ">="))
            if op.endswith("in"):
                return f"({self.float_atom(defined) if r.random() < 0.6 else num()} {op} t)"
            return f"(t {op} ({self.same_object('t[0]', d, defined)}, {num()}))"
        return f"({cond()} if {cond()} else {cond()})"

    def tuple_value(self, d: int, defined: Set[str]) -> str:
        """A ``(float, int)`` tuple."""
        r = self.rnd
        fresh = f"({self.float_expr(d, defined)}, {self.int_expr(d, defined)})"
        if "t" not in defined or r.random() < 0.4:
            return fresh
        return r.choice((
            f"({fresh} if {self.bool_expr(d, defined)} else t)",
            f"(t[:1] + ({self.int_expr(d, defined)},))",
            f"((t + ({self.float_expr(d, defined)},))[:2])",
            f"(t[0] + {self.num_expr(d, defined)}, t[1])",
            "t[::-1][::-1]",
        ))

    def expr_typed(self, d: int, defined: Set[str]) -> Tuple[str, str]:
        k = self.rnd.random()
        if k < 0.6:
            return self.float_expr(d, defined), "float"
        if k < 0.8:
            return self.int_expr(d, defined), "int"
        return self.bool_expr(d, defined), "bool"

    # ------------------------------------------------------------ statements
    # (if/elif/else, assert, return, raise: semantics_helpers.StatementGenerator)

    def statement_kinds(self, depth: int):
        return (["assign", "aug", "unpack", "tuple", "if", "assert", "return", "raise", "pass"],
                [5, 3, 1, 1, 3 if depth > 0 else 0, 1, 1, 1, 0.2])

    def simple_statement(self, kind, pad, top, defined, lines) -> bool:
        r = self.rnd
        d = self.depth - 1
        allowed = lambda pool: list(pool) if (top or self.flow) else [  # noqa: E731
            n for n in sorted(defined) if n in pool]
        floats, ints = allowed(self.FLOAT_LOCALS), allowed(self.INT_LOCALS)
        tuples = allowed(self.TUPLE_LOCALS)
        if kind == "assign" and (floats or ints):
            if floats and (not ints or r.random() < 0.65):
                name, value = r.choice(floats), self.float_expr(d, defined)
            else:
                name, value = r.choice(ints), self.int_expr(d, defined)
            lines.append(f"{pad}{name} = {value}")
            defined.add(name)
            self.assigned_anywhere.add(name)
        elif kind == "aug" and defined - set(self.TUPLE_LOCALS):
            name = r.choice(sorted(defined - set(self.TUPLE_LOCALS)))
            if name in self.FLOAT_LOCALS:
                op = r.choice(("+=", "-=", "*=", "/=", "//=", "%="))
                lines.append(f"{pad}{name} {op} {self.num_expr(d, defined)}")
            else:
                op = r.choice(("+=", "-=", "*=", "//=", "%="))
                lines.append(f"{pad}{name} {op} {self.int_expr(d, defined)}")
        elif kind == "unpack" and len(floats) >= 2:
            a, c = r.sample(floats, 2)
            if r.random() < 0.5 and a in defined and c in defined:
                lines.append(f"{pad}{a}, {c} = {c}, {a}")
            else:
                lines.append(f"{pad}{a}, {c} = {self.float_expr(d, defined)}, "
                             f"{self.float_expr(d, defined)}")
            defined |= {a, c}
            self.assigned_anywhere |= {a, c}
        elif kind == "tuple" and tuples:
            if "t" in defined and floats and ints and r.random() < 0.3:
                a, c = r.choice(floats), r.choice(ints)
                lines.append(f"{pad}{a}, {c} = t")
                defined |= {a, c}
                self.assigned_anywhere |= {a, c}
            else:
                lines.append(f"{pad}t = {self.tuple_value(d, defined)}")
                defined.add("t")
                self.assigned_anywhere.add("t")
        else:
            return False
        return True

    def if_test(self, defined: Set[str]) -> str:
        d = self.depth - 1
        return (self.bool_expr(d, defined) if self.rnd.random() < 0.85
                else self.float_expr(d, defined))  # truth of a float

    def result(self, defined: Set[str]) -> str:
        r = self.rnd
        k = r.random()
        if k < 0.15:
            a, _ = self.expr_typed(self.depth - 1, defined)
            c, _ = self.expr_typed(self.depth - 1, defined)
            return f"({a}, {c})"
        if k < 0.18:
            return "None"
        if k < 0.23 and "t" in defined:
            return r.choice(("t", f"t + ({self.float_expr(self.depth - 1, defined)},)"))
        return self.expr_typed(self.depth, defined)[0]

    def function(self) -> str:
        return HEADER + SIGNATURE + "\n".join(self.body()) + "\n"


def expression_function(rnd: random.Random, depth: int, nan_signs: bool = False) -> str:
    gen = FloatProgramGenerator(rnd, depth, nan_signs=nan_signs)
    return HEADER + SIGNATURE + f"    return {gen.expr_typed(depth, set())[0]}\n"


def functions(depth: int, flow: bool = False, nan_signs: bool = False):
    return lambda rnd: FloatProgramGenerator(rnd, depth, flow=flow,
                                             nan_signs=nan_signs).function()


def expressions(depth: int, nan_signs: bool = False):
    return lambda rnd: expression_function(rnd, depth, nan_signs)


# ---------------------------------------------------------------- checking

def check_program(source: str, inputs, tally: Tally, seed) -> None:
    """Translate ``source``; compare it with CPython on every input."""
    tally.programs += 1
    try:
        t = translated(source)
    except Untranslatable as exc:
        tally.problems[REFUSED].append(
            f"--- seed {seed}\n{source}the translator refused it: {exc.text} (line {exc.line})")
        return
    except Exception as exc:  # noqa: BLE001 -- a crash of the translator is a finding too
        tally.problems[CRASHED].append(
            f"--- seed {seed}\n{source}the translator crashed: {type(exc).__name__}: {exc}")
        return
    bad = []
    for args in inputs:
        tally.cases += 1
        expected = t.run(*args)
        kind, value = expected
        tally.saw(outcome_kind(expected))
        try:
            got = t.predict(*args)
        except AssertionError as exc:  # no single outcome, or no constant value
            got = ("broken", str(exc))
        if got[0] == UNMODELLED:
            tally.unmodelled_cases += 1
        elif not same(expected, got):
            bad.append(f"f{tuple(args)!r}: CPython {expected}, translation {got}")
    if bad:
        tally.mismatched_cases += len(bad)
        tally.problems[MISMATCH].append(
            f"--- seed {seed}\n{source}" + "\n".join(bad[:5])
            + f"\n({len(bad)} of {len(inputs)} inputs disagree)")


def run_batch(seeds, make_source, count: int = 8) -> Tally:
    tally = Tally()
    for seed in seeds:
        rnd = random.Random(seed)
        source = make_source(rnd)
        check_program(source, inputs_for(rnd, count), tally, seed)
    return tally


# ---------------------------------------------------------------- the harness itself


def test_float_inputs_reach_the_translation_exactly():
    # Identity returns every input bit for bit: -0.0 stays negative, subnormals
    # and the largest double survive the trip into z3 and back.
    t = translated(SIGNATURE
                   + "    return (x, -y, n / 1, float(n) if abs(n) < 10 ** 300 else 0.0)\n")
    pool = FLOAT_CORNERS + [random_float(random.Random(s)) for s in range(200)]
    for i, v in enumerate(pool):
        args = (v, pool[-1 - i], pool.index(v) - 20, False)
        got = t.predict(*args)
        assert same(t.run(*args), got), (args, got)
        if v == v:
            assert struct.pack("<d", got[1][0]) == struct.pack("<d", v)


def test_bit_exact_comparison_can_fail():
    # The comparison must tell 0.0 from -0.0 and 1 from 1.0, and match NaN with NaN.
    assert not same(("returned", 0.0), ("returned", -0.0))
    assert not same(("returned", 1.0), ("returned", 1))
    assert not same(("returned", (1.0, 0.0)), ("returned", (1.0, -0.0)))
    assert not same(("returned", math.nan), ("returned", math.inf))
    assert same(("returned", math.nan), ("returned", -math.nan))
    assert same_float(5e-324, 5e-324) and not same_float(5e-324, 1e-323)


def test_a_wrong_translation_would_be_caught():
    # One ulp off is a mismatch: the harness would report a translation of
    # 0.1 + 0.2 that gave 0.3, i.e. the comparison is exact.
    t = translated(SIGNATURE + "    return x + y\n")
    got = t.predict(0.1, 0.2, 0, False)
    assert got == ("returned", 0.30000000000000004)
    assert not same(("returned", 0.3), got)


def test_a_planted_sign_of_zero_mistake_is_caught():
    # End to end: pair the translation of `-x` with a function computing
    # `0.0 - x`, which differs only in the sign of a zero result (IEEE 754-2019
    # §6.3: 0.0 - 0.0 is +0.0, -(0.0) is -0.0). The harness must notice.
    t = translated(SIGNATURE + "    return -x\n")
    wrong = dataclasses.replace(t, fn=lambda x, y, n, b: 0.0 - x)
    inputs = [(v, 0.0, 0, False) for v in FLOAT_CORNERS]
    caught = [args[0] for args in inputs if wrong.mismatch(*args)]
    assert [struct.pack("<d", v) for v in caught] == [struct.pack("<d", 0.0)]  # -(-0.0) is 0.0
    assert t.agrees(*inputs) == []


def test_reading_a_float_agrees_with_reading_it_from_a_model():
    # Two independent ways to read a z3 float: simplifying to a numeral
    # (read_float) and evaluating in a solver's model (fpmath.read).
    ctx = z3.Context()
    v = z3.FP("v", fpmath.sort(ctx))
    for value in FLOAT_CORNERS + [random_float(random.Random(s)) for s in range(40)]:
        direct = read_float(z3.simplify(fpmath.const(value, ctx)))
        solver = z3.Solver(ctx=ctx)
        solver.add(v == fpmath.const(value, ctx))  # structural ==: the very value
        assert solver.check() == z3.sat
        assert same_float(direct, fpmath.read(solver.model(), v)), value
        assert same_float(direct, value), value


def test_nan_parameters_are_distinct_objects():
    # x in (y,) is True in CPython when x and y are one NaN object; the
    # translation takes parameters to be distinct, and the harness passes
    # distinct objects even when the caller reuses one NaN.
    t = translated(SIGNATURE + "    return (x in (y,), x in (x,), (x, 1) == (x, 1))\n")
    nan = float("nan")
    assert t.run(nan, nan, 0, False) == ("returned", (False, True, True))
    assert t.mismatch(nan, nan, 0, False) is None


def test_the_input_pools_hold_the_corner_cases():
    with pytest.raises(OverflowError):
        float(OVERFLOW_INT)
    assert float(OVERFLOW_INT - 1) == DBL_MAX
    assert DBL_TRUE_MIN == bits_to_float(1) and DBL_MIN == bits_to_float(1 << 52)
    assert DBL_MAX == bits_to_float(0x7FEFFFFFFFFFFFFF)
    for v in (0.0, -0.0, INF, -INF, 5e-324, DBL_MIN, DBL_MAX, 0.1, 0.2, 0.3, 1.0, -1.0,
              2.0**53, 2.0**53 + 2, 1e16, 1e-300):
        assert any(struct.pack("<d", v) == struct.pack("<d", c) for c in FLOAT_CORNERS), v
    assert any(math.isnan(c) for c in FLOAT_CORNERS)
    for n in (0, 1, -1, 2**53 + 1, 10**308, -(10**308), 10**400, -(10**400)):
        assert n in INT_CORNERS


def test_generator_produces_the_constructs_it_claims():
    text = "\n".join(FloatProgramGenerator(random.Random(s), 3).function() for s in range(300))
    for construct in (" / ", " // ", " % ", "float('nan')", "float('inf')", "abs(", "min(",
                      "max(", "float(", "int(", "bool(", "math.isnan(", "math.isinf(",
                      "math.isfinite(", "math.fabs(", "math.sqrt(", "math.floor(",
                      "math.ceil(", "math.copysign(", " ** ", " in (", " not in (", ")[",
                      " if ", " and ", " or ", "not ", "elif ", "else:", "assert ", "raise ",
                      "return", "+=", "/=", "//=", "%=", "<", "==", "NAN", "SAME_NAN", "u, ",
                      "n / ", "(-(-", ")[x]", "(-2.0) ** 3", ") < (", "float(x)", "(+"):
        assert construct in text, construct


def test_nan_signs_change_only_the_text_of_copysign():
    # The same seed gives the same program with or without NaN signs, up to
    # the guard on copysign's second argument.
    for seed in range(60):
        for make in (functions, lambda d, nan_signs=False: functions(d, True, nan_signs)):
            plain = make(4)(random.Random(seed)).splitlines()
            raw = make(4, nan_signs=True)(random.Random(seed)).splitlines()
            assert len(plain) == len(raw), seed
            for a, c in zip(plain, raw):
                assert a == c or "copysign" in c, (seed, a, c)


# ---------------------------------------------------------------- one operation at a time

# Every operation of the subset alone, on every combination of corner values:
# the random programs combine them, these pin each one down exhaustively.
BINARY_FLOAT = ["x + y", "x - y", "x * y", "x / y", "x // y", "x % y", "x < y", "x <= y",
                "x > y", "x >= y", "x == y", "x != y", "min(x, y)", "max(x, y)",
                "(x, y) < (y, x)", "x in (y, 1.0)", "(x, 1) == (y, 1)", "x and y", "x or y",
                "math.copysign(x, y) if not math.isnan(y) else 0.0"]
UNARY_FLOAT = ["-x", "+x", "abs(x)", "math.fabs(x)", "math.sqrt(x)", "math.floor(x)",
               "math.ceil(x)", "int(x)", "float(x)", "bool(x)", "not x", "math.isnan(x)",
               "math.isinf(x)", "math.isfinite(x)", "x if x else 2.0", "x in (x,)", "~x"]
FLOAT_AND_INT = ["x + n", "n + x", "x - n", "n - x", "x * n", "n * x", "x / n", "n / x",
                 "x // n", "n // x", "x % n", "n % x", "x < n", "n < x", "x == n", "n == x",
                 "n <= x", "x >= n", "x != n", "x in (n,)", "(n, x) == (x, n)",
                 "math.copysign(n, x) if not math.isnan(x) else 0.0"]
INT_TO_FLOAT = ["float(n)", "n / 3", "3 / n", "n / 10 ** 400", "-n / 7", "math.sqrt(n)",
                "math.floor(n)", "math.isnan(n)", "math.fabs(n)", "n / (2 ** 53 + 1)", "n / m"]
# Ints whose quotients land in the subnormal range, at ties, or overflow.
INTS_FOR_DIVISION = INT_CORNERS + [True, False, 2**1074, 2**1075, 3 * 2**1073, 10**1000]


def operation_inputs(template: str) -> List[tuple]:
    if template in BINARY_FLOAT:
        return [(a, c, 0, 0) for a in FLOAT_CORNERS for c in FLOAT_CORNERS]
    if template in UNARY_FLOAT:
        return [(a, 1.0, 0, 0) for a in FLOAT_CORNERS]
    if template in FLOAT_AND_INT:
        return [(a, 1.0, k, 0) for a in FLOAT_CORNERS for k in INT_CORNERS + [True, False]]
    if template == "n / m":
        return [(1.0, 1.0, p, q) for p in INTS_FOR_DIVISION for q in INTS_FOR_DIVISION]
    return [(1.0, 1.0, k, 0) for k in INTS_FOR_DIVISION]


def check_operation(template: str, inputs) -> None:
    t = translated("import math\n\n\ndef f(x: float, y: float, n: int, m: int):\n"
                   f"    return {template}\n")
    bad = t.agrees(*inputs)
    assert not bad, "\n".join(bad[:10]) + f"\n{len(bad)} of {len(inputs)} inputs disagree"


QUICK_OPERATIONS = ["x // y", "x % y", "x < n", "n / m", "math.floor(x)", "x in (x,)"]
SMALL_POOL = [0.0, -0.0, INF, -INF, NAN, DBL_TRUE_MIN, DBL_MAX, -1.0, 0.1, 2.0**53, 2.5]


@pytest.mark.parametrize("template", QUICK_OPERATIONS)
def test_each_operation_agrees_on_some_corners(template):
    small = [args for args in operation_inputs(template)
             if all(type(a) is not float or a in SMALL_POOL or a != a for a in args[:2])]
    check_operation(template, small[:200])


@pytest.mark.slow
@pytest.mark.parametrize("template", BINARY_FLOAT + UNARY_FLOAT + FLOAT_AND_INT + INT_TO_FLOAT)
def test_each_operation_agrees_on_every_corner(template):
    check_operation(template, operation_inputs(template))


def python_value(v, env):
    """An outcome value computed by ``py_eval`` (CPython's own operators)."""
    if isinstance(v, ir.Tup):
        return tuple(python_value(i, env) for i in v.items)
    if v is ir.NONE:
        return None
    r = py_eval(v, env)
    return bool(r) if v.sort == ir.BOOL else r


@pytest.mark.parametrize("seeds", [range(0, 10), range(50_000, 50_008)])
def test_lowering_agrees_with_python_on_the_same_terms(seeds):
    # The same IR, evaluated two ways: lowered to z3 (the harness) and by
    # CPython's operators (py_eval). A disagreement here is in lower/fpmath; a
    # disagreement only with the program itself is in the translation.
    checked = 0
    for seed in seeds:
        rnd = random.Random(seed)
        t = translated(functions(3, flow=seed >= 50_000)(rnd))
        names = [p.name for p in t.behaviour.params]
        for args in inputs_for(rnd):
            env = dict(zip(names, args))
            hits = [i for i, o in enumerate(t.behaviour.outcomes) if py_eval(o.guard, env)]
            assert hits == t.evaluator.holding(args), (seed, args)
            o = t.behaviour.outcomes[hits[0]]
            if o.returns:
                expected = ("returned", python_value(o.value, env))
                assert same(expected, t.predict(*args)), (seed, args, expected)
            checked += 1
    assert checked >= 20 * len(seeds)


# ---------------------------------------------------------------- found by the random programs
#
# Disagreements the random programs found, minimised by hand (the translation
# has since been fixed; these keep it so), and one limit of the model.


def test_a_double_negation_is_a_new_object():
    # Language Reference, "Membership test operations": `in` is identity first,
    # then ==. -(-x) has x's value but is a new float object, so for a NaN x it
    # is neither x nor equal to it. (Found: -(-x) was folded to x itself.)
    t = translated(HEADER + SIGNATURE + "    return (-(-x) in (x,), (-(-x), 1) == (x, 1))\n")
    assert t.run(NAN, 0.0, 0, False) == ("returned", (False, False))
    assert t.mismatch(NAN, 0.0, 0, False, allow_unmodelled=False) is None


def test_a_float_tuple_index_raises_type_error():
    # Language Reference, "Subscriptions": a tuple index must be an int; CPython
    # raises TypeError "tuple indices must be integers or slices, not float".
    # (Found: a float index was compared with the bounds like an int.)
    t = translated(HEADER + SIGNATURE + "    return (1.0, 2.0)[x]\n")
    for x in (1.0, 0.0, -1.0, 7.0, NAN, INF):
        assert t.run(x, 0.0, 0, False)[1] is TypeError
        assert t.mismatch(x, 0.0, 0, False, allow_unmodelled=False) is None


def test_two_module_names_for_one_nan_are_one_object():
    # SAME_NAN = NAN binds a second name to the same object, so identity makes
    # NAN in (SAME_NAN,) true. (Found: module constants were one object per name.)
    t = translated(HEADER + SIGNATURE + "    return (NAN in (SAME_NAN,), NAN in (float('nan'),))\n")
    assert t.run(0.0, 0.0, 0, False) == ("returned", (True, False))
    assert t.mismatch(0.0, 0.0, 0, False, allow_unmodelled=False) is None


def test_a_power_of_negative_constants_is_translated():
    # CPython folds -2.0 into a constant; these are powers of two constants,
    # which the float subset computes with CPython itself. (Found: refused,
    # -2.0 was a negation of a constant rather than a constant.)
    t = translated(HEADER + SIGNATURE + "    return ((-2.0) ** 3, 4 ** -0.5, INF ** -1.5)\n")
    assert t.predict(0.0, 0.0, 0, False) == ("returned", (-8.0, 0.5, 0.0))


def test_copysign_of_a_nan_sign_is_not_modelled():
    # math docs: copysign gives x's magnitude with y's sign. CPython copies a
    # NaN's sign bit as well: -nan has it set, and on x86-64 so does inf - inf
    # (checked by running CPython 3.11 here). z3's NaN has no sign, so the
    # translation must not claim a value there -- and must claim one elsewhere.
    # (Found: it answered as if every NaN were positive.)
    t = translated(HEADER + SIGNATURE
                   + "    return (math.copysign(1.0, -x), math.copysign(2.0, y - y))\n")
    assert t.run(NAN, INF, 0, False) == ("returned", (-1.0, -2.0))
    assert t.predict(NAN, INF, 0, False)[0] == UNMODELLED
    for x, y in ((-0.0, 1.0), (0.0, -3.0), (-INF, 2.0)):  # -x and y - y are not NaN
        assert t.mismatch(x, y, 0, False, allow_unmodelled=False) is None


def test_a_negative_int_power_of_constants_is_translated():
    # Language Reference, "The power operator": with int operands and a negative
    # exponent the result is a float (2 ** -1 == 0.5). Both are constants, but
    # the translator refuses it (only 0 <= e <= 64 for ints).
    t = translated(HEADER + SIGNATURE + "    return 2 ** -1\n")
    assert t.predict(0.0, 0.0, 0, False) == ("returned", 0.5)


# ---------------------------------------------------------------- quick share

QUICK_BATCHES = 4
QUICK_PER_BATCH = 12


@pytest.mark.parametrize("batch", range(QUICK_BATCHES))
def test_random_float_functions_agree_with_cpython(batch):
    seeds = range(batch * QUICK_PER_BATCH, (batch + 1) * QUICK_PER_BATCH)
    tally = run_batch(seeds, functions(3))
    assert_none(tally)
    assert len(tally.outcomes) >= 3, tally.outcomes  # values and exceptions both seen


@pytest.mark.parametrize("batch", range(2))
def test_random_float_expressions_agree_with_cpython(batch):
    seeds = range(10_000 + batch * 20, 10_000 + (batch + 1) * 20)
    assert_none(run_batch(seeds, expressions(4)))


def test_random_float_functions_reading_locals_assigned_on_some_paths():
    tally = run_batch(range(50_000, 50_020), functions(3, flow=True))
    assert_none(tally)
    assert "UnboundLocalError" in tally.outcomes


# ---------------------------------------------------------------- slow share


@pytest.mark.slow
@pytest.mark.parametrize("batch", range(10))
def test_many_random_float_functions_agree_with_cpython(batch):
    per = 60
    seeds = range(1_000_000 + batch * per, 1_000_000 + (batch + 1) * per)
    assert_none(run_batch(seeds, functions(4), count=16))


@pytest.mark.slow
@pytest.mark.parametrize("batch", range(4))
def test_many_random_float_expressions_agree_with_cpython(batch):
    per = 150
    seeds = range(2_000_000 + batch * per, 2_000_000 + (batch + 1) * per)
    assert_none(run_batch(seeds, expressions(5), count=16))


@pytest.mark.slow
@pytest.mark.parametrize("batch", range(3))
def test_many_random_float_functions_reading_locals_assigned_on_some_paths(batch):
    per = 60
    seeds = range(3_000_000 + batch * per, 3_000_000 + (batch + 1) * per)
    assert_none(run_batch(seeds, functions(4, flow=True), count=16))
