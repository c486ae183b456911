"""Differential testing of Optional values, lists and objects, mutation and
aliasing included: random programs run in CPython and through the translation.

Each seeded program is a function ``f(xs: list[int], ys: list[int], n: int,
w: Wallet, k: Optional[int])`` (``Wallet`` is a dataclass of the generated
module) with statements over the lists (append, extend, pop() and pop(i),
item assignment with negative indexes too, ``xs += ys``, rebinding, a local
that is one of the lists), over the wallet (attribute reads, writes and
augmented assignment) and over ``k`` (``is None`` tests, arithmetic that
raises TypeError when it is None), with expressions of slices, ``+``, ``in``,
``==``, ``is``, ``len`` and list displays of ints. The inputs include empty
lists and ``xs`` and ``ys`` being one list object.

A case is one input tuple: CPython runs the function on a deep copy of the
arguments (one ``copy.deepcopy`` of the tuple, which keeps the aliasing), the
evaluator (``semantics_helpers.Evaluator``) predicts the outcome from the
translation, and the two must agree on the outcome -- the returned value with
its exact type, object for object (a returned list that is ``xs`` must be
``xs``), or the exception class -- and, for a return, on the post-state of
every argument. A program the translator refuses is counted, not compared.
"""

from __future__ import annotations

import dataclasses
import random
from typing import List, Set

import pytest

from refines.errors import Untranslatable

from semantics_helpers import (CRASHED, MISMATCH, REFUSED, UNMODELLED,  # noqa: F401
                               StatementGenerator, Tally, outcome_kind, same_shape,
                               same_state, shape, translated)

HEADER = '''\
from dataclasses import dataclass
from typing import Optional


@dataclass
class Wallet:
    owner: str
    cents: int


class QuotaExceeded(Exception):
    pass


'''

SIGNATURE = "def f(xs: list[int], ys: list[int], n: int, w: Wallet, k: Optional[int]):\n"

# ---------------------------------------------------------------- inputs

INT_RANGE = (-4, 4)
OWNERS = ("", "a", "ab", "\u00e9")
MAX_LENGTH = 4


def random_list(rnd: random.Random) -> List[int]:
    return [rnd.randint(*INT_RANGE) for _ in range(rnd.choice((0, 0, 1, 2, 3, MAX_LENGTH)))]


def inputs_for(rnd: random.Random, wallet: type, count: int = 8) -> List[tuple]:
    """Fixed inputs (empty lists, one list passed twice, k None or not) and
    ``count`` seeded random ones, a quarter of them with ``xs is ys``."""
    W = wallet
    shared = [1, 2]
    empty = []
    out = [
        ([], [], 0, W("", 0), None),
        ([1], [], 1, W("a", 5), 2),
        ([], [3, -1], -1, W("ab", -2), None),
        (shared, shared, 2, W("a", 1), 0),
        (empty, empty, 0, W("", 0), -3),
        ([3, 1, 2], [2], -2, W("\u00e9", 3), 1),
        ([0, 0, 0, 0], [1, 2, 3], 4, W("a", 0), None),
        ([-4], [-4], 3, W("b", 2), 4),
    ]
    for _ in range(count):
        xs = random_list(rnd)
        ys = xs if rnd.random() < 0.25 else random_list(rnd)
        k = None if rnd.random() < 0.35 else rnd.randint(*INT_RANGE)
        out.append((xs, ys, rnd.randint(*INT_RANGE), W(rnd.choice(OWNERS),
                                                         rnd.randint(*INT_RANGE)), k))
    return out


# ---------------------------------------------------------------- programs

INT_LITERALS = (-3, -1, 0, 1, 2, 5)
CMP = ("<", "<=", ">", ">=", "==", "!=")


class HeapProgramGenerator(StatementGenerator):
    """Random source text of ``f(xs, ys, n, w, k)``.

    Locals are typed by name: ``zs`` holds a list (one of the parameters'
    lists or a new one), ``m`` and ``j`` ints. Lists are only ever lists of
    ints; every list expression has a known element type (no ``[]``).
    """

    LISTS = ("xs", "ys")
    RAISES = ("ValueError", "QuotaExceeded", 'ValueError("refused")', "QuotaExceeded(n)")

    def __init__(self, rnd: random.Random, depth: int = 3) -> None:
        self.rnd = rnd
        self.depth = depth
        self.flow = False
        self.assigned_anywhere: Set[str] = set()

    # ------------------------------------------------------------ expressions

    def list_name(self, defined: Set[str]) -> str:
        return self.rnd.choice(list(self.LISTS) + (["zs"] if "zs" in defined else []))

    def int_atom(self, defined: Set[str]) -> str:
        r = self.rnd
        k = r.random()
        if k < 0.35:
            return r.choice(["n"] + sorted(n for n in ("m", "j") if n in defined))
        if k < 0.6:
            return str(r.choice(INT_LITERALS))
        if k < 0.75:
            return f"len({self.list_name(defined)})"
        if k < 0.88:
            return "w.cents"
        if k < 0.94:
            return "len(w.owner)"
        return "k"  # TypeError below when None, in arithmetic

    def plain_atom(self, defined: Set[str]) -> str:
        """An int atom for indexes and slice bounds, sometimes the Optional
        ``k`` (TypeError as an index when None; an omitted bound in a slice)."""
        r = self.rnd
        return r.choice(("n", str(r.choice(INT_LITERALS)), f"len({self.list_name(defined)})",
                         "w.cents", "k"))

    def index(self, defined: Set[str]) -> str:
        r = self.rnd
        return str(r.randint(-3, 3)) if r.random() < 0.6 else self.plain_atom(defined)

    def list_expr(self, d: int, defined: Set[str]) -> str:
        r = self.rnd
        k = r.random()
        if d <= 0 or k < 0.35:
            return self.list_name(defined)
        if k < 0.5:
            return f"{self.list_expr(d - 1, defined)} + {self.list_expr(d - 1, defined)}"
        if k < 0.6:
            items = [self.int_expr(d - 1, defined) for _ in range(r.randint(1, 3))]
            return "[" + ", ".join(items) + "]"
        if k < 0.8:
            a, b = self.bound(defined), self.bound(defined)
            form = r.choice(("{a}:{b}", "{a}:", ":{b}", ":"))
            return f"{self.list_name(defined)}[{form.format(a=a, b=b)}]"
        if k < 0.9:
            return f"({self.list_expr(d - 1, defined)})[{self.bound(defined)}:]"
        return f"[{self.int_expr(d - 1, defined)}] + {self.list_name(defined)}"

    def bound(self, defined: Set[str]) -> str:
        r = self.rnd
        return str(r.randint(-4, 4)) if r.random() < 0.7 else self.plain_atom(defined)

    def int_expr(self, d: int, defined: Set[str]) -> str:
        r = self.rnd
        k = r.random()
        if d <= 0 or k < 0.35:
            return self.int_atom(defined)
        if k < 0.6:
            op = r.choice(("+", "-", "*", "+", "-"))
            return f"({self.int_expr(d - 1, defined)} {op} {self.int_expr(d - 1, defined)})"
        if k < 0.75:
            return f"{self.list_name(defined)}[{self.index(defined)}]"
        if k < 0.82:
            return f"len({self.list_expr(d - 1, defined)})"
        if k < 0.9:
            return f"(k + {self.int_atom(defined)})"
        return (f"({self.int_expr(d - 1, defined)} if {self.bool_expr(d - 1, defined)} "
                f"else {self.int_expr(d - 1, defined)})")

    def bool_expr(self, d: int, defined: Set[str]) -> str:
        r = self.rnd
        k = r.random()
        if d <= 0 or k < 0.15:
            return (f"{self.int_atom(defined)} {r.choice(CMP)} {self.int_atom(defined)}"
                    if r.random() < 0.5 else r.choice(("k is None", "k is not None")))
        if k < 0.3:
            return f"{self.int_expr(d - 1, defined)} {r.choice(CMP)} {self.int_expr(d - 1, defined)}"
        if k < 0.42:
            neg = r.choice(("", "not "))
            return f"{self.int_expr(d - 1, defined)} {neg}in {self.list_expr(d - 1, defined)}"
        if k < 0.52:
            return f"{self.list_expr(d - 1, defined)} {r.choice(('==', '!='))} " \
                   f"{self.list_expr(d - 1, defined)}"
        if k < 0.62:
            a, b = self.list_name(defined), self.list_name(defined)
            return f"{a} {r.choice(('is', 'is not'))} {b}"
        if k < 0.7:
            return r.choice(("k is None", "k is not None", "k == n", "k != 0"))
        if k < 0.76:
            return f"w.owner == {r.choice(OWNERS)!r}"
        if k < 0.84:
            return f"not ({self.bool_expr(d - 1, defined)})"
        op = r.choice(("and", "or"))
        return f"({self.bool_expr(d - 1, defined)} {op} {self.bool_expr(d - 1, defined)})"

    # ------------------------------------------------------------ statements

    def statement_kinds(self, depth: int):
        kinds = ["mutate", "mutate", "assign", "wallet", "if", "assert", "return", "raise", "pass"]
        weights = [5, 3, 3, 2, 3 if depth > 0 else 0, 1, 1, 0.5, 0.3]
        return kinds, weights

    def simple_statement(self, kind, pad, top, defined, lines) -> bool:
        r = self.rnd
        d = self.depth - 1
        if kind == "mutate":
            t = self.list_name(defined)
            k = r.random()
            if k < 0.25:
                lines.append(f"{pad}{t}.append({self.int_expr(d, defined)})")
            elif k < 0.38:
                lines.append(f"{pad}{t}.extend({self.list_expr(d, defined)})")
            elif k < 0.5:
                lines.append(f"{pad}{t}[{self.index(defined)}] = {self.int_expr(d, defined)}")
            elif k < 0.62:
                arg = "" if r.random() < 0.5 else self.index(defined)
                target = r.choice(("", "m = ", "j = "))
                lines.append(f"{pad}{target}{t}.pop({arg})")
                if target:
                    defined.add(target[0])
            elif k < 0.74:
                lines.append(f"{pad}{t} += {self.list_expr(d, defined)}")
            elif k < 0.84:
                lines.append(f"{pad}zs = {r.choice(self.LISTS)}")
                defined.add("zs")
            elif k < 0.92:
                lines.append(f"{pad}zs = {self.list_expr(d, defined)}")
                defined.add("zs")
            else:
                lines.append(f"{pad}{t} = {self.list_expr(d, defined)}")  # rebinding
            return True
        if kind == "assign":
            name = r.choice(("m", "j"))
            if r.random() < 0.3 and name in defined:
                lines.append(f"{pad}{name} {r.choice(('+=', '-=', '*='))} {self.int_expr(d, defined)}")
            else:
                lines.append(f"{pad}{name} = {self.int_expr(d, defined)}")
            defined.add(name)
            return True
        if kind == "wallet":
            k = r.random()
            if k < 0.4:
                lines.append(f"{pad}w.cents {r.choice(('+=', '-=', '*='))} "
                             f"{self.int_expr(d, defined)}")
            elif k < 0.7:
                lines.append(f"{pad}w.cents = {self.int_expr(d, defined)}")
            elif k < 0.85:
                lines.append(f"{pad}w.owner = {r.choice(OWNERS)!r}")
            else:
                lines.append(f"{pad}w.owner += {r.choice(OWNERS[1:])!r}")
            return True
        return False

    def result(self, defined: Set[str]) -> str:
        r = self.rnd
        k = r.random()
        d = self.depth - 1
        if k < 0.35:
            return self.list_expr(d, defined)
        if k < 0.6:
            return self.int_expr(d, defined)
        if k < 0.7:
            return "None"
        if k < 0.78:
            return "k"
        if k < 0.88:
            return self.bool_expr(d, defined)
        return f"({self.list_name(defined)}, {self.int_expr(d, defined)})"

    def function(self) -> str:
        return HEADER + SIGNATURE + "\n".join(self.body()) + "\n"


def functions(depth: int):
    return lambda rnd: HeapProgramGenerator(rnd, depth).function()


# ---------------------------------------------------------------- checking

def check_program(source: str, rnd: random.Random, count: int, tally: Tally, seed) -> None:
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
    for args in inputs_for(rnd, t.fn.__globals__["Wallet"], count):
        tally.cases += 1
        expected = t.run_state(*args)
        tally.saw(outcome_kind(expected[0]))
        try:
            got = t.predict_state(*args)
        except AssertionError as exc:  # no single outcome, or no constant value
            got = (("broken", str(exc)[:2000]), None)
        except Exception as exc:  # noqa: BLE001 -- the evaluation crashed
            got = (("crashed", f"{type(exc).__name__}: {exc}"), None)
        if got[0][0] == UNMODELLED:
            tally.unmodelled_cases += 1
        elif not same_state(expected, got):
            alias = " (xs is ys)" if args[0] is args[1] else ""
            bad.append(f"f{tuple(args)!r}{alias}: CPython {expected}, translation {got}")
    if bad:
        tally.mismatched_cases += len(bad)
        tally.problems[MISMATCH].append(
            f"--- seed {seed}\n{source}" + "\n".join(bad[:5])
            + f"\n({len(bad)} inputs disagree)")


def run_batch(seeds, make_source, count: int = 8) -> Tally:
    tally = Tally()
    for seed in seeds:
        rnd = random.Random(seed)
        check_program(make_source(rnd), rnd, count, tally, seed)
    return tally


def assert_agrees(tally: Tally, max_refused: float = 0.5) -> None:
    found = tally.problems[MISMATCH] + tally.problems[CRASHED]
    assert not found, (f"{len(found)} of {tally.programs} programs disagree with CPython "
                       "or crash the translator\n" + "\n\n".join(found[:4]))
    assert tally.unmodelled_cases == 0, f"{tally.unmodelled_cases} cases not modelled"
    # Most programs are compared, not refused (the generator avoids what is refused).
    assert len(tally.problems[REFUSED]) <= max_refused * tally.programs, (
        f"{len(tally.problems[REFUSED])} of {tally.programs} refused\n"
        + "\n\n".join(tally.problems[REFUSED][:3]))
    assert tally.cases > 0


# ---------------------------------------------------------------- the harness itself


def _wallet_module():
    return translated(HEADER + SIGNATURE + "    return None\n")


def test_inputs_reach_the_translation_with_their_aliasing():
    # Identity: every argument comes back as it went in, aliasing included.
    t = translated(HEADER + SIGNATURE + "    return (xs, ys, n, w.owner, w.cents, k, xs is ys)\n")
    W = t.fn.__globals__["Wallet"]
    inputs = inputs_for(random.Random(4), W, 30)
    assert any(a[0] is a[1] for a in inputs) and any(a[0] is not a[1] for a in inputs)
    for args in inputs:
        (kind, value), post = t.predict_state(*args)
        assert kind == "returned" and value[:2] == (args[0], args[1])
        assert value[2:] == (args[2], args[3].owner, args[3].cents, args[4], args[0] is args[1])
        assert (value[0] is value[1]) == (args[0] is args[1])
        assert value[0] is post[0] and value[1] is post[1]  # the result is the argument
        assert t.mismatch(*args) is None


def test_the_state_comparison_sees_values_types_and_identity():
    a, b = [1], [1]
    assert same_state((("returned", a), (a, b)), (("returned", [1]), ([1], [1]))) is False
    assert same_state((("returned", a), (a, b)), (("returned", b), (a, b))) is False
    assert same_state((("returned", a), (a, b)), (("returned", a), (a, b)))
    assert same_shape(shape([True]), shape([1]))  # bool in CPython, int modelled: allowed
    assert not same_shape(shape([1]), shape([True]))  # the model says bool: CPython must
    assert not same_shape(shape(([1], [1])), shape(([1, 0], [1])))
    assert not same_shape(shape("1"), shape(1))
    assert not same_shape(shape(None), shape(0))
    assert not same_shape(shape((a, a)), shape((a, b)))  # one object vs two equal ones
    assert same_state((("raised", IndexError), None), (("raised", IndexError), None))
    assert not same_state((("raised", IndexError), None), (("raised", TypeError), None))


def test_a_wrong_translation_would_be_caught():
    # Planted bugs: CPython's function differs from the translated one in
    # the returned value, in a mutation only, and in aliasing only.
    t = translated(HEADER + SIGNATURE + "    xs.append(n)\n    return xs[1:]\n")
    W = t.fn.__globals__["Wallet"]
    inputs = inputs_for(random.Random(1), W, 20)
    assert t.agrees(*inputs) == []

    def value_off(xs, ys, n, w, k):
        xs.append(n)
        return xs[2:]

    def mutation_off(xs, ys, n, w, k):
        xs.append(n + 1)
        return xs[:-1][1:] + [n]

    def copies(xs, ys, n, w, k):  # returns the argument itself instead of a copy
        xs.append(n)
        return xs if len(xs) <= 1 else xs[1:]

    for fn in (value_off, mutation_off):
        wrong = dataclasses.replace(t, fn=fn)
        assert wrong.agrees(*inputs), fn.__name__
    t2 = translated(HEADER + SIGNATURE + "    xs.append(n)\n    return xs[:]\n")
    wrong = dataclasses.replace(t2, fn=lambda xs, ys, n, w, k: (xs.append(n), xs)[1])
    assert wrong.agrees(*inputs)  # equal contents, but CPython returns xs itself

    t3 = translated(HEADER + SIGNATURE + "    w.cents += n\n    return None\n")
    wrong = dataclasses.replace(t3, fn=lambda xs, ys, n, w, k: None)
    assert any(wrong.mismatch(*a) for a in inputs if a[2] != 0)


def test_the_generator_writes_the_constructs_it_claims():
    text = "\n".join(HeapProgramGenerator(random.Random(s), 3).function() for s in range(300))
    for construct in (".append(", ".extend(", ".pop()", ".pop(", "] = ", "[-", " += ",
                      "zs = xs", "zs = ", ":]", "[:", " + [", " in ", " not in ", " == ",
                      " is ys", " is not ", "len(", "w.cents", "w.owner", "w.cents += ",
                      "w.cents = ", "w.owner = ", "k is None", "k is not None", "(k + ",
                      "return None", "return k", "if ", "elif ", "assert ", "raise "):
        assert construct in text, construct


def test_outcomes_are_varied():
    tally = run_batch(range(0, 100), functions(3))
    for kind in ("list", "int", "bool", "NoneType", "tuple", "IndexError", "TypeError",
                 "AssertionError"):
        assert tally.outcomes.get(kind, 0) > 0, (kind, tally.outcomes)
    raised_by_raise = tally.outcomes.get("ValueError", 0) + tally.outcomes.get("QuotaExceeded", 0)
    assert raised_by_raise > 0, tally.outcomes
    assert tally.programs - len(tally.problems[REFUSED]) >= 20


# ---------------------------------------------------------------- found mismatches

OPTIONAL_INDEX = "from typing import Optional\n\ndef f(xs: list[int], k: Optional[int]):\n"


# Found by this harness and fixed (translate.index_value / slice_cases): an
# Optional[int] index or slice bound was modelled as always raising TypeError.
@pytest.mark.parametrize("body, args", [
    ("    return xs[k]\n", ([5, 6], 1)),         # CPython 6
    ("    return xs[k]\n", ([5, 6], None)),      # CPython TypeError
    ("    xs[k] = 0\n    return xs\n", ([5, 6], 1)),  # CPython [5, 0], xs becomes [5, 0]
])
def test_an_optional_index_that_holds_an_int(body, args):
    t = translated(OPTIONAL_INDEX + body)
    assert t.mismatch(*args) is None


@pytest.mark.parametrize("body, args", [
    ("    return xs[k:]\n", ([5, 6], None)),   # CPython [5, 6]
    ("    return xs[k:]\n", ([5, 6], 1)),      # CPython [6]
    ("    return xs[1:k]\n", ([5, 6], None)),  # CPython [6]
    ("    return xs[k:k]\n", ([5, 6], None)),  # CPython [5, 6]
])
def test_an_optional_slice_bound(body, args):
    t = translated(OPTIONAL_INDEX + body)
    assert t.mismatch(*args) is None


# ---------------------------------------------------------------- quick share

QUICK_BATCHES = 4
QUICK_PER_BATCH = 15


@pytest.mark.parametrize("batch", range(QUICK_BATCHES))
def test_random_heap_functions_agree_with_cpython(batch):
    seeds = range(batch * QUICK_PER_BATCH, (batch + 1) * QUICK_PER_BATCH)
    assert_agrees(run_batch(seeds, functions(3)))


# ---------------------------------------------------------------- slow share


@pytest.mark.slow
@pytest.mark.parametrize("batch", range(8))
def test_many_random_heap_functions_agree_with_cpython(batch):
    per = 50
    seeds = range(1_000_000 + batch * per, 1_000_000 + (batch + 1) * per)
    assert_agrees(run_batch(seeds, functions(4), count=16))
