"""What the translator believes a function does, for people to review.

``--refines-explain`` prints, for every obligation whose body is translated:

* the before/after relation the translation computed, as cases in Python
  syntax: ``when age <= 14: result == 1100``, ``when len(name) == 0: raises
  IndexError``, ``b.slots == old(b.slots) + n`` for an object changed in place.
  Values that untranslated parts produce are named ``unknown_1``,
  ``unknown_2``, ... and the parts are listed;
* what the function guarantees about its result under ``assuming``. Where the
  parameters and the result are ints and bools in linear arithmetic, this is
  the strongest postcondition, ``exists x. assuming(x) and S(x, result)``,
  with the parameters eliminated by the solver (``eliminate.exists``), checked
  both ways. Elsewhere it is a list of facts the solver proves (bounds on an
  int or a length, a float that is never NaN, a value that is never None),
  true but not necessarily the strongest; the label says which.

Conditions are made readable and checked like preconditions (``readable``);
the values are printed from the translation's own terms. A case or fact that
could not be made readable or checked within the budget is left out and
counted in the note.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from typing import Dict, List, Optional, Tuple

import z3

from refines import eliminate, heap, ir
from refines.readable import cases as value_cases, print_cubes, printed, readable

MAX_CASES = 12  # cases of one if-then-else value before it is printed whole
MAX_PRINTED = 300  # operations in a printed value
GALLOP = 64  # doublings before a bound counts as absent

STRONGEST = "strongest"  # the guarantee is the strongest postcondition
FACTS = "facts"  # proved facts, not necessarily the strongest


@dataclass
class Explanation:
    """Plain text, JSON-able."""

    cases: List[Tuple[str, str]] = field(default_factory=list)  # (when, then)
    unknowns: str = ""  # what unknown_1, unknown_2, ... stand for
    assuming: Optional[str] = None  # the assuming text the guarantee is under
    guarantee: List[str] = field(default_factory=list)
    guarantee_kind: str = FACTS
    note: str = ""

    def to_json(self) -> dict:
        return {"relation": [{"when": w, "then": t} for w, t in self.cases],
                "unknowns": self.unknowns or None, "assuming": self.assuming,
                "guarantee": list(self.guarantee), "guarantee_kind": self.guarantee_kind,
                "note": self.note or None}


def explain(ob, behaviour: ir.Behaviour, spec, solver) -> Explanation:
    params = ob.params
    out = Explanation(assuming=ob.assuming.text if ob.assuming is not None else None)
    names = _Names()
    effects = {id(o): _effects(o, params) for o in behaviour.outcomes if o.returns}
    changes = any(effects.values())
    skipped = 0
    grouped: Dict[str, List[ir.Term]] = {}
    order: List[str] = []
    for o in behaviour.outcomes:
        for guard, then in _ends(o, effects.get(id(o), []), params, names, changes, solver):
            if then not in grouped:
                grouped[then] = []
                order.append(then)
            grouped[then].append(guard)
    for then in order:
        guard = ir.or_(*grouped[then])
        if solver.check(guard)[0] == z3.unsat:
            continue  # no input ends this way
        when = _condition(guard, params, names, changes, solver)
        if when is None:
            skipped += 1
            continue
        out.cases.append(("always" if when == "True" else when, then))
    shown = " ".join(w + " " + t for w, t in out.cases)
    used = [n for n in names.index.values() if re.search(rf"\b{n}\b", shown)]
    if used:
        out.unknowns = ", ".join(used) + ": values the untranslated parts give (" \
            + "; ".join(behaviour.untranslated) + ")"
    out.guarantee, out.guarantee_kind, lost = _guarantee(behaviour, spec, params, solver)
    skipped += lost
    if skipped:
        out.note = (f"{skipped} part(s) could not be printed readably or checked within "
                    f"the budget and are left out")
    return out


# ---------------------------------------------------------------- the relation


class _Names:
    """Display names: ``unknown_<n>`` for opaque values, ``old(...)`` for
    pre-state reads of lists and objects in a function that changes them."""

    def __init__(self) -> None:
        self.index: Dict[str, str] = {}  # opaque name -> display name, in order of use

    def shown(self, t: ir.Term, old: bool) -> ir.Term:
        def replace(node: ir.Term):
            if ir.is_opaque(node):
                if node.name not in self.index:
                    self.index[node.name] = f"unknown_{len(self.index) + 1}"
                return ir.Var(self.index[node.name], node.sort)
            if old and ir.is_pre_read(node):
                return ir.Var(f"old({ir.render(node)})", node.sort)
            return None

        return ir.substitute(t, replace)


def _condition(guard: ir.Term, params, names: _Names, old: bool, solver) -> Optional[str]:
    """A guard as checked text: unknown values by their display names (so the
    text can be read back), then pre-state reads shown as ``old(...)``."""
    if ir.is_true(guard):
        return "True"
    renamed = names.shown(guard, False)
    unknowns = [v for v in ir.variables(renamed) if v.name.startswith("unknown_")]
    shown = printed(renamed, ir.TRUE, list(params) + unknowns, solver)
    if shown is None:
        return None
    if not old or not _mentions_heap(renamed):
        return shown.text
    if shown.cubes is None:
        return _printed(names.shown(renamed, True))
    return print_cubes([[names.shown(lit, True) for lit in cube] for cube in shown.cubes])


def _mentions_heap(t: ir.Term) -> bool:
    return any(ir.is_pre_read(n) for n in ir.nodes(t))


def _ends(o: ir.Outcome, effects: List[ir.Term], params, names: _Names, old: bool,
          solver) -> List[Tuple[ir.Term, str]]:
    """(guard, what happens) pairs for one outcome; an if-then-else value is
    split into its cases."""
    if o.unmodelled:
        return [(o.guard, f"not modelled: {o.unmodelled}")]
    if not o.returns:
        why = f": {o.cause}" if o.cause and not o.cause.startswith("raise ") else ""
        return [(o.guard, f"raises {o.exception.__name__} (line {o.line}{why})")]
    pieces = _result_cases(o.value, {p.name: i for i, p in enumerate(params)}, o.heap or {})
    if isinstance(o.value, ir.Term) and o.value.sort == ir.BOOL \
            and not isinstance(o.value, ir.Const):
        # A bool result reads best as the condition it is, made readable.
        text = _condition(o.value, params, names, old, solver)
        if text is not None:
            pieces = [([], f"result == ({text})")]
    out = []
    for cube, text in pieces:
        guard = ir.and_(o.guard, *cube)
        if isinstance(text, ir.Cmp) and text.right.sort == ir.FLOAT and solver.check(
                guard, ir.op("isnan", text.right, sort=ir.BOOL))[0] != z3.unsat:
            # A NaN is not == to itself: say that a NaN comes back as a NaN.
            value = _printed(names.shown(text.right, old))
            text = f"result == {value} or math.isnan({value}) and math.isnan(result)"
        parts = [text] + effects
        out.append((guard, " and ".join(
            _render(p, names, old) if isinstance(p, ir.Term) else p for p in parts)))
    return out


def _result_cases(v, order: Dict[str, int], heap_state: dict) -> List[Tuple[list, object]]:
    """``result == v`` split on the if-then-else terms of the value (of each
    item of a tuple) and on whether an optional value is None, linear parts
    folded; ``heap_state`` holds the contents of a list the call makes."""
    split = _split(v)
    if split is None or len(split) > MAX_CASES:
        split = [([], v)]
    return [(cube, _equals(_folded(value, order), heap_state)) for cube, value in split]


def _split(v) -> Optional[List[Tuple[list, object]]]:
    if isinstance(v, ir.Tup):
        out: List[Tuple[list, object]] = [([], ())]
        for item in v.items:
            sub = _split(item)
            if sub is None or len(out) * len(sub) > MAX_CASES:
                return None
            out = [(c + sc, items + (si,)) for c, items in out for sc, si in sub]
        return [(c, ir.Tup(items)) for c, items in out]
    if isinstance(v, ir.Opt):
        rest = _split(v.value)
        if rest is None:
            return None
        return [([v.none], ir.NONE)] + [([ir.not_(v.none)] + c, x) for c, x in rest]
    if isinstance(v, ir.Term) and v.sort != ir.BOOL:
        return value_cases(v) or [([], v)]
    return [([], v)]


def _folded(v, order: Dict[str, int]):
    """Int terms with their linear parts folded (``queue - queue`` is 0)."""
    if isinstance(v, ir.Tup):
        return ir.Tup(tuple(_folded(i, order) for i in v.items))
    if isinstance(v, ir.Term) and v.sort == ir.INT and not isinstance(v, ir.Ite):
        from refines.readable import normal_term

        return normal_term(v, order)
    return v


def _equals(v, heap_state: dict):
    """``result == v`` as a term where one exists, else as text."""
    if v is ir.NONE:
        return "result is None"
    if isinstance(v, ir.Term):
        return ir.Cmp("==", ir.Var("result", v.sort), v) if v.sort in (
            ir.INT, ir.BOOL, ir.FLOAT, ir.STR) else f"result == {ir.render(v)}"
    if isinstance(v, ir.Ref):
        if isinstance(v.ref, ir.Var) and v.ref.name.endswith(ir.REF_SUFFIX):
            return f"result is {ir.render(v.ref)}"
        if v.kind.startswith("list:"):
            # A list the call made: its contents, from the heap as the call left it.
            key = heap.field_key(v.kind)
            contents = ir.select(heap_state.get(key) or heap.initial_field(key), v.ref)
            return ir.Cmp("==", ir.Var("result", contents.sort), contents)
        return f"result is a new {heap.describe(v.kind)}"
    return f"result == {ir.render_value(v)}"


def _effects(o: ir.Outcome, params) -> List[ir.Term]:
    """``xs == <new contents>`` and ``b.slots == <new value>`` for the lists
    and objects of the parameters that this outcome changes."""
    out = []
    for p in params:
        if p.sort != ir.REF:
            continue
        ref = ir.initial(p).ref
        keys = [heap.field_key(p.kind)] if p.kind.startswith("list:") else [
            heap.field_key(p.kind, a) for a in heap.KINDS[p.kind].fields]
        for key in keys:
            arr = (o.heap or {}).get(key)
            if arr is None or arr is heap.initial_field(key):
                continue
            after = ir.select(arr, ref)
            before = ir.select(heap.initial_field(key), ref)
            if ir.render(after) == ir.render(before):
                continue
            out.append(ir.Cmp("==", before, after))  # left prints as the post-state
    return out


def _render(t: ir.Term, names: _Names, old: bool) -> str:
    if isinstance(t, ir.Cmp) and ir.is_pre_read(t.left):
        # An effect: the field after the call, read plainly, equals a value
        # computed from the pre-state, whose reads print as old(...).
        right = names.shown(t.right, True)
        text = _printed(right)
        if isinstance(right, ir.Ite):  # `a == (b if c else d)`, not `(a == b) if c else d`
            text = f"({text})"
        return f"{ir.render(t.left)} == {text}"
    return _printed(names.shown(t, old))


def _printed(t: ir.Term) -> str:
    size = ir.printed_size(t)
    return ir.render(t) if size <= MAX_PRINTED else f"<a term of {size} operations>"


# ---------------------------------------------------------------- the guarantee


def _guarantee(behaviour: ir.Behaviour, spec, params, solver) -> Tuple[List[str], str, int]:
    """What holds of the result under ``assuming``: the strongest
    postcondition where it can be computed, else proved facts."""
    returns = [o for o in behaviour.outcomes if o.returns]
    assuming = spec.assuming.holds
    facts: List[str] = []
    raising = sorted({o.exception.__name__ for o in behaviour.outcomes
                      if not o.returns and not o.unmodelled
                      and solver.check(assuming, o.guard)[0] == z3.sat})
    if any(o.unmodelled and solver.check(assuming, o.guard)[0] != z3.unsat
           for o in behaviour.outcomes):
        raising.append("something not modelled")
    if not returns or all(solver.check(assuming, o.guard)[0] == z3.unsat for o in returns):
        return [("always raises " + " or ".join(raising)) if raising
                else "never returns"], FACTS, 0
    from refines.obligation import merge_returns, returns_by_shape

    found: List[Tuple[List[str], bool]] = []  # per reachable shape: facts, strongest?
    lost = 0
    for members in returns_by_shape(returns):
        where = ir.and_(assuming, ir.or_(*(o.guard for o in members)))
        if solver.check(where)[0] == z3.unsat:
            continue
        value = merge_returns(members).value
        strongest = _strongest(value, where, params, solver)
        if strongest is not None:
            found.append(([strongest[0]], strongest[1]))
            continue
        texts, n = _facts(value, "result", where, solver)
        lost += n
        found.append((texts, False))
    found = [([t for t in texts if t != "True"], exact) for texts, exact in found]
    if len(found) == 1:
        facts, kind = found[0][0], STRONGEST if found[0][1] and found[0][0] else FACTS
    elif all(texts for texts, _ in found):
        # Returns of different shapes (None on one path, an int on another).
        facts = [" or ".join(f"({' and '.join(t)})" if len(t) > 1 or " or " in t[0]
                             else t[0] for t, _ in found)]
        kind = STRONGEST if all(exact for _, exact in found) else FACTS
    else:
        facts, kind = [], FACTS  # some shape has nothing known beyond its type
    facts.append("may raise " + " or ".join(raising) if raising else "never raises")
    return facts, kind, lost


def _strongest(value, where: ir.Term, params, solver) -> Optional[Tuple[str, bool]]:
    """``exists params. where and result == value``, as checked text."""
    items = value.items if isinstance(value, ir.Tup) else (value,)
    if not all(isinstance(v, ir.Term) and v.sort in (ir.INT, ir.BOOL) for v in items):
        return None
    if any(p.sort not in (ir.INT, ir.BOOL) or p.optional for p in params):
        return None
    results = ([ir.Var("result", value.sort)] if not isinstance(value, ir.Tup)
               else [ir.Var(f"result_{i}", v.sort) for i, v in enumerate(items)])
    cond = ir.and_(where, *(ir.cmp("==", r, v) for r, v in zip(results, items)))
    bound = list(params) + [v for v in ir.variables(cond) if ir.is_opaque(v)]
    gone = eliminate.exists(cond, bound, solver, describe=lambda v: "a parameter")
    if gone.term is None:
        return None
    text = readable(gone.term, ir.TRUE, results, solver)
    if text is None:
        return None
    if isinstance(value, ir.Tup):
        import re

        text = re.sub(r"\bresult_(\d+)\b", r"result[\1]", text)
    return text, gone.exact


def _facts(value, name: str, where: ir.Term, solver) -> Tuple[List[str], int]:
    """Facts about ``value`` that hold wherever ``where`` does, each proved."""
    if isinstance(value, ir.Tup):
        out, lost = [], 0
        for i, item in enumerate(value.items):
            f, n = _facts(item, f"{name}[{i}]", where, solver)
            out.extend(f)
            lost += n
        return out, lost
    if value is ir.NONE:
        return [f"{name} is None"], 0
    if isinstance(value, ir.Opt):
        if solver.check(where, value.none)[0] == z3.unsat:
            f, n = _facts(value.value, name, where, solver)
            return [f"{name} is not None"] + f, n
        if solver.check(where, ir.not_(value.none))[0] == z3.unsat:
            return [f"{name} is None"], 0
        f, n = _facts(value.value, name, ir.and_(where, ir.not_(value.none)), solver)
        if not f:
            return [], n
        inner = " and ".join(f)
        return [f"{name} is None or " + (f"({inner})" if len(f) > 1 else inner)], n
    if isinstance(value, ir.Ref):
        return [], 0
    if value.sort == ir.INT:
        return _int_bounds(value, name, where, solver), 0
    if value.sort == ir.STR:
        return _int_bounds(ir.str_len(value), f"len({name})", where, solver,
                           floor=0), 0
    if value.sort == ir.BOOL:
        for const in (True, False):
            if solver.check(where, ir.cmp("!=", value, ir.const(const)))[0] == z3.unsat:
                return [f"{name} is {const}"], 0
        return [], 0
    if value.sort == ir.FLOAT:
        out = []
        nan = ir.op("isnan", value, sort=ir.BOOL)
        if solver.check(where, nan)[0] == z3.unsat:
            inf = ir.op("isinf", value, sort=ir.BOOL)
            out.append(f"not math.isnan({name})" if solver.check(where, inf)[0] != z3.unsat
                       else f"math.isfinite({name})")
            for op, text in ((">=", f"{name} >= 0.0"), ("<=", f"{name} <= 0.0")):
                if solver.check(where, ir.not_(ir.cmp(op, value, ir.const(0.0))))[0] \
                        == z3.unsat:
                    out.append(text)
        return out, 0
    return [], 0


def _int_bounds(v: ir.Term, name: str, where: ir.Term, solver,
                floor: Optional[int] = None) -> List[str]:
    """The least upper and greatest lower bound of ``v`` where ``where``
    holds, each attained (``lo <= v <= hi``), when they exist."""
    status, model, _ = solver.check(where)
    if status != z3.sat:
        return []
    start = solver.value(model, v)
    hi = _tight(v, where, solver, start, +1)
    lo = _tight(v, where, solver, start, -1)
    if floor is not None and lo is not None and lo <= floor:
        lo = None
    if lo is not None and hi is not None:
        return [f"{name} == {lo}" if lo == hi else f"{lo} <= {name} <= {hi}"]
    if lo is not None:
        return [f"{name} >= {lo}"]
    if hi is not None:
        return [f"{name} <= {hi}"]
    return []


def _tight(v: ir.Term, where: ir.Term, solver, start: int, sign: int) -> Optional[int]:
    """The bound of ``v`` on the side ``sign`` (+1: upper), or None if it
    grows past every bound tried or the budget ends."""
    op = ">" if sign > 0 else "<"

    def beyond(k: int) -> Optional[bool]:
        status = solver.check(where, ir.cmp(op, v, ir.const(k)))[0]
        return None if status == z3.unknown else status == z3.sat

    first = beyond(start)
    if first is None:
        return None
    if not first:
        return start  # attained: the model's value
    known, n = start, 1  # v goes beyond `known`
    for _ in range(GALLOP):
        probe = start + sign * n
        answer = beyond(probe)
        if answer is None:
            return None
        if answer:
            known, n = probe, n * 2
            continue
        # v goes beyond `known` but not beyond `probe`: bisect.
        low, high = known, probe
        while abs(high - low) > 1:
            mid = (low + high) // 2
            answer = beyond(mid)
            if answer is None:
                return None
            low, high = (mid, high) if answer else (low, mid)
        return high
    return None
