"""``strmath`` against CPython, exhaustively on small domains.

Every function of ``plugin/refines/strmath.py`` is compared with what CPython
computes, on every string over a small alphabet up to a small length and every
index or bound in -5..5 (and ``None`` where the operation takes it), two ways:

* *simplify*: the function applied to z3 constants, reduced by ``z3.simplify``
  (twice: one pass can leave a string comparison half done) -- fast, so the
  sweeps are exhaustive. ``simplify`` leaves ``str.power`` with a count of 3
  or more unevaluated (measured with z3 5.4.1); such a closed term is then
  evaluated in an empty model, which unrolls it.
* *solver*: on a seeded sample of a few hundred cases, z3 variables are
  constrained to the inputs -- a string character by character (its length and
  each ``str.at``), not by one equation with a constant, so the solver itself
  must reason -- ``out == f(vars)`` is asserted, the model is read with
  ``strmath.read`` (or as an int or bool), and the answer must be CPython's
  and the only one (``out != answer`` is unsatisfiable). With the inputs
  pinned character by character, z3 5.4.1 cannot rule out other answers of
  ``replace`` ("incomplete (theory seq)"); for it, uniqueness is checked with
  the inputs pinned by one equation each.

``find`` and ``rfind`` return a term over a fresh integer constant and the
definition that pins it (see ``strmath.find``): on the simplify path the
definition is decided for every candidate value of the constant from -4 to
past the length, and exactly one must satisfy it; on the solver path it is
asserted with the rest, so uniqueness is over all integers. A definition must
be satisfiable for every pre-state (else it would make every query
unsatisfiable); the sweeps check that on their domains, and
``test_the_find_definitions_pin_one_value_without_a_window`` proves
uniqueness for all strings up to length 4 (z3 does not decide it with a
symbolic window, nor existence, in minutes). The exhaustive find sweep visits
one of each pair of cases that differ only by swapping ``a`` and ``b`` (find
reads characters only through equality); the slow share visits all.

The alphabets: ``a b`` for the large sweeps, and a smaller sweep over
``a é U+1F600 \\ U+0000``: one non-ASCII and one astral code point (code point
order and length), and the backslash and NUL, which ``strmath.const`` must
escape (``StringVal`` reads ``\\u{..}`` inside its argument).

All z3 objects come from one ``z3.Context()`` per module (mixing contexts can
crash the interpreter). The Python rules and where they are written:

* Language Reference, "Subscriptions": a negative index counts from the end;
  an index out of range raises IndexError.
* Language Reference, "Slicings", and the ``str`` documentation, "Common
  Sequence Operations", notes 3 and 4: a negative bound counts from the end;
  bounds are clamped to ``0 .. len(s)``; an omitted (``None``) lower bound is
  0 and upper bound ``len(s)``; ``i >= j`` gives the empty string.
* "Common Sequence Operations": ``x in s`` is a substring test for str (so
  ``'' in s``), note 2: ``s * n`` is empty for ``n <= 0``.
* ``str`` documentation, "String Methods": ``find(sub[, start[, end]])`` is
  the lowest index where ``sub`` is found within ``s[start:end]``, -1 if not;
  ``rfind`` the highest; ``startswith``/``endswith``; ``replace(old, new)``
  replaces all (non-overlapping, left to right) occurrences. CPython quirks
  beyond the words, run here: ``'abc'.find('', 4) == -1`` (start is not
  clamped to the length) while ``'abc'.find('', 3) == 3``, and
  ``'abc'.find('', 2, 1) == -1``.
* Built-in functions, ``str()`` of an int: its decimal digits, with ``-``.
* Language Reference, "Value comparisons": strings compare lexicographically
  by the code points of their characters (``ord``).
"""

from __future__ import annotations

import itertools
import operator
import random
from typing import Any, Callable, List, Optional, Sequence

import pytest
import z3

from refines import strmath

from semantics_helpers import free_constants, read_string

CTX = z3.Context()

ASTRAL = "\U0001F600"
BOUNDS: List[Optional[int]] = [None] + list(range(-5, 6))
INDEXES = list(range(-5, 6))
CMP = {"<": operator.lt, "<=": operator.le, ">": operator.gt, ">=": operator.ge,
       "==": operator.eq, "!=": operator.ne}


def strings(alphabet: Sequence[str], longest: int) -> List[str]:
    return ["".join(p) for k in range(longest + 1) for p in itertools.product(alphabet, repeat=k)]


AB2, AB3, AB4 = strings("ab", 2), strings("ab", 3), strings("ab", 4)
WIDE_ALPHABET = ("a", "\u00e9", ASTRAL, "\\", "\x00")
WIDE1, WIDE2 = strings(WIDE_ALPHABET, 1), strings(WIDE_ALPHABET, 2)
# Texts for the constant encoding: escapes z3 would read, quotes, controls,
# the edges of the BMP and of the solver's alphabet, lone surrogates.
AWKWARD = ["", "\\", "\\\\", "\x00", "a\x00b", "\n", "\t\r", "\u00e9", ASTRAL, "\U0002FFFF",
           "\U00010000", "\uffff", "\ud800", "\udfff", "\\u{41}", "\\u{5c}", "u{41}",
           "\\x41", "\\u0041", "a\\nb", '"', "'", "\x7f", "\x1f", "~ ", "{}",
           "\u00e9" + ASTRAL + "\\\x00"]


def c(text: str) -> z3.SeqRef:
    return strmath.const(text, CTX)


def n(k: Optional[int]):
    return None if k is None else z3.IntVal(k, CTX)


def python(fn: Callable[[], Any]) -> Any:
    """CPython's outcome: the value, or the exception class."""
    try:
        return fn()
    except Exception as exc:  # noqa: BLE001 -- the exception is the outcome
        return type(exc)


# ---------------------------------------------------------------- the simplify path

_EMPTY_MODEL = z3.Model(ctx=CTX)


def evaluated(e: z3.ExprRef) -> Any:
    """The Python value of a closed z3 term: bool, int or str."""
    v = z3.simplify(e)
    if not z3.is_const(v):
        v = z3.simplify(v)
    if not z3.is_const(v):
        assert "str.power" in v.sexpr(), f"simplify left {v}"
        assert not free_constants(v), f"not closed: {v}"  # completion would invent values
        v = _EMPTY_MODEL.eval(v, model_completion=True)
    if z3.is_true(v) or z3.is_false(v):
        return z3.is_true(v)
    if z3.is_int_value(v):
        return v.as_long()
    if z3.is_string_value(v):
        return read_string(v)
    raise AssertionError(f"not a value: {v}")


_FORMULAS: dict = {}


def substituted(name: str, build: Callable, *values) -> Any:
    """``build`` applied to z3 variables once per shape of the arguments (which
    are None), then each case's constants substituted and simplified: the same
    formula on the same constants as building it from them, at half the cost."""
    key = (name,) + tuple(None if v is None else type(v) for v in values)
    if key not in _FORMULAS:
        variables = [None if v is None else (z3.String if isinstance(v, str) else z3.Int)(
            f"p{i}", CTX) for i, v in enumerate(values)]
        _FORMULAS[key] = build(*variables), variables
    formula, variables = _FORMULAS[key]
    pairs = [(var, c(v) if isinstance(v, str) else z3.IntVal(v, CTX))
             for var, v in zip(variables, values) if var is not None]
    return evaluated(z3.substitute(formula, *pairs))


def sweep(cases, expected: Callable, got: Callable) -> int:
    """Compare ``expected(*case)`` (CPython) with ``got(*case)`` (strmath)
    on every case; fail with the first mismatches. Returns the case count."""
    bad, count = [], 0
    for case in cases:
        want, have = expected(*case), got(*case)
        count += 1
        if type(want) is not type(have) or want != have:
            bad.append(f"{case!r}: CPython {want!r}, strmath {have!r}")
    assert not bad, f"{len(bad)} of {count} cases disagree:\n" + "\n".join(bad[:12])
    return count


# ---------------------------------------------------------------- constants and reading


def test_the_sort_is_z3_strings():
    assert strmath.sort(CTX) == z3.StringSort(CTX)
    assert c("ab").sort() == strmath.sort(CTX)


@pytest.mark.parametrize("text", AWKWARD + WIDE2, ids=repr)
def test_a_constant_reads_back_as_the_same_code_points(text):
    # str documentation, "Text Sequence Type": a str is a sequence of code
    # points. Three readings: the simplified constant, strmath.read on an empty
    # model, and strmath.read of a variable the solver must equate with it.
    term = c(text)
    assert read_string(z3.simplify(term)) == text
    assert evaluated(z3.Length(term)) == len(text)
    assert strmath.read(_EMPTY_MODEL, term) == text
    v = z3.String("v", CTX)
    solver = z3.Solver(ctx=CTX)
    solver.add(v == term)
    assert solver.check() == z3.sat
    assert strmath.read(solver.model(), v) == text


def test_code_points_beyond_the_solver_alphabet_are_rejected():
    assert read_string(z3.simplify(c("\U0002FFFF"))) == "\U0002FFFF"  # the last one in
    for text in ("\U00030000", "a\U0010FFFF"):
        with pytest.raises(ValueError):
            c(text)
    assert strmath.MAX_CONSTANT_CODE_POINT < strmath.SOLVER_MAX_CODE_POINT == 0x2FFFF


# ---------------------------------------------------------------- one function at a time


def test_length():
    assert sweep([(s,) for s in AB4 + WIDE2 + AWKWARD], len,
                 lambda s: evaluated(strmath.length(c(s), CTX))) == 31 + 31 + len(AWKWARD)


def _index(s: str, i: int):
    ok = evaluated(strmath.index_ok(c(s), n(i), CTX))
    return evaluated(strmath.getitem(c(s), n(i), CTX)) if ok else IndexError


def test_indexing():
    # Language Reference, "Subscriptions": s[i] for -len(s) <= i < len(s),
    # counting from the end for a negative i; IndexError outside.
    cases = [(s, i) for s in AB4 + WIDE2 for i in INDEXES]
    assert sweep(cases, lambda s, i: python(lambda: s[i]), _index) == 62 * 11
    assert _index("ab", -3) is IndexError and _index("ab", -2) == "a"


def test_slicing():
    # Language Reference, "Slicings"; Common Sequence Operations, notes 3 and 4.
    cases = [(s, lo, hi) for s in AB4 for lo in BOUNDS for hi in BOUNDS]
    assert sweep(cases, lambda s, lo, hi: s[lo:hi], lambda s, lo, hi: substituted(
        "slice", lambda *a: strmath.slice_(*a, CTX), s, lo, hi)) == 31 * 144
    # Built from the constants directly, over the wide alphabet.
    cases = [(s, lo, hi) for s in WIDE2 for lo in BOUNDS for hi in BOUNDS]
    assert sweep(cases, lambda s, lo, hi: s[lo:hi],
                 lambda s, lo, hi: evaluated(strmath.slice_(c(s), n(lo), n(hi), CTX))) == 31 * 144


# find and rfind return a value over a fresh constant, and the definition that
# pins the constant (strmath.find's docstring). On constants, the definition is
# decided by simplify for each candidate value of the constant, from well
# below -1 to well past the length; exactly one candidate must satisfy it
# (the solver path below checks uniqueness over all integers).
SLACK = 3


def _candidates(length: int) -> List[int]:
    return list(range(-1 - SLACK, length + 1 + SLACK))


def _pinned(definition_at: Callable, value_at: Callable, length: int):
    hits = [k for k in _candidates(length) if evaluated(definition_at(k))]
    if len(hits) != 1:
        return f"the definition holds for {hits}"
    return evaluated(value_at(hits[0]))


def _find(s, sub, start, end, last=False):
    """strmath.find built from the constants directly."""
    fresh = z3.Int("fresh", CTX)
    value, definition = strmath.find(c(s), c(sub), n(start), n(end), CTX, fresh, last=last)
    at = lambda e: lambda k: z3.substitute(e, (fresh, z3.IntVal(k, CTX)))  # noqa: E731
    return _pinned(at(definition), at(value), len(s))


_FIND_FORMULAS: dict = {}


def _find_substituted(s, sub, start, end, last=False):
    """The same, from one formula per shape over variables, with the candidates
    decided in one simplify call (a bit mask): the inputs are substituted."""
    key = (last, start is None, end is None, len(s))
    if key not in _FIND_FORMULAS:
        S, T = z3.String("s", CTX), z3.String("t", CTX)
        A, B, F = z3.Int("a", CTX), z3.Int("b", CTX), z3.Int("fresh", CTX)
        value, definition = strmath.find(S, T, None if start is None else A,
                                         None if end is None else B, CTX, F, last=last)
        ks = _candidates(len(s))
        at = [(F, z3.IntVal(k, CTX)) for k in ks]
        mask = z3.Sum([z3.If(z3.substitute(definition, k), z3.IntVal(2**i, CTX),
                             z3.IntVal(0, CTX)) for i, k in enumerate(at)])
        _FIND_FORMULAS[key] = (S, T, A, B), ks, mask, [z3.substitute(value, k) for k in at]
    (S, T, A, B), ks, mask, values = _FIND_FORMULAS[key]
    pairs = [(S, c(s)), (T, c(sub))] + [(v, z3.IntVal(k, CTX)) for v, k in ((A, start), (B, end))
                                         if k is not None]
    bits = evaluated(z3.substitute(mask, *pairs))
    hits = [i for i in range(len(ks)) if bits >> i & 1]
    if len(hits) != 1:
        return f"the definition holds for {[ks[i] for i in hits]}"
    return evaluated(z3.substitute(values[hits[0]], *pairs))


def _python_find(s, sub, start, end, last=False):
    return (s.rfind if last else s.find)(sub, start, end)


def _canonical(s: str, sub: str) -> bool:
    """One of each pair of cases that differ only by swapping 'a' and 'b':
    find answers them alike (it reads characters only through equality)."""
    return (s + sub)[:1] in ("", "a")


@pytest.mark.parametrize("last", [False, True], ids=["find", "rfind"])
def test_find_with_every_window(last):
    # String Methods, find/rfind: the lowest/highest index of sub within
    # s[start:end], or -1; None for an omitted start or end.
    cases = [(s, sub, a, b, last) for s in AB3 for sub in AB2 if _canonical(s, sub)
             for a in BOUNDS for b in BOUNDS]
    assert sweep(cases, _python_find, _find_substituted) == 53 * 144


@pytest.mark.parametrize("last", [False, True], ids=["find", "rfind"])
def test_find_over_the_wide_alphabet(last):
    windows = (None, -1, 0, 2)
    cases = [(s, sub, a, b, last) for s in WIDE2 for sub in WIDE1 for a in windows
             for b in windows]
    assert sweep(cases, _python_find, _find_substituted) == 31 * 6 * 16


def test_find_built_from_constants_directly():
    cases = [(s, sub, a, b, last) for s in ("", "ab", "aba", "\\" + ASTRAL) for sub in
             ("", "a", "ab", ASTRAL) for a in (None, -5, -1, 0, 2, 5) for b in (None, -4, 1, 3)
             for last in (False, True)]
    assert sweep(cases, _python_find, _find) == 4 * 4 * 6 * 4 * 2


def test_the_find_definitions_pin_one_value_without_a_window():
    # For every string up to length 4 and needle up to length 2 (any
    # characters), two constants that both meet the definition are equal.
    # (With symbolic start and end, z3 5.4.1 does not decide this in minutes.)
    S, T = z3.String("s", CTX), z3.String("t", CTX)
    F1, F2 = z3.Int("f1", CTX), z3.Int("f2", CTX)
    for last in (False, True):
        solver = z3.Solver(ctx=CTX)
        solver.set("rlimit", 50_000_000)
        solver.add(strmath.find(S, T, None, None, CTX, F1, last=last)[1],
                   strmath.find(S, T, None, None, CTX, F2, last=last)[1],
                   F1 != F2, z3.Length(S) <= 4, z3.Length(T) <= 2)
        assert solver.check() == z3.unsat, last


@pytest.mark.parametrize("case, expected", [
    (("abc", "", 4, None), -1),  # start past the end: -1, even for ''
    (("abc", "", 3, None), 3),  # start at the end: '' is found there
    (("abc", "", 2, 1), -1),  # an empty window shorter than ''?  -1 all the same
    (("abc", "", 1, 1), 1),
    (("abc", "", -10, None), 0),  # a start before the beginning counts from 0
    (("abc", "c", -1, None), 2),
    (("abc", "c", None, -1), -1),
    (("abab", "ab", 1, None), 2),
])
@pytest.mark.parametrize("last", [False, True], ids=["find", "rfind"])
def test_find_quirks(case, expected, last):
    # CPython answers these (run here); strmath must answer the same.
    s, sub, a, b = case
    if not last:
        assert s.find(sub, a, b) == expected
    assert _find(s, sub, a, b, last) == _python_find(s, sub, a, b, last)


def test_rfind_of_the_empty_string_is_the_window_end():
    assert "abc".rfind("", 1, 2) == 2 and "abc".rfind("") == 3
    assert _find("abc", "", 1, 2, last=True) == 2 and _find("abc", "", None, None, True) == 3


@pytest.mark.parametrize("name", ["contains", "startswith", "endswith"])
def test_substring_tests(name):
    # Common Sequence Operations (`in`); String Methods (startswith, endswith).
    fn = getattr(strmath, name)
    reference = {"contains": lambda hay, needle: needle in hay,
                 "startswith": str.startswith, "endswith": str.endswith}[name]
    cases = [(a, b) for a in AB4 for b in AB4] + [(a, b) for a in WIDE2 for b in WIDE2]
    assert sweep(cases, reference, lambda a, b: evaluated(fn(c(a), c(b), CTX))) == 2 * 31 * 31


def test_repeat():
    # Common Sequence Operations, note 2: n <= 0 gives the empty string.
    cases = [(s, k) for s in AB3 + WIDE2 for k in INDEXES]
    assert sweep(cases, operator.mul,
                 lambda s, k: evaluated(strmath.repeat(c(s), n(k), CTX))) == 46 * 11


def test_replace():
    # String Methods, replace: every non-overlapping occurrence, left to right
    # ('aaa'.replace('aa', 'b') == 'ba'); the result is not scanned again.
    cases = [(s, old, new) for s in AB4 for old in AB2[1:] for new in AB2]
    cases += [(s, old, new) for s in WIDE2 for old in WIDE1[1:] for new in ("", "\\", ASTRAL + "a")]
    assert sweep(cases, str.replace,
                 lambda s, old, new: evaluated(strmath.replace(c(s), c(old), c(new), CTX))
                 ) == 31 * 6 * 7 + 31 * 5 * 3
    assert evaluated(strmath.replace(c("aaa"), c("aa"), c("b"), CTX)) == "ba"


INTS = list(range(-1000, 1001)) + [s * (10**k + d) for k in range(2, 31) for d in (-1, 0, 1)
                                   for s in (1, -1)]


def test_str_of_int():
    # str(n): the decimal digits, with a leading '-' for a negative n; '0'.
    assert sweep([(k,) for k in INTS], str,
                 lambda k: evaluated(strmath.of_int(n(k), CTX))) == len(INTS)


@pytest.mark.parametrize("op", list(CMP))
def test_comparisons(op):
    # Language Reference, "Value comparisons": by code point, lexicographically.
    cases = [(a, b) for a in AB3 for b in AB3] + [(a, b) for a in WIDE2 for b in WIDE2]
    assert sweep(cases, CMP[op],
                 lambda a, b: evaluated(strmath.compare(op, c(a), c(b)))) == 15 * 15 + 31 * 31


def test_the_wide_alphabet_orders_by_code_point():
    # The sweep above relies on these orders being visited.
    assert "\x00" < "\\" < "a" < "\u00e9" < ASTRAL
    assert evaluated(strmath.compare("<", c("\u00e9"), c(ASTRAL)))
    assert evaluated(strmath.compare(">", c("a"), c("\\a")))


# ---------------------------------------------------------------- the solver path


def _var(sort: str, name: str):
    return {"str": z3.String, "int": z3.Int, "bool": z3.Bool}[sort](name, CTX)


def _pin(v, value, by_chars: bool) -> List[z3.BoolRef]:
    """Constraints that make ``v`` the input ``value``: an int by two
    inequalities; a string by one equation with its constant, or (``by_chars``)
    by its length and its characters one at a time, which leaves the solver
    more to do."""
    if not isinstance(value, str):
        return [v >= value, v <= value]
    if not by_chars:
        return [v == c(value)]
    return [z3.Length(v) == len(value)] + [v.at(k) == c(ch) for k, ch in enumerate(value)]


def _read(model, out, sort):
    if sort == "str":
        return strmath.read(model, out)
    value = model.eval(out, model_completion=True)
    return z3.is_true(value) if sort == "bool" else value.as_long()


def _literal(value, sort):
    if sort == "str":
        return c(value)
    return z3.BoolVal(value, CTX) if sort == "bool" else z3.IntVal(value, CTX)


def solve(sort: str, inputs: Sequence[Any], build: Callable, by_chars: bool = True):
    """``build(*vars)`` with the variables pinned to ``inputs`` (``None``
    stays ``None``): the answer the model gives (or the check's result, when
    it is not sat), and the check that no other answer exists (``unsat``)."""
    solver = z3.Solver(ctx=CTX)
    variables = []
    for i, value in enumerate(inputs):
        if value is None:
            variables.append(None)
            continue
        v = _var("str" if isinstance(value, str) else "int", f"in{i}")
        solver.add(*_pin(v, value, by_chars))
        variables.append(v)
    out = _var(sort, "out")
    built = build(*variables)
    if isinstance(built, tuple):  # a value and the definitions of its fresh constants
        built, *definitions = built
        solver.add(*definitions)
    solver.add(out == built)
    result = solver.check()
    if result != z3.sat:
        return f"check: {result}", None
    answer = _read(solver.model(), out, sort)
    solver.add(out != _literal(answer, sort))
    return answer, solver.check()


def solver_cases(rnd: random.Random):
    """(name, inputs, output sort, z3 builder, CPython answer), seeded."""
    pick = rnd.choice
    strs = AB4 + WIDE2
    for _ in range(30):
        s, i = pick(strs), pick(INDEXES)
        yield "index_ok", (s, i), "bool", lambda s, i: strmath.index_ok(s, i, CTX), \
            python(lambda: s[i]) is not IndexError
        if -len(s) <= i < len(s):
            yield "getitem", (s, i), "str", lambda s, i: strmath.getitem(s, i, CTX), s[i]
    for _ in range(50):
        s, lo, hi = pick(strs), pick(BOUNDS), pick(BOUNDS)
        yield "slice", (s, lo, hi), "str", lambda s, a, b: strmath.slice_(s, a, b, CTX), s[lo:hi]
    for last in (False, True):
        for _ in range(50):
            s, sub, a, b = pick(AB4 + WIDE2), pick(AB2 + WIDE1), pick(BOUNDS), pick(BOUNDS)
            yield ("rfind" if last else "find"), (s, sub, a, b), "int", \
                lambda s, t, a, b, last=last: strmath.find(s, t, a, b, CTX,
                                                           z3.Int("fresh", CTX), last=last), \
                _python_find(s, sub, a, b, last)
    for name, reference in (("contains", lambda h, x: x in h), ("startswith", str.startswith),
                            ("endswith", str.endswith)):
        for _ in range(25):
            a, b = pick(strs), pick(AB2 + WIDE1)
            yield name, (a, b), "bool", lambda a, b, f=getattr(strmath, name): f(a, b, CTX), \
                reference(a, b)
    for _ in range(30):
        s, k = pick(AB3 + WIDE1), pick(INDEXES)
        yield "repeat", (s, k), "str", lambda s, k: strmath.repeat(s, k, CTX), s * k
    for _ in range(40):
        s, old, new = pick(AB4 + WIDE2), pick(AB2[1:] + WIDE1[1:]), pick(AB2 + WIDE1)
        yield "replace", (s, old, new), "str", \
            lambda s, o, w: strmath.replace(s, o, w, CTX), s.replace(old, new)
    for _ in range(30):
        k = pick(INTS)
        yield "of_int", (k,), "str", lambda k: strmath.of_int(k, CTX), str(k)
    for _ in range(60):
        op, a, b = pick(list(CMP)), pick(strs), pick(strs)
        yield "compare " + op, (a, b), "bool", \
            lambda a, b, op=op: strmath.compare(op, a, b), CMP[op](a, b)
    for _ in range(20):
        s = pick(strs + AWKWARD)
        yield "length", (s,), "int", lambda s: strmath.length(s, CTX), len(s)
        yield "read", (s,), "str", lambda s: s, s


SOLVER_BATCHES = 1


@pytest.mark.parametrize("batch", range(SOLVER_BATCHES))
def test_the_solver_agrees_with_cpython(batch):
    # With inputs pinned character by character, z3 5.4.1 finds replace's
    # answer but cannot rule out others ("incomplete (theory seq)", measured):
    # there, uniqueness is checked with the inputs pinned by one equation.
    bad, names = [], set()
    cases = list(solver_cases(random.Random(batch)))
    for name, inputs, sort, build, expected in cases:
        names.add(name)
        got, unique = solve(sort, inputs, build)
        if name == "replace" and unique == z3.unknown:
            _, unique = solve(sort, inputs, build, by_chars=False)
        if type(got) is not type(expected) or got != expected or unique != z3.unsat:
            bad.append(f"{name}{inputs!r}: CPython {expected!r}, solver {got!r} "
                       f"(another answer: {unique})")
    assert not bad, f"{len(bad)} of {len(cases)} disagree:\n" + "\n".join(bad[:12])
    kinds = {name.split()[0] for name in names}
    assert len(cases) >= 300 and len(kinds) == 14, (len(cases), kinds)


def test_the_solver_path_can_fail():
    # A wrong formula is caught: pretend slicing does not clamp negative bounds.
    unclamped = solve("str", ("abc", -1, None), lambda s, a, b: z3.SubString(s, a, z3.Length(s)))
    assert unclamped == ("", z3.unsat)
    assert solve("str", ("abc", -1, None),
                 lambda s, a, b: strmath.slice_(s, a, b, CTX)) == ("c", z3.unsat)


# ---------------------------------------------------------------- larger sweeps


@pytest.mark.slow
@pytest.mark.parametrize("last", [False, True], ids=["find", "rfind"])
def test_find_with_every_window_on_longer_strings(last):
    cases = [(s, sub, a, b, last) for s in AB4 for sub in AB3 for a in BOUNDS for b in BOUNDS]
    assert sweep(cases, _python_find, _find_substituted) == 31 * 15 * 144


@pytest.mark.slow
@pytest.mark.parametrize("last", [False, True], ids=["find", "rfind"])
def test_find_with_every_window_over_the_wide_alphabet(last):
    cases = [(s, sub, a, b, last) for s in WIDE2 for sub in WIDE2 for a in BOUNDS for b in BOUNDS]
    assert sweep(cases, _python_find, _find_substituted) == 31 * 31 * 144


@pytest.mark.slow
def test_replace_and_repeat_on_longer_strings():
    ab5 = strings("ab", 5)
    cases = [(s, old, new) for s in ab5 for old in AB3[1:] for new in AB2]
    assert sweep(cases, str.replace,
                 lambda s, old, new: evaluated(strmath.replace(c(s), c(old), c(new), CTX))
                 ) == 63 * 14 * 7
    assert sweep([(s, k) for s in AB4 for k in range(-5, 9)], operator.mul,
                 lambda s, k: evaluated(strmath.repeat(c(s), n(k), CTX))) == 31 * 14


@pytest.mark.slow
@pytest.mark.parametrize("batch", range(SOLVER_BATCHES, SOLVER_BATCHES + 8))
def test_the_solver_agrees_with_cpython_on_more_samples(batch):
    test_the_solver_agrees_with_cpython(batch)
