"""Making a condition readable, and checking the printed text against it.

A condition computed by substitution or elimination is correct but hard to
read. ``readable`` prints it as conjunctions and disjunctions of simple
comparisons over the parameters: if-then-else terms are lifted out of
comparisons, the formula is put in disjunctive normal form (at most
``MAX_CUBES`` cubes), each comparison is normalised to ``<linear form> <op>
<constant>`` with constants folded, and the solver drops empty cubes,
literals the rest of the cube (or the context) already implies, and cubes the
others cover. The printed Python is then parsed back with the project's own
translator and the solver checks that it is equivalent to the condition
wherever the context holds: text that fails the check is never returned.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from math import gcd
from typing import Dict, List, Optional, Sequence, Tuple

import z3

from refines import ir
from refines.errors import SpecError, Untranslatable
from refines.translate import Scope, parse_expression, translate_spec

MAX_CUBES = 64
MAX_PRINTED = 400  # nodes; past this a printed condition helps nobody


# ---------------------------------------------------------------- readable form


@dataclass
class Printed:
    """A condition as checked Python text, and the cubes it prints (None when
    the clean-up gave nothing checkable and the unsimplified form is shown)."""

    text: str
    cubes: Optional[List["Cube"]]


def readable(target: ir.Term, context: ir.Term, params: Sequence[ir.Var],
             solver) -> Optional[str]:
    """Python text equivalent to ``target`` wherever ``context`` holds."""
    out = printed(target, context, params, solver)
    return None if out is None else out.text


def printed(target: ir.Term, context: ir.Term, params: Sequence[ir.Var],
            solver) -> Optional[Printed]:
    """``readable``, with the cubes behind the text."""
    cubes = dnf(target, False)
    if cubes is None:
        # Too many cases to expand by hand (a formula in conjunctive form):
        # the solver lists the cases instead.
        cubes = implicants(target, context, solver)
    if cubes is not None:
        cubes = [c for c in (normal_cube(c, params) for c in cubes) if c is not None]
        cubes = simplify_cubes(cubes, target, context, solver, params)
        # Only worth its queries where the cubes reason through //, %,
        # products or floats: linear integer bounds already read well.
        if (len(cubes) > 1 or (cubes and len(cubes[0]) > 1)) and any(
                _nonlinear(lit) for c in cubes for lit in c):
            whole = ir.or_(*(ir.and_(*c) for c in cubes))
            single = _simpler_literal([whole], context, params, target, solver, force=True)
            if single[0] is not whole:
                cubes = [single]
        cubes = [_simpler_literal(c, context, params, target, solver) for c in cubes]
        text = print_cubes(cubes)
        if equivalent(text, target, context, params, solver):
            return Printed(text, cubes)
    if ir.printed_size(target) > MAX_PRINTED:
        return None  # too large to be read, or even printed
    text = ir.render(target)  # unsimplified, but still Python with its meaning
    if equivalent(text, target, context, params, solver):
        return Printed(text, None)
    return None


def parse_condition(text: str, params: Sequence[ir.Var]):
    """``text`` read back by the translator over the parameters (a
    ``SpecValue``), or None if it cannot be read."""
    try:
        node = parse_expression(text)
        env = {p.name: ir.initial(p) for p in params}
        return translate_spec(node, env, Scope({"math": math}, [p.name for p in params]),
                              "check")
    except (SyntaxError, SpecError, Untranslatable, Exception):  # noqa: BLE001
        return None


def equivalent(text: str, target: ir.Term, context: ir.Term,
               params: Sequence[ir.Var], solver) -> bool:
    """Re-read ``text`` with the translator; the solver checks it never raises
    and equals ``target`` wherever ``context`` holds."""
    value = parse_condition(text, params)
    if value is None:
        return False
    differs = ir.or_(ir.not_(value.defined),
                     ir.not_(ir.cmp("==", value.holds, target)))
    status, _, _ = solver.check(context, differs)
    return status == z3.unsat


def implies(text: str, target: ir.Term, context: ir.Term,
            params: Sequence[ir.Var], solver):
    """``text`` read back (a ``SpecValue``) if the solver shows that it never
    raises where ``context`` holds and implies ``target`` there; else None."""
    value = parse_condition(text, params)
    if value is None:
        return None
    bad = ir.or_(ir.not_(value.defined), ir.and_(value.holds, ir.not_(target)))
    status, _, _ = solver.check(context, bad)
    return value if status == z3.unsat else None


def evaluate(text: str, inputs: dict) -> Optional[bool]:
    """A printed condition evaluated by Python on ``inputs`` (None: it raised).
    The text names only parameters, builtins and ``math``, and changes nothing."""
    try:
        return bool(eval(text, {"math": math}, dict(inputs)))  # noqa: S307 -- checked text
    except Exception:  # noqa: BLE001
        return None


def mentions(text: str, name: str) -> bool:
    """Whether ``text`` uses the name ``name`` (not as an attribute)."""
    return re.search(rf"(?<![\w.]){re.escape(name)}(?!\w)", text) is not None


# ---------------------------------------------------------------- DNF with ite lifting

Cube = List[ir.Term]


def dnf(t: ir.Term, negate: bool) -> Optional[List[Cube]]:
    """Disjunctive normal form of ``t`` (or of ``not t``); None if too large."""
    if isinstance(t, ir.Const):
        return [[]] if bool(t.value) != negate else []
    if isinstance(t, ir.Not):
        return dnf(t.arg, not negate)
    if isinstance(t, (ir.And, ir.Or)):
        conj = isinstance(t, ir.And) != negate
        parts = [dnf(a, negate) for a in t.args]
        if any(p is None for p in parts):
            return None
        return _product(parts) if conj else _concat(parts)
    if isinstance(t, ir.Ite):
        # (c and a) or (not c and b), with the negation pushed into a and b.
        left = _product([dnf(t.cond, False), dnf(t.then, negate)])
        right = _product([dnf(t.cond, True), dnf(t.orelse, negate)])
        return _concat([left, right])
    if isinstance(t, (ir.Var, ir.Op)) and t.sort == ir.BOOL:
        return [[ir.not_(t) if negate else t]]
    if isinstance(t, ir.Cmp):
        if t.left.sort == ir.BOOL and t.right.sort == ir.BOOL:
            same = ir.or_(ir.and_(t.left, t.right),
                          ir.and_(ir.not_(t.left), ir.not_(t.right)))
            return dnf(same, negate != (t.op == "!="))
        # With NaN, not (x < y) is not x >= y: a negated float ordering stays a
        # negation (of each case of its operands).
        keep_not = negate and ir.FLOAT in (t.left.sort, t.right.sort) \
            and t.op not in ("==", "!=")
        op = ir.NEGATED[t.op] if negate and not keep_not else t.op
        out: List[Cube] = []
        lcases, rcases = cases(t.left), cases(t.right)
        if lcases is None or rcases is None:
            return [[ir.Not(t)]] if keep_not else None
        for lcube, lterm in lcases:
            for rcube, rterm in rcases:
                lit = ir.cmp(op, lterm, rterm)
                out.append(lcube + rcube + [ir.not_(lit) if keep_not else lit])
                if len(out) > MAX_CUBES:
                    return None
        return out
    return None


def implicants(target: ir.Term, context: ir.Term, solver) -> Optional[List[Cube]]:
    """A DNF of ``target`` made by the solver rather than by expansion: a model
    of ``target`` not covered yet gives a cube (every atom of the formula as
    the model has it), which is widened by dropping each literal that it can
    do without while still implying ``target``. An atom with an if-then-else
    value inside (``(x if p else y) > 1``) gives the literals of the branch the
    model takes: ``p`` and ``x > 1``. At most ``MAX_CUBES`` cubes; None if the
    solver cannot say."""
    atoms = _atoms(target)
    if atoms is None or len(atoms) > MAX_ATOMS:
        return None
    not_target = ir.not_(target)
    cubes: List[Cube] = []
    for _ in range(MAX_CUBES):
        covered = ir.or_(*(ir.and_(*c) for c in cubes)) if cubes else ir.FALSE
        status, model, _ = solver.check(context, target, ir.not_(covered))
        if status == z3.unsat:
            return cubes
        if status != z3.sat:
            return None
        cube: Cube = []
        for a in atoms:
            for lit in _lifted(a, model, solver):
                if not any(ir.render(lit) == ir.render(x) for x in cube):
                    cube.append(lit)
        for lit in list(cube):
            trial = [x for x in cube if x is not lit]
            if solver.check(context, *trial, not_target)[0] == z3.unsat:
                cube = trial
        cubes.append(cube)
    return None


MAX_ATOMS = 48  # each cube costs one query per atom


def _lifted(a: ir.Term, model, solver) -> Cube:
    """``a`` as the model has it, with every if-then-else value inside it
    replaced by the branch the model takes, and that branch's condition as a
    literal of its own; all of them hold in the model."""
    out: Cube = []
    for _ in range(MAX_ATOMS):
        ite = next((n for n in ir.nodes(a) if isinstance(n, ir.Ite) and n.sort != ir.BOOL), None)
        if ite is None:
            break
        taken = z3.is_true(model.eval(solver.lower(ite.cond), model_completion=True))
        out.extend(_lifted(ite.cond, model, solver) if _atoms(ite.cond) == [ite.cond]
                   else [ite.cond if taken else ir.not_(ite.cond)])
        branch = ite.then if taken else ite.orelse
        a = ir.substitute(a, lambda n, ite=ite, branch=branch: branch if n is ite else None)
    value = model.eval(solver.lower(a), model_completion=True)
    out.append(a if z3.is_true(value) else _negated(a))
    return out


def _negated(a: ir.Term) -> ir.Term:
    """``not a``, as the opposite comparison where that is exact (not for
    floats: with a NaN, not (x < y) is not x >= y)."""
    if isinstance(a, ir.Cmp) and ir.FLOAT not in (a.left.sort, a.right.sort):
        return ir.Cmp(ir.NEGATED[a.op], a.left, a.right)
    return ir.not_(a)


def _atoms(t: ir.Term) -> Optional[List[ir.Term]]:
    """The comparisons and boolean tests ``t`` is made of, by ``and``, ``or``,
    ``not`` and boolean if-then-else (a value inside one may be an
    if-then-else: ``implicants`` lifts it)."""
    out, seen, stack = [], set(), [t]
    while stack:
        n = stack.pop()
        if id(n) in seen:
            continue
        seen.add(id(n))
        if isinstance(n, ir.Const):
            continue
        if isinstance(n, (ir.And, ir.Or, ir.Not)) or (
                isinstance(n, ir.Ite) and n.sort == ir.BOOL) or (
                isinstance(n, ir.Cmp) and n.left.sort == ir.BOOL and n.right.sort == ir.BOOL):
            stack.extend(ir.children(n))
            continue
        if n.sort != ir.BOOL:
            return None
        if not any(ir.render(n) == ir.render(a) for a in out):
            out.append(n)
    return out


def cases(t: ir.Term) -> Optional[List[Tuple[Cube, ir.Term]]]:
    """``t`` as a list of (condition cube, if-free term) pairs."""
    if isinstance(t, (ir.Var, ir.Const)):
        return [([], t)]
    if isinstance(t, ir.Ite):
        out = []
        for cond_cubes, branch in ((dnf(t.cond, False), t.then), (dnf(t.cond, True), t.orelse)):
            sub = cases(branch)
            if cond_cubes is None or sub is None:
                return None
            out.extend((c + sc, st) for c in cond_cubes for sc, st in sub)
        return out if len(out) <= MAX_CUBES else None
    if isinstance(t, ir.ToInt):
        a, b = dnf(t.arg, False), dnf(t.arg, True)
        if a is None or b is None:
            return None
        return [(c, ir.const(1)) for c in a] + [(c, ir.const(0)) for c in b]
    if isinstance(t, ir.Neg):
        sub = cases(t.arg)
        return None if sub is None else [(c, ir.neg(x)) for c, x in sub]
    if isinstance(t, ir.Arith):
        left, right = cases(t.left), cases(t.right)
        if left is None or right is None or len(left) * len(right) > MAX_CUBES:
            return None
        return [(lc + rc, ir.arith(t.op, lt, rt)) for lc, lt in left for rc, rt in right]
    if isinstance(t, ir.Op):
        combos: List[Tuple[Cube, list]] = [([], [])]
        for a in t.args:
            sub = cases(a)
            if sub is None or len(combos) * len(sub) > MAX_CUBES:
                return None
            combos = [(c + sc, args + [st]) for c, args in combos for sc, st in sub]
        return [(c, ir.Op(t.name, tuple(args), t.sort)) for c, args in combos]
    return None


def _product(parts: List[Optional[List[Cube]]]) -> Optional[List[Cube]]:
    acc: List[Cube] = [[]]
    for p in parts:
        if p is None:
            return None
        acc = [a + b for a in acc for b in p]
        if len(acc) > MAX_CUBES:
            return None
    return acc


def _concat(parts: List[Optional[List[Cube]]]) -> Optional[List[Cube]]:
    out: List[Cube] = []
    for p in parts:
        if p is None:
            return None
        out.extend(p)
    return out if len(out) <= MAX_CUBES else None


# ---------------------------------------------------------------- literals


def linear(t: ir.Term, atoms: Dict[str, ir.Term]) -> Tuple[Dict[str, int], int]:
    """``t`` as {atom text: coefficient} plus a constant; non-linear parts are atoms."""
    if isinstance(t, ir.Const):
        return {}, int(t.value)
    if isinstance(t, ir.Neg):
        c, k = linear(t.arg, atoms)
        return {a: -v for a, v in c.items()}, -k
    if isinstance(t, ir.Arith) and t.op in ("+", "-"):
        c1, k1 = linear(t.left, atoms)
        c2, k2 = linear(t.right, atoms)
        sign = 1 if t.op == "+" else -1
        out = dict(c1)
        for a, v in c2.items():
            out[a] = out.get(a, 0) + sign * v
        return {a: v for a, v in out.items() if v}, k1 + sign * k2
    if isinstance(t, ir.Arith) and t.op == "*":
        for const_side, other in ((t.left, t.right), (t.right, t.left)):
            if isinstance(const_side, ir.Const):
                c, k = linear(other, atoms)
                m = int(const_side.value)
                return {a: v * m for a, v in c.items() if v * m}, k * m
    # A non-linear part is an atom; its operands are normalised in turn.
    if isinstance(t, ir.Arith):
        t = ir.arith(t.op, normal_term(t.left), normal_term(t.right))
    key = ir.render(t)
    atoms[key] = t
    return {key: 1}, 0


def normal_term(t: ir.Term, order: Optional[Dict[str, int]] = None) -> ir.Term:
    """Fold the linear parts of a term: ``(x + 2 - 1) // 2`` -> ``(x + 1) // 2``.
    With ``order`` (name -> position), terms with a plus sign come first, each
    group in that order: ``queue - leaving``, not ``-leaving + queue``."""
    if isinstance(t, (ir.Var, ir.Const)):
        return t
    atoms: Dict[str, ir.Term] = {}
    coeffs, k = linear(t, atoms)
    if order is None:
        return _rebuild(coeffs, k, atoms, sorted(coeffs))
    names = sorted(coeffs, key=lambda a: (coeffs[a] < 0, order.get(a, len(order)), a))
    return _rebuild(coeffs, k, atoms, names)


def _rebuild(coeffs: Dict[str, int], k: int, atoms: Dict[str, ir.Term],
             names: Sequence[str]) -> ir.Term:
    lhs: Optional[ir.Term] = None
    for a in names:
        v = coeffs[a]
        term = atoms[a] if abs(v) == 1 else ir.arith("*", ir.const(abs(v)), atoms[a])
        if lhs is None:
            lhs = term if v > 0 else ir.neg(term)
        else:
            lhs = ir.arith("+" if v > 0 else "-", lhs, term)
    if lhs is None:
        return ir.const(k)
    if k > 0:
        return ir.arith("+", lhs, ir.const(k))
    if k < 0:
        return ir.arith("-", lhs, ir.const(-k))
    return lhs


def normal_literal(lit: ir.Term, order: Dict[str, int]) -> ir.Term:
    """A comparison as ``<linear form> <op> <constant>``, constants folded."""
    if isinstance(lit, ir.Not) and isinstance(lit.arg, ir.Cmp):
        inner = normal_literal(lit.arg, order)
        return ir.not_(inner)
    if isinstance(lit, ir.Cmp) and isinstance(lit.left, ir.Const) \
            and not isinstance(lit.right, ir.Const) and lit.left.sort != ir.REF:
        # The subject first: `wear < 0.0`, not `0.0 > wear` (exact for floats too).
        lit = ir.Cmp(ir.FLIPPED[lit.op], lit.right, lit.left)
    if not isinstance(lit, ir.Cmp) or lit.left.sort != ir.INT or lit.right.sort != ir.INT:
        return lit  # only integer comparisons are rearranged: float ones round
    atoms: Dict[str, ir.Term] = {}
    c1, k1 = linear(lit.left, atoms)
    c2, k2 = linear(lit.right, atoms)
    coeffs = dict(c1)
    for a, v in c2.items():
        coeffs[a] = coeffs.get(a, 0) - v
    coeffs = {a: v for a, v in coeffs.items() if v}
    k = k2 - k1  # sum(coeffs * atoms) <op> k
    op = lit.op
    if not coeffs:
        return ir.cmp(op, ir.const(0), ir.const(k))
    names = sorted(coeffs, key=lambda a: (order.get(a, len(order)), a))
    if coeffs[names[0]] < 0:  # lead with a positive coefficient
        coeffs = {a: -v for a, v in coeffs.items()}
        k, op = -k, ir.FLIPPED[op]
    g = 0
    for v in coeffs.values():
        g = gcd(g, abs(v))
    if g > 1:  # integer tightening: 2*x > 5  <=>  x >= 3
        if op in ("==", "!="):
            if k % g:
                return ir.const(op == "!=")
            k //= g
        elif k % g and op in (">", ">="):
            op, k = ">=", -((-k) // g)  # the least integer above k / g
        elif k % g:
            op, k = "<=", k // g  # the greatest integer below k / g
        else:
            k //= g
        coeffs = {a: v // g for a, v in coeffs.items()}
    if len(names) == 1 and coeffs[names[0]] == 1:
        bounded = _floordiv_bounds(atoms[names[0]], op, k, order)
        if bounded is not None:
            return bounded
        atom = atoms[names[0]]
        if isinstance(atom, ir.Op) and atom.name == "len":
            # A length is never negative: `len(s) <= 0` is `len(s) == 0`.
            if (op, k) in (("<=", 0), ("<", 1)):
                return ir.Cmp("==", atom, ir.const(0))
            if (op, k) in ((">=", 1), (">", 0)):
                return ir.Cmp(">", atom, ir.const(0))
    positive = [a for a in names if coeffs[a] > 0]
    negative = [a for a in names if coeffs[a] < 0]
    if negative:
        # Terms with a minus sign move to the right: `climbers > 3 * belayers`
        # rather than `climbers - 3 * belayers > 0`.
        return ir.Cmp(op, _rebuild(coeffs, 0, atoms, positive),
                      _rebuild({a: -coeffs[a] for a in negative}, k, atoms, negative))
    # Over the integers x > -1 is x >= 0: compare with zero where one step does it.
    if op == ">" and k == -1:
        op, k = ">=", 0
    elif op == "<" and k == 1:
        op, k = "<=", 0
    return ir.Cmp(op, _rebuild(coeffs, 0, atoms, names), ir.const(k))


def _floordiv_bounds(atom: ir.Term, op: str, k: int, order: Dict[str, int]):
    """``e // m <op> k`` for a constant m > 0, as bounds on ``e``:
    e // m >= k  <=>  e >= k*m   and   e // m <= k  <=>  e <= k*m + m - 1."""
    if not (isinstance(atom, ir.Arith) and atom.op == "//"
            and isinstance(atom.right, ir.Const) and atom.right.value > 0):
        return None
    e, m = atom.left, int(atom.right.value)
    low, high = k * m, k * m + m - 1
    bounds = {">=": [(">=", low)], ">": [(">=", high + 1)], "<=": [("<=", high)],
              "<": [("<=", low - 1)], "==": [(">=", low), ("<=", high)]}.get(op)
    if bounds is None:
        return None
    return ir.and_(*(normal_literal(ir.cmp(o, e, ir.const(b)), order) for o, b in bounds))


def normal_cube(cube: Cube, params: Sequence[ir.Var]) -> Optional[Cube]:
    order = {p.name: i for i, p in enumerate(params)}
    out: Cube = []
    for lit in cube:
        n = normal_literal(lit, order)
        if ir.is_false(n):
            return None
        for part in (n.args if isinstance(n, ir.And) else (n,)):
            if ir.is_true(part) or any(ir.render(part) == ir.render(o) for o in out):
                continue
            out.append(part)
    # Literals about earlier parameters first, as the signature reads; one that
    # can raise (`x // y`, `s[0]`) after the others, which `and` evaluates
    # first in Python and which may be what keeps it from raising (`y != 0`).
    optional = _optional_names(params)
    out.sort(key=lambda lit: (_partial(lit, optional), _first_param(lit, order)))
    return out


def _optional_names(params: Sequence[ir.Var]) -> frozenset:
    return frozenset(p.name for p in params if p.optional)


def _safe(cube: Cube, context: ir.Term, params: Sequence[ir.Var], solver) -> bool:
    """Whether the printed cube never raises in Python where ``context``
    holds: the solver's ``s[0]`` has a value for "" too, Python's raises, so
    a literal may be what guards another one."""
    if not params:
        return False
    value = parse_condition(print_cube(cube), params)
    return value is not None and solver.check(context, ir.not_(value.defined))[0] == z3.unsat


# Ops that raise on some arguments (an index out of range, a division by zero).
_PARTIAL_OPS = {"getitem", "nth", "int_truediv", "sqrt", "trunc", "floor", "ceil",
                "str_of_int"}


def _partial(t: ir.Term, optional: frozenset = frozenset()) -> bool:
    """Whether evaluating ``t`` in Python can raise; with ``optional``, the
    names of Optional parameters, a use of one's value counts (`x < 0` raises
    TypeError when x is None; `x is None` does not)."""
    for n in ir.nodes(t):
        if isinstance(n, ir.Var) and n.name in optional:
            return True
        if isinstance(n, ir.Arith) and n.op in ("//", "%", "/") and not (
                isinstance(n.right, ir.Const) and n.right.value != 0):
            return True
        if isinstance(n, ir.Op) and n.name in _PARTIAL_OPS:
            return True
    return False


def _first_param(t: ir.Term, order: Dict[str, int]) -> int:
    return min((order.get(v.name, len(order)) for v in ir.variables(t)), default=len(order))


# ---------------------------------------------------------------- solver clean-up


def simplify_cubes(cubes: List[Cube], target: ir.Term, context: ir.Term,
                   solver, params: Sequence[ir.Var] = ()) -> List[Cube]:
    """Drop empty cubes, redundant literals and subsumed cubes, keeping
    ``OR(cubes)`` equivalent to ``target`` under ``context``."""
    kept = []
    for cube in cubes:
        status, _, _ = solver.check(context, *cube)
        if status != z3.unsat:
            kept.append(cube)
    cubes = kept
    not_target = ir.not_(target)
    optional = _optional_names(params)
    for i, cube in enumerate(cubes):
        lits = list(cube)
        # Python reads this cube only where the ones printed before it are false.
        earlier = ir.not_(ir.or_(*(ir.and_(*c) for c in cubes[:i]))) if i else ir.TRUE
        # Weaken the cube by dropping a literal while it still implies the
        # target; that also drops literals the context implies. The largest
        # literals go first: `len(s[0]) == 1` implies `len(s) > 0` in the
        # model, but only the latter is safe to print (s[0] raises on "").
        for lit in sorted(cube, key=ir.printed_size, reverse=True):
            trial = [x for x in lits if x is not lit]
            status, _, _ = solver.check(context, *trial, not_target)
            if status == z3.unsat and (_partial(lit, optional)
                                       or not any(_partial(x, optional) for x in trial)
                                       or _safe(trial, ir.and_(context, earlier), params,
                                                solver)):
                lits = trial
        cubes[i] = lits
    if len(cubes) > 1:
        # Widen integer bounds while the cube still implies the target, so
        # that cases that meet merge: `x >= 1 or x == 0` becomes `x >= 0`
        # (the second cube is then covered and dropped below).
        cubes = [_widened(c, not_target, context, solver) for c in cubes]
    result: List[Cube] = []
    for i, cube in enumerate(cubes):
        others = result + cubes[i + 1:]
        covered = ir.or_(*(ir.and_(*c) for c in others)) if others else ir.FALSE
        status, _, _ = solver.check(context, *cube, ir.not_(covered))
        if status != z3.unsat:
            result.append(cube)
    return result


WIDEN_STEPS = 32  # doublings of a bound's step before giving up


def _widened(cube: Cube, not_target: ir.Term, context: ir.Term, solver) -> Cube:
    lits = list(cube)
    for i, lit in enumerate(lits):
        if not (isinstance(lit, ir.Cmp) and lit.op in ("<", "<=", ">", ">=")
                and isinstance(lit.right, ir.Const) and lit.right.sort == ir.INT
                and lit.left.sort == ir.INT):
            continue
        k, step = int(lit.right.value), (-1 if lit.op in (">", ">=") else 1)

        def ok(n: int) -> bool:
            trial = lits[:i] + [ir.Cmp(lit.op, lit.left, ir.const(k + step * n))] + lits[i + 1:]
            return solver.check(context, *trial, not_target)[0] == z3.unsat

        if not ok(1):
            continue
        good, n = 1, 2
        while n <= 2 ** WIDEN_STEPS and ok(n):
            good, n = n, n * 2
        if n > 2 ** WIDEN_STEPS:
            continue  # no bound needed at all: the dropping step keeps it on purpose
        low, high = good, n
        while high - low > 1:
            mid = (low + high) // 2
            low, high = (mid, high) if ok(mid) else (low, mid)
        lits[i] = ir.Cmp(lit.op, lit.left, ir.const(k + step * low))
    return lits


def _simpler_literal(cube: Cube, context: ir.Term, params: Sequence[ir.Var],
                     target: ir.Term, solver, force: bool = False) -> Cube:
    """Replace a cube (or with ``force``, a whole condition) that reasons
    through ``//``, ``%``, products or floats by one simple condition on one
    parameter -- a comparison with a constant, or for a float ``not
    math.isnan(x)`` and the like -- when the solver shows the two agree under
    ``context`` (``0 <= x % y < y`` is ``y > 0``)."""
    if not force and not any(_nonlinear(lit) for lit in cube):
        return cube
    if not force and len(cube) < 2 and ir.printed_size(cube[0]) <= 5:
        return cube  # already as simple as a candidate
    whole = ir.and_(*cube)
    for candidate in _candidates(params, target):
        status, _, _ = solver.check(context, ir.not_(ir.cmp("==", whole, candidate)))
        if status == z3.unsat:
            return [candidate]
    return cube


def _candidates(params: Sequence[ir.Var], target: ir.Term):
    ints = sorted(ir.constants(target) | {0, 1, -1},
                  key=lambda c: (abs(c), c))[:6]
    for p in params:
        if p.optional:
            none = ir.initial(p).none
            yield ir.Not(none)
            yield none
        if p.sort == ir.INT:
            for c in ints:
                for op in (">", ">=", "<", "<=", "==", "!="):
                    yield ir.Cmp(op, p, ir.const(c))
        elif p.sort == ir.FLOAT:
            for name in ("isnan", "isfinite", "isinf"):
                test = ir.op(name, p, sort=ir.BOOL)
                yield ir.Not(test)
                yield test
        elif p.sort == ir.BOOL:
            yield p
            yield ir.Not(p)
        elif p.sort == ir.STR:
            length = ir.str_len(p)
            for c in (c for c in ints if c >= 0):
                for op in (">", ">=", "<", "<=", "==", "!="):
                    yield ir.Cmp(op, length, ir.const(c))


def _nonlinear(t: ir.Term) -> bool:
    return any(n.sort == ir.FLOAT or isinstance(n, ir.Op) or (
        isinstance(n, ir.Arith) and (n.op in ("//", "%") or (
            n.op == "*" and not isinstance(n.left, ir.Const)
            and not isinstance(n.right, ir.Const)))) for n in ir.nodes(t))


# ---------------------------------------------------------------- printing


def print_cubes(cubes: List[Cube]) -> str:
    if not cubes:
        return "False"
    if any(not c for c in cubes):
        return "True"
    texts = [print_cube(c) for c in cubes]
    if len(texts) == 1:
        return texts[0]
    return " or ".join(f"({t})" if " and " in t else t for t in texts)


def print_cube(cube: Cube) -> str:
    """Literals joined by ``and``; a lower and an upper bound on one
    expression become a chain (``0 <= x <= 24``, ``lo <= (lo + hi) / 2.0 <= hi``),
    which Python reads exactly as the two comparisons."""
    lits = list(cube)
    views = [_bound_views(lit) for lit in lits]
    out = []
    used = set()
    for i, a in enumerate(lits):
        if i in used:
            continue
        chained = None
        for j in range(i + 1, len(lits)):
            if j in used or chained is not None:
                continue
            for subject, side, bound, op in views[i]:
                match = [v for v in views[j] if v[0] == subject and v[1] != side]
                if not match:
                    continue
                other = match[0]
                low, high = ((bound, op), (other[2], other[3])) if side == "lower" \
                    else ((other[2], other[3]), (bound, op))
                chained = f"{low[0]} {low[1]} {subject} {high[1]} {high[0]}"
                used.add(j)
                break
        out.append(chained or ir.render(a))
    return " and ".join(out)


def _bound_views(lit: ir.Term) -> list:
    """``lit`` read as bounds: (subject, "lower" or "upper", bound, op), the op
    as it reads left to right in a chain (``<`` or ``<=``). Constants are never
    the subject, and a constant bound is preferred (listed first)."""
    if not isinstance(lit, ir.Cmp) or lit.op in ("==", "!="):
        return []
    strength = _PRINT_PREC
    left, right = ir._render(lit.left, strength, {}), ir._render(lit.right, strength, {})
    op = lit.op if lit.op in ("<", "<=") else {">": "<", ">=": "<="}[lit.op]
    small, big = (left, right) if lit.op in ("<", "<=") else (right, left)
    small_t, big_t = (lit.left, lit.right) if lit.op in ("<", "<=") else (lit.right, lit.left)
    views = []
    if not isinstance(big_t, ir.Const):
        views.append((big, "lower", small, op))  # small < big: a lower bound of big
    if not isinstance(small_t, ir.Const):
        views.append((small, "upper", big, op))
    views.sort(key=lambda v: not _is_constant_text(v[2]))
    return views


# Operands of a comparison print with the parentheses a chain needs.
_PRINT_PREC = ir._PREC["cmp"] + 1


def _is_constant_text(text: str) -> bool:
    try:
        float(text)
        return True
    except ValueError:
        return False
