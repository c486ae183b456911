"""What the tester draws: a strategy per parameter, from its type hint,
narrowed by the simple bounds ``assuming`` states, and mixed with boundary
values taken from the constants in the spec and the body.

Bounds are read, not guessed: a conjunct of ``assuming`` like ``0 <= qty``,
``qty < LIMIT``, ``len(name) > 0``, ``code in ('A', 'B')``, ``x is not
None`` or ``not math.isnan(x)`` narrows the strategy of that parameter, so the
tester does not waste draws that ``assuming`` would throw away. Every drawn
input is still checked against the whole of ``assuming`` at run time; a
conjunct not understood here only costs draws.
"""

from __future__ import annotations

import ast
import dataclasses
import inspect
import math
import typing
from dataclasses import dataclass, field
from typing import Any, Dict, List, Optional, Tuple

from astroid import nodes
from hypothesis import strategies as st

from refines.source import Obligation, SpecPart

# At most this many boundary values per parameter, nearest the constants first.
MAX_BOUNDARY = 24
# Lists get boundary lengths at int constants up to this one.
MAX_LIST_LENGTH = 64
# Floats at the edges of IEEE 754 binary64 (IEEE 754-2019, 3.3 and 3.4): the
# smallest subnormal, the largest subnormal, the smallest normal, the largest
# finite value, signed zeros, infinities and NaN.
FLOAT_EDGES = (0.0, -0.0, 5e-324, -5e-324, 2.225073858507201e-308, 2.2250738585072014e-308,
               -2.2250738585072014e-308, 1.7976931348623157e308, -1.7976931348623157e308,
               math.inf, -math.inf, math.nan, 1.0, -1.0, 0.5)
# Strings that often break text handling (common practice): the empty string,
# blanks, a NUL, characters whose case mapping changes the length ("ß"
# uppercases to "SS", "İ" lowercases to two code points: Unicode
# SpecialCasing.txt), a combining mark and a character beyond the BMP.
STR_EDGES = ("", " ", "a", "A", "0", "\x00", "ß", "İ", "e\u0301", "\U0001F9D7")


class CannotDraw(Exception):
    """No values can be drawn for a parameter; the message says which and why."""


@dataclass
class Bounds:
    """What ``assuming`` says about one parameter, in the simplest terms."""

    lo: Any = None
    hi: Any = None
    lo_strict: bool = False
    hi_strict: bool = False
    min_len: Optional[int] = None
    max_len: Optional[int] = None
    not_none: bool = False
    not_nan: bool = False
    finite: bool = False
    choices: Optional[tuple] = None

    def admits(self, value: Any) -> bool:
        """Whether a boundary value is inside these bounds (None: not applicable)."""
        if value is None:
            return not self.not_none
        if self.choices is not None and value not in self.choices:
            return False
        if isinstance(value, float) and value != value:
            return not (self.not_nan or self.finite or self.lo is not None or self.hi is not None)
        if isinstance(value, float) and math.isinf(value) and self.finite:
            return False
        try:
            if self.lo is not None and (value < self.lo or (self.lo_strict and value == self.lo)):
                return False
            if self.hi is not None and (value > self.hi or (self.hi_strict and value == self.hi)):
                return False
        except TypeError:
            pass
        if isinstance(value, (str, list)):
            if self.min_len is not None and len(value) < self.min_len:
                return False
            if self.max_len is not None and len(value) > self.max_len:
                return False
        return True


@dataclass
class Plan:
    """Everything the tester draws from."""

    strategies: Dict[str, st.SearchStrategy]
    boundary: Dict[str, List[Any]]  # per parameter, in the order they are tried
    shares: Dict[str, str] = field(default_factory=dict)  # param -> earlier param it may alias


def plan(ob: Obligation) -> Plan:
    """The strategies and boundary values for ``ob``'s parameters."""
    limits = bounds(ob.assuming) if ob.assuming is not None else {}
    consts = constants(ob)
    defaults = _defaults(ob)
    strategies, boundary = {}, {}
    for name, hint in zip(ob.names, ob.hints):
        if hint is None and name in defaults:
            # No hint, but a default: the tester keeps it (bisect_left's lo=0).
            strategies[name], boundary[name] = st.just(defaults[name]), [defaults[name]]
            continue
        if hint is None:
            raise CannotDraw(f"parameter `{name}` has no type hint to draw values from")
        b = limits.get(name, Bounds())
        strategy = strategy_for(hint, b, name, consts)
        edges = [v for v in boundary_values(hint, consts) if _admits(b, v)][:MAX_BOUNDARY]
        boundary[name] = edges
        strategies[name] = st.one_of(st.sampled_from(edges), strategy) if edges else strategy
    shares = {}
    for i, (name, hint) in enumerate(zip(ob.names, ob.hints)):
        if _mutable(hint):
            earlier = [n for n, h in zip(ob.names[:i], ob.hints[:i]) if h == hint]
            if earlier:
                shares[name] = earlier[0]  # one object passed twice: aliasing
    return Plan(strategies, boundary, shares)


def _defaults(ob: Obligation) -> Dict[str, Any]:
    try:
        params = inspect.signature(ob.fn).parameters
    except (TypeError, ValueError):
        return {}
    return {n: p.default for n, p in params.items() if p.default is not inspect.Parameter.empty}


def _admits(b: Bounds, value: Any) -> bool:
    try:
        return b.admits(value)
    except Exception:  # noqa: BLE001 -- an odd value: let the run-time check decide
        return True


def _mutable(hint: Any) -> bool:
    origin = typing.get_origin(hint) or hint
    if origin in (list, dict, set, bytearray):
        return True
    return isinstance(hint, type) and hint.__module__ not in ("builtins", "typing") and not (
        dataclasses.is_dataclass(hint) and hint.__dataclass_params__.frozen)


# ---------------------------------------------------------------- strategies


def strategy_for(hint: Any, b: Bounds, name: str,
                 consts: Optional["Constants"] = None) -> st.SearchStrategy:
    """A strategy for values of ``hint`` within ``b``; the items of a list and
    the attributes of an object mix in the boundary values of ``consts``."""
    if hint is typing.Any or hint is object:
        raise CannotDraw(f"parameter `{name}` is hinted `{_text(hint)}`, which says nothing "
                         "about the values to draw")
    if b.choices is not None:
        return st.sampled_from(b.choices)
    origin, args = typing.get_origin(hint), typing.get_args(hint)
    if _is_optional(hint):
        inner = strategy_for(next(a for a in args if a is not type(None)), b, name, consts)
        return inner if b.not_none else st.one_of(st.none(), inner)
    if hint is bool:
        return st.booleans()
    if hint is int:
        lo = None if b.lo is None else _int_edge(b.lo, up=True, strict=b.lo_strict)
        hi = None if b.hi is None else _int_edge(b.hi, up=False, strict=b.hi_strict)
        if lo is not None and hi is not None and lo > hi:
            raise CannotDraw(f"no int `{name}` satisfies the bounds in assuming")
        return st.integers(min_value=lo, max_value=hi)
    if hint is float:
        bounded = b.lo is not None or b.hi is not None
        return st.floats(
            min_value=None if b.lo is None else float(b.lo),
            max_value=None if b.hi is None else float(b.hi),
            exclude_min=b.lo is not None and b.lo_strict,
            exclude_max=b.hi is not None and b.hi_strict,
            allow_nan=not (bounded or b.not_nan or b.finite),
            allow_infinity=not (b.finite or (b.lo is not None and b.hi is not None)))
    if hint is str:
        return st.text(min_size=b.min_len or 0, max_size=b.max_len)
    if origin in (list, typing.List) and len(args) == 1:
        return st.lists(_part(args[0], f"{name}[...]", consts), min_size=b.min_len or 0,
                        max_size=b.max_len)
    if isinstance(hint, type) and hint.__module__ not in ("builtins", "typing") \
            and _attributes_only(hint):
        return _objects(hint, name, consts)
    if dataclasses.is_dataclass(hint) and isinstance(hint, type):
        try:  # its __init__, with the fields' boundary values mixed in
            hints = _annotations(hint)
            return st.builds(hint, **{f.name: _part(hints[f.name], f"{name}.{f.name}", consts)
                                      for f in dataclasses.fields(hint)
                                      if f.init and f.name in hints})
        except CannotDraw:
            pass
    try:
        strategy = st.from_type(hint)
        strategy.validate()
        return strategy
    except Exception as exc:  # noqa: BLE001 -- hypothesis says why in its own words
        raise CannotDraw(f"no values can be drawn for parameter `{name}` of type "
                         f"`{_text(hint)}` ({type(exc).__name__}: {exc})") from None


def _int_edge(value: Any, up: bool, strict: bool) -> int:
    """The least (``up``) or greatest int within a bound, which may be a float."""
    if isinstance(value, float) and not math.isfinite(value):
        raise CannotDraw("an int bounded by an infinity or NaN")
    if up:
        return int(math.floor(value) + 1 if strict else math.ceil(value))
    return int(math.ceil(value) - 1 if strict else math.floor(value))


def _is_optional(hint: Any) -> bool:
    import types

    origin = typing.get_origin(hint)
    args = typing.get_args(hint)
    return (origin is typing.Union or origin is types.UnionType) and type(None) in args \
        and len(args) == 2


def _attributes_only(cls: type) -> bool:
    """A class whose state is its annotated attributes, set by nothing the
    tester can call with drawn arguments: no dataclass, no own ``__init__``."""
    if dataclasses.is_dataclass(cls):
        return False
    return cls.__init__ is object.__init__ and bool(_annotations(cls))


def _annotations(cls: type) -> dict:
    try:
        hints = typing.get_type_hints(cls)
    except Exception:  # noqa: BLE001
        hints = dict(getattr(cls, "__annotations__", {}))
    return {k: v for k, v in hints.items() if typing.get_origin(v) is not typing.ClassVar}


def _part(hint: Any, name: str, consts: Optional["Constants"]) -> st.SearchStrategy:
    """Values for an item or attribute: drawn, or a boundary value."""
    strategy = strategy_for(hint, Bounds(), name, consts)
    edges = boundary_values(hint, consts)[:MAX_BOUNDARY] if consts is not None else []
    return st.one_of(st.sampled_from(edges), strategy) if edges else strategy


def _objects(cls: type, name: str, consts: Optional["Constants"]) -> st.SearchStrategy:
    """Instances made as the prover considers them: the annotated attributes
    set directly, without ``__init__``."""
    fields = {attr: _part(hint, f"{name}.{attr}", consts)
              for attr, hint in _annotations(cls).items()}

    def make(values: dict):
        obj = cls.__new__(cls)
        for attr, value in values.items():
            object.__setattr__(obj, attr, value)
        return obj

    return st.fixed_dictionaries(fields).map(make)


def _text(hint: Any) -> str:
    return getattr(hint, "__name__", None) or str(hint)


# ---------------------------------------------------------------- bounds


def bounds(part: SpecPart) -> Dict[str, Bounds]:
    """The bounds each conjunct of ``assuming`` puts on a single parameter."""
    out: Dict[str, Bounds] = {}
    for conjunct in _conjuncts(part.body):
        try:
            _read_conjunct(conjunct, part, out)
        except Exception:  # noqa: BLE001 -- not understood: the run-time check decides
            continue
    return out


def _conjuncts(node: nodes.NodeNG) -> List[nodes.NodeNG]:
    if isinstance(node, nodes.BoolOp) and node.op == "and":
        return [c for v in node.values for c in _conjuncts(v)]
    return [node]


_FLIP = {"<": ">", "<=": ">=", ">": "<", ">=": "<=", "==": "==", "!=": "!="}


def _read_conjunct(node: nodes.NodeNG, part: SpecPart, out: Dict[str, Bounds]) -> None:
    params = set(part.params)
    if isinstance(node, nodes.UnaryOp) and node.op == "not":
        target = _math_call(node.operand, "isnan", params, part)
        if target:
            out.setdefault(target, Bounds()).not_nan = True
        return
    target = _math_call(node, "isfinite", params, part)
    if target:
        out.setdefault(target, Bounds()).finite = True
        return
    if not isinstance(node, nodes.Compare):
        return
    left = node.left
    for op, right in node.ops:
        _read_link(left, op, right, part, params, out)
        left = right


def _read_link(left, op, right, part, params, out) -> None:
    if op in ("is not", "is") and isinstance(right, nodes.Const) and right.value is None:
        if op == "is not" and isinstance(left, nodes.Name) and left.name in params:
            out.setdefault(left.name, Bounds()).not_none = True
        return
    if op == "in" and isinstance(left, nodes.Name) and left.name in params:
        values = _constant(right, part, params)
        if isinstance(values, (tuple, list, set, frozenset)) and values:
            out.setdefault(left.name, Bounds()).choices = tuple(sorted(values, key=repr))
        return
    if op not in _FLIP:
        return
    for subject, other, o in ((left, right, op), (right, left, _FLIP[op])):
        name, is_len = _subject(subject, params)
        if name is None:
            continue
        value = _constant(other, part, params)
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            return
        b = out.setdefault(name, Bounds())
        if is_len:
            _len_bound(b, o, value)
        else:
            _value_bound(b, o, value)
        return


def _subject(node, params) -> Tuple[Optional[str], bool]:
    """The parameter a comparison side is about: ``x`` or ``len(x)``."""
    if isinstance(node, nodes.Name) and node.name in params:
        return node.name, False
    if (isinstance(node, nodes.Call) and isinstance(node.func, nodes.Name)
            and node.func.name == "len" and len(node.args) == 1
            and isinstance(node.args[0], nodes.Name) and node.args[0].name in params):
        return node.args[0].name, True
    return None, False


def _value_bound(b: Bounds, op: str, value) -> None:
    if value != value:
        return
    if op in (">", ">=") and (b.lo is None or value > b.lo or (value == b.lo and op == ">")):
        b.lo, b.lo_strict = value, op == ">"
    elif op in ("<", "<=") and (b.hi is None or value < b.hi or (value == b.hi and op == "<")):
        b.hi, b.hi_strict = value, op == "<"
    elif op == "==":
        b.choices = (value,)


def _len_bound(b: Bounds, op: str, value) -> None:
    n = int(math.floor(value)) if isinstance(value, float) else value
    if op == ">":
        b.min_len = max(b.min_len or 0, n + 1)
    elif op == ">=":
        b.min_len = max(b.min_len or 0, math.ceil(value))
    elif op == "<":
        b.max_len = min(b.max_len if b.max_len is not None else n, math.ceil(value) - 1)
    elif op == "<=":
        b.max_len = min(b.max_len if b.max_len is not None else n, n)
    elif op == "==" and value == int(value):
        b.min_len = b.max_len = int(value)
    if b.min_len is not None and b.min_len < 0:
        b.min_len = 0


def _math_call(node, fname: str, params, part: SpecPart) -> Optional[str]:
    """``x`` for ``math.<fname>(x)`` (or ``<fname>(x)`` imported from math)."""
    if not (isinstance(node, nodes.Call) and len(node.args) == 1
            and isinstance(node.args[0], nodes.Name) and node.args[0].name in params):
        return None
    func = node.func
    fn = None
    if isinstance(func, nodes.Attribute) and isinstance(func.expr, nodes.Name):
        fn = getattr(part.globals.get(func.expr.name), func.attrname, None)
    elif isinstance(func, nodes.Name):
        fn = part.globals.get(func.name)
    return node.args[0].name if fn is getattr(math, fname) else None


def _constant(node, part: SpecPart, params) -> Any:
    """The value of an expression that mentions no parameter, evaluated in the
    spec's module (``LIMIT``, ``2 * LIMIT``, ``('A', 'B')``); raises otherwise."""
    for n in node.nodes_of_class(nodes.Name):
        if n.name in params:
            raise ValueError("mentions a parameter")
    for n in node.nodes_of_class(nodes.Call):
        raise ValueError("calls are not evaluated while reading bounds")
    return eval(compile(ast.Expression(ast.parse(node.as_string(), mode="eval").body),
                        "<bound>", "eval"), dict(part.globals))  # noqa: S307


# ---------------------------------------------------------------- boundary values


@dataclass
class Constants:
    numbers: List[Any] = field(default_factory=list)  # ints and floats, in order of appearance
    texts: List[str] = field(default_factory=list)


def constants(ob: Obligation) -> Constants:
    """The int, float and str constants of the spec and the body (module
    constants by their value), in order of appearance, without repeats."""
    out = Constants()
    seen: set = set()

    def add(value):
        key = (type(value), repr(value))
        if key in seen or isinstance(value, bool):
            return
        seen.add(key)
        if isinstance(value, (int, float)):
            out.numbers.append(value)
        elif isinstance(value, str) and len(value) <= 64:
            out.texts.append(value)

    parts = [p for p in (ob.relation, ob.assuming) if p is not None]
    parts += [p for _, p in ob.raises]
    for part in parts:
        for value in _node_constants(part.body, part.globals, set(part.params)):
            add(value)
    body = _body(ob)
    if body is not None:
        fn = inspect.unwrap(ob.fn)
        for value in _node_constants(body, getattr(fn, "__globals__", {}), set(ob.names)):
            add(value)
    return out


def _body(ob: Obligation) -> Optional[nodes.NodeNG]:
    """The function's ``def``, read from its source file (parsed once, as for
    the proof) when it has one; a builtin has none."""
    if ob.fn_node is not None:
        return ob.fn_node
    from refines.source import find_function

    fn = inspect.unwrap(ob.fn)
    try:
        return find_function(fn, inspect.getsourcefile(fn))[0]
    except Exception:  # noqa: BLE001 -- no source to read constants from
        return None


def _node_constants(node: nodes.NodeNG, globals_: dict, params: set) -> List[Any]:
    """The constants written under ``node``: literals, module-level names by
    their value, and constant expressions (`-1`, `2 * WEEK_DAYS`) worked out."""
    out = []
    for n in node.nodes_of_class((nodes.Const, nodes.Name, nodes.BinOp, nodes.UnaryOp)):
        if isinstance(n, nodes.Const):
            out.append(n.value)
        elif isinstance(n, nodes.Name):
            if n.name not in params and n.name in globals_:
                out.append(globals_[n.name])
        elif _foldable(n, globals_, params):
            try:
                out.append(eval(compile(n.as_string(), "<constant>", "eval"),  # noqa: S307
                                dict(globals_)))
            except Exception:  # noqa: BLE001 -- e.g. a division by zero: not a constant
                pass
    return out


def _foldable(node: nodes.NodeNG, globals_: dict, params: set) -> bool:
    """Only numbers, module-level numbers and arithmetic: nothing that runs code."""
    for n in [node, *node.nodes_of_class(nodes.NodeNG)]:
        if isinstance(n, nodes.Name):
            value = globals_.get(n.name)
            if n.name in params or not isinstance(value, (int, float)) or isinstance(value, bool):
                return False
        elif isinstance(n, nodes.Const):
            if not isinstance(n.value, (int, float)) or isinstance(n.value, bool):
                return False
        elif isinstance(n, nodes.BinOp):
            if n.op == "**":
                return False  # 10 ** 10 ** 10 would take forever
        elif not isinstance(n, nodes.UnaryOp):
            return False
    return True


def boundary_values(hint: Any, consts: Constants) -> List[Any]:
    """Values at the edges: each constant and its neighbours (±1 for ints,
    the adjacent doubles for floats), the edges of the type, for strs the
    constants, their neighbours in length, and known awkward characters."""
    if _is_optional(hint):
        inner = next(a for a in typing.get_args(hint) if a is not type(None))
        return [None] + boundary_values(inner, consts)
    if hint is bool:
        return [False, True]
    if hint is int:
        out: List[Any] = []
        for c in consts.numbers:
            if isinstance(c, float):
                if not math.isfinite(c):
                    continue
                c = math.floor(c)
            out += [c, c - 1, c + 1]
        out += [0, 1, -1]
        return _unique(out)
    if hint is float:
        out = []
        for c in consts.numbers:
            try:
                c = float(c)
            except OverflowError:
                continue
            out += [c, math.nextafter(c, -math.inf), math.nextafter(c, math.inf)]
        return _unique(out + list(FLOAT_EDGES))
    if hint is str:
        out = []
        for c in consts.texts:
            out += [c, c[:-1], c + c[-1:]] if c else [c]
        return _unique(out + list(STR_EDGES))
    origin, args = typing.get_origin(hint), typing.get_args(hint)
    if origin in (list, typing.List) and len(args) == 1:
        items = boundary_values(args[0], consts)[:4]
        out = [[]] + [[v] for v in items] + ([[items[0], items[0]]] if items else [])
        # Lengths at the int constants: a limit of 6 items gets 5, 6 and 7.
        plain = boundary_values(args[0], Constants())[:1] or items[:1]
        for c in consts.numbers:
            if plain and isinstance(c, int) and 2 < c <= MAX_LIST_LENGTH:
                out += [plain * (c - 1), plain * c, plain * (c + 1)]
        return _unique(out)
    return []


def _unique(values: List[Any]) -> List[Any]:
    out, seen = [], set()
    for v in values:
        key = (type(v), repr(v))
        if key not in seen:
            seen.add(key)
            out.append(v)
    return out

