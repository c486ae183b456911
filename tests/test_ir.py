"""The intermediate form: smart constructors keep meaning, ``render`` prints Python.

Meaning is checked by evaluating terms with CPython's own operators
(``py_eval``) and comparing; printing is checked by parsing the printed text
with ``ast`` (the tree must be the one the term stands for) and by ``eval`` on
concrete values.
"""

from __future__ import annotations

import ast
import itertools

import random

import pytest

from refines import ir

from semantics_helpers import ARITH, CMP, py_eval

INT_VALUES = (-(10**30), -7, -2, -1, 0, 1, 2, 3, 7, 10**30)
BOOL_VALUES = (False, True)

X, Y = ir.Var("x", ir.INT), ir.Var("y", ir.INT)
P, Q = ir.Var("p", ir.BOOL), ir.Var("q", ir.BOOL)
ENVS = [dict(x=x, y=y, p=p, q=q) for x, y, p, q in itertools.product(
    (-7, -1, 0, 2, 10**30), (-3, 0, 1, 5), BOOL_VALUES, BOOL_VALUES)]


def outcome(thunk):
    """A value, or the exception class it raised (so ZeroDivisionError compares)."""
    try:
        return ("value", thunk())
    except ZeroDivisionError:
        return ("raised", ZeroDivisionError)


def same_meaning(folded: ir.Term, raw: ir.Term, envs=ENVS) -> bool:
    """``folded`` has ``raw``'s value wherever ``raw`` is defined.

    Where evaluating ``raw`` divides by zero, a folded term may have any value:
    terms are total, and the translator has already made such states a raising
    outcome (``ir.arith``: "the caller has already made it a raising outcome").
    So ``or_(x // y > 0, TRUE)`` may fold to ``TRUE``.
    """
    for env in envs:
        expected = outcome(lambda: py_eval(raw, env))
        if expected[0] != "raised" and outcome(lambda: py_eval(folded, env)) != expected:
            return False
    return True


# ---------------------------------------------------------------- folding constants

@pytest.mark.parametrize("op", sorted(ARITH))
def test_arith_on_constants_folds_to_pythons_value(op):
    values = INT_VALUES + BOOL_VALUES
    for a, b in itertools.product(values, values):
        t = ir.arith(op, ir.const(a), ir.const(b))
        if op in ("//", "%") and b == 0:
            # Must not fold to a number: Python raises here, and the translator
            # has already made that a raising outcome.
            assert not isinstance(t, ir.Const), (a, op, b, t)
            continue
        assert isinstance(t, ir.Const) and t.sort == ir.INT, (a, op, b, t)
        assert t.value == ARITH[op](a, b) and type(t.value) is int, (a, op, b, t)


@pytest.mark.parametrize("op", sorted(CMP))
def test_cmp_on_constants_folds_to_pythons_value(op):
    # Python Language Reference, 6.10.1 "Value comparisons": bools compare as the
    # ints 0 and 1, so True == 1 and False < 1 hold.
    values = INT_VALUES + BOOL_VALUES
    for a, b in itertools.product(values, values):
        t = ir.cmp(op, ir.const(a), ir.const(b))
        assert isinstance(t, ir.Const) and t.sort == ir.BOOL, (a, op, b)
        assert t.value is CMP[op](a, b), (a, op, b)


def test_neg_and_as_int_fold_constants():
    for v in INT_VALUES + BOOL_VALUES:
        n = ir.neg(ir.const(v))
        assert isinstance(n, ir.Const) and n.value == -v and type(n.value) is int
        i = ir.as_int(ir.const(v))
        assert isinstance(i, ir.Const) and i.value == int(v) and i.sort == ir.INT


def test_boolean_connectives_on_constants_follow_the_truth_tables():
    for bits in itertools.product(BOOL_VALUES, repeat=3):
        args = [ir.const(b) for b in bits]
        assert ir.and_(*args) is ir.const(all(bits))
        assert ir.or_(*args) is ir.const(any(bits))
        assert ir.and_(*args[:2]) is ir.const(bits[0] and bits[1])
        assert ir.or_(*args[:2]) is ir.const(bits[0] or bits[1])
        assert ir.not_(args[0]) is ir.const(not bits[0])
        assert ir.implies(args[0], args[1]) is ir.const((not bits[0]) or bits[1])
        assert ir.ite(args[0], args[1], args[2]) is ir.const(bits[1] if bits[0] else bits[2])
    assert ir.and_() is ir.TRUE and ir.or_() is ir.FALSE  # like all([]) and any([])


def test_connectives_with_one_constant_keep_the_meaning():
    for k in (ir.TRUE, ir.FALSE):
        checks = [
            (ir.and_(P, k), ir.And((P, k))), (ir.and_(k, P, Q), ir.And((k, P, Q))),
            (ir.or_(P, k), ir.Or((P, k))), (ir.or_(Q, k, P), ir.Or((Q, k, P))),
            (ir.implies(P, k), ir.Or((ir.Not(P), k))), (ir.implies(k, P), ir.Or((ir.Not(k), P))),
            (ir.ite(P, k, Q), ir.Ite(P, k, Q)),
            (ir.ite(P, Q, k), ir.Ite(P, Q, k)), (ir.ite(k, P, Q), ir.Ite(k, P, Q)),
        ]
        for folded, raw in checks:
            assert same_meaning(folded, raw), (folded, raw)
    assert same_meaning(ir.not_(ir.not_(P)), P)
    assert ir.ite(P, ir.TRUE, ir.FALSE) is P
    assert same_meaning(ir.ite(P, ir.FALSE, ir.TRUE), ir.Not(P))


def test_identity_folds_keep_the_meaning():
    zero, one = ir.const(0), ir.const(1)
    pairs = [(ir.arith("+", X, zero), ir.Arith("+", X, zero)),
             (ir.arith("+", zero, X), ir.Arith("+", zero, X)),
             (ir.arith("-", X, zero), ir.Arith("-", X, zero)),
             (ir.arith("-", zero, X), ir.Arith("-", zero, X)),
             (ir.arith("*", X, one), ir.Arith("*", X, one)),
             (ir.arith("*", one, X), ir.Arith("*", one, X)),
             (ir.arith("*", X, zero), ir.Arith("*", X, zero)),
             (ir.arith("//", X, one), ir.Arith("//", X, one)),
             (ir.arith("%", X, one), ir.Arith("%", X, one)),
             (ir.arith("+", P, zero), ir.Arith("+", ir.ToInt(P), zero)),
             (ir.arith("*", one, P), ir.Arith("*", one, ir.ToInt(P))),
             (ir.neg(ir.neg(X)), X), (ir.neg(P), ir.Neg(ir.ToInt(P)))]
    for folded, raw in pairs:
        assert same_meaning(folded, raw), (folded, raw)
        assert folded.sort == ir.INT


def test_a_bool_used_as_an_int_counts_as_zero_or_one():
    # Python Language Reference, 3.2 "The standard type hierarchy": Booleans
    # behave like the values 0 and 1 in almost all contexts.
    t = ir.arith("+", P, ir.const(1))
    for env in ENVS:
        assert py_eval(t, env) == env["p"] + 1
    mixed = ir.ite(P, ir.TRUE, ir.const(3))  # `True if p else 3`
    assert mixed.sort == ir.INT
    for env in ENVS:
        assert py_eval(mixed, env) == (True if env["p"] else 3)
    assert ir.cmp("==", P, ir.const(1)).sort == ir.BOOL
    for env in ENVS:
        assert py_eval(ir.cmp("==", P, ir.const(1)), env) is (env["p"] == 1)
        assert py_eval(ir.cmp("<", P, Q), env) is (env["p"] < env["q"])


def test_flattening_keeps_the_meaning():
    a, b = ir.cmp("<", X, Y), ir.cmp("==", X, ir.const(0))
    nested = ir.and_(ir.and_(a, P), ir.and_(b, ir.or_(Q, P)))
    assert isinstance(nested, ir.And) and not any(isinstance(t, ir.And) for t in nested.args)
    assert same_meaning(nested, ir.And((ir.And((a, P)), ir.And((b, ir.Or((Q, P)))))))
    nested_or = ir.or_(ir.or_(a, P), ir.or_(b, Q))
    assert isinstance(nested_or, ir.Or) and len(nested_or.args) == 4
    assert same_meaning(nested_or, ir.Or((ir.Or((a, P)), ir.Or((b, Q)))))


# ---------------------------------------------------------------- random terms

def random_term(rnd: random.Random, sort: str, depth: int, smart: bool, pool: list):
    """A random well-sorted term, built with the smart constructors or with the
    raw dataclasses. Sub-terms are sometimes shared, making a DAG."""
    same = [t for t in pool if t.sort == sort]
    if same and rnd.random() < 0.15:
        return rnd.choice(same)
    A = ir.arith if smart else (lambda op, a, b: ir.Arith(op, a, b))  # noqa: E731
    C = ir.cmp if smart else (lambda op, a, b: ir.Cmp(op, a, b))  # noqa: E731
    if depth == 0 or rnd.random() < 0.2:
        if sort == ir.INT:
            return rnd.choice((X, Y)) if rnd.random() < 0.6 else ir.const(
                rnd.choice(INT_VALUES))
        return rnd.choice((P, Q)) if rnd.random() < 0.8 else ir.const(rnd.random() < 0.5)
    sub = lambda s: random_term(rnd, s, depth - 1, smart, pool)  # noqa: E731
    if sort == ir.INT:
        kind = rnd.choice(("arith", "arith", "arith", "neg", "toint", "ite"))
        if kind == "arith":
            t = A(rnd.choice(sorted(ARITH)), sub(ir.INT), sub(ir.INT))
        elif kind == "neg":
            t = ir.neg(sub(ir.INT)) if smart else ir.Neg(sub(ir.INT))
        elif kind == "toint":
            t = ir.as_int(sub(ir.BOOL)) if smart else ir.ToInt(sub(ir.BOOL))
        else:
            c, a, b = sub(ir.BOOL), sub(ir.INT), sub(ir.INT)
            t = ir.ite(c, a, b) if smart else ir.Ite(c, a, b)
    else:
        kind = rnd.choice(("cmp", "cmp", "not", "and", "or", "ite", "booleq"))
        if kind == "cmp":
            t = C(rnd.choice(sorted(CMP)), sub(ir.INT), sub(ir.INT))
        elif kind == "booleq":
            t = C(rnd.choice(("==", "!=")), sub(ir.BOOL), sub(ir.BOOL))
        elif kind == "not":
            t = ir.not_(sub(ir.BOOL)) if smart else ir.Not(sub(ir.BOOL))
        elif kind in ("and", "or"):
            args = tuple(sub(ir.BOOL) for _ in range(rnd.randint(2, 3)))
            if smart:
                t = (ir.and_ if kind == "and" else ir.or_)(*args)
            else:
                t = (ir.And if kind == "and" else ir.Or)(args)
        else:
            c, a, b = sub(ir.BOOL), sub(ir.BOOL), sub(ir.BOOL)
            t = ir.ite(c, a, b) if smart else ir.Ite(c, a, b)
    pool.append(t)
    return t


def test_smart_constructors_never_change_the_meaning():
    # The same random recipe built twice, folded and unfolded, must agree everywhere.
    folded = 0
    for seed in range(400):
        sort = (ir.INT, ir.BOOL)[seed % 2]
        smart = random_term(random.Random(seed), sort, 4, True, [])
        raw = random_term(random.Random(seed), sort, 4, False, [])
        assert same_meaning(smart, raw), (seed, smart, raw)
        folded += ir.render(smart) != ir.render(raw)
    assert folded > 100  # the recipes did give the constructors something to fold


def fully_parenthesised(t: ir.Term) -> str:
    """The term printed with parentheses around every compound sub-term."""
    f = fully_parenthesised
    if isinstance(t, ir.Var):
        return t.name
    if isinstance(t, ir.Const):
        return f"({t.value!r})"
    if isinstance(t, (ir.Arith, ir.Cmp)):
        return f"({f(t.left)} {t.op} {f(t.right)})"
    if isinstance(t, ir.Neg):
        return f"(-{f(t.arg)})"
    if isinstance(t, ir.ToInt):
        return f"int({f(t.arg)})"
    if isinstance(t, ir.Not):
        return f"(not {f(t.arg)})"
    if isinstance(t, ir.And):
        return "(" + " and ".join(f(a) for a in t.args) + ")"
    if isinstance(t, ir.Or):
        return "(" + " or ".join(f(a) for a in t.args) + ")"
    if isinstance(t, ir.Ite):
        return f"({f(t.then)} if {f(t.cond)} else {f(t.orelse)})"
    raise TypeError(t)


class _FlattenBoolOps(ast.NodeTransformer):
    """`a and (b and c)` is `a and b and c` in Python, operand values included
    (and/or are associative); the printer prints nested chains flat."""

    def visit_BoolOp(self, node: ast.BoolOp) -> ast.BoolOp:
        self.generic_visit(node)
        values = []
        for v in node.values:
            if isinstance(v, ast.BoolOp) and type(v.op) is type(node.op):
                values.extend(v.values)
            else:
                values.append(v)
        node.values = values
        return node


def tree(text: str) -> str:
    return ast.dump(_FlattenBoolOps().visit(ast.parse(text, mode="eval")))


@pytest.mark.parametrize("smart", [True, False], ids=["smart", "raw"])
def test_render_prints_the_term_it_stands_for(smart):
    # Parentheses leave no trace in Python's syntax tree, so the printed text
    # parses to the same tree as a fully parenthesised print exactly when the
    # precedence is right; eval on concrete values checks the text's meaning.
    for seed in range(300):
        t = random_term(random.Random(1000 + seed), (ir.INT, ir.BOOL)[seed % 2], 4, smart, [])
        text = ir.render(t)
        assert tree(text) == tree(fully_parenthesised(t)), (seed, text)
        for env in ENVS[::7]:
            assert outcome(lambda: eval(text, {}, dict(env))) == outcome(
                lambda: py_eval(t, env)), (seed, text, env)


TRICKY = [
    ir.Arith("-", X, ir.Arith("-", Y, X)),  # x - (y - x)
    ir.Arith("-", ir.Arith("-", X, Y), X),  # x - y - x
    ir.Arith("//", X, ir.Arith("*", Y, X)),  # x // (y * x)
    ir.Arith("*", ir.Arith("//", X, Y), X),
    ir.Arith("%", X, ir.Arith("%", Y, X)),
    ir.Arith("*", ir.Arith("+", X, Y), ir.Arith("-", X, Y)),
    ir.Arith("-", X, ir.const(-3)),  # x - -3
    ir.Arith("//", ir.const(-7), X),  # -7 // x is (-7) // x
    ir.Neg(ir.Arith("+", X, Y)), ir.Neg(ir.Neg(X)), ir.Neg(ir.const(-3)),
    ir.Arith("*", ir.Neg(X), Y),
    ir.Cmp("==", ir.Cmp("<", X, Y), P),  # (x < y) == p, not a chain
    ir.Cmp("<", X, ir.Arith("+", Y, ir.const(1))),
    ir.Cmp("==", ir.Not(P), Q),  # `x == not y` is a syntax error
    ir.Not(ir.Cmp("<", X, Y)), ir.Not(ir.And((P, Q))), ir.Not(ir.Not(P)),
    ir.And((ir.Or((P, Q)), P)), ir.Or((ir.And((P, Q)), ir.Not(P))),
    ir.And((P, ir.And((Q, P)))),
    ir.Ite(P, X, ir.Ite(Q, Y, X)), ir.Ite(ir.Ite(P, Q, P), X, Y),
    ir.Ite(P, ir.Ite(Q, X, Y), X),
    ir.Arith("+", ir.Ite(P, X, Y), ir.const(1)),
    ir.Not(ir.Ite(P, Q, P)), ir.Or((ir.Ite(P, Q, P), Q)),
    ir.Ite(ir.Or((P, Q)), ir.Or((P, Q)), ir.And((P, Q))),
    ir.ToInt(ir.Or((P, Q))), ir.Arith("*", ir.ToInt(P), ir.Neg(Y)),
    ir.Cmp("!=", ir.Ite(P, X, Y), ir.Neg(X)),
]


@pytest.mark.parametrize("t", TRICKY, ids=[fully_parenthesised(t) for t in TRICKY])
def test_render_precedence_cases(t):
    text = ir.render(t)
    assert tree(text) == tree(fully_parenthesised(t)), text
    for env in ENVS:
        assert outcome(lambda: eval(text, {}, dict(env))) == outcome(lambda: py_eval(t, env))


def test_render_shares_subterms_in_different_contexts():
    # A shared sub-term printed once bare and once where it needs parentheses.
    s = ir.Arith("+", X, Y)
    t = ir.Arith("*", ir.Arith("+", s, ir.const(1)), s)
    text = ir.render(t)
    assert tree(text) == tree(fully_parenthesised(t))
    for env in ENVS:
        assert eval(text, {}, dict(env)) == (env["x"] + env["y"] + 1) * (env["x"] + env["y"])


def test_render_value_prints_tuples_and_none_as_python():
    one = ir.Tup((ir.Arith("+", X, ir.const(1)),))
    pair = ir.Tup((X, ir.Tup((P, ir.NONE))))
    for env in ENVS[:5]:
        assert eval(ir.render_value(one), {}, dict(env)) == (env["x"] + 1,)
        assert eval(ir.render_value(pair), {}, dict(env)) == (env["x"], (env["p"], None))
    assert eval(ir.render_value(ir.Tup(()))) == ()
    assert eval(ir.render_value(ir.NONE)) is None
    assert ir.NoneValue() is ir.NONE


def test_outcome_and_behaviour_print_guards_and_results_as_python():
    guard = ir.cmp(">", X, ir.const(0))
    ret = ir.Outcome(guard, value=ir.arith("+", X, ir.const(1)))
    err = ir.Outcome(ir.not_(guard), exception=ValueError)
    b = ir.Behaviour((X,), (ret, err))
    lines = repr(b).splitlines()
    assert len(lines) == 2 and ret.returns and not err.returns
    for line, o in zip(lines, (ret, err)):
        cond, _, end = line.partition("  ->  ")
        for env in ENVS:
            assert eval(cond, {}, dict(env)) == py_eval(o.guard, env)
        if o.returns:
            assert end.startswith("result = ")
            for env in ENVS:
                assert eval(end[len("result = "):], {}, dict(env)) == env["x"] + 1
        else:
            assert end == "raises ValueError"
