"""The obligation: the spec translated over the parameters, and the formula
whose satisfying pre-states are exactly the counterexamples.

For a pre-state allowed by ``assuming``, an outcome is allowed when

* it raises class C and some ``raises`` condition for C (or a base of C) holds;
* it returns, no ``raises`` condition holds, and the relation holds with
  ``result`` bound to the returned value (a relation that itself raises does
  not hold).

The obligation fails exactly on ``assuming and OR(guard_o and not allowed_o)``.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable, Dict, List, Optional, Tuple

from refines import ir
from refines.errors import SpecError, Untranslatable
from refines.source import Obligation, SpecPart
from refines.translate import Scope, SpecValue, translate_spec


@dataclass
class Spec:
    """The spec of an obligation, translated, for one behaviour."""

    assuming: SpecValue
    raises: Tuple[Tuple[type, SpecPart, SpecValue], ...]
    relation: Callable[[ir.Value], SpecValue]


@dataclass
class Violation:
    """The pre-states on which one (group of) outcome(s) breaks the spec."""

    term: ir.Term
    outcome: ir.Outcome  # a representative outcome


def translate_spec_for(ob: Obligation) -> Spec:
    """Translate assuming, raises and relation over the parameters."""
    pre: Dict[str, ir.Value] = {p.name: ir.initial(p) for p in ob.params}

    def read(part: SpecPart, env: Dict[str, ir.Value], old: Optional[dict] = None,
             heap_state: Optional[dict] = None):
        scope = Scope(part.globals, part.params)
        try:
            return translate_spec(part.body, {n: env[n] for n in part.params}, scope,
                                  part.role, old_env=old, heap_state=heap_state)
        except (SpecError, Untranslatable) as exc:
            if exc.path is None:
                exc.path = part.path
            raise

    assuming = (read(ob.assuming, pre) if ob.assuming is not None
                else SpecValue(ir.TRUE, ir.TRUE, ()))
    raises = tuple((cls, part, read(part, pre)) for cls, part in ob.raises)

    def relation(result: ir.Value, heap_state: Optional[dict] = None) -> SpecValue:
        # The parameters are read in the post-state heap; old(...) in the pre-state.
        return read(ob.relation, dict(pre, result=result), old=pre, heap_state=heap_state)

    return Spec(assuming, raises, relation)


def translate_assuming(ob: Obligation) -> ir.Term:
    """Where ``assuming`` holds (and does not raise), over the parameters."""
    if ob.assuming is None:
        return ir.TRUE
    part = ob.assuming
    pre = {p.name: ir.initial(p) for p in ob.params}
    return translate_spec(part.body, {n: pre[n] for n in part.params},
                          Scope(part.globals, part.params), part.role).holds


def allowed(spec: Spec, outcome: ir.Outcome, relation: Optional[SpecValue] = None) -> ir.Term:
    """Where ``outcome`` (if it happens) meets the spec."""
    if not outcome.returns:
        return ir.or_(*(r.holds for cls, _, r in spec.raises
                        if issubclass(outcome.exception, cls)))
    no_raise_required = ir.and_(*(ir.not_(r.holds) for _, _, r in spec.raises))
    relation = relation if relation is not None else spec.relation(outcome.value,
                                                                   outcome.heap)
    return ir.and_(no_raise_required, relation.holds)


def violations(behaviour: ir.Behaviour, spec: Spec) -> List[Violation]:
    """One violation term per group of outcomes.

    Returns of the same shape are merged into one value (an if-then-else over
    their guards), so the relation is read once rather than once per return.
    """
    # An unmodelled outcome is checked apart: it can only make the verdict unknown.
    out = [Violation(ir.and_(o.guard, ir.not_(allowed(spec, o))), o)
           for o in behaviour.outcomes if not o.returns and not o.unmodelled]
    for members in returns_by_shape(behaviour.outcomes):
        merged = merge_returns(members)
        out.append(Violation(ir.and_(merged.guard, ir.not_(allowed(spec, merged))), merged))
    return out


def returns_by_shape(outcomes) -> List[List[ir.Outcome]]:
    """The returning outcomes, grouped by the shape of their value (the order
    of first appearance); one group merges into one value (``merge_returns``)."""
    groups: Dict[str, List[ir.Outcome]] = {}
    for o in outcomes:
        if o.returns:
            groups.setdefault(_shape(o.value), []).append(o)
    return list(groups.values())


def merge_returns(members: List[ir.Outcome]) -> ir.Outcome:
    """One returning outcome for returns of one shape: the value and heap are
    if-then-else terms over their guards."""
    value, heap_state = members[-1].value, dict(members[-1].heap or {})
    for o in reversed(members[:-1]):
        value = _merge_value(o.guard, o.value, value)
        heap_state = _merge_heap(o.guard, o.heap or {}, heap_state)
    guard = ir.or_(*(o.guard for o in members))
    return ir.Outcome(guard, value=value, line=members[0].line, heap=heap_state)


def _merge_heap(cond: ir.Term, a: dict, b: dict) -> dict:
    from refines.heap import initial_field

    out = {}
    for key in set(a) | set(b):
        x, y = a.get(key) or initial_field(key), b.get(key) or initial_field(key)
        out[key] = x if x is y else ir.ite(cond, x, y)
    return out


def _shape(v: ir.Value) -> str:
    """Values of one shape merge into one if-then-else value."""
    if isinstance(v, ir.Ref):
        return v.kind
    if isinstance(v, ir.Tup):
        return "(" + ",".join(_shape(i) for i in v.items) + ")"
    if isinstance(v, ir.Opt):
        return "Optional " + _shape(v.value)
    if v is ir.NONE:
        return "None"
    return v.sort if v.sort in (ir.FLOAT, ir.STR) else "int"


def _merge_value(cond: ir.Term, a: ir.Value, b: ir.Value) -> ir.Value:
    if isinstance(a, ir.Tup):
        return ir.Tup(tuple(_merge_value(cond, x, y) for x, y in zip(a.items, b.items)))
    if isinstance(a, ir.Opt):
        return ir.Opt(ir.ite(cond, a.none, b.none), ir.ite(cond, a.value, b.value))
    if isinstance(a, ir.Ref):
        return ir.Ref(ir.ite(cond, a.ref, b.ref), a.kind)
    if a is ir.NONE:
        return ir.NONE
    return ir.ite(cond, a, b)
