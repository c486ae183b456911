"""Quantifier elimination (refines.eliminate): the conditions it returns are
checked here against brute force, independently of the solver.

Each universal example quantifies an unknown ``h`` that the guard confines
to a finite range (``0 <= h <= x``, say), so ``forall h`` can be evaluated
by trying every ``h`` in that range; each existential example is evaluated
by trying every parameter value in a window. The eliminated form, printed as
Python, must agree with that evaluation on every grid point.
"""

import itertools

import pytest

from refines import eliminate, ir
from refines.prove import Budget, Solver
from refines.readable import readable

X = ir.Var("x", ir.INT)
Y = ir.Var("y", ir.INT)
S = ir.Var("s", ir.STR)
F = ir.Var("f", ir.FLOAT)
GRID = range(-12, 13)


def c(n):
    return ir.const(n)


def solver():
    s = Solver(Budget(10))
    s.per_query = 1.0
    return s


def text_of(term, params):
    out = readable(term, ir.TRUE, params, solver())
    assert out is not None
    return out


def test_forall_over_a_bounded_unknown_agrees_with_trying_every_value():
    # forall h. (0 <= h <= x) -> x - h + y >= 3 ; the worst h is x itself.
    h = ir.opaque(ir.INT)
    cond = ir.implies(ir.and_(ir.cmp(">=", h, c(0)), ir.cmp("<=", h, X)),
                      ir.cmp(">=", ir.arith("+", ir.arith("-", X, h), Y), c(3)))
    out = eliminate.forall(cond, [h], solver())
    assert out.term is not None and out.exact
    text = text_of(out.term, [X, Y])
    for x, y in itertools.product(GRID, GRID):
        expected = all(x - k + y >= 3 for k in range(0, x + 1))
        assert eval(text, {}, {"x": x, "y": y}) == expected, (x, y, text)


def test_forall_with_a_divisibility_condition():
    # forall h. (3 * h == x) -> h > 2: either x is not a multiple of 3, or x // 3 > 2.
    # (Python Language Reference, "Binary arithmetic operations": % of a
    # positive divisor is never negative, so x % 3 == 0 tests divisibility.)
    h = ir.opaque(ir.INT)
    cond = ir.implies(ir.cmp("==", ir.arith("*", c(3), h), X), ir.cmp(">", h, c(2)))
    out = eliminate.forall(cond, [h], solver())
    assert out.term is not None and out.exact
    text = text_of(out.term, [X])
    for x in range(-40, 41):
        expected = all(k > 2 for k in range(-20, 21) if 3 * k == x)
        assert eval(text, {}, {"x": x}) == expected, (x, text)


def test_forall_over_a_flag_and_an_int():
    # An untranslated call: it may raise (flag b) or return h >= 0.
    b, h = ir.opaque(ir.BOOL), ir.opaque(ir.INT)
    cond = ir.and_(ir.implies(ir.and_(ir.cmp(">", X, c(5)), b), ir.FALSE),
                   ir.implies(ir.and_(ir.cmp(">", X, c(5)), ir.not_(b), ir.cmp(">=", h, c(0))),
                              ir.cmp(">=", ir.arith("+", h, X), c(0))))
    out = eliminate.forall(cond, [b, h], solver())
    assert out.term is not None and out.exact
    text = text_of(out.term, [X])
    for x in GRID:
        assert eval(text, {}, {"x": x}) == (x <= 5), (x, text)


def test_parts_without_the_unknown_are_kept_as_they_are():
    # len(s) and a float test do not mention h: they pass through elimination.
    h = ir.opaque(ir.INT)
    nan = ir.op("isnan", F, sort=ir.BOOL)
    cond = ir.implies(ir.cmp(">", h, c(0)),
                      ir.and_(ir.not_(nan), ir.cmp(">", ir.arith("+", h, ir.str_len(S)), c(2))))
    out = eliminate.forall(cond, [h], solver())
    assert out.term is not None and out.exact
    text = text_of(out.term, [S, F])
    import math

    for n, f in itertools.product(range(0, 5), (0.5, float("nan"), -1.0)):
        s = "a" * n
        expected = (not math.isnan(f)) and all(k + n > 2 for k in range(1, 50))
        assert eval(text, {"math": math}, {"s": s, "f": f}) == expected, (n, f, text)


def test_exists_gives_the_image_of_a_floor_division():
    # exists x >= 0. r == (x + 1) // 2  is  r >= 0.
    r = ir.Var("r", ir.INT)
    cond = ir.and_(ir.cmp(">=", X, c(0)),
                   ir.cmp("==", r, ir.arith("//", ir.arith("+", X, c(1)), c(2))))
    out = eliminate.exists(cond, [X], solver())
    assert out.term is not None and out.exact
    text = text_of(out.term, [r])
    image = {(x + 1) // 2 for x in range(0, 200)}
    for value in range(-20, 60):
        assert eval(text, {}, {"r": value}) == (value in image), (value, text)


def test_an_unknown_that_is_a_str_is_not_eliminated_and_says_so():
    t = ir.opaque(ir.STR)
    cond = ir.cmp(">", ir.str_len(t), X)
    out = eliminate.forall(cond, [t], solver())
    assert out.term is None
    assert "str" in out.why


def test_a_product_of_unknowns_is_refused_not_guessed():
    h = ir.opaque(ir.INT)
    out = eliminate.forall(ir.cmp(">", ir.arith("*", h, Y), c(2)), [h], solver())
    assert out.term is None
    assert "not linear" in out.why


def test_no_unknown_means_the_condition_itself():
    cond = ir.cmp(">", X, c(1))
    out = eliminate.forall(cond, [ir.opaque(ir.INT)], solver())
    assert out.term is cond and out.exact


@pytest.mark.parametrize("sign", [1, -1])
def test_the_solvers_euclidean_mod_reads_back_as_pythons(sign):
    # z3's mod is Euclidean (never negative); for a negative divisor Python's
    # % takes the divisor's sign (Language Reference, "Binary arithmetic
    # operations"). The reading back must keep the solver's meaning.
    import z3

    s = solver()
    a = z3.Int("atom!0", s.ctx)
    m = z3.IntVal(4 * sign, s.ctx)
    for build, meaning in ((lambda: a % m == 1, lambda v: v % 4 == 1),
                           (lambda: a / m == 2, lambda v: (v - v % 4) // (4 * sign) == 2)):
        term = eliminate._to_ir(build(), {"atom!0": X})
        text = ir.render(term)
        for v in range(-30, 31):
            assert eval(text, {}, {"x": v}) == meaning(v), (v, text)
