"""Shared helpers for the semantic tests: translate real source, run it both ways.

``translated(source)`` writes the source to a fresh module file, imports it,
reads the function through the same path the plugin uses
(``source.find_function`` -> ``source.read_params`` -> ``translate.Scope`` ->
``translate.translate_body``) and returns a ``Translated`` that can be asked,
for concrete inputs, what the translation predicts (``predict``) and what
CPython actually does (``run``). Both answers are ``("returned", value)`` or
``("raised", exception class)`` so tests compare them directly. A prediction
can also be ``("unmodelled", why)``: the translation says it does not know
what happens there (e.g. the sign of a NaN), which is no claim to compare.

Floats are exact both ways: a concrete float input becomes the z3 constant
with the same IEEE 754 binary64 value (-0.0, subnormals, infinities; any NaN
becomes z3's single NaN), a float the translation predicts is read back
through its bit pattern, and floats compare bit-exactly (``struct.pack('<d')``
-- so 0.0 and -0.0 differ), except that any NaN matches any NaN: z3 has one
NaN without sign or payload, so the sign of a NaN is not compared.

Strings are exact too: a str input becomes the z3 string with the same code
points (``strmath.const``), a str the translation predicts is read back code
point by code point (``read_string``), and strs match only strs.

Some operations lower to a fresh constant and a definition that pins it
(``str.find``); on concrete inputs the evaluator gives each such constant its
one value (by the solver, or by trying candidates where the solver gives up)
and fails when a definition admits none or several.

``StatementGenerator`` is the statement skeleton the seeded program
generators of the differential tests (int, float, str) share.

Predictions are computed in a private ``z3.Context`` per translated function:
every z3 object of one evaluation comes from that context (mixing contexts can
crash the interpreter).
"""

from __future__ import annotations

import atexit
import copy
import ctypes
import dataclasses
import importlib.util
import itertools
import math
import operator
import os
import shutil
import struct
import sys
import tempfile
import textwrap
from dataclasses import dataclass
from typing import Any, Callable, List, Optional, Sequence, Tuple

import z3

from refines import fpmath, heap, ir, strmath
from refines.lower import Lowering
from refines.opaque import MAY_RAISE
from refines.source import find_function, read_params, runtime_params
from refines.translate import Scope, translate_body

# ("returned", value) or ("raised", exception class); predictions may also be
# ("unmodelled", reason).
Result = Tuple[str, Any]
UNMODELLED = "unmodelled"

_DIR: Optional[str] = None
_COUNTER = itertools.count()


def _scratch_dir() -> str:
    global _DIR
    if _DIR is None:
        _DIR = tempfile.mkdtemp(prefix="refines-semantics-")
        atexit.register(shutil.rmtree, _DIR, True)
    return _DIR


def load_module(source: str, directory: Optional[str] = None):
    """Write ``source`` as a new module file and import it (a unique name each time)."""
    name = f"refines_semantics_{os.getpid()}_{next(_COUNTER)}"
    path = os.path.join(directory or _scratch_dir(), name + ".py")
    with open(path, "w", encoding="utf-8") as fh:
        fh.write(textwrap.dedent(source))
    spec = importlib.util.spec_from_file_location(name, path)
    module = importlib.util.module_from_spec(spec)
    sys.modules[name] = module
    spec.loader.exec_module(module)
    return module, path


def run_python(fn: Callable, args: Sequence[Any]) -> Result:
    """What CPython does on ``fn(*args)``."""
    try:
        return ("returned", fn(*args))
    except Exception as exc:  # every exception is an outcome to compare
        return ("raised", type(exc))


class Evaluator:
    """Evaluate a behaviour's outcomes on concrete inputs, in one z3 context."""

    def __init__(self, behaviour: ir.Behaviour) -> None:
        self.behaviour = behaviour
        self.ctx = z3.Context()
        self.lower = Lowering(self.ctx)
        # Optional, list and object parameters: see ``_heap_substitution``.
        self.heapy = any(p.sort == ir.REF or p.optional for p in behaviour.params)
        self.vars = (None if self.heapy else
                     [self.lower.var(p.name, p.sort) for p in behaviour.params])
        self.guards = [self.lower(o.guard) for o in behaviour.outcomes]
        self.values = [None if not o.returns else self._lower_value(o.value)
                       for o in behaviour.outcomes]
        if self.heapy:
            # Each return's heap (fields it wrote), and every pre-state field
            # a term reads or a parameter's kind has: key -> z3 array constant.
            self.heaps = [None if not o.returns else
                          {k: self.lower(a) for k, a in (o.heap or {}).items()}
                          for o in behaviour.outcomes]
            keys = set()
            for p in behaviour.params:
                if p.sort == ir.REF:
                    keys.update(_field_keys(p.kind))
            roots = list(self.guards) + [a for h in self.heaps if h for a in h.values()]
            roots += [t for v in self.values if v is not None for t in _lowered_terms(v)]
            for root in roots:
                for c in free_constants(root):
                    if c.decl().name().startswith(ir.HEAP_PREFIX):
                        keys.add(c.decl().name()[len(ir.HEAP_PREFIX):])
            self.fields = {k: self.lower(heap.initial_field(k)) for k in sorted(keys)}
        # Some ops lower to a fresh constant pinned by a definition (str.find);
        # on concrete inputs the solver gives each its one value.
        self.definitions = list(getattr(self.lower, "definitions", ()))
        self._defined: dict = {}

    def _lower_value(self, v: ir.Value):
        if isinstance(v, ir.Tup):
            return ("tuple", [self._lower_value(i) for i in v.items])
        if v is ir.NONE:
            return ("none", None)
        if isinstance(v, ir.Opt):
            return ("opt", (self.lower(v.none), self._lower_value(v.value)))
        if isinstance(v, ir.Ref):
            return ("ref", (v.kind, self.lower(v.ref)))
        assert isinstance(v, ir.Term), f"outcome value is not a value: {v!r}"
        return (v.sort, self.lower(v))

    def _constant(self, value: Any, sort: str):
        if sort == ir.BOOL:
            return z3.BoolVal(bool(value), self.ctx)
        if sort == ir.FLOAT:
            if type(value) is not float:  # the annotation says float: no silent conversion
                raise TypeError(f"a float parameter needs a float input, not {value!r}")
            return fpmath.const(value, self.ctx)  # the exact binary64 value
        if sort == ir.STR:
            if type(value) is not str:
                raise TypeError(f"a str parameter needs a str input, not {value!r}")
            return strmath.const(value, self.ctx)  # code point for code point
        return z3.IntVal(int(value), self.ctx)

    def param_substitution(self, args: Sequence[Any]):
        """The parameters (and, with lists or objects, the pre-state heap)
        replaced by constants; opaque values and defined constants stay free."""
        if self.heapy:
            return self._heap_substitution(args)
        return [(var, self._constant(a, p.sort))
                for var, a, p in zip(self.vars, args, self.behaviour.params)]

    def outcome_arrays(self, index: int) -> dict:
        """The heap after outcome ``index``, lowered: the fields it wrote, and
        the pre-state fields the evaluation knows for the rest."""
        written = {k: self.lower(a) for k, a in (self.behaviour.outcomes[index].heap or {}).items()}
        return dict(getattr(self, "fields", {}), **written)

    def substitution(self, args: Sequence[Any]):
        if self.heapy:
            subst = self._heap_substitution(args)
        else:
            subst = [(var, self._constant(a, p.sort))
                     for var, a, p in zip(self.vars, args, self.behaviour.params)]
        if self.definitions:
            key = (repr(shape(tuple(args))) if self.heapy
                   else tuple((type(a), a) for a in args))
            if key not in self._defined:
                self._defined[key] = self._defined_constants(subst)
            subst = subst + self._defined[key]
        return subst

    def _defined_constants(self, subst):
        """The values the definitions give their fresh constants on these
        inputs. A definition must pin its constant to exactly one value for
        every pre-state: fail if it admits none or several.

        One constant at a time, each once the constants its definition reads
        are known (a find inside another find's arguments): with the inputs
        substituted, each query has a single unknown, which z3 decides at once,
        while solving them all together can leave it undecided."""
        known = list(subst)
        pending = list(self.definitions)
        while pending:
            progress = False
            for d in list(pending):
                d_now = z3.simplify(z3.substitute(d, *known))
                if _reads(d_now, z3.Z3_OP_SEQ_POWER):
                    # simplify leaves str.power with a count of 3 or more; the
                    # solver is then incomplete on str.replace_all around it
                    # ("incomplete (theory seq)", z3 5.4.1). The model evaluator
                    # unrolls it (without completing the free constant).
                    d_now = z3.simplify(z3.Model(ctx=self.ctx).eval(d_now, model_completion=False))
                free = free_constants(d_now)
                if len(free) > 1:
                    continue
                pending.remove(d)
                progress = True
                if not free:
                    assert z3.is_true(d_now), f"a definition fails here: {d}"
                    continue
                (fresh,) = free
                known.append((fresh, self._pinned(fresh, d_now)))
            assert progress, f"definitions that depend on each other: {pending}"
        return known[len(subst):]

    def _pinned(self, fresh, definition):
        """The one value of ``fresh`` that ``definition`` (which reads nothing
        else) allows. The solver first; where it gives up (long strings built
        by str.power and str.replace_all: "incomplete (theory seq)"), every
        candidate from below -1 to past the longest string in the definition,
        decided by evaluation -- exactly one must hold."""
        solver = z3.Solver(ctx=self.ctx)
        solver.set("rlimit", _DEFINITION_RLIMIT)
        solver.add(definition)
        status = solver.check()
        assert status != z3.unsat, f"no value of {fresh} meets its definition here"
        if status == z3.sat:
            value = solver.model().eval(fresh, model_completion=True)
            solver.add(fresh != value)
            status = solver.check()
            assert status != z3.sat, f"the definition does not pin {fresh} to one value"
            if status == z3.unsat:
                return value
        longest = max([len(read_string(t)) for t in _subterms(definition)
                       if z3.is_string_value(t)] + [0])
        hits = [k for k in range(-4, longest + 4)
                if self.concrete(z3.substitute(definition, (fresh, z3.IntVal(k, self.ctx))),
                                 None) is True]
        assert len(hits) == 1, f"the definition of {fresh} holds for {hits} here"
        return z3.IntVal(hits[0], self.ctx)

    def concrete(self, e: z3.ExprRef, subst) -> Any:
        """The Python value of ``e`` once the parameters are replaced by ``subst``."""
        e = z3.simplify(z3.substitute(e, *subst)) if subst else z3.simplify(e)
        if not z3.is_const(e):
            # One pass can leave string comparisons half done, e.g. ``"" < "ab"``
            # becomes ``Not("" == "ab")`` (measured with z3 5.4.1): a second one ends them.
            e = z3.simplify(e)
        if z3.is_true(e):
            return True
        if z3.is_false(e):
            return False
        if z3.is_int_value(e):
            return e.as_long()
        if z3.is_fp_value(e):
            return read_float(e)
        if z3.is_string_value(e):
            return read_string(e)
        if _only_unrolling_left(e):
            # simplify does not unroll str.power beyond a count of 2 (measured
            # with z3 5.4.1); the model evaluator does, and the term is closed.
            e = z3.simplify(z3.Model(ctx=self.ctx).eval(e, model_completion=True))
            if z3.is_string_value(e):
                return read_string(e)
            if z3.is_int_value(e):
                return e.as_long()
            if z3.is_true(e) or z3.is_false(e):
                return z3.is_true(e)
        raise AssertionError(f"did not evaluate to a constant: {e}")

    def _value(self, lowered, subst) -> Any:
        kind, payload = lowered
        if kind == "tuple":
            return tuple(self._value(i, subst) for i in payload)
        if kind == "none":
            return None
        v = self.concrete(payload, subst)
        if kind == ir.FLOAT:
            assert type(v) is float, f"a float term evaluated to {v!r}"
            return v
        if kind == ir.STR:
            assert type(v) is str, f"a str term evaluated to {v!r}"
            return v
        assert type(v) not in (float, str), f"an {kind} term evaluated to {v!r}"
        return bool(v) if kind == ir.BOOL else int(v)

    # ------------------------------------------------ Optional, lists, objects

    # The value an absent Optional's payload variable gets: the translation
    # must not read it where the parameter is None.
    OPTIONAL_FILLER = 13

    def _heap_substitution(self, args: Sequence[Any]):
        """Parameters replaced by constants, for behaviours with Optional,
        list or object parameters. Each distinct Python object gets a
        reference number from 0 up, in order of first appearance (the same
        object twice: one number -- aliasing); each pre-state field becomes a
        constant array (a default everywhere, the objects' contents at their
        numbers)."""
        numbers: dict = {}
        objects = []  # (kind, number, object)
        subst = []
        for p, a in zip(self.behaviour.params, args):
            v = ir.initial(p)
            if p.sort == ir.REF:
                if id(a) not in numbers:
                    numbers[id(a)] = len(numbers)
                    objects.append((p.kind, numbers[id(a)], a))
                subst.append((self.lower(v.ref), z3.IntVal(numbers[id(a)], self.ctx)))
            elif p.optional:
                subst.append((self.lower(v.none), z3.BoolVal(a is None, self.ctx)))
                filler = {ir.BOOL: False, ir.FLOAT: 0.0, ir.STR: ""}.get(
                    p.sort, self.OPTIONAL_FILLER)
                subst.append((self.lower(v.value),
                              self._constant(filler if a is None else a, p.sort)))
            else:
                subst.append((self.lower(p), self._constant(a, p.sort)))
        for key, var in self.fields.items():
            sort = heap.field_sort(key)
            arr = z3.K(z3.IntSort(self.ctx), self._default(sort))
            for kind, number, obj in objects:
                if key == kind:  # a list: its contents
                    if type(obj) is not list:
                        raise TypeError(f"a {kind} parameter needs a list, not {obj!r}")
                    value = self._seq_constant(obj, sort[len("seq:"):])
                elif key.startswith(kind + ".") and kind.startswith("obj:"):
                    value = self._constant(getattr(obj, key[len(kind) + 1:]), sort)
                else:
                    continue
                arr = z3.Store(arr, z3.IntVal(number, self.ctx), value)
            subst.append((var, arr))
        return subst

    def _default(self, sort: str):
        if sort.startswith("seq:"):
            return self._seq_constant([], sort[len("seq:"):])
        return self._constant({ir.BOOL: False, ir.FLOAT: 0.0, ir.STR: ""}.get(sort, 0), sort)

    def _seq_constant(self, items: Sequence[Any], elem: str):
        from refines.lower import z3_sort

        seq_sort = z3_sort(ir.seq_sort(elem), self.ctx)
        if not items:
            return z3.Empty(seq_sort)
        for x in items:
            if elem == ir.INT and type(x) is not int or elem == ir.BOOL and type(x) is not bool:
                raise TypeError(f"a list of {elem} needs {elem} items, not {x!r}")
        units = [z3.Unit(self._constant(x, elem)) for x in items]
        return units[0] if len(units) == 1 else z3.Concat(*units)

    def _read(self, lowered, subst, arrays: dict, made: dict) -> Any:
        """The Python value of a lowered outcome value; lists and objects are
        read in ``arrays`` (the outcome's heap), one object per reference
        number (``made``), so a list returned and an argument that is the same
        object are one Python object."""
        kind, payload = lowered
        if kind == "tuple":
            return tuple(self._read(i, subst, arrays, made) for i in payload)
        if kind == "opt":
            none, inner = payload
            is_none = self.concrete(none, subst)
            assert type(is_none) is bool, f"an Optional's none flag evaluated to {is_none!r}"
            return None if is_none else self._read(inner, subst, arrays, made)
        if kind == "ref":
            return self._object(payload[0], self.concrete(payload[1], subst), subst,
                                arrays, made)
        if kind.startswith("seq:"):
            return self._read_seq(payload, kind[len("seq:"):], subst)
        return self._value(lowered, subst)

    def _object(self, kind: str, number: Any, subst, arrays: dict, made: dict) -> Any:
        assert type(number) is int, f"a reference evaluated to {number!r}"
        if (kind, number) in made:
            return made[(kind, number)]
        at = z3.IntVal(number, self.ctx)
        if kind.startswith("list:"):
            made[(kind, number)] = out = []
            out.extend(self._read_seq(z3.Select(arrays[kind], at), heap.elem_sort(kind), subst))
            return out
        info = heap.KINDS[kind]
        obj = info.cls.__new__(info.cls)  # its fields as the model has them, not via __init__
        made[(kind, number)] = obj
        for attr, sort in info.fields.items():
            object.__setattr__(obj, attr, self._value(
                (sort, z3.Select(arrays[heap.field_key(kind, attr)], at)), subst))
        return obj

    def _read_seq(self, e, elem: str, subst) -> list:
        e = z3.simplify(z3.substitute(e, *subst)) if subst else z3.simplify(e)
        n = self.concrete(z3.Length(e), None)
        assert type(n) is int and n >= 0, f"a list length evaluated to {n!r}"
        return [self._value((elem, e[i]), None) for i in range(n)]

    def _arrays(self, index: int) -> dict:
        """The heap after outcome ``index``: written fields, the rest as before."""
        written = self.heaps[index] or {}
        return dict(self.fields, **written)

    def predict_state(self, args: Sequence[Any]) -> Tuple[Result, Optional[tuple]]:
        """The predicted outcome and, for a return, the post-state of every
        argument (lists and objects read in the outcome's heap; other
        arguments as given). Raising outcomes: ``(("raised", cls), None)``."""
        hits = self.holding(args)
        assert len(hits) == 1, (
            f"on {tuple(args)!r}: {len(hits)} outcome guards hold (expected exactly 1)\n"
            f"{self.behaviour!r}")
        i = hits[0]
        o = self.behaviour.outcomes[i]
        if o.unmodelled:
            return (UNMODELLED, o.unmodelled), None
        if not o.returns:
            return ("raised", o.exception), None
        subst = self.substitution(args)
        if not self.heapy:
            return ("returned", self._value(self.values[i], subst)), tuple(args)
        arrays = self._arrays(i)
        made: dict = {}
        post = []
        for p, a in zip(self.behaviour.params, args):
            if p.sort == ir.REF:
                post.append(self._read(("ref", (p.kind, self.lower(ir.initial(p).ref))),
                                       subst, arrays, made))
            else:
                post.append(a)
        value = self._read(self.values[i], subst, arrays, made)
        return ("returned", value), tuple(post)

    def holding(self, args: Sequence[Any]) -> List[int]:
        """Indexes of the outcomes whose guard holds on ``args``."""
        subst = self.substitution(args)
        return [i for i, g in enumerate(self.guards) if self.concrete(g, subst) is True]

    def predict(self, args: Sequence[Any]) -> Result:
        """The single outcome the translation predicts on ``args``.

        Fails if no guard or more than one guard holds: a behaviour's guards are
        documented to be disjoint and to cover every pre-state.
        """
        hits = self.holding(args)
        assert len(hits) == 1, (
            f"on {tuple(args)!r}: {len(hits)} outcome guards hold (expected exactly 1)\n"
            f"{self.behaviour!r}")
        o = self.behaviour.outcomes[hits[0]]
        if o.unmodelled:
            return (UNMODELLED, o.unmodelled)
        if not o.returns:
            return ("raised", o.exception)
        if self.heapy:
            return self.predict_state(args)[0]
        return ("returned", self._value(self.values[hits[0]], self.substitution(args)))


def _field_keys(kind: str) -> List[str]:
    """The heap fields of a kind: a list kind's contents, a class's attributes."""
    if kind.startswith("list:"):
        return [heap.field_key(kind)]
    return [heap.field_key(kind, a) for a in heap.KINDS[kind].fields]


def _lowered_terms(lowered) -> list:
    kind, payload = lowered
    if kind == "tuple":
        return [t for i in payload for t in _lowered_terms(i)]
    if kind == "none":
        return []
    if kind == "opt":
        return [payload[0]] + _lowered_terms(payload[1])
    if kind == "ref":
        return [payload[1]]
    return [payload]


def shape(value: Any, ids: Optional[dict] = None) -> Any:
    """A value as plain nested tuples that say everything the heap comparison
    looks at: the exact type of each scalar (floats by their bits), each list
    and object's contents, and which of them are one object -- every list or
    object gets a number by first appearance (``ids``), so two values have the
    same shape exactly when they are alike object for object."""
    ids = {} if ids is None else ids
    if isinstance(value, list):
        if id(value) in ids:
            return ("same", ids[id(value)])
        ids[id(value)] = len(ids)
        return ("list", ids[id(value)], tuple(shape(x, ids) for x in value))
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        if id(value) in ids:
            return ("same", ids[id(value)])
        ids[id(value)] = len(ids)
        return ("obj", type(value).__qualname__, ids[id(value)],
                tuple((f.name, shape(getattr(value, f.name, None), ids))
                      for f in dataclasses.fields(value)))
    if isinstance(value, tuple):
        return ("tuple", tuple(shape(x, ids) for x in value))
    if value is None:
        return ("none",)
    if type(value) is float:
        return ("float", "nan" if value != value else float_bits(value))
    if type(value) in (int, bool, str):
        return (type(value).__name__, value)
    return ("other", repr(value))


def same_shape(expected: Any, got: Any) -> bool:
    """Shapes (``shape``) agree, with ``same``'s one allowance: where the
    translation has an int, CPython may have a bool (a value that is a bool
    on one path and an int on another is modelled as an int)."""
    if isinstance(expected, tuple) and isinstance(got, tuple) and expected[:1] == ("bool",) \
            and got[:1] == ("int",):
        return expected[1] == got[1]
    if not (isinstance(expected, tuple) and isinstance(got, tuple)):
        return expected == got
    return len(expected) == len(got) and all(same_shape(a, b) for a, b in zip(expected, got))


def same_state(expected: Tuple[Result, Optional[tuple]],
               got: Tuple[Result, Optional[tuple]]) -> bool:
    """Outcome and post-state agree: the same exception class (no post-state
    is compared after a raise), or the returned value and every argument's
    post-state alike object for object (``shape`` of arguments, then result,
    numbered together: a result that is an argument must be that argument)."""
    (e_res, e_args), (g_res, g_args) = expected, got
    if e_res[0] != g_res[0] or UNMODELLED in (e_res[0], g_res[0]):
        return False
    if e_res[0] == "raised":
        return e_res[1] is g_res[1]
    return same_shape(shape((e_args, e_res[1])), shape((g_args, g_res[1])))


def read_float(e: z3.FPNumRef) -> float:
    """The Python float of a z3 Float64 numeral, exactly.

    NaN first (z3 has one NaN: it reads as ``float('nan')``), then the IEEE
    754 bit pattern (``fpToIEEEBV``) unpacked with ``struct``; that keeps
    -0.0, infinities and subnormals, which printing the numeral does not.
    """
    ctx = e.ctx
    if z3.is_true(z3.simplify(z3.fpIsNaN(e, ctx=ctx))):
        return float("nan")
    bits = z3.simplify(z3.fpToIEEEBV(e, ctx=ctx))
    assert z3.is_bv_value(bits) and bits.size() == 64, f"not a binary64 numeral: {e}"
    return struct.unpack("<d", struct.pack("<Q", bits.as_long()))[0]


# Resource units for deciding one definition on concrete inputs by the solver
# (z3's rlimit is reproducible, a timeout is not); past them, candidates.
_DEFINITION_RLIMIT = 2_000_000


def _reads(e: z3.ExprRef, kind: int) -> bool:
    """Whether ``e`` applies an operation of this kind somewhere."""
    seen, stack = set(), [e]
    while stack:
        t = stack.pop()
        if t.get_id() in seen or not z3.is_app(t):
            continue
        seen.add(t.get_id())
        if t.decl().kind() == kind:
            return True
        stack.extend(t.children())
    return False


def _subterms(e: z3.ExprRef) -> list:
    seen, out, stack = set(), [], [e]
    while stack:
        t = stack.pop()
        if t.get_id() in seen:
            continue
        seen.add(t.get_id())
        out.append(t)
        if z3.is_app(t):
            stack.extend(t.children())
    return out


def free_constants(e: z3.ExprRef) -> list:
    """The uninterpreted constants ``e`` still reads."""
    found, seen, stack = {}, set(), [e]
    while stack:
        t = stack.pop()
        if t.get_id() in seen:
            continue
        seen.add(t.get_id())
        if z3.is_const(t) and t.decl().kind() == z3.Z3_OP_UNINTERPRETED:
            found[t.get_id()] = t
        elif z3.is_app(t):
            stack.extend(t.children())
    return list(found.values())


def read_string(e: z3.SeqRef) -> str:
    """The Python str of a z3 string value, code point for code point
    (``as_string`` escapes characters and is not meant to be inverted)."""
    assert z3.is_string_value(e), f"not a string value: {e}"
    ref, ast = e.ctx.ref(), e.as_ast()
    n = z3.Z3_get_string_length(ref, ast)
    buf = (ctypes.c_uint * n)()
    z3.Z3_get_string_contents(ref, ast, n, buf)
    return "".join(map(chr, buf))


# Operations whose value z3 leaves unspecified somewhere (division by zero):
# a term holding one is never handed to the model evaluator, which would
# complete it with an arbitrary value.
_UNSPECIFIED_SOMEWHERE = {z3.Z3_OP_DIV, z3.Z3_OP_IDIV, z3.Z3_OP_MOD, z3.Z3_OP_REM,
                          z3.Z3_OP_UNINTERPRETED}


def _only_unrolling_left(e: z3.ExprRef) -> bool:
    """Whether ``e`` is a closed term that ``simplify`` left unevaluated only
    for a ``str.power``: no free names, no float operations, no operation that
    is unspecified anywhere."""
    seen, stack, power = set(), [e], False
    while stack:
        t = stack.pop()
        if t.get_id() in seen:
            continue
        seen.add(t.get_id())
        if z3.is_fp(t) or z3.is_fprm(t):
            return False
        if not z3.is_app(t):
            return False  # a bound variable or a quantifier
        kind = t.decl().kind()
        if kind in _UNSPECIFIED_SOMEWHERE:
            return False
        power = power or kind == z3.Z3_OP_SEQ_POWER
        stack.extend(t.children())
    return power


def distinct_objects(args: Sequence[Any]) -> Tuple[Any, ...]:
    """``args`` with every NaN replaced by a new object with the same bits.

    The translation takes distinct parameters to be distinct objects, and for
    NaN that is visible: ``x in (y,)`` compares by identity first, so it is
    true when ``x`` and ``y`` are the same NaN object (a grid reuses one).
    Other values equal themselves anyway, so their identity is invisible.
    """
    return tuple(struct.unpack("<d", float_bits(a))[0] if type(a) is float and a != a else a
                 for a in args)


def float_bits(v: float) -> bytes:
    return struct.pack("<d", v)


def same_float(a: float, b: float) -> bool:
    """Bit-exact equality of two floats; any NaN matches any NaN (z3 has one NaN)."""
    if a != a or b != b:
        return a != a and b != b
    return float_bits(a) == float_bits(b)


@dataclass
class Translated:
    fn: Callable
    behaviour: ir.Behaviour
    path: str
    evaluator: Evaluator

    def predict(self, *args: Any) -> Result:
        return self.evaluator.predict(args)

    def run(self, *args: Any) -> Result:
        return run_python(self.fn, distinct_objects(args))

    def run_state(self, *args: Any) -> Tuple[Result, tuple]:
        """What CPython does, on a deep copy of the arguments (taken as one
        tuple, so aliasing among them is kept), and the arguments after."""
        copied = copy.deepcopy(tuple(args))
        return run_python(self.fn, distinct_objects(copied)), copied

    def predict_state(self, *args: Any) -> Tuple[Result, Optional[tuple]]:
        return self.evaluator.predict_state(args)

    def state_mismatch(self, *args: Any, allow_unmodelled: bool = True) -> Optional[str]:
        """Like ``mismatch``, comparing the post-state of list and object
        arguments too (``same_state``)."""
        expected = self.run_state(*args)
        try:
            got = self.predict_state(*args)
        except AssertionError as exc:
            return f"{self.fn.__name__}{tuple(args)!r}: CPython {expected}, translation: {exc}"
        if same_state(expected, got) or (got[0][0] == UNMODELLED and allow_unmodelled):
            return None
        return f"{self.fn.__name__}{tuple(args)!r}: CPython {expected}, translation {got}"

    def mismatch(self, *args: Any, allow_unmodelled: bool = True) -> Optional[str]:
        """``None`` if translation and CPython agree on ``args``, else a description.

        Where the translation says the outcome is not modelled it claims
        nothing, so that agrees -- unless ``allow_unmodelled`` is false.
        Behaviours with Optional, list or object parameters compare the
        post-state too (``state_mismatch``).
        """
        if self.evaluator.heapy:
            return self.state_mismatch(*args, allow_unmodelled=allow_unmodelled)
        expected = self.run(*args)
        try:
            got = self.predict(*args)
        except AssertionError as exc:  # no single outcome, or no constant value
            return f"{self.fn.__name__}{tuple(args)!r}: CPython {expected}, translation: {exc}"
        if same(expected, got) or (got[0] == UNMODELLED and allow_unmodelled):
            return None
        return f"{self.fn.__name__}{tuple(args)!r}: CPython {expected}, translation {got}"

    def agrees(self, *inputs: Sequence[Any]) -> List[str]:
        """The mismatches over several input tuples (empty when all agree)."""
        return [m for m in (self.mismatch(*args) for args in inputs) if m is not None]


def same(expected: Result, got: Result) -> bool:
    """Outcomes agree: same exception class, or equal values of the same shape.

    Python's bool is an int (``True == 1``), and the translation models it so:
    scalars compare with ``==``; tuples and ``None`` must match in shape. One
    direction of typing is checked too: where the translation says the value is
    a bool, CPython's must be one (``True + 1`` is the int 2, not a bool). The
    other direction is allowed -- a value that is a bool on one path and an int
    on another (``b and x``) is modelled as an int.

    Floats match only floats (``1.0 == 1`` is not enough: the type is part of
    the outcome), and bit-exactly: ``0.0`` and ``-0.0`` differ; two NaNs match
    whatever their signs and payloads (see ``same_float``).
    """
    if expected[0] != got[0] or UNMODELLED in (expected[0], got[0]):
        return False
    if expected[0] == "raised":
        return expected[1] is got[1]
    return _same_value(expected[1], got[1])


def _same_value(a: Any, b: Any) -> bool:
    if isinstance(a, tuple) or isinstance(b, tuple):
        return (isinstance(a, tuple) and isinstance(b, tuple) and len(a) == len(b)
                and all(_same_value(x, y) for x, y in zip(a, b)))
    if a is None or b is None:
        return a is b
    if type(a) is float or type(b) is float:
        return type(a) is float and type(b) is float and same_float(a, b)
    if type(a) is str or type(b) is str:
        return type(a) is str and type(b) is str and a == b
    if type(a) not in (int, bool) or type(b) not in (int, bool):
        return False
    if type(b) is bool and type(a) is not bool:
        return False
    return a == b


def translated(source: str, name: str = "f", directory: Optional[str] = None) -> Translated:
    """Translate function ``name`` of the module ``source`` the way the plugin does."""
    module, path = load_module(source, directory)
    fn = getattr(module, name)
    fn_node, _ = find_function(fn, path)
    names, _, hints, _ = runtime_params(fn)
    params, _ = read_params(fn_node, fn.__globals__, dict(zip(names, hints)))
    scope = Scope(fn.__globals__, list(fn_node.locals))
    behaviour = translate_body(fn_node, params, scope)
    return Translated(fn, behaviour, path, Evaluator(behaviour))


def line_of(source: str, fragment: str) -> int:
    """The 1-based line of the first line of ``source`` containing ``fragment``."""
    for number, text in enumerate(textwrap.dedent(source).splitlines(), start=1):
        if fragment in text:
            return number
    raise ValueError(f"{fragment!r} not in source")


def grid(*axes: Sequence[Any]) -> List[Tuple[Any, ...]]:
    """Every combination of the given axis values (a small exhaustive input set)."""
    return list(itertools.product(*axes))


SMALL = (-3, -1, 0, 1, 2, 4)
BOOLS = (False, True)
# Strings a grid over a str parameter visits by default: empty, repeats, a
# non-ASCII and an astral code point.
STRS = ("", "a", "ab", "ba", "aab", "\u00e9", "a\U0001F600")
# IEEE 754 corner cases a grid over a float parameter visits by default.
FLOATS = (0.0, -0.0, 1.0, -2.5, 0.1, 5e-324, 1.7976931348623157e308,
          float("inf"), float("-inf"), float("nan"))


def inputs_for(params: Sequence[ir.Var], ints: Sequence[int] = SMALL,
               floats: Sequence[float] = FLOATS) -> List[Tuple]:
    """All combinations of small values for the parameters' sorts."""
    axes = [BOOLS if p.sort == ir.BOOL else floats if p.sort == ir.FLOAT
            else STRS if p.sort == ir.STR else ints for p in params]
    return grid(*axes)


def check_agrees(source: str, ints: Sequence[int] = SMALL, name: str = "f",
                 floats: Sequence[float] = FLOATS) -> Translated:
    """Translate ``source`` and assert it agrees with CPython on a grid of inputs."""
    t = translated(source, name)
    bad = t.agrees(*inputs_for(t.behaviour.params, ints, floats))
    assert not bad, "\n".join(bad[:10]) + f"\n{len(bad)} mismatches\n{t.behaviour!r}"
    return t


# ---- the statement skeleton of the random program generators


class StatementGenerator:
    """What the seeded program generators of the differential tests share: a
    block of statements -- ``if``/``elif``/``else`` (what follows sees the
    names assigned on every branch that goes on), ``assert``, early
    ``return``, ``raise`` and ``pass`` -- around the statements each one writes
    itself. A subclass says which statements there are and how often
    (``statement_kinds``), writes the others (``simple_statement``), the tests
    of ``if`` and ``assert`` and the returned expression (``result``), and has
    ``rnd``, ``depth``, ``flow`` and ``assigned_anywhere``.

    The random draws happen in one fixed order, so a seed gives one program:
    the kind of each statement, then what the kind draws.
    """

    RAISES = ("ValueError", "QuotaExceeded", 'ValueError("refused")',
              "QuotaExceeded(f'over by {x}')")

    def statement_kinds(self, depth: int) -> Tuple[Sequence[str], Sequence[float]]:
        """The kinds of statement and their weights (``if`` only for depth > 0)."""
        raise NotImplementedError

    def simple_statement(self, kind: str, pad: str, top: bool, defined: set,
                         lines: List[str]) -> bool:
        """Append a statement of ``kind`` other than if/assert/return/raise/pass,
        updating ``defined`` (and ``assigned_anywhere``); False if it does not
        write one (the statement is then ``pass``)."""
        return False

    def if_test(self, defined: set) -> str:
        return self.bool_expr(self.depth - 1, defined)

    def assert_test(self, defined: set) -> str:
        return self.bool_expr(self.depth - 1, defined)

    def result(self, defined: set) -> str:
        raise NotImplementedError

    def block(self, indent: int, depth: int, defined: set,
              length: int) -> Tuple[List[str], set, bool]:
        """Lines, the names assigned on every path that goes on after the block,
        and whether every path through it ends (return/raise)."""
        r = self.rnd
        pad = "    " * indent
        top = indent == 1
        lines: List[str] = []
        defined = set(defined)
        for _ in range(length):
            kinds, weights = self.statement_kinds(depth)
            kind = r.choices(kinds, weights)[0]
            if self.simple_statement(kind, pad, top, defined, lines):
                continue
            if kind == "if":
                branches = r.choice((1, 2, 2, 3))
                has_else = r.random() < 0.6
                going_on: List[set] = []  # assigned sets of branches that fall through
                for i in range(branches + has_else):
                    if i < branches:
                        lines.append(f"{pad}{'if' if i == 0 else 'elif'} {self.if_test(defined)}:")
                    else:
                        lines.append(f"{pad}else:")
                    body, out, done = self.block(indent + 1, depth - 1, defined, r.randint(1, 3))
                    lines.extend(body)
                    if not done:
                        going_on.append(out)
                if not has_else:
                    going_on.append(defined)
                if not going_on:
                    return lines, defined, True
                defined = set.intersection(*going_on)
            elif kind == "assert":
                lines.append(f"{pad}assert {self.assert_test(defined)}")
            elif kind == "return" and depth < self.depth:
                lines.append(f"{pad}return {self.result(defined)}")
                return lines, defined, True
            elif kind == "raise" and depth < self.depth:
                lines.append(f"{pad}raise {r.choice(self.RAISES)}")
                return lines, defined, True
            else:
                lines.append(f"{pad}pass")
        return lines, defined, False

    def body(self) -> List[str]:
        """The lines of a function body; most bodies that can fall off the end
        return something there."""
        body, defined, ended = self.block(1, self.depth, set(), self.rnd.randint(2, 5))
        if not ended and self.rnd.random() < 0.9:
            body.append(f"    return {self.result(defined)}")
        return body


# ---- a reference evaluator for IR terms, with CPython's own operators

ARITH = {"+": operator.add, "-": operator.sub, "*": operator.mul,
          "//": operator.floordiv, "%": operator.mod}
CMP = {"<": operator.lt, "<=": operator.le, ">": operator.gt, ">=": operator.ge,
        "==": operator.eq, "!=": operator.ne}


# Float terms: ``/`` too, and the named operations, each as CPython computes it.
FLOAT_ARITH = dict(ARITH, **{"/": operator.truediv})
_FLOAT_MAX_INT = 2**1024 - 2**970  # the least int magnitude float() rejects
PY_OPS = {
    "float": float,
    "float_overflows": lambda n: abs(n) >= _FLOAT_MAX_INT,
    "int_truediv": operator.truediv,
    "int_truediv_overflows": lambda p, q: abs(p) >= _FLOAT_MAX_INT * abs(q),
    "fabs": math.fabs, "min": min, "max": max, "sqrt": math.sqrt,
    "copysign": math.copysign, "isnan": math.isnan, "isinf": math.isinf,
    "isfinite": math.isfinite, "trunc": int, "floor": math.floor, "ceil": math.ceil,
    # str: Python's own operations and methods
    "len": len, "getitem": operator.getitem, "slice": lambda s, a, b: s[a:b],
    "slice_from": lambda s, a: s[a:], "slice_to": lambda s, b: s[:b],
    "contains": lambda needle, hay: needle in hay, "startswith": str.startswith,
    "endswith": str.endswith, "find": str.find, "rfind": str.rfind,
    "repeat": operator.mul, "replace": str.replace, "str_of_int": str,
}


def py_eval(t: ir.Term, env: dict):
    """CPython's value of a term (Python's operators; short-circuit and/or/ite)."""
    if isinstance(t, ir.Var):
        return env[t.name]
    if isinstance(t, ir.Const):
        return t.value
    if isinstance(t, ir.Op):
        return PY_OPS[t.name](*(py_eval(a, env) for a in t.args))
    if isinstance(t, ir.Arith) and t.sort == ir.FLOAT:
        return FLOAT_ARITH[t.op](py_eval(t.left, env), py_eval(t.right, env))
    if isinstance(t, ir.Arith):
        return ARITH[t.op](py_eval(t.left, env), py_eval(t.right, env))
    if isinstance(t, ir.Neg):
        return -py_eval(t.arg, env)
    if isinstance(t, ir.ToInt):
        return int(py_eval(t.arg, env))
    if isinstance(t, ir.Cmp):
        return CMP[t.op](py_eval(t.left, env), py_eval(t.right, env))
    if isinstance(t, ir.Not):
        return not py_eval(t.arg, env)
    if isinstance(t, (ir.And, ir.Or)):
        stop_on = isinstance(t, ir.Or)
        value = not stop_on
        for a in t.args:
            value = py_eval(a, env)
            if bool(value) == stop_on:
                return value
        return value
    if isinstance(t, ir.Ite):
        return py_eval(t.then, env) if py_eval(t.cond, env) else py_eval(t.orelse, env)
    raise TypeError(t)



# ---------------------------------------------------------------- differential batches

MISMATCH, REFUSED, CRASHED = "mismatch", "refused", "crashed"
ALL_PROBLEMS = (MISMATCH, REFUSED, CRASHED)


class Tally:
    """What a batch of random programs found: problems by kind (each with its
    seed and program), how often each kind of CPython outcome was seen, and
    how many programs and cases ran. Shared by the differential harnesses."""

    def __init__(self) -> None:
        self.problems = {MISMATCH: [], REFUSED: [], CRASHED: []}
        self.outcomes: dict = {}
        self.programs = 0
        self.cases = 0
        self.mismatched_cases = 0
        self.unmodelled_cases = 0  # the translation claims nothing there

    def saw(self, kind: str) -> None:
        self.outcomes[kind] = self.outcomes.get(kind, 0) + 1

    def merge(self, other: "Tally") -> None:
        for k in self.problems:
            self.problems[k].extend(other.problems[k])
        for k, v in other.outcomes.items():
            self.outcomes[k] = self.outcomes.get(k, 0) + v
        self.programs += other.programs
        self.cases += other.cases
        self.mismatched_cases += other.mismatched_cases
        self.unmodelled_cases += other.unmodelled_cases


def outcome_kind(result) -> str:
    """The class name of a returned value, or of the exception raised."""
    kind, value = result
    return value.__name__ if kind == "raised" else type(value).__name__


def assert_none(tally: Tally, kinds=ALL_PROBLEMS) -> None:
    """No program of the batch had a problem of these kinds, and every case
    was a claim (the generators keep away from what is not modelled)."""
    found = [p for k in kinds for p in tally.problems[k]]
    what = " or ".join({MISMATCH: "disagree with CPython", REFUSED: "are refused",
                        CRASHED: "crash the translator"}[k] for k in kinds)
    assert not found, (f"{len(found)} of {tally.programs} programs {what}\n"
                       + "\n\n".join(found[:4]))
    assert tally.unmodelled_cases == 0, f"{tally.unmodelled_cases} cases not modelled"


# ---------------------------------------------------------------- soundness of abstractions

# Resource units for one "does the behaviour admit this run?" query.
ADMIT_RLIMIT = 20_000_000


def admits(behaviour: ir.Behaviour, fn: Callable, args: Sequence[Any],
           evaluator: Optional[Evaluator] = None) -> Optional[str]:
    """None if ``behaviour`` admits what CPython does on ``fn(*args)``, else
    what went wrong.

    A behaviour with untranslated parts says what may happen, not what will:
    its opaque values (``ir.opaque``) are free. It admits a run when some
    choice of them makes an outcome hold that matches the run -- the same
    exception class, or an equal returned value (floats bit for bit, any NaN
    for a NaN) with every list and object argument left as the run left it,
    object for object -- or makes an unmodelled outcome hold, which claims
    nothing (except that an untranslated call's outcome claims a raise, of
    any class). The parameters are fixed to the inputs and the solver decides.
    A run that is not admitted is a wrong abstraction: a proof could then
    hold for the behaviour and fail for the function."""
    ev = evaluator or Evaluator(behaviour)
    copied = copy.deepcopy(tuple(args))
    real = run_python(fn, distinct_objects(copied))
    subst = ev.param_substitution(args)
    numbers = {}  # id of an argument's object (after the run) -> its reference number
    for p, original, after in zip(behaviour.params, _numbered(behaviour.params, args), copied):
        if p.sort == ir.REF:
            numbers[id(after)] = original
    ctx = ev.ctx
    alternatives = []
    for i, o in enumerate(behaviour.outcomes):
        guard = ev.guards[i]
        if o.unmodelled.endswith(MAY_RAISE):
            if real[0] == "raised":  # the call raised: any exception
                alternatives.append(guard)
        elif o.unmodelled:
            alternatives.append(guard)
        elif real[0] == "raised":
            if not o.returns and o.exception is real[1]:
                alternatives.append(guard)
        elif o.returns:
            arrays = ev.outcome_arrays(i)
            made: dict = {}
            parts = [guard, _matches(ev, ev.values[i], real[1], arrays, numbers, made)]
            for p, after in zip(behaviour.params, copied):
                if p.sort == ir.REF:
                    ref = ev.lower(ir.initial(p).ref)
                    parts.append(_matches(ev, ("ref", (p.kind, ref)), after, arrays,
                                          numbers, made))
            alternatives.append(z3.And(parts))
    # One query per matching outcome: small queries, which the solver's
    # string procedure decides where one large disjunction can stall it.
    definitions = [z3.substitute(d, *subst) if subst else d for d in ev.lower.definitions]
    undecided = False
    for claim in alternatives:
        solver = z3.Solver(ctx=ctx)
        solver.set("rlimit", ADMIT_RLIMIT)
        solver.add(z3.substitute(claim, *subst) if subst else claim)
        solver.add(*definitions)
        status = solver.check()
        if status == z3.sat:
            return None
        undecided = undecided or status == z3.unknown
    what = "undecided by the solver" if undecided else "not admitted"
    return f"{fn.__name__}{tuple(args)!r}: CPython {real}, {what} by\n{behaviour!r}"


def _numbered(params, args) -> List[Optional[int]]:
    """The reference number of each list or object argument, as
    ``Evaluator._heap_substitution`` numbers them (one per object)."""
    numbers: dict = {}
    out = []
    for p, a in zip(params, args):
        if p.sort == ir.REF:
            numbers.setdefault(id(a), len(numbers))
            out.append(numbers[id(a)])
        else:
            out.append(None)
    return out


def _matches(ev: Evaluator, lowered, value: Any, arrays: dict, numbers: dict, made: dict):
    """A z3 condition: the lowered outcome value is ``value``."""
    ctx = ev.ctx
    false = z3.BoolVal(False, ctx)
    kind, payload = lowered
    if kind == "none":
        return z3.BoolVal(value is None, ctx)
    if kind == "opt":
        none, inner = payload
        if value is None:
            return none
        return z3.And(z3.Not(none), _matches(ev, inner, value, arrays, numbers, made))
    if kind == "tuple":
        if type(value) is not tuple or len(value) != len(payload):
            return false
        return z3.And([z3.BoolVal(True, ctx)] + [
            _matches(ev, item, v, arrays, numbers, made) for item, v in zip(payload, value)])
    if kind == "ref":
        ref_kind, ref = payload
        if id(value) in made:  # one object met twice: one reference
            return ref == made[id(value)]
        made[id(value)] = ref
        if id(value) in numbers:
            same = ref == z3.IntVal(numbers[id(value)], ctx)
        else:  # a new object is none of the arguments
            same = z3.And([z3.BoolVal(True, ctx)] + [ref != z3.IntVal(n, ctx)
                                                      for n in set(numbers.values())])
        if ref_kind.startswith("list:"):
            if type(value) is not list:
                return false
            elem = heap.elem_sort(ref_kind)
            # A bool stored in a list[int] is modelled as the int it equals
            # (the same allowance as ``same``).
            items = [int(x) if elem == ir.INT and type(x) is bool else x for x in value]
            try:
                contents = ev._seq_constant(items, elem)
            except TypeError:
                return false
            return z3.And(same, z3.Select(_array(ev, arrays, ref_kind), ref) == contents)
        info = heap.KINDS[ref_kind]
        if type(value) is not info.cls:
            return false
        parts = [same]
        for attr, sort in info.fields.items():
            key = heap.field_key(ref_kind, attr)
            parts.append(_matches(ev, (sort, z3.Select(_array(ev, arrays, key), ref)),
                                  getattr(value, attr), arrays, numbers, made))
        return z3.And(parts)
    term = payload
    if kind == ir.FLOAT:
        return term == fpmath.const(value, ctx) if type(value) is float else false
    if kind == ir.STR:
        return term == strmath.const(value, ctx) if type(value) is str else false
    if kind == ir.BOOL:
        return term == z3.BoolVal(value, ctx) if type(value) is bool else false
    if type(value) not in (int, bool):
        return false
    return term == z3.IntVal(int(value), ctx)


def _array(ev: Evaluator, arrays: dict, key: str):
    """A field after an outcome: written by it, else as before the call (a
    field no argument has is a free array: any objects of that kind)."""
    return arrays[key] if key in arrays else ev.lower(heap.initial_field(key))


def check_sound(source: str, inputs: Sequence[Tuple], name: str = "f") -> Translated:
    """Translate ``source`` and assert that its behaviour admits what CPython
    does on every input tuple."""
    t = translated(source, name)
    bad = [m for m in (admits(t.behaviour, t.fn, args, t.evaluator) for args in inputs)
           if m is not None]
    assert not bad, "\n\n".join(bad[:3]) + f"\n{len(bad)} of {len(inputs)} runs not admitted"
    return t
