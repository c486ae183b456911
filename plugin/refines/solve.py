"""Which engine answers a solver query, within the obligation's budget.

``prove.Solver.check`` hands every query here as a list of z3 assertions in the
obligation's own context. The strategy depends on what the query contains:

* **No float, or floats mixed with ints, reals or strings: z3 alone**, exactly
  as before this module existed -- one ``z3.Solver`` with all the units left
  as its ``rlimit`` and the wall-clock backstop as its ``timeout``. Integer
  queries take 1-20 ms and must not pay for anything else. Telling them apart
  costs two z3 probes on a goal (``is-qffpbv`` and ``is-qfbv``, run in C):
  about 0.02-0.03 ms, also for a 1,000-link query.
* **Floats with only booleans (and bit-vectors) around them: bitwuzla, then
  z3** (``FLOAT_STEPS``). The query is exported as SMT-LIB2
  (``z3.Solver.sexpr()``), parsed by bitwuzla and checked with the whole
  budget left; if bitwuzla gives up before the budget is spent (a parse
  error, or its answer is not confirmed), z3 gets what is left. Bitwuzla
  understands no integers, so mixed queries cannot go there.

Why, measured on this machine (2 shared cores, z3 5.4.1, bitwuzla 0.10.0;
``tests/benchmarks/bench_solver_strategy.py`` and docs/performance.md have
the tables). z3 on the proving queries of four hard float obligations, five
random seeds, 30 s each: the midpoint overflow 0.06-0.24 s (sat);
``price * qty / qty == price`` sat in 6-10 s with three seeds and undecided
at 30 s with two; a degree-5 Horner polynomial bound and a three-division
hue computation undecided with every seed, and so were z3's tactics
``qffp``, ``qffpbv`` and ``simplify; fpa2bv; bit-blast; sat``. Bitwuzla on
the same text: 0.012 s, 0.44 s, 0.8 s (proved) and about 40 s (proved). On
the 51 pure-float queries the test suite asks, bitwuzla (export and parse
included) answered all, the same as z3, median 2.9 ms against 3.5 ms and
0.26 s against 1.5 s in total. No float query was found where z3 won, so
z3 comes second, for what bitwuzla cannot take. Splitting the hue query on
the conditions of its divisions (16 cases) did not pay either: bitwuzla took
about 37 s over the cases against 40 s for the whole.

Limits and reproducibility. z3's ``rlimit`` is reproducible and its timeout
is not; on float queries z3 spends only 0.4-2.8 million units per second
(against 8.9 million on integer queries), so there the wall-clock backstop,
not the rlimit, ends an undecided query, and z3's timeout can be late by
seconds. Bitwuzla has no resource limit in its Python API, only a time
limit (``TIME_LIMIT_PER``, not reproducible) and a terminator callback. The
callback is polled at points fixed by the formula and the options: the same
query gave the same number of polls (764,725) in six runs, whatever the
load, so a limit on polls is reproducible like an rlimit. One poll is
charged ``units_per_second / BITWUZLA_POLLS_PER_SECOND`` units of the
obligation's budget, and the same callback also stops bitwuzla at the
wall-clock backstop. Bitwuzla polled at least every 55 ms in the measured
queries (it cannot be stopped between polls); the benchmark prints how far
past the backstop any query ran.

A sat answer from bitwuzla is read back (the IEEE bit pattern of every
declared constant), the values are added to the query as equalities in z3,
and z3 checks that: with every input fixed it is a few milliseconds, and
the model that comes back is a z3 model in the obligation's context, which
``prove`` reads with ``model.eval``. If z3 does not confirm the model, the
answer is unknown. An unsat answer from bitwuzla (a sound engine) is taken
as it is.
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

# Bitwuzla terminator polls per second of solving, the median over the runs of
# bench_solver_strategy.py that its limit stopped (the rate of undecided float
# queries ranged from about 20,000 to 230,000 by query).
BITWUZLA_POLLS_PER_SECOND = 120_000
# The z3 check that confirms another engine's model may use at least this
# much, even if the engine spent the rest of the budget: with all inputs fixed
# it costs a few thousand units.
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

    @property
    def label(self) -> str:
        bits = ["z3"]
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


# The single z3 check of every query, as before this module existed.
Z3_ALONE = Strategy("z3 alone", floats=(Z3(),))
# The chosen strategy (see the module docstring for the measurements).
FLOAT_STEPS: Tuple[Step, ...] = (Bitwuzla(), Z3())
PORTFOLIO = Strategy("bitwuzla, then z3", floats=FLOAT_STEPS)
DEFAULT = PORTFOLIO


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

    def check(self, assertions: Sequence[z3.BoolRef]) -> Answer:
        """``(status, model, why unknown)`` for the conjunction of ``assertions``."""
        if self.budget.remaining() <= 0 or self.budget.units <= 0:
            return z3.unknown, None, "the solver budget ran out"
        steps = self.strategy.other
        if self.strategy.floats != steps and float_only(self.ctx, assertions):
            steps = self.strategy.floats
        if not available():
            steps = tuple(st for st in steps if not isinstance(st, Bitwuzla)) or (Z3(),)
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
                status, model, why, spent = _z3(self.ctx, step, assertions,
                                                int(units * share), remaining * share)
                self.budget.units -= spent
            self.log.append((step.label, str(status), time.perf_counter() - started, spent))
            if status != z3.unknown:
                return status, model, None
            reasons.append(why if len(steps) == 1 else f"{step.label}: {why}")
        return z3.unknown, None, "; ".join(reasons)

    def _confirm(self, assertions, fixed: Optional[List[z3.BoolRef]]) -> Answer:
        """The z3 model of ``assertions`` with another engine's values fixed."""
        if fixed is None:
            return z3.unknown, None, "its model could not be read back"
        s = z3.Solver(ctx=self.ctx)
        s.set("timeout", max(1, int(max(self.budget.remaining(), CONFIRM_SECONDS) * 1000)))
        s.set("rlimit", max(self.budget.units, CONFIRM_UNITS))
        s.add(*assertions)
        s.add(*fixed)
        status = s.check()
        self.budget.units -= _rlimit_spent(s)
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
    except bitwuzla.BitwuzlaException as exc:
        return z3.unknown, None, f"could not take the query ({exc})", 0
    spent = int(polls[0] / polls_per_unit)
    if result == bitwuzla.Result.UNSAT:
        return z3.unsat, None, None, spent
    if result == bitwuzla.Result.SAT:
        return z3.sat, _fixed_values(ctx, parser, engine), None, spent
    why = ("resource limit reached" if polls[0] > limit else
           "wall-clock backstop reached" if time.perf_counter() > deadline else "gave up")
    return z3.unknown, None, why, spent


def _z3(ctx: z3.Context, step: Z3, assertions, units: int, seconds: float):
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
    spent = _rlimit_spent(s)
    if status == z3.sat:
        return status, s.model(), None, spent
    if status == z3.unknown:
        return status, None, s.reason_unknown(), spent
    return status, None, None, spent


def _rlimit_spent(s: z3.Solver) -> int:
    stats = s.statistics()
    return int(stats.get_key_value("rlimit count")) if "rlimit count" in stats.keys() else 0


def smt2(ctx: z3.Context, assertions: Sequence[z3.BoolRef]) -> str:
    """The declarations and assertions as SMT-LIB2 text (no check-sat)."""
    s = z3.Solver(ctx=ctx)
    s.add(*assertions)
    return s.sexpr()


def _fixed_values(ctx: z3.Context, parser, engine) -> Optional[List[z3.BoolRef]]:
    """``name == value`` in z3 for every constant bitwuzla's model gives."""
    fixed = []
    for term in parser.get_declared_funs():
        sort, name = term.sort(), term.symbol()
        value = engine.get_value(term)
        if sort.is_fp():
            e, s = sort.fp_exp_size(), sort.fp_sig_size()
            fp = z3.FPSort(e, s, ctx=ctx)
            bits = z3.BitVecVal(int(value.value(fp_as_tuple=False), 2), e + s, ctx=ctx)
            # Structural equality (SMT-LIB `=`): one NaN, and -0.0 is not 0.0.
            fixed.append(z3.FP(name, fp) == z3.fpBVToFP(bits, fp, ctx=ctx))
        elif sort.is_bool():
            fixed.append(z3.Bool(name, ctx) == z3.BoolVal(bool(value.value()), ctx=ctx))
        elif sort.is_bv():
            n = sort.bv_size()
            fixed.append(z3.BitVec(name, n, ctx) == z3.BitVecVal(int(value.value(), 2), n,
                                                                  ctx=ctx))
        else:
            return None
    return fixed

