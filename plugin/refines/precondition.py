"""The exact precondition of a spec, simpler sufficient ones, and the
suggested ``assuming``: computed, made readable and checked before shown.

For a deterministic body the exact (weakest) precondition follows from the
one-point law: the post-state is a function of the pre-state, so quantifying
over it collapses to substituting each outcome into the spec,

    wp = OR over outcomes o of (guard_o and allowed_o)

where ``allowed_o`` is the relation with ``result`` replaced by the returned
value (and no ``raises`` condition holding), or for a raising outcome, some
``raises`` condition for that class holding.

Where parts of the body are not translated, the outcomes also depend on the
opaque values ``h`` that stand for what those parts do, and the precondition
must hold whatever they do: ``forall h. AND over o of (guard_o -> allowed_o)``
(for an input and a choice of ``h`` at most one guard holds; a choice no real
run makes satisfies none). The quantifier is eliminated by the solver
(``eliminate``). An outcome that is not modelled (a call that may raise)
counts as breaking the spec. The result is then exact *for the translation*:
the weakest condition under which the function meets the spec whatever the
untranslated parts do. For the function itself it is sufficient, not always
necessary, and the report says so.

Everything shown is Python text that the solver has checked (``readable``),
and which the counterexample, a real run that breaks the spec, falsifies.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Dict, List, Optional

import z3

from refines import eliminate, ir, sufficient
from refines.obligation import allowed
from refines.readable import MAX_PRINTED, equivalent, evaluate, mentions, printed, readable

# What a precondition is exact for: the function, or the translation, whose
# untranslated parts may do anything (then it is sufficient for the function).
FOR_FUNCTION = "function"
FOR_TRANSLATION = "translation"


@dataclass
class Preconditions:
    exact: Optional[str]  # the weakest precondition, as checked Python text
    suggested: Optional[str]  # a lambda: assuming tightened by it
    note: Optional[str] = None  # why something is not shown
    scope: str = FOR_FUNCTION  # what ``exact`` is exact for
    sufficient: List[str] = field(default_factory=list)  # simpler, stronger ones


def weakest(behaviour: ir.Behaviour, spec) -> ir.Term:
    """The weakest precondition of the translated body for ``spec``, with the
    opaque values of untranslated parts still free (see ``compute``)."""
    if not behaviour.untranslated:
        # Guards are disjoint and cover every input: substitute (one-point law).
        # An unmodelled outcome is left out, i.e. counts as breaking the spec.
        return ir.or_(*(ir.and_(o.guard, allowed(spec, o)) for o in behaviour.outcomes
                        if not o.unmodelled))
    # Opaque values (only untranslated parts make them) may leave every guard
    # false for some choice of them: each outcome implies its spec instead.
    return ir.and_(*(ir.implies(o.guard, ir.FALSE if o.unmodelled else allowed(spec, o))
                     for o in behaviour.outcomes))


def compute(ob, behaviour: ir.Behaviour, spec, solver,
            counterexample: Optional[Dict[str, Any]] = None) -> Preconditions:
    """The exact precondition, simpler sufficient ones and the suggestion for
    a refuted obligation. ``counterexample`` (the inputs before the failing
    call) must falsify everything shown; what it does not falsify is dropped."""
    params = ob.params
    wp = weakest(behaviour, spec)
    parts = tuple(behaviour.untranslated)
    unmodelled = [o.unmodelled for o in behaviour.outcomes if o.unmodelled]
    scope = FOR_TRANSLATION if parts or unmodelled else FOR_FUNCTION
    opaque = [v for v in ir.variables(wp) if ir.is_opaque(v)]
    if opaque:
        gone = eliminate.forall(wp, opaque, solver)
        if gone.term is None:
            return Preconditions(None, None, _about(parts, unmodelled) + ", and "
                                 + gone.why, scope)
        wp = gone.term
    shown = printed(wp, ir.TRUE, params, solver)
    if shown is None:
        if ir.printed_size(wp) > MAX_PRINTED:
            why = (f"the exact precondition has {ir.printed_size(wp)} operations once "
                   f"branches are expanded, too many to print readably")
        else:
            why = ("the printed form of the exact precondition could not be checked "
                   "equivalent to the computed one within the budget, so it is not shown")
        return Preconditions(None, None, why, scope)
    exact_text = shown.text
    tightened = ir.and_(spec.assuming.holds, wp)
    status, _, _ = solver.check(tightened)
    if status == z3.unsat:
        if scope == FOR_TRANSLATION:
            return Preconditions(exact_text if exact_text != "False" else None, None,
                                 "whatever " + _about(parts, unmodelled, short=True)
                                 + ", no input allowed by the current assuming can be shown "
                                 "to meet the spec: the translation keeps too little of "
                                 "what they do", scope)
        return Preconditions(exact_text, None,
                             "no input allowed by the current assuming meets the spec", scope)
    alternatives, simpler = sufficient.alternatives(wp, shown, spec.assuming.holds, params,
                                                    solver)
    if simpler is not None and equivalent(simpler, wp, ir.TRUE, params, solver):
        exact_text = simpler  # an interval that is the same condition, shorter
    out = Preconditions(exact_text, None, None, scope)
    out.sufficient = alternatives
    out.suggested = _suggestion(ob, wp, tightened, exact_text, spec, solver)
    if out.suggested is None:
        out.note = "no tightened assuming could be checked"
    elif shown.cubes is None and out.exact == shown.text:
        out.note = ("the precondition could not be split into simple cases within the limits, "
                    "so it is printed as computed (checked equivalent)")
    if counterexample is not None:
        _falsified_by(out, counterexample, ob)
    return out


def _suggestion(ob, wp: ir.Term, tightened: ir.Term, exact_text: str, spec,
                solver) -> Optional[str]:
    """``assuming`` tightened by the precondition, as a lambda: the shorter of
    the whole simplified, and the user's text ``and`` the rest."""
    params = ob.params
    candidates = []
    if ob.assuming is None:
        candidates.append(exact_text)
    else:
        alone = readable(tightened, ir.TRUE, params, solver)
        if alone is not None:
            candidates.append(alone)
        rest = readable(wp, spec.assuming.holds, params, solver)
        for part in dict.fromkeys(p for p in (rest, exact_text) if p is not None):
            both = f"({ob.assuming.text}) and ({part})" if part != "True" else ob.assuming.text
            if equivalent(both, tightened, ir.TRUE, params, solver):
                candidates.append(both)
    if not candidates:
        return None
    best = min(candidates, key=len)
    used = [p.name for p in params if mentions(best, p.name)]
    return f"lambda {', '.join(used)}: {best}".replace("lambda : ", "lambda: ")


def _about(parts, unmodelled, short: bool = False) -> str:
    what = "; ".join(parts) if parts else "; ".join(dict.fromkeys(unmodelled))
    if short:
        return f"the untranslated parts do ({what})" if parts else f"happens where {what}"
    return (f"not computed: the precondition ranges over what the untranslated parts do "
            f"({what})" if parts else f"not computed: part of the behaviour is not modelled "
                                      f"({what})")


def _falsified_by(out: Preconditions, inputs: Dict[str, Any], ob) -> None:
    """The counterexample breaks the spec, so every precondition shown must be
    false on it. Evaluated by Python on copies of the inputs; a text that is
    true (or raises) there is an internal inconsistency and is not shown."""
    def wrong(text: str) -> bool:
        return evaluate(text, inputs) is not False

    bad = [t for t in [out.exact] + out.sufficient if t is not None and wrong(t)]
    if out.exact in bad:
        out.exact = None
    out.sufficient = [t for t in out.sufficient if t not in bad]
    if out.suggested is not None and wrong(out.suggested.split(":", 1)[1]):
        bad.append(out.suggested)
        out.suggested = None
    if bad:
        out.note = ("internal inconsistency: the counterexample satisfies "
                    + "; ".join(f"`{t}`" for t in bad)
                    + ", so it is not shown (please report it as a bug in pytest-refines)")


def fill(result, ob, pre: Preconditions) -> None:
    """Put ``pre`` into a refuted ``Result``."""
    result.exact_precondition = pre.exact
    result.precondition_scope = pre.scope if pre.exact is not None else None
    result.sufficient_preconditions = list(pre.sufficient)
    result.suggested_assuming = pre.suggested
    result.precondition_note = pre.note
    shown = [pre.suggested or ""] + list(pre.sufficient)
    if any("math." in t for t in shown) and ob.fn.__globals__.get("math") is not math:
        result.notes.append(f"the suggestion uses the math module: add `import math` "
                            f"to {ob.show(ob.path)} before pasting it")
