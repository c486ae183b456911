"""Quantifier elimination: a condition without the values it ranges over.

Two questions need a quantifier over part of the state:

* the precondition of a body with untranslated parts holds where the spec is
  met *whatever* those parts do: ``forall h. W(x, h)``, with ``h`` the opaque
  values (``ir.opaque``) the parts stand for;
* what a function guarantees about its result under ``assuming`` is the
  strongest postcondition, ``exists x. assuming(x) and S(x, result)``, with the
  parameters ``x`` quantified.

The solver's quantifier elimination (z3's ``qe`` and ``qe2`` tactics) gives a
formula without the quantifier for linear integer arithmetic with booleans.
The rest of the condition may be anything the translator models: every
largest part of it that does not mention a quantified value is named by a
fresh constant before elimination (an *atom*) and put back afterwards. That is
exact: an equivalence that holds for all values of the constants holds for
the parts they stand for.

What comes back is checked by the solver before anyone sees it:

* the *sound* direction without quantifiers (for ``forall``: the result
  implies ``W`` for every ``h``; for ``exists``: ``W`` implies the result);
* the *exact* direction with the quantifier, within the query budget. If that
  cannot be shown, the result is still sound, and ``Eliminated.exact`` says
  it is only sufficient (for ``forall``) or only implied (for ``exists``).

Where elimination is not possible (a quantified value that is a float, a str
or a list; a product of two unknowns; the solver's tactics run out of time),
``Eliminated.term`` is None and ``why`` says so. A formula with a quantifier
is never returned.
"""

from __future__ import annotations

import time
from dataclasses import dataclass
from typing import Callable, Dict, List, Optional, Sequence

import z3

from refines import ir

# The tactics tried, in order. ``qe`` answered every linear example of the
# test suite in milliseconds; ``qe2`` ran for seconds on one with a
# divisibility constraint that ``qe`` settled in 6 ms, and does better on some
# floor divisions, so it comes second.
TACTICS = (("simplify", "qe"), ("simplify", "qe2"))
# Wall-clock cap of one tactic run (the tactics take no resource limit); the
# caller's per-query slice of the budget caps it further.
TACTIC_SECONDS = 1.0

_LINEAR_SORTS = (ir.INT, ir.BOOL)
ATOM_PREFIX = "atom!"


@dataclass
class Eliminated:
    """The condition without the quantified values, or why there is none."""

    term: Optional[ir.Term]
    exact: bool = False  # equivalent to the quantified condition (checked)
    why: str = ""


def forall(cond: ir.Term, bound: Sequence[ir.Var], solver,
           describe: Callable[[ir.Var], str] = lambda v: "an untranslated part") -> Eliminated:
    """``forall bound. cond`` without the quantifier; the result implies it."""
    return _eliminate(cond, bound, solver, universal=True, describe=describe)


def exists(cond: ir.Term, bound: Sequence[ir.Var], solver,
           describe: Callable[[ir.Var], str] = lambda v: "a parameter") -> Eliminated:
    """``exists bound. cond`` without the quantifier; it implies the result."""
    return _eliminate(cond, bound, solver, universal=False, describe=describe)


def _eliminate(cond: ir.Term, bound: Sequence[ir.Var], solver, universal: bool,
               describe) -> Eliminated:
    names = {v.name for v in bound}
    present = [v for v in ir.variables(cond) if v.name in names]
    if not present:
        return Eliminated(cond, exact=True)
    for v in present:
        if v.sort not in _LINEAR_SORTS:
            return Eliminated(None, why=f"{describe(v)} gives a {_sort_word(v.sort)}, which "
                                        f"the solver cannot eliminate")
    try:
        skeleton, atoms = _atomise(cond, names)
    except _NotLinear as exc:
        return Eliminated(None, why=str(exc))
    lowered = solver.lower(skeleton)
    qvars = [solver.lower(v) for v in _unique(present)]
    quantified = z3.ForAll(qvars, lowered) if universal else z3.Exists(qvars, lowered)
    result = _qe(quantified, solver)
    if result is None:
        return Eliminated(None, why="the solver's quantifier elimination found no "
                                    "quantifier-free form in time")
    try:
        back = _to_ir(result, {f"{ATOM_PREFIX}{i}": a for i, a in enumerate(atoms)})
    except _NotLinear as exc:
        return Eliminated(None, why=f"the solver's answer has a form this release does not "
                                    f"read back ({exc})")
    # Sound direction, without a quantifier: the bound values stay free.
    sound = (solver.check(back, ir.not_(cond)) if universal
             else solver.check(cond, ir.not_(back)))[0]
    if sound != z3.unsat:
        return Eliminated(None, why="the solver's quantifier-free form could not be "
                                    "checked against the condition")
    # Exact direction, with the quantifier, over the atoms (so for every value
    # of what they stand for).
    exact = solver.check_lowered(z3.Not(result), quantified) if universal \
        else solver.check_lowered(result, z3.Not(quantified))
    return Eliminated(back, exact=exact[0] == z3.unsat)


def _unique(vs: Sequence[ir.Var]) -> List[ir.Var]:
    seen, out = set(), []
    for v in vs:
        if v.name not in seen:
            seen.add(v.name)
            out.append(v)
    return out


def _sort_word(sort: str) -> str:
    if sort.startswith("seq:"):
        return "list"
    if sort.startswith("arr:"):
        return "changed list or object"
    return {ir.FLOAT: "float", ir.STR: "str", ir.REF: "list or object"}.get(sort, sort)


class _NotLinear(Exception):
    """The quantified values reach a part the elimination cannot take."""


def _atomise(cond: ir.Term, names: set):
    """``cond`` with every largest part that mentions no quantified value
    replaced by a fresh atom; the parts that do mention one must be linear
    integer arithmetic or booleans."""
    depends: Dict[int, bool] = {}
    stack = [(cond, False)]
    while stack:  # which nodes mention a quantified value
        node, ready = stack.pop()
        if id(node) in depends:
            continue
        kids = ir.children(node)
        if ready or not kids:
            depends[id(node)] = (isinstance(node, ir.Var) and node.name in names) or any(
                depends[id(k)] for k in kids)
        else:
            stack.append((node, True))
            stack.extend((k, False) for k in kids if id(k) not in depends)
    atoms: List[ir.Term] = []
    index: Dict[int, ir.Var] = {}

    def replace(node: ir.Term):
        if depends[id(node)]:
            _check_linear(node, depends)
            return None
        if isinstance(node, ir.Const):
            return node
        if node.sort not in _LINEAR_SORTS:  # cannot happen below a linear node
            raise _NotLinear(f"a {_sort_word(node.sort)} meets an untranslated value")
        if id(node) not in index:
            index[id(node)] = ir.Var(f"{ATOM_PREFIX}{len(atoms)}", node.sort)
            atoms.append(node)
        return index[id(node)]

    return ir.substitute(cond, replace), atoms


def _check_linear(node: ir.Term, depends: Dict[int, bool]) -> None:
    if isinstance(node, ir.Var):
        return
    if isinstance(node, (ir.Not, ir.And, ir.Or, ir.ToInt)):
        return
    if isinstance(node, ir.Ite) and node.sort in _LINEAR_SORTS:
        return
    if isinstance(node, ir.Neg) and node.sort == ir.INT:
        return
    if isinstance(node, ir.Cmp) and node.left.sort in _LINEAR_SORTS \
            and node.right.sort in _LINEAR_SORTS:
        return
    if isinstance(node, ir.Arith) and node.sort == ir.INT:
        if node.op in ("+", "-"):
            return
        if node.op == "*" and (isinstance(node.left, ir.Const)
                               or isinstance(node.right, ir.Const)):
            return
        if node.op in ("//", "%") and isinstance(node.right, ir.Const) and node.right.value:
            return
        raise _NotLinear(f"an untranslated value meets `{ir.render(node)}`, which is not "
                         f"linear")
    raise _NotLinear(f"an untranslated value reaches `{ir.render(node)}`, which the "
                     f"solver's elimination does not take")


def _qe(quantified: z3.BoolRef, solver) -> Optional[z3.BoolRef]:
    """The quantifier-free equivalent from the first tactic that gives one."""
    ctx = solver.ctx
    for names in TACTICS:
        seconds = min(TACTIC_SECONDS, solver.budget.remaining(),
                      solver.per_query or TACTIC_SECONDS)
        if seconds <= 0 or solver.budget.units <= 0:
            return None
        tactic = z3.TryFor(z3.Then(*[z3.Tactic(n, ctx) for n in names], ctx=ctx),
                           max(1, int(seconds * 1000)), ctx=ctx)
        goal = z3.Goal(ctx=ctx)
        goal.add(quantified)
        started = time.perf_counter()
        try:
            subgoals = tactic(goal)
        except z3.Z3Exception:
            subgoals = None
        finally:
            # The tactics take no resource limit: charge their time at the rate
            # the budget is counted in.
            from refines.prove import RLIMIT_PER_SECOND
            solver.budget.units -= int((time.perf_counter() - started) * RLIMIT_PER_SECOND)
        if subgoals is None:
            continue
        parts = [z3.And(*g) if len(g) else z3.BoolVal(True, ctx) for g in subgoals]
        out = z3.Or(*parts) if len(parts) != 1 else parts[0]
        if not _has_quantifier(out):
            return out
    return None


def _has_quantifier(e: z3.ExprRef) -> bool:
    stack, seen = [e], set()
    while stack:
        n = stack.pop()
        if n.get_id() in seen:
            continue
        seen.add(n.get_id())
        if z3.is_quantifier(n):
            return True
        stack.extend(n.children())
    return False


# ---------------------------------------------------------------- back to terms

_CMP = {z3.Z3_OP_LE: "<=", z3.Z3_OP_LT: "<", z3.Z3_OP_GE: ">=", z3.Z3_OP_GT: ">"}
_ARITH = {z3.Z3_OP_ADD: "+", z3.Z3_OP_SUB: "-", z3.Z3_OP_MUL: "*"}


def _to_ir(e: z3.ExprRef, atoms: Dict[str, ir.Term]) -> ir.Term:
    """A quantifier-free z3 formula over atoms and integers, as a term over
    what the atoms stand for."""
    memo: Dict[int, ir.Term] = {}

    def go(n: z3.ExprRef) -> ir.Term:
        key = n.get_id()
        if key not in memo:
            memo[key] = node(n)
        return memo[key]

    def node(n: z3.ExprRef) -> ir.Term:
        if z3.is_true(n):
            return ir.TRUE
        if z3.is_false(n):
            return ir.FALSE
        if z3.is_int_value(n):
            return ir.const(n.as_long())
        if not z3.is_app(n):
            raise _NotLinear(str(n))
        k = n.decl().kind()
        args = [go(c) for c in n.children()]
        if k == z3.Z3_OP_UNINTERPRETED and not args:
            name = n.decl().name()
            if name not in atoms:
                raise _NotLinear(f"the name {name}")
            return atoms[name]
        if k == z3.Z3_OP_AND:
            return ir.and_(*args)
        if k == z3.Z3_OP_OR:
            return ir.or_(*args)
        if k == z3.Z3_OP_NOT:
            return ir.not_(args[0])
        if k == z3.Z3_OP_IMPLIES:
            return ir.implies(args[0], args[1])
        if k == z3.Z3_OP_ITE:
            return ir.ite(*args)
        if k in (z3.Z3_OP_EQ, z3.Z3_OP_IFF) and len(args) == 2:
            return ir.cmp("==", args[0], args[1])
        if k == z3.Z3_OP_DISTINCT and len(args) == 2:
            return ir.cmp("!=", args[0], args[1])
        if k == z3.Z3_OP_XOR and len(args) == 2:
            return ir.cmp("!=", args[0], args[1])
        if k in _CMP:
            return ir.cmp(_CMP[k], args[0], args[1])
        if k in _ARITH:
            out = args[0]
            for a in args[1:]:
                out = ir.arith(_ARITH[k], out, a)
            return out
        if k == z3.Z3_OP_UMINUS:
            return ir.neg(args[0])
        if k in (z3.Z3_OP_MOD, z3.Z3_OP_IDIV) and isinstance(args[1], ir.Const):
            # The solver's div and mod are Euclidean; for a positive divisor they
            # are Python's // and %. By a negative m: a mod m == a mod |m|, and
            # a div m == -(a div |m|).
            m = int(args[1].value)
            if m == 0:
                raise _NotLinear("a division by zero")
            mag = ir.const(abs(m))
            if k == z3.Z3_OP_MOD:
                return ir.arith("%", args[0], mag)
            q = ir.arith("//", args[0], mag)
            return q if m > 0 else ir.neg(q)
        raise _NotLinear(f"the operation {n.decl().name()}")

    return go(e)
