"""Which engine answers a solver query, within the obligation's budget.

``prove.Solver.check`` hands every query here as a list of z3 assertions in the
obligation's own context. The strategy depends on what the query contains:

* **No float, or floats mixed with ints, reals or strings: z3 alone**, as
  before this module existed -- one ``z3.Solver`` with all the units left as
  its ``rlimit`` and the wall-clock backstop as its ``timeout``. Integer
  queries take 1-20 ms and pay nothing else: telling the kinds apart is two
  z3 probes on a goal (``is-qffpbv`` and not ``is-qfbv``, run in C), about
  0.02-0.03 ms, also for a 1,000-link query. Bitwuzla has no integers or
  reals, so mixed queries cannot go there.
* **A float with only booleans (and bit-vectors) around it: bitwuzla, then
  z3** (``FLOAT_STEPS``). The query goes to bitwuzla as SMT-LIB2 text
  (``z3.Solver.sexpr()``) with the whole budget left; z3 gets whatever is
  left, which happens only when bitwuzla stops early (a parse error, or a
  model that z3 does not confirm).

Why, measured on this machine (2 shared cores, z3 5.4.1, bitwuzla 0.10.0;
``tests/benchmarks/bench_solver_strategy.py`` prints the tables, and
docs/performance.md has them). z3 on the proving queries of four hard float
obligations, five random seeds, 30 s each: the midpoint overflow 0.06-0.24 s
(sat); ``price * qty / qty == price`` sat in 6-10 s with three seeds and
undecided at 30 s with two; a degree-5 Horner polynomial bound and a
three-division hue computation undecided with every seed, and so with z3's
tactics ``qffp``, ``qffpbv`` and ``simplify; fpa2bv; bit-blast; sat``.
Bitwuzla on the same text: 0.012 s, 0.44 s, 0.8 s (proved) and about 40 s
(proved, past the default budget). On the 51 pure-float queries the test
suite asks, bitwuzla (export and parse included) gave z3's answers, median
2.9 ms against 3.5 ms, 0.26 s against 1.5 s in total. At the 10 s budget,
bitwuzla decided 7 of the 8 float proving queries of the benchmark in 6 s
in total, z3 6 in 59 s; three z3 seeds splitting the budget, z3's
bit-blasting tactic, and z3 on a slice before bitwuzla all did worse, and
so did a quick z3 try before bitwuzla (meant for the many small queries of
an exact precondition, ``QUICK_FIRST``): it cost more on hard queries than
it saved on small ones. Splitting the hue query on the conditions of its
divisions (16 cases) did not pay either: bitwuzla took about 37 s over the
cases against 40 s for the whole. No float query was found that z3 decided
and bitwuzla did not, so z3 comes second, for what bitwuzla cannot take.

Limits and reproducibility. z3's ``rlimit`` is reproducible and its timeout
is not. On float queries z3 spends 0.1-4.6 million units per second (median
about 1 million, against 8.9 million on integer queries), unevenly (the hue
query spends its first 100,000 units in 0.1 s and the next 100,000 in 3 s),
so an undecided float query in z3 is ended by the wall clock, not by the
rlimit, and z3's timeout ended checks up to 15 s late. Bitwuzla's Python API has no
resource limit, only a time limit (``TIME_LIMIT_PER``, not reproducible)
and a terminator callback. The callback is polled at points fixed by the
formula and the options: one query gave the same number of polls (764,725)
in six runs under different loads, so a limit on polls is reproducible like
an rlimit. A poll is charged ``units_per_second / BITWUZLA_POLLS_PER_SECOND``
units of the obligation's budget, and the same callback stops bitwuzla at
the wall-clock backstop. Bitwuzla polled at least every 55 ms in the
measured queries, and it cannot stop between polls; the benchmark prints
how far past the backstop any check ended. ``BITWUZLA_POLLS_PER_SECOND``
is set low on purpose (measured rates were 58,700 to 223,000 polls a second,
by load), so that the poll limit, not the backstop, ends bitwuzla: the
backstop comes first only below 37,500 polls a second. Work bitwuzla does
between polls (bit-blasting, about 0.4 s for a query with a multiplication
and a division) is not charged, so an obligation with many such queries
(an exact precondition) can reach the backstop before its units run out.

A z3 check is charged the growth of the context's ``rlimit count``: that
statistic is the context's running total, while a check's ``rlimit`` counts
from where the total stands. (The code before this module charged each query
the running total, so every query paid again for all the ones before it.)

A sat answer from bitwuzla is read back (the IEEE bit pattern of every
declared constant) into a z3 model in the obligation's context, and z3
evaluates the query in it (about 0.1 ms); if that does not come out true,
z3 checks the query with those values fixed. So every sat answer is a z3
model, which ``prove`` reads with ``model.eval``; if z3 does not confirm it,
the answer is unknown. An unsat answer from bitwuzla (a sound engine) is
taken as it is.
"""

from __future__ import annotations

import time
from dataclasses import dataclass
from typing import List, Optional, Sequence, Tuple, Union

import z3

try:  # bitwuzla is a dependency, but a check must still run without it
    import bitwuzla
except ImportError:  # pragma: no cover -- exercised by monkeypatching in tests
    bitwuzla = None

# Bitwuzla terminator polls per second of solving. bench_solver_strategy.py
# measures it on the runs that a limit stopped: medians of 75,600 and 208,000
# in two runs under different loads (58,700 to 223,000 in all; single queries
# run to the end polled 20,000 to 230,000 times a second). Set near the low
# end, so that the poll limit (reproducible) rather than the backstop ends
# bitwuzla. A 10 s budget buys 750,000 polls.
BITWUZLA_POLLS_PER_SECOND = 75_000
# The z3 check that confirms another engine's model, needed only when z3's
# evaluation of the query in that model is not conclusive, may use at least
# this much even if the engine spent the rest of the budget.
CONFIRM_UNITS = 2_000_000
CONFIRM_SECONDS = 1.0

Status = z3.CheckSatResult
Answer = Tuple[Status, Optional[z3.ModelRef], Optional[str]]


@dataclass(frozen=True)
class Z3:
    """A z3 check with ``share`` of the units and wall time left."""

    share: float = 1.0
    seed: Optional[int] = None  # None: z3's default seeds
    tactic: Optional[str] = None  # "simplify;fpa2bv;bit-blast;sat", say
    # A quick try: at most ``units`` (and ``seconds`` of wall time, a backstop),
    # and once it has failed to answer in an obligation, that obligation's
    # later queries skip it.
    quick: bool = False
    units: Optional[int] = None
    seconds: Optional[float] = None

    @property
    def label(self) -> str:
        bits = ["z3"]
        if self.quick:
            bits.append("quick")
        if self.tactic:
            bits.append(f"tactic {self.tactic}")
        if self.seed is not None:
            bits.append(f"seed {self.seed}")
        return " ".join(bits)


@dataclass(frozen=True)
class Bitwuzla:
    """Bitwuzla on the SMT-LIB2 text, with ``share`` of what is left."""

    share: float = 1.0
    seed: Optional[int] = None

    label = "bitwuzla"


Step = Union[Z3, Bitwuzla]


@dataclass(frozen=True)
class Strategy:
    """Steps tried in order until one answers sat or unsat.

    ``floats`` is used for queries with a float and only booleans and
    bit-vectors besides, ``other`` for every other query.
    """

    name: str
    floats: Tuple[Step, ...]
    other: Tuple[Step, ...] = (Z3(),)
    # "growth": a z3 check is charged the units it spent. "total": it is charged
    # the context's running total, the accounting before this module (which
    # overcharged every query after the first); kept for the benchmark only.
    charge: str = "growth"


# The single z3 check of every query.
Z3_ALONE = Strategy("z3 alone", floats=(Z3(),))
# Exactly the code before this module, budget accounting included (benchmarks).
BEFORE = Strategy("z3 alone, before solve.py", floats=(Z3(),), charge="total")
# The chosen strategy (see the module docstring for the measurements).
FLOAT_STEPS: Tuple[Step, ...] = (Bitwuzla(), Z3())
PORTFOLIO = Strategy("bitwuzla, then z3", floats=FLOAT_STEPS)
DEFAULT = PORTFOLIO
# A candidate measured and not chosen: a quick z3 try before bitwuzla, meant
# for obligations with many small queries. It cost more on hard queries than
# it saved on small ones (docs/performance.md).
QUICK_UNITS = 500_000
QUICK_SECONDS = 0.5
QUICK_FIRST = Strategy("quick z3, bitwuzla, z3",
                       floats=(Z3(quick=True, units=QUICK_UNITS, seconds=QUICK_SECONDS),
                               Bitwuzla(), Z3()))


def available() -> bool:
    """Whether bitwuzla can be used."""
    return bitwuzla is not None


def float_only(ctx: z3.Context, assertions: Sequence[z3.BoolRef]) -> bool:
    """The query has a float, and besides only booleans and bit-vectors."""
    g = z3.Goal(ctx=ctx)
    g.add(*assertions)
    return (z3.Probe("is-qffpbv", ctx=ctx)(g) == 1.0
            and z3.Probe("is-qfbv", ctx=ctx)(g) != 1.0)


class Runner:
    """Runs the queries of one obligation, spending from its ``budget``.

    ``budget`` has ``units`` (z3 resource units left, shared by all queries)
    and ``remaining()`` (wall-clock seconds left before the backstop);
    ``units_per_second`` converts other engines' work into units.
    """

    def __init__(self, ctx: z3.Context, budget, units_per_second: int,
                 strategy: Optional[Strategy] = None) -> None:
        self.ctx = ctx
        self.budget = budget
        self.units_per_second = units_per_second
        self.strategy = strategy or DEFAULT
        # Per query: (step label, status, seconds, units spent), for benchmarks.
        self.log: List[Tuple[str, str, float, int]] = []
        self.skip: set = set()  # quick steps that failed once in this obligation
        # z3's "rlimit count" statistic is the context's running total, while
        # the "rlimit" of a check is counted from where the total stands: a
        # query is charged the growth of the total since the last one.
        self.z3_total = 0

    def check(self, assertions: Sequence[z3.BoolRef]) -> Answer:
        """``(status, model, why unknown)`` for the conjunction of ``assertions``."""
        if self.budget.remaining() <= 0 or self.budget.units <= 0:
            return z3.unknown, None, "the solver budget ran out"
        steps = self.strategy.other
        if self.strategy.floats != steps and float_only(self.ctx, assertions):
            steps = self.strategy.floats
        if not available():
            steps = tuple(st for st in steps if not isinstance(st, Bitwuzla)) or (Z3(),)
        steps = tuple(st for st in steps if st not in self.skip) or (Z3(),)
        reasons = []
        for i, step in enumerate(steps):
            remaining, units = self.budget.remaining(), self.budget.units
            if remaining <= 0 or units <= 0:
                reasons.append("the solver budget ran out")
                break
            share = 1.0 if i == len(steps) - 1 else step.share
            started = time.perf_counter()
            if isinstance(step, Bitwuzla):
                status, fixed, why, spent = _bitwuzla(
                    self.ctx, step, assertions, int(units * share),
                    started + remaining * share,
                    BITWUZLA_POLLS_PER_SECOND / self.units_per_second)
                self.budget.units -= spent
                model = None
                if status == z3.sat:
                    status, model, why = self._confirm(assertions, fixed)
            else:
                units, seconds = int(units * share), remaining * share
                if step.units is not None:
                    units = min(units, step.units)
                if step.seconds is not None:
                    seconds = min(seconds, step.seconds)
                status, model, why, total = _z3(self.ctx, step, assertions, units, seconds)
                spent = self._charge(total)
            self.log.append((step.label, str(status), time.perf_counter() - started, spent))
            if status != z3.unknown:
                return status, model, None
            if getattr(step, "quick", False):
                self.skip.add(step)
            reasons.append(why if len(steps) == 1 else f"{step.label}: {why}")
        return z3.unknown, None, "; ".join(reasons)

    def _charge(self, total: int) -> int:
        """Spend the z3 work done since the last charge; return it."""
        spent = total if self.strategy.charge == "total" else max(0, total - self.z3_total)
        self.z3_total = max(self.z3_total, total)
        self.budget.units -= spent
        return spent

    def _confirm(self, assertions, values) -> Answer:
        """A z3 model of ``assertions`` in this context, from another engine's
        values: z3 evaluates the query on them (about 0.1 ms); if that does
        not settle it, z3 checks the query with the values fixed."""
        if values is None:
            return z3.unknown, None, "its model could not be read back"
        model = _model_of(self.ctx, values, assertions)
        if model is not None:
            return z3.sat, model, None
        s = z3.Solver(ctx=self.ctx)
        s.set("timeout", max(1, int(max(self.budget.remaining(), CONFIRM_SECONDS) * 1000)))
        s.set("rlimit", max(self.budget.units, CONFIRM_UNITS))
        s.add(*assertions)
        s.add(*[c == v for c, v in values])
        status = s.check()
        self._charge(_rlimit_total(s))
        if status == z3.sat:
            return status, s.model(), None
        if status == z3.unsat:
            # Two sound engines disagree on the same text: trust neither.
            return z3.unknown, None, "z3 rejects its model (the engines disagree)"
        return z3.unknown, None, f"z3 could not confirm its model ({s.reason_unknown()})"


# ---------------------------------------------------------------- helpers


def _bitwuzla(ctx: z3.Context, step: Bitwuzla, assertions, units: int, deadline: float,
              polls_per_unit: float):
    """``(status, fixed values if sat, why unknown, units spent)``."""
    limit = units * polls_per_unit
    polls = [0]

    def stop() -> bool:
        polls[0] += 1
        return polls[0] > limit or time.perf_counter() > deadline

    try:
        options = bitwuzla.Options()
        options.set(bitwuzla.Option.PRODUCE_MODELS, True)
        if step.seed is not None:
            options.set(bitwuzla.Option.SEED, step.seed)
        parser = bitwuzla.Parser(bitwuzla.TermManager(), options)
        parser.parse(smt2(ctx, assertions), True, False)
        engine = parser.bitwuzla()
        engine.configure_terminator(stop)
        result = engine.check_sat()
    except Exception as exc:  # noqa: BLE001 -- a parse error, say: z3 comes next
        return z3.unknown, None, f"could not take the query ({type(exc).__name__}: {exc})", 0
    spent = int(polls[0] / polls_per_unit)
    if result == bitwuzla.Result.UNSAT:
        return z3.unsat, None, None, spent
    if result == bitwuzla.Result.SAT:
        return z3.sat, _fixed_values(ctx, parser, engine), None, spent
    why = ("resource limit reached" if polls[0] > limit else
           "wall-clock backstop reached" if time.perf_counter() > deadline else "gave up")
    return z3.unknown, None, why, spent


def _z3(ctx: z3.Context, step: Z3, assertions, units: int, seconds: float):
    """``(status, model, why unknown, the context's rlimit total after it)``."""
    if step.tactic:
        names = [n.strip() for n in step.tactic.split(";")]
        tactics = [z3.Tactic(n, ctx=ctx) for n in names]
        tactic = tactics[0] if len(tactics) == 1 else z3.Then(*tactics, ctx=ctx)
        s = tactic.solver()
    else:
        s = z3.Solver(ctx=ctx)
    if step.seed is not None:
        s.set("random_seed", step.seed)
    s.set("timeout", max(1, int(seconds * 1000)))
    s.set("rlimit", max(1, units))
    s.add(*assertions)
    status = s.check()
    total = _rlimit_total(s)
    if status == z3.sat:
        return status, s.model(), None, total
    if status == z3.unknown:
        return status, None, s.reason_unknown(), total
    return status, None, None, total


def _rlimit_total(s: z3.Solver) -> int:
    """The context's running total of z3 resource units (not this check's)."""
    stats = s.statistics()
    return int(stats.get_key_value("rlimit count")) if "rlimit count" in stats.keys() else 0


def smt2(ctx: z3.Context, assertions: Sequence[z3.BoolRef]) -> str:
    """The declarations and assertions as SMT-LIB2 text (no check-sat)."""
    s = z3.Solver(ctx=ctx)
    s.add(*assertions)
    return s.sexpr()


def _fixed_values(ctx: z3.Context, parser, engine) -> Optional[List[Tuple[z3.ExprRef,
                                                                          z3.ExprRef]]]:
    """``(constant, value)`` in z3 for every constant bitwuzla's model gives."""
    values = []
    for term in parser.get_declared_funs():
        sort, name = term.sort(), term.symbol()
        value = engine.get_value(term)
        if sort.is_fp():
            e, s = sort.fp_exp_size(), sort.fp_sig_size()
            fp = z3.FPSort(e, s, ctx=ctx)
            # The IEEE bit pattern: exact for -0.0, subnormals, infinities; any
            # NaN pattern is z3's one NaN.
            bits = z3.BitVecVal(int(value.value(fp_as_tuple=False), 2), e + s, ctx=ctx)
            values.append((z3.FP(name, fp), z3.simplify(z3.fpBVToFP(bits, fp, ctx=ctx))))
        elif sort.is_bool():
            values.append((z3.Bool(name, ctx), z3.BoolVal(bool(value.value()), ctx=ctx)))
        elif sort.is_bv():
            n = sort.bv_size()
            values.append((z3.BitVec(name, n, ctx), z3.BitVecVal(int(value.value(), 2), n,
                                                                 ctx=ctx)))
        else:
            return None
    return values


def _model_of(ctx: z3.Context, values, assertions) -> Optional[z3.ModelRef]:
    """A z3 model with ``values`` if every assertion evaluates to true in it."""
    if not hasattr(z3, "Model"):  # older z3: the solver check confirms instead
        return None
    model = z3.Model(ctx=ctx)
    for const, value in values:
        model.update_value(const, value)
    # Completion gives any constant the other engine did not mention a value;
    # the model is genuine exactly when the whole query evaluates to true.
    if all(z3.is_true(model.eval(a, model_completion=True)) for a in assertions):
        return model
    return None
