"""From an obligation to a verdict.

The obligation "every pre-state allowed by ``assuming`` leads to an outcome
the spec allows" is refuted by a single pre-state, so the solver is asked for
one: ``assuming and (some outcome violates the spec)``. Unsatisfiable means
proved. A model is a candidate counterexample, which is replayed by calling
the real function; only a reproduced violation is reported as ``refuted``.

Each obligation is solved in a fresh ``z3.Context``, so verdicts do not depend
on what else ran in the process (or on xdist's scheduling).
"""

from __future__ import annotations

import time
import traceback
from typing import Any, Callable, List, Optional, Tuple, Union

import z3

from refines import fpmath, heap, ir, precondition, replay, solve, strmath
from refines.errors import SpecError, Untranslatable, format_message
from refines.lower import Lowering, read_int
from refines.obligation import Spec, translate_assuming, translate_spec_for, violations
from refines.regression import refute
from refines.source import Obligation
from refines.translate import Scope, translate_body
from refines.verdict import ERROR, PROVED, UNKNOWN, Result, Undecided

# The budget is counted in z3 resource units, not seconds: unlike a
# wall-clock timeout, a resource limit gives the same verdict however loaded
# the machine is. One second of budget buys the units z3 spends in a median
# second here (tests/benchmarks/bench_rlimit.py measured 8.8 million; the
# range was 3.5 to 21 million by kind of query). A wall-clock limit of
# BACKSTOP times the budget stops queries that spend their units slowly.
RLIMIT_PER_SECOND = 8_000_000
BACKSTOP = 2.0
# The share of the budget one query of the precondition's clean-up may spend.
PER_SIMPLIFICATION = 0.05
# Seconds a replay of the solver's counterexample may run (the watchdog).
RUN_LIMIT = 1.0


class Budget:
    """The solver budget of one obligation, shared by all its queries."""

    def __init__(self, seconds: float) -> None:
        self.seconds = seconds
        self.units = int(seconds * RLIMIT_PER_SECOND)
        self.deadline = time.perf_counter() + seconds * BACKSTOP

    def remaining(self) -> float:
        """Wall-clock seconds left before the backstop."""
        return max(0.0, self.deadline - time.perf_counter())


class Solver:
    """Queries in the obligation's own z3 context."""

    def __init__(self, budget: Budget) -> None:
        self.ctx = z3.Context()
        self.lower = Lowering(self.ctx)
        self.budget = budget
        # Which engine answers each query (z3 alone, or a portfolio for float
        # queries): solve.py. Every query spends from the one budget.
        self.runner = solve.Runner(self.ctx, budget, RLIMIT_PER_SECOND)
        # Seconds of budget one query may spend at most (None: all that is
        # left); set while the precondition is made readable, where an
        # undecided query only means a simplification is not made.
        self.per_query = None

    def check(self, *terms: ir.Term):
        """``(status, model, why unknown)`` for the conjunction of ``terms``.

        A sat answer always comes with a z3 model in ``self.ctx``."""
        if self.budget.remaining() <= 0 or self.budget.units <= 0:
            return z3.unknown, None, "the solver budget ran out"
        return self.check_lowered(*[self.lower(t) for t in terms])

    def check_lowered(self, *assertions: z3.BoolRef):
        """``check`` for assertions already in z3 (a quantified one, say), in
        ``self.ctx``; the lowering's definitions are added."""
        if self.budget.remaining() <= 0 or self.budget.units <= 0:
            return z3.unknown, None, "the solver budget ran out"
        assertions = list(assertions) + self.lower.definitions  # lower.Lowering
        if self.per_query is None:
            return self.runner.check(assertions)
        # A slice of what is left, so that one hard query cannot spend it all.
        whole = self.budget
        part = Budget(0)
        part.units = min(whole.units, int(self.per_query * RLIMIT_PER_SECOND))
        part.deadline = min(whole.deadline, time.perf_counter() + self.per_query * BACKSTOP)
        before = part.units
        self.runner.budget = part
        try:
            return self.runner.check(assertions)
        finally:
            self.runner.budget = whole
            whole.units -= before - part.units

    def inputs(self, model: z3.ModelRef, params) -> dict:
        """The arguments a model gives; parameters whose references are equal
        get one shared list or object (aliasing)."""
        made: dict = {}
        return {p.name: self.value(model, ir.initial(p), None, made) for p in params}

    def value(self, model: z3.ModelRef, v: ir.Value, heap_state: dict = None,
              made: dict = None) -> Any:
        """The Python value of ``v`` in ``model``; lists and objects are read
        in ``heap_state`` (the pre-state where None), one object per reference."""
        if isinstance(v, ir.Ref):
            return self._object(model, v, heap_state or {}, {} if made is None else made)
        if isinstance(v, ir.Tup):
            return tuple(self.value(model, i, heap_state, made) for i in v.items)
        if v is ir.NONE:
            return None
        if isinstance(v, ir.Opt):
            none = z3.is_true(model.eval(self.lower(v.none), model_completion=True))
            return None if none else self.value(model, v.value, heap_state, made)
        if v.sort == ir.FLOAT:
            return fpmath.read(model, self.lower(v))
        if v.sort == ir.STR:
            return strmath.read(model, self.lower(v))
        if v.sort.startswith("seq:"):
            return self._items(model, self.lower(v), v.sort[4:])
        z = model.eval(self.lower(v), model_completion=True)
        if v.sort == ir.BOOL:
            return z3.is_true(z)
        return read_int(z)


    def _items(self, model, seq: z3.ExprRef, elem: str) -> list:
        n = model.eval(z3.Length(seq), model_completion=True).as_long()
        out = []
        for i in range(n):
            z = model.eval(seq[i], model_completion=True)
            out.append(strmath.read(model, z) if elem == ir.STR
                       else fpmath.read(model, z) if elem == ir.FLOAT
                       else z3.is_true(z) if elem == ir.BOOL else read_int(z))
        return out

    def _object(self, model, v: ir.Ref, heap_state: dict, made: dict) -> Any:
        number = model.eval(self.lower(v.ref), model_completion=True).as_long()
        key = (v.kind, number)
        if key in made:
            return made[key]
        if v.kind.startswith("list:"):
            made[key] = self.value(model, ir.select(
                heap_state.get(v.kind) or heap.initial_field(v.kind), v.ref))
            return made[key]
        info = heap.KINDS[v.kind]
        obj = info.cls.__new__(info.cls)  # its fields as the model has them, not via __init__
        made[key] = obj
        for attr in info.fields:
            k = heap.field_key(v.kind, attr)
            object.__setattr__(obj, attr, self.value(model, ir.select(
                heap_state.get(k) or heap.initial_field(k), v.ref)))
        for attr in info.skipped:  # not modelled: its default, if the class has one
            object.__setattr__(obj, attr, getattr(info.cls, attr, None))
        return obj


def prove(ob: Obligation, timeout: float, explain: bool = False) -> Union[Result, Undecided]:
    """The verdict on one obligation, within ``timeout`` seconds of solving,
    or what the solver leaves undecided (for the tester to take up). With
    ``explain``, the outcome carries what the translation believes the body
    does (``explain.explain``, on a budget of its own)."""
    start = time.perf_counter()
    result = _base(ob)
    budget = Budget(timeout)
    explained: list = [] if explain else None
    try:
        if ob.untranslated is not None:
            raise ob.untranslated
        outcome = _check(ob, budget, result, explained)
    except Untranslatable as exc:
        outcome = Undecided(
            reason=f"not translated: {exc.text} ({ob.where(exc.path or ob.path, exc.line)})",
            hint=exc.hint, message_key=exc.key)
        if explain:
            explained.append({"note": outcome.reason})
    except Exception as exc:  # noqa: BLE001 -- never crash the session
        _record(result, exc, ob.path, ob.show, f"checking {ob.function}", ob.line)
        outcome = result
    if isinstance(outcome, Undecided) and ob.params is not None and ob.assuming is not None:
        # The tester starts from inputs that satisfy assuming, after any the
        # solver found on the way; for a precondition that rejects nearly every
        # drawn input it asks for more (a fresh solver each time).
        outcome.seeds += allowed_inputs(ob, timeout)
        outcome.more = lambda n: [i for _, i in allowed_inputs(ob, timeout, count=n)]
    if isinstance(outcome, Result):
        outcome.seconds = time.perf_counter() - start
    if explained:
        outcome.explanation = explained[0]
    return outcome


def _record(result: Result, exc: Exception, path: str, show: Callable[[str], str],
            doing: str, line: int) -> None:
    """Turn what stopped a check into its verdict: a construct not modelled is
    ``unknown``, a malformed spec or an internal failure is ``error``."""
    if isinstance(exc, Untranslatable):
        result.verdict = UNKNOWN
        result.reason = f"not translated: {exc.text} ({show(path)}:{exc.line})"
        result.hint, result.message_key = exc.hint, exc.key
    elif isinstance(exc, SpecError):
        result.verdict = ERROR
        result.reason = f"{show(exc.path or path)}:{exc.line}: {exc.text}"
        result.hint, result.message_key = exc.hint, exc.key
    else:
        result.verdict = ERROR
        result.reason = (f"internal error while {doing} ({show(path)}:{line}): "
                         f"{type(exc).__name__}: {exc}")
        result.notes.append(traceback.format_exc())


def _base(ob: Obligation) -> Result:
    return Result(verdict=ERROR, function=ob.function, path=ob.show(ob.path), line=ob.line)


def _check(ob: Obligation, budget: Budget, result: Result,
           explained: Optional[list] = None) -> Result:
    scope = Scope(ob.fn.__globals__, list(ob.fn_node.locals))
    try:
        behaviour = translate_body(ob.fn_node, ob.params, scope)
    except Untranslatable as exc:
        exc.path = exc.path or ob.fn_node.root().file  # an attached target's own file
        raise
    spec = translate_spec_for(ob)
    solver = Solver(budget)
    if explained is not None:
        explained.append(_explanation(ob, behaviour, spec, budget.seconds))

    # A spec that can itself raise is malformed: say where, with an example.
    ill = _ill_formed(ob, spec, solver)
    if ill is not None:
        result.verdict = ERROR
        result.reason, result.hint, result.message_key = ill
        return result

    def undecided(*args, **kwargs) -> Undecided:
        # If testing finds a counterexample, its preconditions come from here.
        out = Undecided(*args, **kwargs)
        out.preconditions = _later(ob, behaviour, spec, budget.seconds)
        return out

    found = violations(behaviour, spec)
    status, model, why = solver.check(spec.assuming.holds,
                                      ir.or_(*(v.term for v in found)))
    untranslated = tuple(getattr(behaviour, "untranslated", ()))
    if status == z3.unsat:
        gap = _unmodelled(ob, behaviour, spec, solver)
        if gap is not None:
            reason, seeds = gap
            return undecided(reason, "exclude those inputs with assuming=, or leave them "
                                     "to testing", None, seeds)
        result.verdict = PROVED
        # What the proof takes for granted beyond the modelled semantics.
        result.notes.extend("assumed: " + a for a in behaviour.assumptions)
        if untranslated:
            result.notes.append("untranslated: proved whatever these parts do: "
                                + "; ".join(untranslated))
        return result
    if status == z3.unknown:
        if "incomplete" in (why or ""):
            # Not a matter of time: the solver's procedure stops short of an
            # answer for this formula (e.g. str.replace over strings of any length).
            reason = f"the solver gave up without an answer ({why})"
            hint = ("a longer budget will not help; bound the inputs in assuming=, "
                    "or leave this claim to tests")
        else:
            reason = f"the solver could not decide within {budget.seconds:g} s ({why})"
            hint = "raise --refines-timeout, or split the function"
        return undecided(reason, hint)

    inputs = solver.inputs(model, ob.params)
    predicted = _predicted(solver, model, behaviour)
    call = replay.call_text(ob, inputs)
    pre = replay.before(inputs)
    try:
        with replay.watchdog(RUN_LIMIT):
            actual = replay.run(ob, inputs)
    except replay.Overrun:
        return undecided(f"the solver's counterexample {call} did not finish within "
                         f"{RUN_LIMIT:g} s when run", seeds=[("solver", pre)])
    judgement = replay.judge(ob, inputs, actual, pre)
    if (judgement.holds or not replay.assuming_holds(ob, pre)) and untranslated:
        # The solver chose what the untranslated parts do; the real parts did
        # otherwise. Not a translation error: the question goes to testing,
        # starting from inputs where those parts could break the spec.
        seeds = [("solver", replay.before(pre))] + violating_inputs(
            ob, solver, [spec.assuming.holds, ir.or_(*(v.term for v in found))], model)
        return undecided(
            f"the solver's counterexample {call} depends on what untranslated parts "
            f"do ({'; '.join(untranslated)}), and the real call {actual.describe()}, "
            "which meets the spec", seeds=seeds)
    if judgement.holds or not replay.assuming_holds(ob, pre):
        result.verdict = ERROR
        result.reason = (
            f"translation disagrees with Python on {call}: "
            f"the translation predicted it {predicted} and breaks the spec, but the "
            f"real call {actual.describe()}, which "
            + ("meets the spec" if judgement.holds else "is outside `assuming`"))
        result.hint = ("if Python runs with -O, asserts are skipped and this is "
                       "expected (the translation models asserts as enabled); "
                       "otherwise please report it as a bug in pytest-refines")
        return result
    refute(result, ob, pre, actual, judgement, "solver", RUN_LIMIT)
    precondition.fill(result, ob, _preconditions(ob, behaviour, spec, solver, pre))
    return result


def _preconditions(ob: Obligation, behaviour: ir.Behaviour, spec: Spec, solver: Solver,
                   counterexample: dict):
    """The preconditions of a refuted obligation (``precondition.compute``),
    each clean-up query on a slice of the budget; a failure is a note, and
    the refutation stands on its own."""
    solver.per_query = max(0.05, solver.budget.seconds * PER_SIMPLIFICATION)
    try:
        return precondition.compute(ob, behaviour, spec, solver, counterexample)
    except Exception as exc:  # noqa: BLE001 -- the refutation stands on its own
        return precondition.Preconditions(
            None, None, f"the exact precondition could not be computed (internal error: "
                        f"{type(exc).__name__}: {exc})")


def _later(ob: Obligation, behaviour: ir.Behaviour, spec: Spec, seconds: float):
    """The preconditions for a counterexample the tester may find, on a
    budget of their own (the obligation's was spent on the proof)."""
    return lambda counterexample: _preconditions(ob, behaviour, spec,
                                                 Solver(Budget(seconds)), counterexample)


def _explanation(ob: Obligation, behaviour: ir.Behaviour, spec: Spec, seconds: float) -> dict:
    """``explain.explain`` as JSON, in a context and on a budget of its own;
    a failure is a note."""
    from refines import explain

    solver = Solver(Budget(seconds))
    solver.per_query = max(0.05, seconds * PER_SIMPLIFICATION)
    try:
        return explain.explain(ob, behaviour, spec, solver).to_json()
    except Exception as exc:  # noqa: BLE001 -- an explanation is an aid
        return {"note": f"no explanation (internal error: {type(exc).__name__}: {exc})"}


def _unmodelled(ob: Obligation, behaviour: ir.Behaviour, spec, solver: Solver):
    """Why the proof does not cover everything, if an unmodelled outcome is
    reachable under ``assuming``; None when none is."""
    for o in behaviour.outcomes:
        if not o.unmodelled:
            continue
        status, model, _ = solver.check(spec.assuming.holds, o.guard)
        if status == z3.unsat:
            continue
        where = ob.where(ob.path, o.line)
        if status == z3.sat:
            inputs = solver.inputs(model, ob.params)
            return (f"{o.unmodelled} ({where}) for {replay.call_text(ob, inputs)}, and "
                    f"every other outcome meets the spec", [("solver", inputs)])
        return f"{o.unmodelled} ({where}) may happen", []
    return None


def _predicted(solver: Solver, model, behaviour: ir.Behaviour) -> str:
    for o in behaviour.outcomes:
        if z3.is_true(model.eval(solver.lower(o.guard), model_completion=True)):
            if o.unmodelled:
                return f"reaches something not modelled ({o.unmodelled})"
            if o.returns:
                return f"returns {solver.value(model, o.value, o.heap)!r}"
            return f"raises {o.exception.__name__}"
    return "ends in no modelled way"


def _ill_formed(ob: Obligation, spec: Spec, solver: Solver):
    checks = []
    if ob.assuming is not None:
        checks.append((ob.assuming, spec.assuming.raising, ir.TRUE))
    for cls, part, r in spec.raises:
        checks.append((part, r.raising, spec.assuming.holds))
    for part, raising, context in checks:
        for o in raising:
            status, model, _ = solver.check(context, o.guard)
            if status == z3.sat:
                inputs = solver.inputs(model, ob.params)
                shown = ", ".join(f"{k}={v!r}" for k, v in inputs.items()
                                  if k in part.params)
                text, hint = format_message("spec-raising", role=f"`{part.role}`",
                                            exception=o.exception.__name__, inputs=shown)
                return f"{ob.where(part.path, part.line)}: {text}", hint, "spec-raising"
    return None


# Inputs the solver hands to the tester: how many of each kind, and the share
# of the obligation's budget (at most SEED_SECONDS) they may spend.
SEEDS = 8
SEED_SHARE = 0.2
SEED_SECONDS = 2.0
MIN_SEED_QUERY = 0.05


def allowed_inputs(ob: Obligation, seconds: float, count: int = SEEDS
                   ) -> List[Tuple[str, dict]]:
    """Diverse inputs that satisfy ``assuming``, from the solver: the tester
    starts from them, so a narrow precondition wastes no draws. Empty when
    there is no ``assuming`` or it cannot be translated."""
    if ob.assuming is None or ob.params is None:
        return []
    try:
        holds = translate_assuming(ob)
        solver = Solver(Budget(min(SEED_SECONDS, seconds * SEED_SHARE)))
        # A slice per query, but not so thin that a busy machine's wall clock
        # (the backstop) ends every query: the whole stays within the budget.
        solver.per_query = max(MIN_SEED_QUERY, solver.budget.seconds / (2 * count))
        return [("assuming", i) for i in diverse(solver, ob.params, [holds], count)]
    except Exception:  # noqa: BLE001 -- seeds are an aid; testing goes on without them
        return []


def violating_inputs(ob: Obligation, solver: Solver, terms: list, model) -> List[Tuple[str, dict]]:
    """More inputs on which the translation allows the spec to break (the
    first one, ``model``, excluded): candidates for the tester to replay."""
    try:
        solver.per_query = max(0.05, solver.budget.seconds * PER_SIMPLIFICATION)
        first = solver.inputs(model, ob.params)
        return [("solver", i) for i in diverse(solver, ob.params, terms, SEEDS, [first])]
    except Exception:  # noqa: BLE001 -- seeds are an aid; testing goes on without them
        return []


def diverse(solver: Solver, params, terms: list, count: int, seen=()) -> List[dict]:
    """Up to ``count`` models of ``terms`` with pairwise different parameters,
    steered apart: each new one is pushed beyond the magnitude of the last on
    one int parameter in turn (alternating sign), when that is satisfiable."""
    blocks = [b for b in (_differs(params, i) for i in seen) if b is not None]
    ints = [p for p in params if p.sort == ir.INT and not p.optional]
    out: List[dict] = []
    for k in range(2 * count):
        if len(out) >= count:
            break
        push = None
        if ints and out:
            p = ints[k % len(ints)]
            bound = 4 * abs(out[-1][p.name]) + 1
            push = (ir.cmp(">", p, ir.const(bound)) if k % 2 == 0
                    else ir.cmp("<", p, ir.const(-bound)))
        status, model, _ = solver.check(*terms, *blocks, *([push] if push is not None else []))
        if status != z3.sat and push is not None:
            status, model, _ = solver.check(*terms, *blocks)
        if status != z3.sat:
            break
        inputs = solver.inputs(model, params)
        out.append(inputs)
        block = _differs(params, inputs)
        if block is None:
            break  # nothing to tell models apart by: one is all there is
        blocks.append(block)
    return out


def _differs(params, inputs: dict) -> Optional[ir.Term]:
    """A term that excludes exactly these values of the scalar parameters."""
    parts = []
    for p in params:
        value = inputs.get(p.name)
        if p.sort == ir.REF and p.kind.startswith("list:") and isinstance(value, list):
            parts.append(_list_differs(p, value))
            continue
        if p.sort == ir.REF or p.optional or value is None:
            continue
        if p.sort == ir.FLOAT and value != value:
            parts.append(ir.not_(ir.op("isnan", p, sort=ir.BOOL)))
        elif p.sort == ir.STR and any(ord(c) > strmath.SOLVER_MAX_CODE_POINT for c in value):
            continue
        else:
            parts.append(ir.cmp("!=", p, ir.const(value)))
    parts = [p for p in parts if p is not None]
    return ir.or_(*parts) if parts else None


def _list_differs(p: ir.Var, items: list) -> Optional[ir.Term]:
    """The contents of list parameter ``p`` differ from ``items``."""
    elem = heap.elem_sort(p.kind)
    if elem == ir.FLOAT and any(x != x for x in items):
        return None  # a NaN item: equality cannot tell it apart
    if elem == ir.STR and any(ord(c) > strmath.SOLVER_MAX_CODE_POINT
                              for x in items for c in x):
        return None
    contents = heap.initial_contents(ir.initial(p))
    value: ir.Term = ir.empty_seq(elem)
    for x in items:
        value = ir.arith("+", value, ir.op("seq_unit", ir.const(x), sort=ir.seq_sort(elem)))
    return ir.cmp("!=", contents, value)
