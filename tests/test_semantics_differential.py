"""Differential testing of the translator against CPython.

A seeded generator writes random functions in the supported int/bool subset
(arithmetic with floor ``//`` and ``%``, ``**`` by a small constant, unary
operators, comparisons and chains, ``and``/``or``/``not``, conditional
expressions, ``abs``/``min``/``max``/``int``/``bool``, tuple displays with
indexing, ``in`` and comparison, ``if``/``elif``/``else`` with assignments,
augmented assignments, unpacking, ``assert``, ``raise`` and ``return``). Each
function is written as a module, imported, translated, and its predicted
outcome (value, or exception class) is compared with calling it, on several
inputs. Zero mismatches are expected.

Everything is seeded, so a failure names the seed and prints the program; the
quick share runs by default, the large one with ``-m slow`` (``make test-slow``).
"""

from __future__ import annotations

import random
from typing import List, Optional, Set, Tuple

import pytest

from refines.errors import Untranslatable

from semantics_helpers import StatementGenerator, translated

HEADER = '''\
LIMIT = 7
ENABLED = True


class QuotaExceeded(Exception):
    pass


'''

FIXED_INPUTS = [(0, 0, False), (1, -1, True), (-2, 3, False), (7, 2, True),
                (-7, -2, False), (10**30, 3, True), (-(10**30), -1, False),
                (2, 0, True), (0, 5, False), (-1, -1, True), (3, 3, False)]


class ProgramGenerator(StatementGenerator):
    """Random source text of functions ``f(x: int, y: int, b: bool)``.

    Two ways of using locals:

    * ``flow=False``: a new local is introduced only at the top level of the
      body, outside any ``if``; branches may reassign locals that exist
      already. So every local has a value on every path where it is read.
    * ``flow=True``: branches introduce locals too, and reads follow Python's
      rules loosely: mostly names assigned on every path that reaches the
      read (a branch that returns or raises does not count), sometimes any
      name assigned earlier in the text -- where CPython then raises
      UnboundLocalError on the paths that did not assign it. Out-of-range
      constant tuple indexes are allowed in this mode too.
    """

    INT_PARAMS = ("x", "y")
    LOCALS = ("u", "v", "w", "total")

    def __init__(self, rnd: random.Random, depth: int = 3, flow: bool = False) -> None:
        self.rnd = rnd
        self.depth = depth
        self.flow = flow
        self.assigned_anywhere: Set[str] = set()

    # ------------------------------------------------------------ expressions

    def atom_int(self, defined: Set[str]) -> str:
        r = self.rnd
        names = list(self.INT_PARAMS) + sorted(defined)
        if self.flow and self.assigned_anywhere and r.random() < 0.3:
            names = sorted(self.assigned_anywhere)
        k = r.random()
        if k < 0.55:
            return r.choice(names)
        if k < 0.85:
            return str(r.choice((-3, -2, -1, 0, 1, 2, 3, 5, 10)))
        if k < 0.92:
            return r.choice(("LIMIT", "ENABLED", "True", "False", "b"))
        return r.choice(("10**12", "-(10**30)", "1000003"))

    def int_expr(self, d: int, defined: Set[str]) -> str:
        r = self.rnd
        if d <= 0 or r.random() < 0.25:
            return self.atom_int(defined)
        sub = lambda: self.int_expr(d - 1, defined)  # noqa: E731
        cond = lambda: self.bool_expr(d - 1, defined)  # noqa: E731
        kind = r.choices(
            ["arith", "div", "pow", "unary", "abs", "minmax", "ifexp", "boolop",
             "int_of_bool", "index"],
            [6, 3, 1, 2, 1, 2, 2, 1, 1, 1])[0]
        if kind == "arith":
            return f"({sub()} {r.choice(('+', '-', '*'))} {sub()})"
        if kind == "div":
            return f"({sub()} {r.choice(('//', '%'))} {sub()})"
        if kind == "pow":
            base = self.int_expr(min(d - 1, 1), defined)
            return f"(({base}) ** {r.choice((0, 1, 2, 3))})"
        if kind == "unary":
            return f"({r.choice(('-', '+', '~'))}{sub()})"
        if kind == "abs":
            return f"abs({sub()})"
        if kind == "minmax":
            args = ", ".join(sub() for _ in range(r.choice((2, 2, 3))))
            return f"{r.choice(('min', 'max'))}({args})"
        if kind == "ifexp":
            return f"({sub()} if {cond()} else {sub()})"
        if kind == "boolop":
            return f"({sub()} {r.choice(('and', 'or'))} {sub()})"
        if kind == "int_of_bool":
            return f"(int({cond()}) + {sub()})" if r.random() < 0.5 else f"(({cond()}) * {sub()})"
        n = r.choice((1, 2, 3))
        items = ", ".join(sub() for _ in range(n))
        if r.random() < 0.5:
            # A parameter as index: IndexError exactly where it is out of range.
            # (A local may hold a constant, which makes the index constant.)
            index = self.atom_int(defined) if self.flow else r.choice(self.INT_PARAMS)
        else:
            index = str(r.randint(-4, 3) if self.flow else r.randint(-n, n - 1))
        return f"({items},)[{index}]"

    def bool_expr(self, d: int, defined: Set[str]) -> str:
        r = self.rnd
        ops = ("<", "<=", ">", ">=", "==", "!=")
        if d <= 0 or r.random() < 0.15:
            k = r.random()
            if k < 0.7:
                return f"({self.atom_int(defined)} {r.choice(ops)} {self.atom_int(defined)})"
            return r.choice(("b", "True", "False", "ENABLED", "(not b)"))
        sub = lambda: self.int_expr(d - 1, defined)  # noqa: E731
        cond = lambda: self.bool_expr(d - 1, defined)  # noqa: E731
        kind = r.choices(["cmp", "chain", "not", "boolop", "in", "tuplecmp", "bool", "ifexp"],
                         [5, 2, 1, 3, 1, 1, 1, 1])[0]
        if kind == "cmp":
            return f"({sub()} {r.choice(ops)} {sub()})"
        if kind == "chain":
            return f"({sub()} {r.choice(ops)} {sub()} {r.choice(ops)} {sub()})"
        if kind == "not":
            return f"(not {cond()})"
        if kind == "boolop":
            return f"({cond()} {r.choice(('and', 'or'))} {cond()})"
        if kind == "in":
            items = ", ".join(sub() for _ in range(r.choice((0, 1, 2, 3))))
            return f"({sub()} {r.choice(('in', 'not in'))} ({items}{',' if items else ''}))"
        if kind == "tuplecmp":
            n, m = r.choice((1, 2)), r.choice((1, 2))
            left = ", ".join(sub() for _ in range(n))
            right = ", ".join(sub() for _ in range(m))
            return f"(({left},) {r.choice(ops)} ({right},))"
        if kind == "bool":
            return f"bool({sub()})"
        return f"({cond()} if {cond()} else {cond()})"

    def expr(self, d: int, defined: Set[str]) -> str:
        return self.bool_expr(d, defined) if self.rnd.random() < 0.25 else self.int_expr(
            d, defined)

    # ------------------------------------------------------------ statements
    # (if/elif/else, assert, return, raise: semantics_helpers.StatementGenerator)

    def statement_kinds(self, depth: int):
        return (["assign", "aug", "unpack", "if", "assert", "return", "raise", "pass"],
                [5, 2, 1, 3 if depth > 0 else 0, 1, 1, 1, 0.3])

    def simple_statement(self, kind, pad, top, defined, lines) -> bool:
        r = self.rnd
        e = lambda: self.expr(self.depth - 1, defined)  # noqa: E731
        # Names this statement may assign: new ones only where allowed.
        targets = list(self.LOCALS) if (top or self.flow) else sorted(defined)
        if kind == "assign" and targets:
            name = r.choice(targets)
            lines.append(f"{pad}{name} = {e()}")
            defined.add(name)
            self.assigned_anywhere.add(name)
        elif kind == "aug" and defined:
            name = r.choice(sorted(defined))
            op = r.choice(("+=", "-=", "*=", "//=", "%="))
            lines.append(f"{pad}{name} {op} {self.int_expr(self.depth - 1, defined)}")
        elif kind == "unpack" and len(targets) >= 2:
            a, c = r.sample(targets, 2)
            if r.random() < 0.5 and a in defined and c in defined:
                lines.append(f"{pad}{a}, {c} = {c}, {a}")
            else:
                lines.append(f"{pad}{a}, {c} = {e()}, {e()}")
            defined |= {a, c}
            self.assigned_anywhere |= {a, c}
        else:
            return False
        return True

    def result(self, defined: Set[str]) -> str:
        r = self.rnd
        k = r.random()
        if k < 0.12:
            return f"({self.expr(self.depth - 1, defined)}, {self.expr(self.depth - 1, defined)})"
        if k < 0.15:
            return "None"
        return self.expr(self.depth, defined)

    def function(self) -> str:
        return HEADER + "def f(x: int, y: int, b: bool):\n" + "\n".join(self.body()) + "\n"


def inputs_for(rnd: random.Random) -> List[Tuple[int, int, bool]]:
    extra = [(rnd.randint(-20, 20), rnd.randint(-20, 20), rnd.random() < 0.5)
             for _ in range(5)]
    return FIXED_INPUTS + extra


def expression_function(rnd: random.Random, depth: int) -> str:
    gen = ProgramGenerator(rnd, depth)
    return HEADER + f"def f(x: int, y: int, b: bool):\n    return {gen.expr(depth, set())}\n"


MISMATCH, REFUSED = "mismatch", "refused"


def check_program(source: str, inputs) -> Tuple[Optional[Tuple[str, str]], Set[str]]:
    """``(kind, description)`` of the problem -- ``MISMATCH`` when the
    translation disagrees with CPython on some input, ``REFUSED`` when it raised
    Untranslatable for this supported program -- or ``None``; and the kinds of
    CPython outcome seen (to show the sample is varied)."""
    module_kinds: Set[str] = set()
    try:
        t = translated(source)
    except Untranslatable as exc:
        return (REFUSED, f"the translator refused it: {exc.text} (line {exc.line})"), set()
    for args in inputs:
        kind, value = t.run(*args)
        module_kinds.add(value.__name__ if kind == "raised" else type(value).__name__)
    bad = t.agrees(*inputs)
    if bad:
        text = "\n".join(bad[:5]) + f"\n({len(bad)} of {len(inputs)} inputs disagree)"
        return (MISMATCH, text), module_kinds
    return None, module_kinds


def run_batch(seeds, make_source):
    """Problems by kind (each with its seed and program) and the outcomes seen."""
    problems = {MISMATCH: [], REFUSED: []}
    outcomes: Set[str] = set()
    for seed in seeds:
        rnd = random.Random(seed)
        source = make_source(rnd)
        problem, kinds = check_program(source, inputs_for(rnd))
        outcomes |= kinds
        if problem is not None:
            kind, text = problem
            problems[kind].append(f"--- seed {seed}\n{source}{text}")
    return problems, outcomes


def assert_none(problems, kinds, total):
    found = [p for k in kinds for p in problems[k]]
    what = " or ".join("disagree with CPython" if k == MISMATCH else "are refused"
                       for k in kinds)
    assert not found, f"{len(found)} of {total} programs {what}\n" + "\n\n".join(found[:4])


BOTH = (MISMATCH, REFUSED)


def functions(depth, flow=False):
    return lambda rnd: ProgramGenerator(rnd, depth, flow=flow).function()


def expressions(depth):
    return lambda rnd: expression_function(rnd, depth)


# ---------------------------------------------------------------- quick share

QUICK_BATCHES = 8
QUICK_PER_BATCH = 25


@pytest.mark.parametrize("batch", range(QUICK_BATCHES))
def test_random_functions_agree_with_cpython(batch):
    seeds = range(batch * QUICK_PER_BATCH, (batch + 1) * QUICK_PER_BATCH)
    problems, outcomes = run_batch(seeds, functions(3))
    assert_none(problems, BOTH, QUICK_PER_BATCH)
    assert len(outcomes) >= 3, outcomes  # returned values and raised exceptions both seen


@pytest.mark.parametrize("batch", range(3))
def test_random_expressions_agree_with_cpython(batch):
    seeds = range(10_000 + batch * 40, 10_000 + (batch + 1) * 40)
    problems, _ = run_batch(seeds, expressions(4))
    assert_none(problems, BOTH, 40)


FLOW_SEEDS = range(50_000, 50_040)
_flow_cache: dict = {}


def flow_batch():
    """The quick flow-mode batch, run once for the two tests that read it."""
    if not _flow_cache:
        _flow_cache["result"] = run_batch(FLOW_SEEDS, functions(3, flow=True))
    return _flow_cache["result"]


def test_random_functions_reading_locals_assigned_on_some_paths():
    # Python raises UnboundLocalError where a local is read on a path that did
    # not assign it; elsewhere the read sees the assigned value.
    problems, outcomes = flow_batch()
    assert_none(problems, (MISMATCH,), len(FLOW_SEEDS))
    assert "UnboundLocalError" in outcomes


def test_random_functions_reading_locals_assigned_on_some_paths_are_translated():
    # The same programs use only supported constructs: none may be refused.
    problems, _ = flow_batch()
    assert_none(problems, (REFUSED,), len(FLOW_SEEDS))


def test_generator_produces_the_constructs_it_claims():
    text = "\n".join(ProgramGenerator(random.Random(s), 3).function() for s in range(200))
    for construct in ("//", "%", "**", " if ", " and ", " or ", "not ", "abs(", "min(",
                      "max(", "int(", "bool(", ")[", " in (", "elif ", "else:", "assert ",
                      "raise ", "return", "+=", ", ", "<", "==", "LIMIT", "~"):
        assert construct in text, construct


# ---------------------------------------------------------------- slow share

@pytest.mark.slow
@pytest.mark.parametrize("batch", range(12))
def test_many_random_functions_agree_with_cpython(batch):
    per = 100
    seeds = range(1_000_000 + batch * per, 1_000_000 + (batch + 1) * per)
    problems, _ = run_batch(seeds, functions(4))
    assert_none(problems, BOTH, per)


@pytest.mark.slow
@pytest.mark.parametrize("batch", range(5))
def test_many_random_expressions_agree_with_cpython(batch):
    per = 200
    seeds = range(2_000_000 + batch * per, 2_000_000 + (batch + 1) * per)
    problems, _ = run_batch(seeds, expressions(5))
    assert_none(problems, BOTH, per)


@pytest.mark.slow
@pytest.mark.parametrize("batch", range(4))
def test_many_random_functions_reading_locals_assigned_on_some_paths(batch):
    per = 100
    seeds = range(3_000_000 + batch * per, 3_000_000 + (batch + 1) * per)
    problems, _ = run_batch(seeds, functions(4, flow=True))
    assert_none(problems, (MISMATCH,), per)
