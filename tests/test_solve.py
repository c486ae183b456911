"""The solver strategy's contract (refines.solve): which engine a query goes to,
that unsat means unsat, that a sat answer is a z3 model of the query in the
obligation's context, and that a spent budget gives unknown.

No test asserts on time; hard queries are starved on purpose instead.
"""

from __future__ import annotations

import math

import pytest
import z3

from helpers import check_one
from refines import fpmath, solve
from refines.prove import RLIMIT_PER_SECOND, Budget, Solver

needs_bitwuzla = pytest.mark.skipif(not solve.available(), reason="bitwuzla not installed")
BITWUZLA_ONLY = solve.Strategy("bitwuzla only", floats=(solve.Bitwuzla(),))
BITWUZLA_THEN_Z3 = solve.Strategy("bitwuzla, then z3", floats=(solve.Bitwuzla(), solve.Z3()))


class Query:
    """z3 terms for one query, in a fresh context, and a runner for them."""

    def __init__(self, seconds: float = 5.0, strategy=None) -> None:
        self.ctx = z3.Context()
        self.budget = Budget(seconds)
        self.runner = solve.Runner(self.ctx, self.budget, RLIMIT_PER_SECOND, strategy)
        self.sort = fpmath.sort(self.ctx)
        self.rne = fpmath.rne(self.ctx)

    def fp(self, name: str) -> z3.FPRef:
        return z3.FP(name, self.sort)

    def f(self, value: float) -> z3.FPRef:
        return fpmath.const(value, self.ctx)

    def finite(self, x) -> z3.BoolRef:
        return fpmath.isfinite(x, self.ctx)

    def check(self, *assertions):
        return self.runner.check(list(assertions))

    def engines(self):
        return [label for label, *_ in self.runner.log]


def midpoint_overflows(q: Query):
    """Finite lo, hi with (lo + hi) / 2 infinite: satisfiable (lo = hi = 1e308)."""
    lo, hi = q.fp("lo"), q.fp("hi")
    mid = z3.fpDiv(q.rne, z3.fpAdd(q.rne, lo, hi, ctx=q.ctx), q.f(2.0), ctx=q.ctx)
    return [q.finite(lo), q.finite(hi), z3.fpIsInf(mid, ctx=q.ctx)], (lo, hi)


def price_round_trip_fails(q: Query):
    """price * qty / qty != price for finite inputs: satisfiable, and it takes
    bitwuzla a few thousand polls (z3: seconds)."""
    price, qty = q.fp("price"), q.fp("qty")
    back = z3.fpDiv(q.rne, z3.fpMul(q.rne, price, qty, ctx=q.ctx), qty, ctx=q.ctx)
    return [q.finite(price), q.finite(qty), z3.Not(z3.fpIsZero(qty, ctx=q.ctx), q.ctx),
            z3.Not(z3.fpEQ(back, price, ctx=q.ctx), q.ctx)]


def horner_leaves_range(q: Query):
    """0 <= t <= 1 and a degree-5 polynomial outside [0, 1]: unsatisfiable (the
    claim holds), which z3 does not decide in 30 s and bitwuzla in about 1 s."""
    t, r, c = q.fp("t"), q.rne, q.ctx
    acc = q.f(0.05)
    for k in (-0.1, 0.2, -0.3, 0.35, 0.3):
        acc = z3.fpAdd(r, z3.fpMul(r, acc, t, ctx=c), q.f(k), ctx=c)
    return [z3.fpLEQ(q.f(0.0), t, ctx=c), z3.fpLEQ(t, q.f(1.0), ctx=c),
            z3.Not(z3.And(z3.fpLEQ(q.f(0.0), acc, ctx=c), z3.fpLEQ(acc, q.f(1.0), ctx=c)), c)]


# ---------------------------------------------------------------- which engine


def test_int_queries_take_z3s_single_fast_path(monkeypatch):
    def no(*a, **k):
        raise AssertionError("an int query must not reach another engine")
    monkeypatch.setattr(solve, "_bitwuzla", no)
    q = Query()
    n = z3.Int("n", q.ctx)
    assert not solve.float_only(q.ctx, [n > 3])
    status, model, why = q.check(n > 3, n < 5)
    assert status == z3.sat and model.eval(n).as_long() == 4 and why is None
    status, _, _ = q.check(n > 3, n < 4)
    assert status == z3.unsat
    assert q.engines() == ["z3", "z3"]


def test_mixed_int_and_float_queries_stay_with_z3(monkeypatch):
    monkeypatch.setattr(solve, "_bitwuzla", lambda *a, **k: pytest.fail("reached bitwuzla"))
    q = Query()
    n, x = z3.Int("n", q.ctx), q.fp("x")
    mixed = [n > 0, z3.fpLT(x, q.f(1.0), ctx=q.ctx)]
    assert not solve.float_only(q.ctx, mixed)
    assert q.check(*mixed)[0] == z3.sat
    assert q.engines() == ["z3"]


def test_float_only_is_floats_with_booleans_around():
    q = Query()
    x, p = q.fp("x"), z3.Bool("p", q.ctx)
    assert solve.float_only(q.ctx, [z3.Or(p, z3.fpIsNaN(x, ctx=q.ctx))])
    assert not solve.float_only(q.ctx, [z3.Or(p, z3.Not(p))])  # no float: z3
    assert not solve.float_only(q.ctx, [z3.fpToReal(x, ctx=q.ctx) > 2])  # reals: z3


def test_the_default_for_floats_is_bitwuzla_then_z3():
    first, then = solve.DEFAULT.floats
    assert isinstance(first, solve.Bitwuzla) and isinstance(then, solve.Z3)
    assert solve.DEFAULT.other == (solve.Z3(),)  # everything else: z3 alone


@needs_bitwuzla
def test_float_queries_go_to_bitwuzla_first():
    q = Query()
    assertions, _ = midpoint_overflows(q)
    assert q.check(*assertions)[0] == z3.sat
    assert q.engines() == ["bitwuzla"]


@needs_bitwuzla
def test_a_quick_try_that_gave_up_is_skipped_for_the_rest_of_the_obligation():
    tiny = solve.Z3(quick=True, units=2_000)  # enough for an easy query only
    q = Query(strategy=solve.Strategy("tiny", floats=(tiny, solve.Bitwuzla(), solve.Z3())))
    x = q.fp("x")
    assert q.check(z3.fpIsNaN(x, ctx=q.ctx))[0] == z3.sat
    assert q.engines() == ["z3 quick"]
    assertions, _ = midpoint_overflows(q)
    assert q.check(*assertions)[0] == z3.sat
    assert q.engines() == ["z3 quick", "z3 quick", "bitwuzla"]
    assert q.check(z3.fpIsNaN(x, ctx=q.ctx))[0] == z3.sat
    assert q.engines()[3:] == ["bitwuzla"]


def test_z3_alone_sends_float_queries_to_z3_only(monkeypatch):
    monkeypatch.setattr(solve, "_bitwuzla", lambda *a, **k: pytest.fail("reached bitwuzla"))
    q = Query(strategy=solve.Z3_ALONE)
    assertions, _ = midpoint_overflows(q)
    assert q.check(*assertions)[0] == z3.sat
    assert q.engines() == ["z3"]


def test_without_bitwuzla_floats_are_answered_by_z3(monkeypatch):
    monkeypatch.setattr(solve, "bitwuzla", None)
    assert not solve.available()
    q = Query()
    assertions, (lo, hi) = midpoint_overflows(q)
    status, model, _ = q.check(*assertions)
    assert status == z3.sat
    assert q.engines() and all(e.startswith("z3") for e in q.engines())
    a, b = fpmath.read(model, lo), fpmath.read(model, hi)
    assert math.isfinite(a) and math.isfinite(b) and math.isinf((a + b) / 2)


# ---------------------------------------------------------------- answers


@pytest.mark.parametrize("strategy", [solve.DEFAULT, solve.Z3_ALONE], ids=["default", "z3"])
def test_unsat_only_for_claims_that_hold(strategy):
    q = Query(strategy=strategy)
    x, y = q.fp("x"), q.fp("y")
    # x < y and y < x never hold together (also not with NaN): unsat.
    assert q.check(z3.fpLT(x, y, ctx=q.ctx), z3.fpLT(y, x, ctx=q.ctx))[0] == z3.unsat
    # |x| >= 0 fails only for NaN: satisfiable, and the model is NaN.
    status, model, _ = q.check(z3.Not(z3.fpGEQ(z3.fpAbs(x, ctx=q.ctx), q.f(0.0), ctx=q.ctx),
                                      q.ctx))
    assert status == z3.sat and math.isnan(fpmath.read(model, x))
    # x + 1.0 > x fails for huge, infinite and NaN x: satisfiable, not unsat.
    bigger = z3.fpGT(z3.fpAdd(q.rne, x, q.f(1.0), ctx=q.ctx), x, ctx=q.ctx)
    status, model, _ = q.check(z3.Not(bigger, q.ctx))
    assert status == z3.sat
    v = fpmath.read(model, x)
    assert not v + 1.0 > v


@needs_bitwuzla
def test_a_sat_answer_is_a_z3_model_in_the_obligations_context():
    q = Query(strategy=BITWUZLA_ONLY)
    assertions, (lo, hi) = midpoint_overflows(q)
    status, model, why = q.check(*assertions)
    assert status == z3.sat and why is None
    assert isinstance(model, z3.ModelRef) and model.ctx is q.ctx
    for a in assertions:
        assert z3.is_true(model.eval(a, model_completion=True))
    a, b = fpmath.read(model, lo), fpmath.read(model, hi)
    assert math.isfinite(a) and math.isfinite(b) and math.isinf((a + b) / 2)


@needs_bitwuzla
@pytest.mark.parametrize("want", ["nan", "-0.0", "inf", "subnormal"])
def test_special_values_come_back_bit_exact(want):
    q = Query(strategy=BITWUZLA_ONLY)
    x, p = q.fp("x"), z3.Bool("p", q.ctx)
    c = q.ctx
    conditions = {
        "nan": z3.fpIsNaN(x, ctx=c),
        "-0.0": z3.And(z3.fpIsZero(x, ctx=c), z3.fpIsNegative(x, ctx=c)),
        "inf": z3.And(z3.fpIsInf(x, ctx=c), z3.fpIsPositive(x, ctx=c)),
        "subnormal": z3.And(z3.fpIsSubnormal(x, ctx=c), z3.fpIsPositive(x, ctx=c)),
    }
    status, model, _ = q.check(p, conditions[want])
    assert status == z3.sat and q.engines() == ["bitwuzla"]
    v = fpmath.read(model, x)
    assert z3.is_true(model.eval(p))
    if want == "nan":
        assert math.isnan(v)
    elif want == "-0.0":
        assert v == 0.0 and math.copysign(1.0, v) == -1.0
    elif want == "inf":
        assert v == math.inf
    else:
        assert 0.0 < v < 2.2250738585072014e-308


def _wrong_values(ctx, parser, engine):
    # As if bitwuzla's model gave both bounds as 0.0, which z3 rejects.
    return [(z3.FP(name, fpmath.sort(ctx)), fpmath.const(0.0, ctx)) for name in ("lo", "hi")]


@needs_bitwuzla
def test_a_model_z3_rejects_is_never_sat(monkeypatch):
    monkeypatch.setattr(solve, "_fixed_values", _wrong_values)
    q = Query(strategy=BITWUZLA_ONLY)
    assertions, _ = midpoint_overflows(q)
    status, model, why = q.check(*assertions)
    assert status == z3.unknown and model is None
    assert "disagree" in why


@needs_bitwuzla
def test_after_a_rejected_model_z3_answers_with_its_own(monkeypatch):
    monkeypatch.setattr(solve, "_fixed_values", _wrong_values)
    q = Query(strategy=BITWUZLA_THEN_Z3)
    assertions, (lo, hi) = midpoint_overflows(q)
    status, model, _ = q.check(*assertions)
    assert status == z3.sat and q.engines() == ["bitwuzla", "z3"]
    assert [s for _, s, *_ in q.runner.log] == ["unknown", "sat"]
    assert math.isinf((fpmath.read(model, lo) + fpmath.read(model, hi)) / 2)


# ---------------------------------------------------------------- budget


@pytest.mark.parametrize("strategy", [solve.DEFAULT, solve.Z3_ALONE, BITWUZLA_ONLY],
                         ids=["default", "z3", "bitwuzla"])
@pytest.mark.parametrize("query", [price_round_trip_fails, horner_leaves_range],
                         ids=["false claim", "true claim"])
def test_a_spent_budget_gives_unknown_never_proved(strategy, query):
    q = Query(strategy=strategy)
    q.budget.units = 1_000  # starved on purpose: far less than the query needs
    status, model, why = q.check(*query(q))
    assert status == z3.unknown and model is None
    assert why


def test_each_query_is_charged_its_own_work():
    # z3's "rlimit count" is the context's running total: charging it whole
    # would charge every query for all the queries before it.
    q = Query()
    x, y = z3.Ints("x y", q.ctx)
    start = q.budget.units
    for k in range(4):
        assert q.check(x * x + y * y == 25 + k * 0, x > 0, y > 0)[0] == z3.sat
    charged = [spent for *_, spent in q.runner.log]
    assert start - q.budget.units == sum(charged)
    assert charged[-1] < 2 * charged[0] + 1_000  # not the running total
    assert sum(charged) == q.runner.z3_total


def test_no_budget_left_answers_unknown_at_once():
    q = Query()
    q.budget.units = 0
    assert q.check(z3.BoolVal(True, q.ctx)) == (z3.unknown, None, "the solver budget ran out")
    assert q.engines() == []


@needs_bitwuzla
def test_bitwuzla_work_is_charged_reproducibly():
    spent = []
    for _ in range(2):
        q = Query(strategy=BITWUZLA_ONLY)
        q.budget.units = 3_000 * RLIMIT_PER_SECOND // solve.BITWUZLA_POLLS_PER_SECOND
        before = q.budget.units
        status, _, why = q.check(*price_round_trip_fails(q))
        assert status == z3.unknown and "resource limit" in why
        spent.append(before - q.budget.units)
    assert spent[0] == spent[1] > 0


@needs_bitwuzla
def test_the_budget_is_shared_across_queries():
    q = Query(strategy=BITWUZLA_ONLY)
    start = q.budget.units
    assertions, _ = midpoint_overflows(q)
    q.check(*assertions)
    after_one = q.budget.units
    q.check(*assertions)
    assert start > after_one > q.budget.units


def test_prove_solver_delegates_and_keeps_its_contract():
    from refines import ir
    solver = Solver(Budget(5.0))
    x = ir.Var("x", ir.FLOAT)
    status, model, why = solver.check(ir.op("isnan", x, sort=ir.BOOL))
    assert status == z3.sat and why is None and model.ctx is solver.ctx
    assert math.isnan(solver.value(model, x))


# ---------------------------------------------------------------- end to end


def test_end_to_end_a_true_float_claim_is_proved(tmp_path):
    result = check_one(tmp_path, """
        import math

        @refines(lambda measured, expected, result: result >= 0.0 or math.isnan(result))
        def abs_error(measured: float, expected: float) -> float:
            return abs(measured - expected)
    """, timeout=10.0)
    assert result.verdict == "proved", result.reason


def test_end_to_end_a_false_float_claim_is_refuted_and_confirmed(tmp_path):
    result = check_one(tmp_path, """
        import math

        @refines(lambda x, result: math.isfinite(result), assuming=lambda x: math.isfinite(x))
        def double(x: float) -> float:
            return x * 2.0
    """, timeout=10.0)
    assert result.verdict == "refuted", result.reason
    assert result.counterexample.confirmed
    assert math.isinf(2.0 * float(result.counterexample.inputs["x"]))
