"""Loops: ``for`` and ``while``, abstracted soundly.

A mixin of ``translate.Translator``. A loop is not unrolled; it is replaced
by what is true of every iteration (partial correctness: a run that never
ends is no behaviour, and the behaviour says so for loops whose end is not
evident, through ``Translator.assume``):

1. The names the loop assigns (``assigned``) and the heap fields it writes
   are found first: the body is translated in a sandbox, from the state at
   the loop, then from states of the shapes found, until the shapes settle.
2. *One arbitrary iteration*: every such name and field gets a fresh value
   of its shape (the state at the start of some iteration), a fresh flag
   ``enter`` says that the iteration happens, the loop variable gets some
   element of the iterable, and the ``while`` test holds. The body is then
   translated as usual: a ``return`` or ``raise`` in it is an outcome under
   that condition, which covers the iteration that really ends the call.
   ``break`` and ``continue`` end the path.
3. *After the loop*: the path goes on where no outcome of the body happened
   (a free ``enter`` keeps this possible even when every iteration would
   raise, as for an empty list), with fresh values again for what the loop
   changes; a ``while`` loop without ``break`` leaves it only where its test
   is false. The ``else`` clause runs after a normal exit.

Every real run of the loop that ends is then admitted: its state at the
start of the last iteration, or at the exit, is one choice of the fresh
values. The values after the loop are unknown to the proof, so what it
proves holds whatever the loop computes.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Dict, List, Optional, Set

from astroid import nodes

from refines import heap, ir
from refines.values import Conflict, MaybeUnbound, fresh_like, merge, signature

# Rounds of the sandbox before a shape that keeps changing is given up
# (it becomes a Conflict: an error only if read).
MAX_ROUNDS = 4
_SHAPE_COND = ir.Var("shape!", ir.BOOL)  # merges values only to learn shapes
_SCOPES = (nodes.FunctionDef, nodes.AsyncFunctionDef, nodes.Lambda, nodes.ClassDef,
           nodes.ListComp, nodes.SetComp, nodes.DictComp, nodes.GeneratorExp)


@dataclass
class Frame:
    """The loop being translated: the states where the body jumps."""

    breaks: List[tuple] = field(default_factory=list)  # (env, heap)
    continues: List[tuple] = field(default_factory=list)
    jumped_out: bool = False  # some break is on a path that runs


def assigned(stmts, out: Optional[Set[str]] = None) -> Set[str]:
    """The names a block assigns, outside nested scopes (a comprehension's
    variables are its own)."""
    out = set() if out is None else out
    stack = list(stmts)
    while stack:
        n = stack.pop()
        if isinstance(n, _SCOPES):
            continue
        if isinstance(n, nodes.AssignName) and not (
                isinstance(n.parent, nodes.AnnAssign) and n.parent.value is None):
            out.add(n.name)
        stack.extend(n.get_children())
    return out


@dataclass
class Iteration:
    """What one iteration of a ``for`` loop binds: ``element(writes)`` gives the
    item (adding its facts), where ``writes`` are the fields the body writes."""

    element: object  # Callable[[set], ir.Value]
    endless_if: object = None  # Callable[[set], bool]: may the loop never end?
    value: object = None  # the value walked (a list, str or tuple), if any


class Loops:
    """Translator methods for loops."""

    # ------------------------------------------------------------ jumps

    def stmt_Break(self, node: nodes.Break) -> None:
        frame = self.loops[-1]
        if not ir.is_false(self.live):
            frame.breaks.append((dict(self.env), dict(self.heap)))
            frame.jumped_out = True
        self.live = ir.FALSE
        self.cuts += 1

    def stmt_Continue(self, node: nodes.Continue) -> None:
        frame = self.loops[-1]
        if not ir.is_false(self.live):
            frame.continues.append((dict(self.env), dict(self.heap)))
        self.live = ir.FALSE
        self.cuts += 1

    # ------------------------------------------------------------ statements

    def stmt_While(self, node: nodes.While) -> None:
        self.assume(f"the while loop at line {node.lineno} finishes "
                    f"(termination is not proved)")
        self.loop(node, "while", None)

    def stmt_For(self, node: nodes.For) -> None:
        iteration = self.iteration(node.iter, node)
        if iteration is None or ir.is_false(self.live):
            return
        self.loop(node, "for", iteration)

    # ------------------------------------------------------------ the abstraction

    def loop(self, node, kind: str, iteration: Optional[Iteration]) -> None:
        names = sorted(assigned(node.body, assigned([node.target]) if kind == "for" else None))
        shapes, writes, breaks = self.discover(node, kind, iteration, names)
        if kind == "for" and iteration.endless_if is not None and iteration.endless_if(writes):
            self.assume(f"the for loop at line {node.lineno} finishes (the loop changes "
                        f"lists of the kind it walks, and termination is not proved)")
        self.untranslated_part(f"the {kind} loop (line {node.lineno})")
        before_env, before_heap, before_live = self.env, self.heap, self.live
        start = len(self.outcomes)

        # One arbitrary iteration, from a state of the shapes found.
        self.env, self.heap = self.havoc_state(before_env, before_heap, names, shapes, writes)
        self.live = ir.conj(before_live, ir.opaque(ir.BOOL))  # `enter`
        start_heap = self.heap
        frame = self.iterate(node, kind, iteration, writes)
        breaks = breaks or frame.jumped_out
        ends = [h for _, h in frame.breaks + frame.continues] + (
            [] if ir.is_false(self.live) else [self.heap])
        if any(start_heap.get(k) is not v and k not in writes for h in ends for k, v in h.items()):
            # The sandbox runs a superset of these paths, so this cannot happen;
            # if it did, the item's facts would rest on a list the loop changes.
            raise RuntimeError(f"the loop at line {node.lineno} writes a field its "
                               f"sandbox did not see")

        # After the loop: where no outcome of the body happened.
        guards = [o.guard for o in self.outcomes[start:]]
        self.live = before_live if not guards else ir.conj(
            before_live, ir.not_(ir.or_(*guards)))
        self.env, self.heap = self.havoc_state(before_env, before_heap, names, shapes, writes)
        if kind == "while" and not breaks:
            test = self.truth(self.expr(node.test))
            self.constrain(ir.not_(test))
        if node.orelse:
            if not breaks:
                self.block(node.orelse)
            else:
                self.branches(ir.opaque(ir.BOOL), lambda: self.block(node.orelse),
                              lambda: None)

    def iterate(self, node, kind: str, iteration: Optional[Iteration], writes) -> Frame:
        """Translate one iteration from the current (havocked) state."""
        self.loops.append(Frame())
        try:
            if kind == "while":
                self.constrain(self.truth(self.expr(node.test)))
            else:
                element = iteration.element(writes)
                if not ir.is_false(self.live):
                    self.assign(node.target, element)
            self.block(node.body)
        finally:
            frame = self.loops.pop()
        return frame

    def havoc_state(self, env, heap_state, names, shapes, writes):
        """``env`` and ``heap_state`` with fresh values for ``names`` (of the
        given shapes; an absent shape leaves the name unbound) and fresh
        arrays for the fields in ``writes``."""
        env = dict(env)
        for name in names:
            if shapes.get(name) is None:
                env.pop(name, None)
            else:
                env[name] = fresh_like(shapes[name])
        self.heap = dict(heap_state)
        self.havoc(writes)
        return env, self.heap

    def discover(self, node, kind, iteration, names):
        """The shapes of the loop's names at the start of an iteration and
        after the loop, the fields it writes, and whether it can break: by
        translating it in a sandbox until the shapes settle."""
        entry_env, entry_heap = self.env, self.heap
        shapes: Dict[str, object] = {n: entry_env.get(n) for n in names}
        writes: Set[str] = set()
        breaks = False
        for _ in range(MAX_ROUNDS):
            saved = self.save()
            try:
                self.env = dict(entry_env)
                for name in names:
                    if shapes[name] is None:
                        self.env.pop(name, None)
                    else:
                        self.env[name] = fresh_like(shapes[name])
                self.heap = dict(entry_heap)
                self.live = ir.conj(self.live, ir.opaque(ir.BOOL))
                frame = self.iterate(node, kind, _loose(iteration), set())
                ends = frame.breaks + frame.continues
                if not ir.is_false(self.live):
                    ends.append((self.env, self.heap))
                breaks = breaks or frame.jumped_out
            finally:
                self.restore(saved)
            new = dict(shapes)
            for env, heap_state in ends:
                for name in names:
                    new[name] = _join(new[name], env.get(name))
                writes.update(k for k, v in heap_state.items() if entry_heap.get(k) is not v)
            if all(signature(new[n]) == signature(shapes[n]) for n in names):
                break
            shapes = new
        else:
            shapes = {n: s if signature(s) == signature(new[n]) else
                      Conflict("shapes that keep changing from one iteration to the next")
                      for n, s in new.items()}
        return shapes, writes, breaks

    def save(self) -> tuple:
        return (self.env, self.heap, self.live, list(self.outcomes), list(self.assumptions),
                list(self.untranslated), self.cuts)

    def restore(self, saved: tuple) -> None:
        (self.env, self.heap, self.live, self.outcomes, self.assumptions,
         self.untranslated, self.cuts) = saved

    # ------------------------------------------------------------ unpacking

    def unpacked(self, value: ir.Value, n: int, target) -> Optional[ir.Tup]:
        """The items of a str or a list unpacked into ``n`` names: ValueError
        unless it has exactly ``n`` (Language Reference, 7.2 Assignment
        statements); other values are not iterable (TypeError)."""
        if isinstance(value, Conflict):  # e.g. the item of a tuple of tuples of two lengths
            self.refuse("mixed", target.lineno, {
                "construct": target.as_string(), "shapes": value.shapes})
            return None
        if isinstance(value, ir.Opt):
            self.raise_when(value.none, TypeError, target.lineno,
                            "cannot unpack non-iterable NoneType object")
            value = value.value
        if isinstance(value, ir.Ref) and not value.kind.startswith("list:"):
            self.refuse("expression", target.lineno, {
                "construct": "unpacking a " + heap.describe(value.kind) + " object"})
            return None
        if isinstance(value, ir.Ref) or (isinstance(value, ir.Term) and value.sort == ir.STR):
            items = self.contents(value) if isinstance(value, ir.Ref) else value
            size = ir.op("len", items, sort=ir.INT) if isinstance(value, ir.Ref) \
                else ir.str_len(value)
            self.raise_when(ir.cmp("!=", size, ir.const(n)), ValueError, target.lineno,
                            f"unpacking a sequence into {n} names")
            if ir.is_false(self.live):
                return None
            if isinstance(value, ir.Ref):
                sort = heap.elem_sort(value.kind)
                return ir.Tup(tuple(ir.op("nth", items, ir.const(i), sort=sort)
                                    for i in range(n)))
            return ir.Tup(tuple(self.str_subscript_at(value, i) for i in range(n)))
        self.raise_when(ir.TRUE, TypeError, target.lineno, "cannot unpack a non-iterable value")
        return None

    def str_subscript_at(self, s: ir.Term, i: int) -> ir.Term:
        if isinstance(s, ir.Const):
            return ir.const(s.value[i])
        return ir.op("getitem", s, ir.const(i), sort=ir.STR)

    # ------------------------------------------------------------ iterables

    def iteration(self, iter_node, node) -> Optional[Iteration]:
        """How a ``for`` loop walks its iterable, which is evaluated once,
        before the loop (``range`` and ``enumerate`` of a list, str or tuple,
        a list, a str, a tuple). A value that is not iterable raises TypeError."""
        if isinstance(iter_node, nodes.Call) and isinstance(iter_node.func, nodes.Name) \
                and not iter_node.keywords:
            if self.scope.is_builtin(iter_node.func.name, range) and 1 <= len(iter_node.args) <= 3:
                return self.range_iteration(iter_node)
            if self.scope.is_builtin(iter_node.func.name, enumerate) \
                    and 1 <= len(iter_node.args) <= 2:
                return self.enumerate_iteration(iter_node)
        return self.walk(self.expr(iter_node), iter_node)

    def walk(self, v: ir.Value, node) -> Optional[Iteration]:
        """Iterating over a value: ``(index, item)`` pairs via ``element``."""
        if isinstance(v, ir.Opt):
            self.raise_when(v.none, TypeError, node.lineno, "'NoneType' object is not iterable")
            v = v.value
        if isinstance(v, ir.Ref) and not v.kind.startswith("list:"):
            return self.refuse("expression", node.lineno, {
                "construct": f"iteration over a {heap.describe(v.kind)} object"})
        if v is ir.NONE or (isinstance(v, ir.Term) and v.sort != ir.STR):
            self.raise_when(ir.TRUE, TypeError, node.lineno, "the value is not iterable")
            return None
        return Iteration(element=lambda writes: self.item_of(v, writes)[1],
                         endless_if=(lambda writes: heap.field_key(v.kind) in writes)
                         if isinstance(v, ir.Ref) else None, value=v)

    def item_of(self, v: ir.Value, writes) -> tuple:
        """``(k, item)``: the position and item of some element of ``v``."""
        k = ir.opaque(ir.INT)
        zero = ir.const(0)
        if isinstance(v, ir.Term):  # a str: one of its characters
            char = ir.op("getitem", v, k, sort=ir.STR)
            # `char in s` follows from the index, but stated, the solver
            # need not find that out (it may not, within the budget).
            self.constrain(ir.and_(ir.cmp(">=", k, zero), ir.cmp("<", k, ir.str_len(v)),
                                   ir.cmp("==", ir.str_len(char), ir.const(1)),
                                   ir.op("contains", char, v, sort=ir.BOOL)))
            return k, char
        if isinstance(v, ir.Tup):
            self.constrain(ir.and_(ir.cmp(">=", k, zero), ir.cmp("<", k, ir.const(len(v.items)))))
            if not v.items:
                return k, ir.NONE
            item = v.items[-1]
            for i in range(len(v.items) - 2, -1, -1):
                item = merge(ir.cmp("==", k, ir.const(i)), v.items[i], item)
            return k, item
        if heap.field_key(v.kind) in writes:
            # The body changes lists of this kind: the item is some value
            # (the list may grow or shrink while it is walked).
            self.constrain(ir.cmp(">=", k, zero))
            return k, fresh_like(ir.opaque(heap.elem_sort(v.kind)))
        items = self.contents(v)
        n = ir.op("len", items, sort=ir.INT)
        item = ir.op("nth", items, k, sort=heap.elem_sort(v.kind))
        self.constrain(ir.and_(ir.cmp(">=", k, zero), ir.cmp("<", k, n),
                               ir.op("seq_contains", item, items, sort=ir.BOOL)))
        return k, item

    def range_iteration(self, call: nodes.Call) -> Optional[Iteration]:
        # range(stop), range(start, stop[, step]) (Built-in Types, "Ranges"):
        # the arguments must be integers (TypeError), a step of 0 raises
        # ValueError; the items are start, start + step, ... before stop.
        bounds = []
        for arg in call.args:
            v = self.expr(arg)
            if isinstance(v, ir.Opt):
                self.raise_when(v.none, TypeError, call.lineno,
                                "'NoneType' object cannot be interpreted as an integer")
                v = v.value
            if isinstance(v, ir.Ref) and not v.kind.startswith("list:"):
                return self.refuse("expression", call.lineno, {
                    "construct": "range() of an object"})
            if not (isinstance(v, ir.Term) and v.sort in (ir.INT, ir.BOOL)):
                self.raise_when(ir.TRUE, TypeError, call.lineno,
                                "range() arguments must be integers")
                return None
            bounds.append(ir.as_int(v))
        if len(bounds) == 1:
            bounds.insert(0, ir.const(0))
        start, stop = bounds[0], bounds[1]
        step = bounds[2] if len(bounds) == 3 else ir.const(1)
        self.raise_when(ir.cmp("==", step, ir.const(0)), ValueError, call.lineno,
                        "range() arg 3 must not be zero")

        def element(writes):
            i = ir.opaque(ir.INT)
            up = ir.and_(ir.cmp("<=", start, i), ir.cmp("<", i, stop))
            down = ir.and_(ir.cmp(">=", start, i), ir.cmp(">", i, stop))
            if isinstance(step, ir.Const):
                fact = up if step.value > 0 else down
                if abs(step.value) != 1:
                    fact = ir.and_(fact, ir.cmp("==", ir.arith(
                        "%", ir.arith("-", i, start), step), ir.const(0)))
            else:
                fact = ir.ite(ir.cmp(">", step, ir.const(0)), up, down)
            self.constrain(fact)
            return i
        return Iteration(element)

    def enumerate_iteration(self, call: nodes.Call) -> Optional[Iteration]:
        # enumerate(iterable, start=0) yields (start + k, k-th item).
        inner = self.walk(self.expr(call.args[0]), call.args[0])
        if not isinstance(inner, Iteration) or ir.is_false(self.live):
            return None
        value = inner.value
        start = ir.const(0)
        if len(call.args) == 2:
            s = self.expr(call.args[1])
            if not (isinstance(s, ir.Term) and s.sort in (ir.INT, ir.BOOL)):
                self.raise_when(ir.TRUE, TypeError, call.lineno,
                                "enumerate() start must be an integer")
                return None
            start = ir.as_int(s)

        def element(writes):
            k, item = self.item_of(value, writes)
            return ir.Tup((ir.arith("+", start, k), item))
        return Iteration(element, inner.endless_if)


def _join(a, b):
    """The shape of a name that is ``a`` on some paths and ``b`` on others
    (None: unbound)."""
    if a is None and b is None:
        return None
    a = MaybeUnbound(ir.NONE, ir.FALSE) if a is None else a
    b = MaybeUnbound(ir.NONE, ir.FALSE) if b is None else b
    return merge(_SHAPE_COND, a, b)


def _loose(iteration: Optional[Iteration]) -> Optional[Iteration]:
    """For the sandbox: an iteration whose item is only of the right shape."""
    if iteration is None:
        return None
    return Iteration(lambda writes: fresh_like(iteration.element(set())),
                     iteration.endless_if)
