"""Differential testing of the str translation against CPython.

A seeded generator writes random functions ``f(s: str, t: str, n: int)`` in
the supported str subset, mixed with ints and bools: string constants (ASCII,
``é``, an astral code point, the backslash, NUL; module constants), ``+``,
``*`` by an int (on either side, negative counts included), indexing with an
int expression (IndexError out of range), slices with constant -- negative
too -- and variable bounds, omitted bounds and a step of 1, ``in`` and
``not in``, ``== != < <= > >=`` between strs, ``==`` between a str and an int
(False) and ordering them (TypeError), ``len``, ``str()`` of an int, a bool
and a str, ``startswith``/``endswith`` with a str or a tuple of strs,
``find``/``rfind`` with and without start and end, ``index``/``rindex``
(ValueError when not found), ``replace`` with a constant non-empty old, the
truth of a str (``if s:``, ``not s``, ``bool(s)``), ``s and t``/``s or t``,
``min``/``max`` of strs (also of a tuple display), comparison chains (the
second link only where the first held, so a TypeError there is conditional),
tuples of strs (``in``, ``==``, ordering item by item), ``isinstance``,
conditional expressions, ``+ -`` and comparisons on ints; and statements: ``if``/``elif``/``else``, assignments, augmented
assignments (``u += ...``, ``u *= n``), swaps, ``assert``, ``raise`` and
early ``return``. Each function is translated, and the outcome the
translation predicts -- a value of the exact type, or an exception class -- is
compared with calling it, on fixed inputs and seeded random ones: strings of
length 0..6 over ``a b`` with occasional non-ASCII, backslash and NUL
characters (and U+2A6A5, above every constant but inside the solver's
alphabet), often a piece of the other string, and ints in -8..8.

The Python rules the programs exercise, and where they are written:

* Language Reference, "Subscriptions" and "Slicings"; the ``str``
  documentation, "Common Sequence Operations" (notes on negative and clamped
  indices, ``s * n`` empty for ``n <= 0``, ``x in s`` a substring test) and
  "String Methods" (find/rfind/index/rindex, startswith/endswith with a tuple
  of prefixes, replace).
* Language Reference, "Value comparisons": strs compare lexicographically by
  code point; ``==`` between a str and an int is False; ordering them raises
  TypeError. "Boolean operations": ``x and y`` is ``x`` if ``x`` is false,
  else ``y``; the empty string is false ("Truth Value Testing").
* Language Reference, "Comparisons": ``a < b < c`` is ``a < b and b < c``
  with ``b`` evaluated once; "Membership test operations": ``x in (a, b)`` is
  ``x is a or x == a or ...``.
* Built-in functions: ``len``, ``str()``, ``min``/``max`` (the first extreme
  item), ``isinstance`` (bool is a subclass of int).

Everything is seeded: a failure names the seed and prints the program. The
quick share runs by default (a few seconds), the larger one with ``-m slow``,
and the on-demand run of 100,000+ cases is::

    .venv/bin/python tests/benchmarks/run_str_fuzz.py [--cases N] [--jobs J]
"""

from __future__ import annotations

import random
from typing import List, Sequence, Set, Tuple

import pytest

from refines import ir
from refines.errors import Untranslatable
from refines.verdict import PROVED

from helpers import check_one
from semantics_helpers import (CRASHED, MISMATCH, REFUSED, UNMODELLED,  # noqa: F401
                               StatementGenerator, Tally, assert_none, outcome_kind,
                               py_eval, same, translated)

HEADER = '''\
PREFIX = 'ab'
EMPTY = ''
WIDE = '\\u00e9\\U0001F600'
LIMIT = 3


class Refused(Exception):
    pass


'''

SIGNATURE = "def f(s: str, t: str, n: int):\n"

# ---------------------------------------------------------------- inputs

ALPHABET = "ab"
# Rare characters: non-ASCII, astral, the two the constant encoding escapes,
# and one above every constant the translator accepts (U+1FFFF) but inside the
# solver's alphabet (U+2FFFF).
RARE = ("\u00e9", "\U0001F600", "\\", "\x00", "\U0002A6A5")
MAX_LENGTH = 6
INT_RANGE = (-8, 8)

FIXED_INPUTS = [
    ("", "", 0), ("a", "", 1), ("", "a", -1), ("ab", "b", 1), ("abab", "ab", -2),
    ("aab", "ba", 3), ("ba", "ab", 8), ("\u00e9\U0001F600", "\U0001F600", -8),
    ("abba", "bb", 2), ("b\\a\x00", "\x00", -1), ("aaaaaa", "aa", 6), ("bab", "", -3),
]


def random_str(rnd: random.Random, other: str = None) -> str:
    """A string of length 0..6, mostly over 'ab'; sometimes a piece of ``other``
    (so that ``in``, ``find`` and ``startswith`` hit)."""
    if other is not None and rnd.random() < 0.3:
        i = rnd.randint(0, len(other))
        return other[i:rnd.randint(i, len(other))]
    return "".join(rnd.choice(ALPHABET) if rnd.random() < 0.9 else rnd.choice(RARE)
                   for _ in range(rnd.randint(0, MAX_LENGTH)))


def inputs_for(rnd: random.Random, count: int = 8) -> List[Tuple[str, str, int]]:
    """The fixed inputs and ``count`` seeded random ones."""
    out = list(FIXED_INPUTS)
    for _ in range(count):
        s = random_str(rnd)
        out.append((s, random_str(rnd, s), rnd.randint(*INT_RANGE)))
    return out


# ---------------------------------------------------------------- programs

STR_LITERALS = ("", "a", "b", "ab", "ba", "aa", "\u00e9", "\U0001F600", "\\", "\x00",
                "b\x00", "a\\b")
STR_NAMES = ("PREFIX", "EMPTY", "WIDE")
OLD_LITERALS = ("a", "b", "ab", "ba", "aa", "\u00e9", "\\", "\U0001F600")  # replace: non-empty
INT_LITERALS = (-8, -5, -3, -2, -1, 0, 1, 2, 3, 5, 8)
CMP_OPS = ("<", "<=", ">", ">=", "==", "!=")


class StrProgramGenerator(StatementGenerator):
    """Random source text of functions ``f(s: str, t: str, n: int)``.

    Expressions are generated by type (str, int, bool), so that no local is a
    str on one path and an int on another (the translator refuses such merges
    by design). Locals are typed by name: ``u v w`` hold strs, ``k m`` ints.
    ``flow`` as in ``test_semantics_differential``: when set, branches
    introduce locals too and reads sometimes name a local assigned on some
    paths only (CPython raises UnboundLocalError on the others).

    Repetition counts are small atoms (``n``, constants, ``len(t)``), never
    arbitrary int expressions, so strings stay short.
    """

    STR_PARAMS = ("s", "t")
    STR_LOCALS = ("u", "v", "w")
    INT_LOCALS = ("k", "m")

    def __init__(self, rnd: random.Random, depth: int = 3, flow: bool = False) -> None:
        self.rnd = rnd
        self.depth = depth
        self.flow = flow
        self.assigned_anywhere: Set[str] = set()

    # ------------------------------------------------------------ atoms

    def _names(self, pool, defined: Set[str]) -> List[str]:
        names = sorted(n for n in defined if n in pool)
        if self.flow and self.rnd.random() < 0.3:
            names += sorted(n for n in self.assigned_anywhere if n in pool)
        return names

    def str_literal(self) -> str:
        r = self.rnd
        if r.random() < 0.15:
            return r.choice(STR_NAMES)
        return repr(r.choice(STR_LITERALS))

    def str_atom(self, defined: Set[str]) -> str:
        r = self.rnd
        if r.random() < 0.7:
            return r.choice(list(self.STR_PARAMS) + self._names(self.STR_LOCALS, defined))
        return self.str_literal()

    def int_atom(self, defined: Set[str]) -> str:
        r = self.rnd
        k = r.random()
        if k < 0.5:
            return r.choice(["n"] + self._names(self.INT_LOCALS, defined))
        if k < 0.85:
            return str(r.choice(INT_LITERALS))
        if k < 0.93:
            return f"len({r.choice(self.STR_PARAMS)})"
        return r.choice(("LIMIT", "True", "False"))

    def count(self) -> str:
        """A repetition count: small, maybe negative or a bool."""
        return self.rnd.choice(("n", "n", "2", "3", "0", "-1", "True", "len(t)", "LIMIT",
                                "(n - 2)"))

    def bound(self, defined: Set[str], none: bool = True) -> str:
        """A slice bound: a constant (negative too), an int expression, or
        (with ``none``) None."""
        r = self.rnd
        k = r.random()
        if k < 0.45:
            return str(r.randint(-7, 7))
        if k < 0.55 and none:
            return "None"
        return self.int_expr(1, defined)

    # ------------------------------------------------------------ expressions

    def str_expr(self, d: int, defined: Set[str]) -> str:
        r = self.rnd
        if d <= 0 or r.random() < 0.2:
            return self.str_atom(defined)
        x = lambda: self.str_expr(d - 1, defined)  # noqa: E731
        i = lambda: self.int_expr(d - 1, defined)  # noqa: E731
        cond = lambda: self.bool_expr(d - 1, defined)  # noqa: E731
        kind = r.choices(
            ["concat", "repeat", "index", "slice", "str", "replace", "ifexp", "boolop",
             "minmax", "mixed_add"],
            [5, 2, 2, 5, 2, 2, 2, 2, 1, 0.2])[0]
        if kind == "concat":
            return f"({x()} + {x()})"
        if kind == "repeat":
            return f"({x()} * {self.count()})" if r.random() < 0.7 else f"({self.count()} * {x()})"
        if kind == "index":
            k = r.random()  # mostly small indexes: an IndexError ends the program
            index = ("n" if k < 0.3 else str(r.randint(-2, 1)) if k < 0.8
                     else self.int_expr(d - 1, defined))
            return f"{self.str_atom(defined) if r.random() < 0.6 else x()}[{index}]"
        if kind == "slice":
            subject = self.str_atom(defined) if r.random() < 0.6 else f"({x()})"
            form = r.choice(("{a}:{b}", "{a}:{b}", "{a}:", ":{b}", ":", "{a}:{b}:1", "::1",
                             "{a}:{b}:None"))
            return f"{subject}[{form.format(a=self.bound(defined), b=self.bound(defined))}]"
        if kind == "str":
            arg = r.choice((i, cond, x, i))()
            return f"str({arg})"
        if kind == "replace":
            return f"{self.str_atom(defined)}.replace({repr(r.choice(OLD_LITERALS))}, {x()})"
        if kind == "ifexp":
            return f"({x()} if {cond()} else {x()})"
        if kind == "boolop":
            return f"({x()} {r.choice(('and', 'or'))} {x()})"
        if kind == "minmax":
            args = ", ".join(x() for _ in range(r.choice((2, 2, 3))))
            if r.random() < 0.2:
                args = f"({args},)"  # min of a tuple display
            return f"{r.choice(('min', 'max'))}({args})"
        # TypeError: a str and an int do not add.
        return f"({x()} + {i()})" if r.random() < 0.5 else f"({i()} + {x()})"

    def find_call(self, d: int, defined: Set[str]) -> str:
        r = self.rnd
        x = lambda: self.str_expr(d - 1, defined)  # noqa: E731
        name = r.choices(("find", "rfind", "index", "rindex"), (4, 3, 1, 0.5))[0]
        subject = self.str_atom(defined) if r.random() < 0.7 else f"({x()})"
        args = [self.str_atom(defined) if r.random() < 0.6 else x()]
        k = r.random()
        if k < 0.35:
            args.append(self.bound(defined))  # s.find(t, None) is s.find(t)
        elif k < 0.6:
            # A None start before an end is not modelled: the start is an int.
            args += [self.bound(defined, none=False), self.bound(defined)]
        return f"{subject}.{name}({', '.join(args)})"

    def int_expr(self, d: int, defined: Set[str]) -> str:
        r = self.rnd
        if d <= 0 or r.random() < 0.25:
            return self.int_atom(defined)
        i = lambda: self.int_expr(d - 1, defined)  # noqa: E731
        x = lambda: self.str_expr(d - 1, defined)  # noqa: E731
        cond = lambda: self.bool_expr(d - 1, defined)  # noqa: E731
        kind = r.choices(["len", "find", "arith", "ifexp", "minmax", "int_of_bool"],
                         [4, 4, 3, 1, 1, 1])[0]
        if kind == "len":
            return f"len({x()})"
        if kind == "find":
            return self.find_call(d, defined)
        if kind == "arith":
            return f"({i()} {r.choice(('+', '-'))} {i()})"
        if kind == "ifexp":
            return f"({i()} if {cond()} else {i()})"
        if kind == "minmax":
            return f"{r.choice(('min', 'max'))}({i()}, {i()})"
        return f"int({cond()})"

    def bool_expr(self, d: int, defined: Set[str]) -> str:
        r = self.rnd
        x = lambda: self.str_expr(d - 1, defined)  # noqa: E731
        if d <= 0 or r.random() < 0.1:
            k = r.random()
            if k < 0.5:
                return f"({self.str_atom(defined)} {r.choice(CMP_OPS)} {self.str_atom(defined)})"
            if k < 0.75:
                return f"({self.str_atom(defined)} {r.choice(('in', 'not in'))} " \
                       f"{self.str_atom(defined)})"
            return r.choice(("(not s)", "bool(t)", "(n < 0)", "True"))
        i = lambda: self.int_expr(d - 1, defined)  # noqa: E731
        cond = lambda: self.bool_expr(d - 1, defined)  # noqa: E731
        kind = r.choices(["strcmp", "chain", "in", "affix", "truth", "intcmp", "boolop", "not",
                          "ifexp", "tuple", "isinstance", "mixed_eq", "mixed_order"],
                         [4, 1, 3, 3, 2, 2, 2, 1, 1, 1.5, 0.5, 0.3, 0.15])[0]
        if kind == "strcmp":
            return f"({x()} {r.choice(CMP_OPS)} {x()})"
        if kind == "chain":  # the middle operand once, the second link only if the first held
            last = x() if r.random() < 0.9 else i()  # ordering it against a str: TypeError
            return f"({x()} {r.choice(CMP_OPS)} {x()} {r.choice(CMP_OPS)} {last})"
        if kind == "tuple":
            # Tuples of strs: sequence comparison item by item ("Value comparisons"),
            # membership by == ("Membership test operations").
            k = r.random()
            if k < 0.4:
                items = [x() for _ in range(r.choice((0, 1, 2, 3)))]
                inner = ", ".join(items) + ("," if len(items) == 1 else "")
                return f"({x()} {r.choice(('in', 'not in'))} ({inner}))"
            left = f"({x()}, {i()})" if r.random() < 0.7 else f"({x()},)"
            right = f"({x()}, {i()})" if r.random() < 0.7 else f"({x()}, {x()})"
            return f"({left} {r.choice(CMP_OPS)} {right})"
        if kind == "isinstance":
            # (isinstance(..., bool) of an int expression is refused by design:
            # an int-sorted term may hold a bool merged into it.)
            make = r.choice((x, i, cond))
            classes = ("str", "int", "(int, str)") + (("bool",) if make is not i else ())
            return f"isinstance({make()}, {r.choice(classes)})"
        if kind == "in":
            return f"({x()} {r.choice(('in', 'not in'))} {x()})"
        if kind == "affix":
            name = r.choice(("startswith", "endswith"))
            subject = self.str_atom(defined) if r.random() < 0.7 else f"({x()})"
            if r.random() < 0.3:
                items = [x() for _ in range(r.choice((0, 1, 2, 3)))]
                arg = "(" + ", ".join(items) + ("," if len(items) == 1 else "") + ")"
            else:
                arg = x()
            return f"{subject}.{name}({arg})"
        if kind == "truth":
            return r.choice((f"(not {x()})", f"bool({x()})"))
        if kind == "intcmp":
            return f"({i()} {r.choice(CMP_OPS)} {i()})"
        if kind == "boolop":
            return f"({cond()} {r.choice(('and', 'or'))} {cond()})"
        if kind == "not":
            return f"(not {cond()})"
        if kind == "ifexp":
            return f"({cond()} if {cond()} else {cond()})"
        if kind == "mixed_eq":  # a str never equals an int
            return f"({x()} {r.choice(('==', '!='))} {i()})"
        return f"({x()} {r.choice(('<', '>='))} {i()})"  # TypeError

    def expr_typed(self, d: int, defined: Set[str]) -> Tuple[str, str]:
        k = self.rnd.random()
        if k < 0.55:
            return self.str_expr(d, defined), "str"
        if k < 0.8:
            return self.int_expr(d, defined), "int"
        return self.bool_expr(d, defined), "bool"

    def test(self, d: int, defined: Set[str]) -> str:
        """An ``if`` test: a bool, or the truth of a str (``if s:``, ``if s and t:``)."""
        r = self.rnd
        k = r.random()
        if k < 0.7:
            return self.bool_expr(d, defined)
        if k < 0.85:
            return self.str_atom(defined)
        return self.str_expr(d, defined)

    # ------------------------------------------------------------ statements
    # (if/elif/else, assert, return, raise: semantics_helpers.StatementGenerator)

    RAISES = ("ValueError", "Refused", 'ValueError("no")', "Refused(f'bad {s}')")

    def statement_kinds(self, depth: int):
        return (["assign", "aug", "swap", "if", "assert", "return", "raise", "pass"],
                [5, 2, 1, 3 if depth > 0 else 0, 1, 1, 1, 0.2])

    def simple_statement(self, kind, pad, top, defined, lines) -> bool:
        r = self.rnd
        d = self.depth - 1
        allowed = lambda pool: list(pool) if (top or self.flow) else [  # noqa: E731
            n for n in sorted(defined) if n in pool]
        strs, ints = allowed(self.STR_LOCALS), allowed(self.INT_LOCALS)
        if kind == "assign" and (strs or ints):
            if strs and (not ints or r.random() < 0.65):
                name, value = r.choice(strs), self.str_expr(d, defined)
            else:
                name, value = r.choice(ints), self.int_expr(d, defined)
            lines.append(f"{pad}{name} = {value}")
            defined.add(name)
            self.assigned_anywhere.add(name)
        elif kind == "aug" and defined:
            name = r.choice(sorted(defined))
            if name in self.STR_LOCALS:
                if r.random() < 0.7:
                    lines.append(f"{pad}{name} += {self.str_expr(d, defined)}")
                else:
                    lines.append(f"{pad}{name} *= {self.count()}")
            else:
                op = r.choice(("+=", "-="))
                lines.append(f"{pad}{name} {op} {self.int_expr(d, defined)}")
        elif kind == "swap" and len(strs) >= 2:
            a, c = r.sample(strs, 2)
            if r.random() < 0.5 and a in defined and c in defined:
                lines.append(f"{pad}{a}, {c} = {c}, {a}")
            else:
                lines.append(f"{pad}{a}, {c} = {self.str_expr(d, defined)}, "
                             f"{self.str_expr(d, defined)}")
            defined |= {a, c}
            self.assigned_anywhere |= {a, c}
        else:
            return False
        return True

    def if_test(self, defined: Set[str]) -> str:
        return self.test(self.depth - 1, defined)

    def assert_test(self, defined: Set[str]) -> str:
        return self.test(self.depth - 1, defined)

    def result(self, defined: Set[str]) -> str:
        r = self.rnd
        k = r.random()
        if k < 0.15:
            a, _ = self.expr_typed(self.depth - 1, defined)
            c, _ = self.expr_typed(self.depth - 1, defined)
            return f"({a}, {c})"
        if k < 0.18:
            return "None"
        return self.expr_typed(self.depth, defined)[0]

    def function(self) -> str:
        return HEADER + SIGNATURE + "\n".join(self.body()) + "\n"


def expression_function(rnd: random.Random, depth: int) -> str:
    gen = StrProgramGenerator(rnd, depth)
    return HEADER + SIGNATURE + f"    return {gen.expr_typed(depth, set())[0]}\n"


def functions(depth: int, flow: bool = False):
    return lambda rnd: StrProgramGenerator(rnd, depth, flow=flow).function()


def expressions(depth: int):
    return lambda rnd: expression_function(rnd, depth)


# ---------------------------------------------------------------- checking

def check_program(source: str, inputs: Sequence[tuple], tally: Tally, seed) -> None:
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
        tally.saw(outcome_kind(expected))
        try:
            got = t.predict(*args)
        except AssertionError as exc:  # no single outcome, or no constant value
            got = ("broken", str(exc)[:2000])
        except Exception as exc:  # noqa: BLE001 -- the evaluation crashed
            got = ("crashed", f"{type(exc).__name__}: {exc}")
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


def test_str_inputs_reach_the_translation_exactly():
    # Identity and a few operations return every input code point for code
    # point: the astral ones, the backslash, NUL, U+2A6A5.
    t = translated(SIGNATURE + "    return (s, t + s, len(s), s[n:], str(n))\n")
    rnd = random.Random(5)
    inputs = FIXED_INPUTS + [(random_str(rnd), "".join(RARE), rnd.randint(-8, 8))
                             for _ in range(40)]
    for args in inputs:
        got = t.predict(*args)
        assert same(t.run(*args), got), (args, got)
        assert got[1][0] == args[0] and type(got[1][0]) is str


def test_the_comparison_is_exact_about_types():
    # A str matches only a str: '1' is not 1, 'True' is not True.
    assert not same(("returned", "1"), ("returned", 1))
    assert not same(("returned", 1), ("returned", "1"))
    assert not same(("returned", "True"), ("returned", True))
    assert not same(("returned", ("a", 1)), ("returned", ("a", "1")))
    assert not same(("returned", "a"), ("returned", "a\x00"))
    assert same(("returned", ("\U0001F600", 2)), ("returned", ("\U0001F600", 2)))


def test_a_wrong_translation_would_be_caught():
    # A planted off-by-one: pair the translation of s[1:] with CPython's s[2:].
    import dataclasses

    t = translated(SIGNATURE + "    return s[1:]\n")
    wrong = dataclasses.replace(t, fn=lambda s, t_, n: s[2:])
    caught = [args for args in FIXED_INPUTS if wrong.mismatch(*args)]
    assert caught and all(len(args[0]) >= 2 for args in caught)
    assert t.agrees(*FIXED_INPUTS) == []


def test_find_values_are_read_through_their_definitions():
    # find/rfind lower to a fresh constant and its definition; the evaluator
    # gives the constant its one value per input -- by the solver, or, for
    # strings the solver gives up on (str.power and replace_all around them),
    # by trying every candidate -- and rejects a definition with no value or
    # with two.
    import z3

    t = translated(SIGNATURE + "    return (s.find(t), s.rfind(t, n), "
                   "((s + 'ab') * 4).replace('ba', t).rfind(t, n), s[s.find(t):].find(t, n))\n")
    assert len(t.evaluator.definitions) >= 4
    assert t.agrees(*inputs_for(random.Random(3))) == []
    ev = t.evaluator
    fresh = z3.Int("fresh", ev.ctx)
    assert ev._pinned(fresh, z3.And(fresh >= 2, fresh <= 2)).as_long() == 2
    for bad in (z3.Or(fresh == 1, fresh == 2), fresh != fresh):
        with pytest.raises(AssertionError):
            ev._pinned(fresh, bad)


def test_the_input_pools_hold_what_they_claim():
    rnd = random.Random(0)
    pool = [x for _ in range(300) for x in inputs_for(rnd)[len(FIXED_INPUTS):]]
    strs = [a for args in pool for a in args[:2]]
    assert "" in strs and max(map(len, strs)) == MAX_LENGTH
    for ch in RARE:
        assert any(ch in x for x in strs), ch
    assert sum(1 for args in pool if args[1] and args[1] in args[0]) > 50  # t often in s
    assert {args[2] for args in pool} == set(range(INT_RANGE[0], INT_RANGE[1] + 1))
    assert all(ord(ch) <= 0x2FFFF for x in strs for ch in x)


def test_generator_produces_the_constructs_it_claims():
    text = "\n".join(StrProgramGenerator(random.Random(s), 3).function() for s in range(300))
    for construct in (" + ", " * ", "[n]", "[-", ":]", "[:", ":1]", ":None]", " in ",
                      " not in ", " < ", " == ", "len(", "str(n", "str(", ".startswith(",
                      ".endswith(", ".startswith((", ".find(", ".rfind(", ".index(",
                      ".rindex(", ".replace(", "if s:", "(not ", " and ", " or ", "min(",
                      "max(", " if ", "elif ", "else:", "assert ", "raise ", "return",
                      "+= ", "*= ", "u, ", "PREFIX", "WIDE", "'\\x00'", "'\\\\'", "'é'",
                      "\U0001F600", "bool(", "int(", "isinstance(", ", str)", "((", ",))"):
        assert construct in text, construct


def test_outcomes_are_varied():
    # The quick share meets values of every type and the exceptions it aims at.
    tally = run_batch(range(0, 60), functions(3))
    for kind in ("str", "int", "bool", "tuple", "NoneType", "IndexError", "ValueError",
                 "TypeError", "AssertionError"):
        assert tally.outcomes.get(kind, 0) > 0, (kind, tally.outcomes)


def python_value(v, env):
    """An outcome value computed by ``py_eval`` (CPython's own operators)."""
    if isinstance(v, ir.Tup):
        return tuple(python_value(i, env) for i in v.items)
    if v is ir.NONE:
        return None
    r = py_eval(v, env)
    return bool(r) if v.sort == ir.BOOL else r


def test_lowering_agrees_with_python_on_the_same_terms():
    # The same IR, evaluated two ways: lowered to z3 (the harness) and by
    # CPython's operators (py_eval). A disagreement here is in lower/strmath;
    # one only with the program itself is in the translation. (py_eval
    # evaluates both sides of an if-then-else, so a guard can raise there:
    # such a case is left out.)
    checked = 0
    for seed in range(20):
        rnd = random.Random(seed)
        t = translated(expressions(3)(rnd))
        names = [p.name for p in t.behaviour.params]
        for args in inputs_for(rnd):
            env = dict(zip(names, args))
            try:
                hits = [i for i, o in enumerate(t.behaviour.outcomes) if py_eval(o.guard, env)]
                o = t.behaviour.outcomes[hits[0]]
                expected = ("returned", python_value(o.value, env)) if o.returns else None
            except (IndexError, TypeError, ValueError):
                continue
            assert hits == t.evaluator.holding(args), (seed, args)
            if expected is not None:
                assert same(expected, t.predict(*args)), (seed, args, expected)
            checked += 1
    assert checked >= 200


# ---------------------------------------------------------------- found: disagreements, now fixed
#
# Disagreements found while building the harness and by run_str_fuzz.py,
# minimised. Each test checks CPython's side first, so that it cannot pass by
# CPython changing. Three are fixed; the digit limit of str(int) is a stated
# assumption of the proof (docs/cautions.md); these are their regression tests.


def test_a_prefix_tuple_is_searched_in_order_and_stops_at_a_match():
    # String Methods, startswith/endswith: "prefix can also be a tuple of
    # prefixes to look for". CPython checks the items left to right and returns
    # True at the first match, before it meets a non-str item; it raises
    # TypeError only when it reaches one (run here, CPython 3.11).
    t = translated(SIGNATURE + "    return (s.startswith((t, n)), s.endswith(('', n)))\n")
    assert t.run("ab", "a", 0) == ("returned", (True, True))
    assert t.run("ab", "x", 0) == ("raised", TypeError)
    assert t.mismatch("ab", "x", 0) is None
    assert t.mismatch("ab", "a", 0) is None


def test_a_repetition_count_past_the_index_range_raises_overflow_error():
    # "Common Sequence Operations" allows any int n, but CPython converts it to
    # a C ssize_t first: |n| >= 2**63 raises OverflowError ("cannot fit 'int'
    # into an index-sized integer"), even for '' and for negative n; and
    # len(s) * n past 2**63 - 1 raises OverflowError ("repeated string is too
    # long") -- both before allocating anything (run here, CPython 3.11, 64-bit).
    t = translated(SIGNATURE + "    return s * n\n")
    for args in (("", "", 10**30), ("", "", -(10**30)), ("ab", "", -(2**70)),
                 ("ab", "", 2**62)):
        assert t.run(*args) == ("raised", OverflowError), args
        assert t.mismatch(*args) is None, t.mismatch(*args)
    assert t.run("", "", 2**63 - 1) == ("returned", "")
    assert t.mismatch("", "", 2**63 - 1) is None


def test_str_of_a_bool_held_in_an_int_term_is_true_or_false():
    # Built-in functions, str(); "Boolean operations": max(True, n) returns
    # the object True when n <= 1, and n > 0 and n returns False when n <= 0;
    # str() of them is 'True'/'False', not '1'/'0'. (Found by run_str_fuzz.py,
    # seeds 8000207 and 8002147: str(min(len(t), False)) and str(max(True, n)).)
    t = translated(SIGNATURE + "    return (str(max(True, n)), str(n > 0 and n), "
                   "str(min(len(t), False)))\n")
    assert t.run("", "a", 0) == ("returned", ("True", "False", "False"))
    assert t.run("", "a", 5) == ("returned", ("5", "5", "False"))
    for args in (("", "a", 0), ("", "a", 5), ("b", "", -1)):
        assert t.mismatch(*args) is None, t.mismatch(*args)


def test_str_of_an_int_past_the_digit_limit_is_a_stated_assumption(tmp_path):
    # Built-in Types, "Integer string conversion length limitation" (CPython
    # 3.11+): str(n) raises ValueError when n has more decimal digits than
    # sys.get_int_max_str_digits() (4300 by default; configurable, 0 = none).
    # The translation does not model this interpreter limit (the solver stalls
    # on 4301-digit numbers); the verdict carries it as an assumption instead.
    import sys

    limit = sys.get_int_max_str_digits() if hasattr(sys, "get_int_max_str_digits") else 0
    if not limit:
        pytest.skip("no int string conversion limit in this interpreter")
    big = f"n * 10 ** {limit // 2} * 10 ** {limit - limit // 2}"
    t = translated(SIGNATURE + f"    return len(str({big}))\n")
    assert t.run("", "", 1) == ("raised", ValueError)  # CPython's side
    r = check_one(tmp_path, """
        @refines(lambda n, result: result >= 1)
        def digits(n: int) -> int:
            return len(str(n))
        """)
    assert r.verdict == PROVED
    assert any(note.startswith("assumed: str() of an int") and str(limit) in note
               for note in r.notes)
    # A constant past the limit is computed by CPython, error included.
    t = translated(SIGNATURE + f"    return str(10 ** {limit})\n")
    assert t.run("", "", 0) == ("raised", ValueError) and t.mismatch("", "", 0) is None


# ---------------------------------------------------------------- quick share

QUICK_BATCHES = 4
QUICK_PER_BATCH = 12


@pytest.mark.parametrize("batch", range(QUICK_BATCHES))
def test_random_str_functions_agree_with_cpython(batch):
    seeds = range(batch * QUICK_PER_BATCH, (batch + 1) * QUICK_PER_BATCH)
    assert_none(run_batch(seeds, functions(3)))


@pytest.mark.parametrize("batch", range(2))
def test_random_str_expressions_agree_with_cpython(batch):
    seeds = range(10_000 + batch * 20, 10_000 + (batch + 1) * 20)
    assert_none(run_batch(seeds, expressions(4)))


def test_random_str_functions_reading_locals_assigned_on_some_paths():
    tally = run_batch(range(50_000, 50_020), functions(3, flow=True))
    assert_none(tally)
    assert tally.outcomes.get("UnboundLocalError", 0) > 0


# ---------------------------------------------------------------- slow share


@pytest.mark.slow
@pytest.mark.parametrize("batch", range(10))
def test_many_random_str_functions_agree_with_cpython(batch):
    per = 50
    seeds = range(1_000_000 + batch * per, 1_000_000 + (batch + 1) * per)
    assert_none(run_batch(seeds, functions(4), count=16))


@pytest.mark.slow
@pytest.mark.parametrize("batch", range(4))
def test_many_random_str_expressions_agree_with_cpython(batch):
    per = 100
    seeds = range(2_000_000 + batch * per, 2_000_000 + (batch + 1) * per)
    assert_none(run_batch(seeds, expressions(5), count=16))


@pytest.mark.slow
@pytest.mark.parametrize("batch", range(3))
def test_many_random_str_functions_reading_locals_assigned_on_some_paths(batch):
    per = 50
    seeds = range(3_000_000 + batch * per, 3_000_000 + (batch + 1) * per)
    assert_none(run_batch(seeds, functions(4, flow=True), count=16))
