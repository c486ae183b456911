"""The intermediate form: before/after relations as small frozen terms.

A term is an expression over the pre-state (the parameters) with Python's
meaning: ``Arith('//', a, b)`` is Python's floor division, not the solver's.
Terms form a DAG (translation shares sub-terms instead of copying them), so
code that walks them memoises by ``id`` rather than hashing structurally.

``repr`` prints a term as the Python expression it stands for, so a
behaviour reads like the mathematics::

    x > 0  ->  result = x + 1
    not (x > 0)  ->  raises ValueError

The smart constructors (``and_``, ``or_``, ``not_``, ``ite``, ``arith``,
``cmp``) fold constants and flatten, which keeps terms small; they never
change the meaning of a term.
"""

from __future__ import annotations

import itertools
import weakref
from dataclasses import dataclass
from typing import Optional, Tuple, Union

INT = "int"
BOOL = "bool"
FLOAT = "float"  # IEEE 754 binary64, as CPython computes it
STR = "str"  # a sequence of Unicode code points
# The heap (lists and objects): a reference is an int-like identity; the
# contents of lists of a kind, or one attribute of a class, form an array from
# references to values. A list's contents are a sequence "seq:<element sort>".
REF = "ref"
REF_SUFFIX = "!ref"  # the reference of a parameter that is a list or an object
HEAP_PREFIX = "heap!"  # the pre-state array of one heap field
# A fresh unconstrained value: what an untranslated part of a body gives (a
# call to a function that is not modelled, a loop's variables). See ``opaque``.
OPAQUE_PREFIX = "opaque!"


def seq_sort(elem: str) -> str:
    return "seq:" + elem


def arr_sort(value: str) -> str:
    return "arr:" + value

ARITH_OPS = ("+", "-", "*", "//", "%")
CMP_OPS = ("<", "<=", ">", ">=", "==", "!=")
FLIPPED = {"<": ">", "<=": ">=", ">": "<", ">=": "<=", "==": "==", "!=": "!="}
NEGATED = {"<": ">=", "<=": ">", ">": "<=", ">=": "<", "==": "!=", "!=": "=="}

# Binding strength, for printing with the fewest parentheses Python needs.
_PREC = {"ite": 0, "or": 1, "and": 2, "not": 3, "cmp": 4, "+": 5, "-": 5,
         "*": 6, "/": 6, "//": 6, "%": 6, "neg": 7, "atom": 9}
# Ops printed as an infix expression rather than a call: their strength.
_OP_PREC = {"int_truediv": 6, "float_overflows": 4,
            "int_truediv_overflows": 4, "contains": 4, "repeat": 6,
            "seq_contains": 4}


class Term:
    """Base of all terms. ``sort`` is ``INT``, ``BOOL``, ``FLOAT`` or ``STR``."""

    sort: str
    __slots__ = ()

    def __repr__(self) -> str:
        return render(self)


@dataclass(frozen=True, repr=False, eq=False)
class Var(Term):
    name: str
    sort: str
    optional: bool = False  # a parameter hinted Optional[...]: see ``initial``
    kind: str = ""  # for a list or object parameter (sort REF): its kind


@dataclass(frozen=True, repr=False, eq=False)
class Const(Term):
    value: Union[int, bool, float, str]
    sort: str


@dataclass(frozen=True, repr=False, eq=False)
class Arith(Term):
    op: str
    left: Term
    right: Term
    sort: str = INT


@dataclass(frozen=True, repr=False, eq=False)
class Neg(Term):
    arg: Term
    sort: str = INT


@dataclass(frozen=True, repr=False, eq=False)
class ToInt(Term):
    """``int(b)`` for a bool ``b``: Python's bool is an int (True == 1)."""

    arg: Term
    sort: str = INT


@dataclass(frozen=True, repr=False, eq=False)
class Cmp(Term):
    op: str
    left: Term
    right: Term
    sort: str = BOOL


@dataclass(frozen=True, repr=False, eq=False)
class Not(Term):
    arg: Term
    sort: str = BOOL


@dataclass(frozen=True, repr=False, eq=False)
class And(Term):
    args: Tuple[Term, ...]
    sort: str = BOOL


@dataclass(frozen=True, repr=False, eq=False)
class Or(Term):
    args: Tuple[Term, ...]
    sort: str = BOOL


@dataclass(frozen=True, repr=False, eq=False)
class Ite(Term):
    cond: Term
    then: Term
    orelse: Term

    @property
    def sort(self) -> str:  # type: ignore[override]
        return self.then.sort


@dataclass(frozen=True, repr=False, eq=False)
class Op(Term):
    """A named operation with Python's meaning, e.g. ``Op("isnan", (x,), BOOL)``.

    ``lower.OPS`` says how each name is lowered and ``OP_TEMPLATES`` how it
    prints; the names are the operations Python defines on floats (and the
    conditions under which they raise) that the plain nodes do not cover.
    """

    name: str
    args: Tuple[Term, ...]
    sort: str


# How each Op prints as Python; ``2 ** 1024 - 2 ** 970`` is the least integer
# magnitude that float() rounds beyond the largest float (OverflowError).
OP_TEMPLATES = {
    "float": "float({0})",
    "float_overflows": "abs({0}) >= 2 ** 1024 - 2 ** 970",
    "int_truediv": "{0} / {1}",
    "int_truediv_overflows": "abs({0}) >= (2 ** 1024 - 2 ** 970) * abs({1})",
    "fabs": "abs({0})",
    "sqrt": "math.sqrt({0})",
    "copysign": "math.copysign({0}, {1})",
    "isnan": "math.isnan({0})",
    "isinf": "math.isinf({0})",
    "isfinite": "math.isfinite({0})",
    "trunc": "int({0})",
    "floor": "math.floor({0})",
    "ceil": "math.ceil({0})",
    # str (the methods print as methods: see _METHODS)
    "len": "len({0})",
    "getitem": "{0}[{1}]",
    "slice": "{0}[{1}:{2}]",
    "slice_from": "{0}[{1}:]",
    "slice_to": "{0}[:{1}]",
    "contains": "{0} in {1}",
    "repeat": "{0} * {1}",
    "str_of_int": "str({0})",
    # lists (sequences) and the heap; `select` of a pre-state field prints
    # as the parameter it belongs to (see _render_select)
    "nth": "{0}[{1}]",
    "seq_contains": "{0} in {1}",
    "seq_unit": "[{0}]",
    "seq_update": "{0}[:{1}] + [{2}] + {0}[{1} + 1:]",
    "select": "{0}[{1}]",
    "store": "{0}[{1}: {2}]",
}
# Ops printed as ``subject.method(args)``: Python's str methods.
_METHODS = {"find", "rfind", "startswith", "endswith", "replace"}
for _name in _METHODS:
    OP_TEMPLATES[_name] = "{0}." + _name + "(...)"
# Ops whose first argument is a subject that binds tightest (``(a + b)[0]``).
_SUBJECT_OPS = _METHODS | {"getitem", "slice", "slice_from", "slice_to", "nth"}


def op(name: str, *args: Term, sort: str) -> Term:
    return Op(name, tuple(args), sort)


TRUE = Const(True, BOOL)
FALSE = Const(False, BOOL)


def const(value: Union[int, bool, float, str]) -> Const:
    if isinstance(value, bool):
        return TRUE if value else FALSE
    if isinstance(value, float):
        return Const(value, FLOAT)
    if isinstance(value, str):
        return Const(value, STR)
    return Const(value, INT)


def is_true(t: Term) -> bool:
    return isinstance(t, Const) and t.value is True


def is_false(t: Term) -> bool:
    return isinstance(t, Const) and t.value is False


def as_int(t: Term) -> Term:
    """View a term as an int (Python's bool is an int subclass)."""
    if t.sort == INT:
        return t
    if isinstance(t, Const):
        return const(int(t.value))
    return ToInt(t)


# ---------------------------------------------------------------- constructors


def and_(*args: Term) -> Term:
    return _junction(args, And, FALSE, TRUE)


def or_(*args: Term) -> Term:
    return _junction(args, Or, TRUE, FALSE)


def _junction(args, kind, absorbing: Const, neutral: Const) -> Term:
    flat: list = []
    seen: set = set()
    for a in args:
        if a is neutral or (isinstance(a, Const) and a.value == neutral.value):
            continue
        if isinstance(a, Const):
            return absorbing
        for b in (a.args if isinstance(a, kind) else (a,)):
            if id(b) not in seen:  # the same term twice adds nothing
                seen.add(id(b))
                flat.append(b)
    if not flat:
        return neutral
    if len(flat) == 1:
        return flat[0]
    return kind(tuple(flat))


def conj(a: Term, b: Term) -> Term:
    """``a and b`` without flattening ``a``: a path condition narrowed step by
    step stays a shared chain, so n narrowings cost O(n), not O(n^2)."""
    if is_true(a):
        return b
    if is_true(b):
        return a
    if is_false(a) or is_false(b):
        return FALSE
    return And((a, b))


def not_(a: Term) -> Term:
    if isinstance(a, Const):
        return const(not a.value)
    if isinstance(a, Not):
        return a.arg
    return Not(a)


def implies(a: Term, b: Term) -> Term:
    return or_(not_(a), b)


def ite(cond: Term, then: Term, orelse: Term) -> Term:
    if is_true(cond) or then is orelse:
        return then
    if is_false(cond):
        return orelse
    if then.sort != orelse.sort:
        if {then.sort, orelse.sort} - {INT, BOOL}:
            raise TypeError(f"an {then.sort} and an {orelse.sort} do not merge into one term")
        # A bool on one side and an int on the other: one int term, with a
        # record of where it holds a bool (str(), `is True` and isinstance
        # tell True from 1).
        where = ite(cond, is_bool(then), is_bool(orelse))
        merged = Ite(cond, as_int(then), as_int(orelse))
        _BOOLNESS[merged] = where
        return merged
    if then.sort == BOOL:
        if is_true(then) and is_false(orelse):
            return cond
        if is_false(then) and is_true(orelse):
            return not_(cond)
    out = Ite(cond, then, orelse)
    if then.sort == INT and (then in _BOOLNESS or orelse in _BOOLNESS):
        _BOOLNESS[out] = ite(cond, is_bool(then), is_bool(orelse))
    return out


_BOOLNESS: "weakref.WeakKeyDictionary" = weakref.WeakKeyDictionary()


def is_bool(t: Term) -> Term:
    """Where the value of ``t`` is a bool object (True or False) rather than
    an int: always for a bool term, where recorded for an int term that
    merges the two, and never otherwise."""
    if t.sort == BOOL:
        return TRUE
    return _BOOLNESS.get(t, FALSE) if isinstance(t, Ite) else FALSE


def arith(op: str, left: Term, right: Term) -> Term:
    if left.sort.startswith("seq:") or right.sort.startswith("seq:"):
        if op != "+" or left.sort != right.sort:
            raise TypeError("list arithmetic is concatenation of two lists of one kind")
        if isinstance(left, Const) and left.value == ():
            return right
        if isinstance(right, Const) and right.value == ():
            return left
        return Arith(op, left, right, left.sort)
    if STR in (left.sort, right.sort):
        # Only concatenation: str * int is the "repeat" op.
        if op != "+" or left.sort != STR or right.sort != STR:
            raise TypeError("str arithmetic is concatenation of two strs")
        if isinstance(left, Const) and isinstance(right, Const):
            return Const(left.value + right.value, STR)
        if isinstance(left, Const) and left.value == "":
            return right
        if isinstance(right, Const) and right.value == "":
            return left
        return Arith(op, left, right, STR)
    if left.sort == FLOAT or right.sort == FLOAT:
        # IEEE arithmetic: no algebraic folding (x + 0.0 is not x for x = -0.0).
        if left.sort != FLOAT or right.sort != FLOAT:
            raise TypeError("float arithmetic needs two float operands")
        if isinstance(left, Const) and isinstance(right, Const) and (
                op in ("+", "-", "*") or right.value != 0):
            # CPython computes these exactly as the model does (IEEE 754 RNE).
            a, b = left.value, right.value
            return Const({"+": lambda: a + b, "-": lambda: a - b, "*": lambda: a * b,
                          "/": lambda: a / b, "//": lambda: a // b,
                          "%": lambda: a % b}[op](), FLOAT)
        return Arith(op, left, right, FLOAT)
    left, right = as_int(left), as_int(right)
    if isinstance(left, Const) and isinstance(right, Const):
        a, b = left.value, right.value
        if op == "+":
            return const(a + b)
        if op == "-":
            return const(a - b)
        if op == "*":
            return const(a * b)
        if b != 0:  # by zero: the caller has already made it a raising outcome
            return const(a // b if op == "//" else a % b)
    if op == "+" and _is_zero(right):
        return left
    if op == "+" and _is_zero(left):
        return right
    if op == "-" and _is_zero(right):
        return left
    if op == "*" and _is_one(right):
        return left
    if op == "*" and _is_one(left):
        return right
    return Arith(op, left, right)


def neg(a: Term) -> Term:
    if a.sort == FLOAT:
        # -2.0 is a constant (CPython folds it too); -(-x) is NOT x: it has x's
        # value but is a new object, which tuple identity can tell apart.
        if isinstance(a, Const):
            return Const(-a.value, FLOAT)
        return Neg(a, FLOAT)
    a = as_int(a)
    if isinstance(a, Const):
        return const(-a.value)
    if isinstance(a, Neg):
        return a.arg
    return Neg(a)


def cmp(op: str, left: Term, right: Term) -> Term:
    if left.sort == REF or right.sort == REF:
        if op not in ("==", "!=") or left.sort != right.sort:
            raise TypeError("references compare by identity only")
        if left is right:
            same = True
        elif _fresh(left) and _fresh(right):
            same = left.value == right.value
        elif (_fresh(left) and _param_ref(right)) or (_fresh(right) and _param_ref(left)):
            same = False  # a new object is none of the parameters
        else:
            return Cmp(op, left, right)
        return const(same == (op == "=="))
    if left is right and left.sort != FLOAT:
        return const(op in ("==", "<=", ">="))  # x == x, except for a NaN
    if left.sort.startswith("seq:"):
        if left.sort != right.sort or op not in ("==", "!="):
            raise TypeError("lists of one kind compare with == and != only")
        return Cmp(op, left, right)
    if STR in (left.sort, right.sort):
        # Strings compare with strings only; the translator settles the rest
        # (== is False, < raises TypeError) before building a comparison.
        if left.sort != right.sort:
            raise TypeError("a str compares with a str")
    elif FLOAT in (left.sort, right.sort):
        # Floats compare with ints exactly (not by converting the int), and a
        # bool is the int 0 or 1; NaN makes every comparison but != false.
        left = left if left.sort == FLOAT else as_int(left)
        right = right if right.sort == FLOAT else as_int(right)
    elif left.sort != right.sort or op not in ("==", "!="):
        left, right = as_int(left), as_int(right)
    if isinstance(left, Const) and isinstance(right, Const):
        a, b = left.value, right.value
        return const({"<": a < b, "<=": a <= b, ">": a > b, ">=": a >= b,
                      "==": a == b, "!=": a != b}[op])
    return Cmp(op, left, right)


def _fresh(t: Term) -> bool:
    """A reference to an object made during the call: a negative constant."""
    return isinstance(t, Const) and t.sort == REF


def _param_ref(t: Term) -> bool:
    """The reference of a parameter. An opaque reference (what an untranslated
    call returned) may be any object, one made during the call included."""
    return isinstance(t, Var) and not t.name.startswith(OPAQUE_PREFIX)


_OPAQUE = itertools.count()


def opaque(sort: str) -> Var:
    """A fresh value about which nothing is known: a new name each call (one
    counter for the process), so two untranslated parts never share one.
    Callers that know something about it (``count`` is not negative) narrow
    the path condition with that fact where they make it."""
    return Var(f"{OPAQUE_PREFIX}{next(_OPAQUE)}", sort)


def is_opaque(t: Term) -> bool:
    return isinstance(t, Var) and t.name.startswith(OPAQUE_PREFIX)


def fresh_ref(n: int) -> Const:
    return Const(-1 - n, REF)


def empty_seq(elem: str) -> Const:
    return Const((), seq_sort(elem))


def select(arr: Term, ref: Term) -> Term:
    """The value of one heap field for one reference. Pushed through writes
    and branches, so that every read ends on a pre-state field: a post-state
    value is then an if-then-else over pre-state reads and written values
    (``ys`` after ``xs.append(1)`` is ``xs + [1] if ys is xs else ys``)."""
    value_sort = arr.sort[len("arr:"):]
    while True:
        if isinstance(arr, Op) and arr.name == "store":
            base, at, value = arr.args
            same = cmp("==", at, ref)
            if is_true(same):
                return value
            if is_false(same):
                arr = base
                continue
            return ite(same, value, select(base, ref))
        if isinstance(arr, Ite):
            return ite(arr.cond, select(arr.then, ref), select(arr.orelse, ref))
        return Op("select", (arr, ref), value_sort)


def store(arr: Term, ref: Term, value: Term) -> Term:
    return Op("store", (arr, ref, value), arr.sort)


def _is_zero(t: Term) -> bool:
    return isinstance(t, Const) and t.value == 0 and t.sort == INT


def _is_one(t: Term) -> bool:
    return isinstance(t, Const) and t.value == 1 and t.sort == INT


# ---------------------------------------------------------------- values

@dataclass(frozen=True, eq=False)
class Tup:
    """A tuple value: a fixed number of values (terms or nested tuples)."""

    items: Tuple["Value", ...]

    def __repr__(self) -> str:
        inner = ", ".join(render_value(v) for v in self.items)
        return f"({inner},)" if len(self.items) == 1 else f"({inner})"


class NoneValue:
    """Python's ``None`` as a value."""

    _instance: Optional["NoneValue"] = None

    def __new__(cls) -> "NoneValue":
        if cls._instance is None:
            cls._instance = super().__new__(cls)
        return cls._instance

    def __repr__(self) -> str:
        return "None"


NONE = NoneValue()

@dataclass(frozen=True, eq=False)
class Opt:
    """A value that is None where ``none`` holds and ``value`` elsewhere (an
    ``Optional[int]`` parameter, or a local assigned None on some paths)."""

    none: Term
    value: Term

    def __repr__(self) -> str:
        return f"None if {render(self.none)} else {render(self.value)}"


@dataclass(frozen=True, eq=False)
class Ref:
    """A list or an object: a reference (sort REF) and its kind, e.g.
    ``list:int`` or ``obj:shop.Account``. What it holds lives on the heap."""

    ref: Term
    kind: str

    def __repr__(self) -> str:
        return f"<{self.kind} {render(self.ref)}>"


Value = Union[Term, Tup, NoneValue, Opt, Ref]


def render_value(v: Value) -> str:
    return repr(v) if not isinstance(v, Term) else render(v)


NONE_SUFFIX = "!none"  # the bool that says an optional parameter is None
_INITIAL: "weakref.WeakKeyDictionary" = weakref.WeakKeyDictionary()


def initial(p: Var) -> Value:
    """The value of parameter ``p`` on entry; for an optional parameter, the
    same ``Opt`` object every time, so identity (``x is x``) is preserved."""
    if not p.optional and p.sort != REF:
        return p
    if p not in _INITIAL:
        if p.sort == REF:
            _INITIAL[p] = Ref(Var(p.name + REF_SUFFIX, REF), p.kind)
        else:
            _INITIAL[p] = Opt(Var(p.name + NONE_SUFFIX, BOOL), Var(p.name, p.sort))
    return _INITIAL[p]


def truth(v: Value) -> Term:
    """Python's truth value of ``v``."""
    if isinstance(v, Opt):
        return and_(not_(v.none), truth(v.value))
    if isinstance(v, Tup):
        return const(bool(v.items))
    if v is NONE:
        return FALSE
    if v.sort == BOOL:
        return v
    if v.sort == FLOAT:
        return cmp("!=", v, const(0.0))  # false only for ±0.0; NaN is true
    if v.sort == STR:
        return cmp(">", str_len(v), const(0))  # only "" is false
    return cmp("!=", v, const(0))


def index_ok(index: Term, n: Term) -> Term:
    """``-n <= index < n``: a sequence index Python accepts (a negative one
    counts from the end)."""
    return and_(cmp(">=", index, neg(n)), cmp("<", index, n))


def str_len(s: Term) -> Term:
    if isinstance(s, Const):
        return const(len(s.value))
    return op("len", s, sort=INT)


# ---------------------------------------------------------------- behaviours


@dataclass(frozen=True, eq=False)
class Outcome:
    """One way the body can end: ``guard`` holds exactly on the pre-states that
    end this way. Guards of a behaviour's outcomes are disjoint and cover every
    pre-state."""

    guard: Term
    value: Optional[Value] = None  # set when the body returns
    exception: Optional[type] = None  # set when it raises
    line: int = 0
    cause: str = ""  # for raises: the statement or operation that raises
    # Set when what happens here is not modelled (e.g. the sign of a NaN):
    # such an outcome can neither prove nor refute, only make a check unknown.
    unmodelled: str = ""
    # For a return: the heap fields written by then (key -> array term); a
    # field not in it still holds its pre-state value.
    heap: Optional[dict] = None

    @property
    def returns(self) -> bool:
        return self.exception is None and not self.unmodelled

    def __repr__(self) -> str:
        if self.unmodelled:
            return f"{render(self.guard)}  ->  not modelled: {self.unmodelled}"
        if self.returns:
            end = f"result = {render_value(self.value)}"
        else:
            end = f"raises {self.exception.__name__}"
        return f"{render(self.guard)}  ->  {end}"


@dataclass(frozen=True, eq=False)
class Behaviour:
    """The before/after relation of a function body, as its outcomes."""

    params: Tuple[Var, ...]
    outcomes: Tuple[Outcome, ...]
    # What the translation takes for granted beyond the modelled semantics
    # (e.g. str(n) under the interpreter's digit limit); the report lists it.
    assumptions: Tuple[str, ...] = ()
    # The parts of the body that were not translated but abstracted by opaque
    # values (a call to a function that is not modelled, a loop), each with its
    # line, e.g. "the call `audit(x)` (line 7)". A proof holds whatever they
    # do; a counterexample may come from a value they never produce.
    untranslated: Tuple[str, ...] = ()

    def __repr__(self) -> str:
        return "\n".join(repr(o) for o in self.outcomes)


# ---------------------------------------------------------------- printing


def render(t: Term) -> str:
    """Print a term as the Python expression it stands for."""
    return _render(t, 0, {})


def printed_size(t: Term) -> int:
    """How many nodes ``render`` would print: a DAG that shares sub-terms can
    print exponentially larger than it is, so callers check this first."""
    memo: dict = {}
    stack = [(t, False)]
    while stack:
        node, ready = stack.pop()
        if id(node) in memo:
            continue
        kids = children(node)
        if ready or not kids:
            memo[id(node)] = 1 + sum(memo[id(k)] for k in kids)
        else:
            stack.append((node, True))
            stack.extend((k, False) for k in kids if id(k) not in memo)
    return memo[id(t)]


def children(t: Term) -> tuple:
    if isinstance(t, (Arith, Cmp)):
        return (t.left, t.right)
    if isinstance(t, (Neg, ToInt, Not)):
        return (t.arg,)
    if isinstance(t, (And, Or)):
        return t.args
    if isinstance(t, Ite):
        return (t.cond, t.then, t.orelse)
    if isinstance(t, Op):
        return t.args
    return ()


def _render(t: Term, ctx_prec: int, memo: dict) -> str:
    text, prec = _render_prec(t, memo)
    return f"({text})" if prec < ctx_prec else text


def _render_prec(t: Term, memo: dict):
    key = id(t)
    if key in memo:
        return memo[key]
    out = _render_node(t, memo)
    memo[key] = out
    return out


def _float_text(value: float):
    """A float literal that Python reads back as exactly this float."""
    if value != value:
        return "float('nan')", _PREC["atom"]
    if value in (float("inf"), float("-inf")):
        return ("float('inf')", _PREC["atom"]) if value > 0 else ("-float('inf')", _PREC["neg"])
    text = repr(value)  # shortest repr round-trips exactly (Python 3.1+)
    return text, _PREC["neg"] if text.startswith("-") else _PREC["atom"]


def is_pre_read(t: Term) -> bool:
    """A read of a parameter's list or attribute as it was on entry."""
    return (isinstance(t, Op) and t.name == "select" and isinstance(t.args[0], Var)
            and t.args[0].name.startswith(HEAP_PREFIX) and isinstance(t.args[1], Var)
            and t.args[1].name.endswith(REF_SUFFIX))


def _render_select(t: Op, memo: dict):
    """A pre-state read prints as Python: ``xs`` for a list parameter's
    contents, ``acct.balance`` for an attribute of an object parameter."""
    arr, ref = t.args
    if is_pre_read(t):
        owner = ref.name[:-len(REF_SUFFIX)]
        field = arr.name[len(HEAP_PREFIX):]
        if field.startswith("list:"):
            return owner, _PREC["atom"]
        return f"{owner}.{field.rsplit('.', 1)[1]}", _PREC["atom"]
    return f"{_render(arr, _PREC['atom'], memo)}[{_render(ref, 0, memo)}]", _PREC["atom"]


def _render_node(t: Term, memo: dict):
    if isinstance(t, Op) and t.name == "select":
        return _render_select(t, memo)
    if isinstance(t, Var) and t.name.endswith(REF_SUFFIX):
        return t.name[:-len(REF_SUFFIX)], _PREC["atom"]
    if isinstance(t, Cmp) and t.left.sort == REF and t.op in ("==", "!="):
        p = _PREC["cmp"]
        word = "is" if t.op == "==" else "is not"
        return f"{_render(t.left, p + 1, memo)} {word} {_render(t.right, p + 1, memo)}", p
    if isinstance(t, Var):
        if t.name.endswith(NONE_SUFFIX):
            return f"{t.name[:-len(NONE_SUFFIX)]} is None", _PREC["cmp"]
        return t.name, _PREC["atom"]
    if isinstance(t, Const):
        if t.sort == FLOAT:
            return _float_text(t.value)
        if t.sort == INT and t.value < 0:
            return repr(t.value), _PREC["neg"]
        if t.sort == STR:
            return repr(t.value), _PREC["atom"]
        if t.sort.startswith("seq:"):
            return repr(list(t.value)), _PREC["atom"]
        if t.sort == REF:
            return f"<new object {-t.value}>", _PREC["atom"]
        return repr(t.value), _PREC["atom"]
    if isinstance(t, Op):
        p = _OP_PREC.get(t.name, _PREC["atom"])
        if t.name in _SUBJECT_OPS:
            args = [_render(t.args[0], _PREC["atom"], memo)] + [
                _render(a, 0, memo) for a in t.args[1:]]
        elif p == _PREC["atom"]:
            args = [_render(a, 0, memo) for a in t.args]
        elif p == _PREC["cmp"]:  # comparisons do not associate: `(a in b) in c`
            args = [_render(a, p + 1, memo) for a in t.args]
        else:  # infix: left-associative, like Arith
            args = [_render(a, p + (i > 0), memo) for i, a in enumerate(t.args)]
        if t.name in _METHODS:
            return f"{args[0]}.{t.name}({', '.join(args[1:])})", _PREC["atom"]
        return OP_TEMPLATES[t.name].format(*args), p
    if isinstance(t, Arith):
        p = _PREC[t.op]
        # Left-associative: the right operand needs parentheses at equal strength.
        return f"{_render(t.left, p, memo)} {t.op} {_render(t.right, p + 1, memo)}", p
    if isinstance(t, Neg):
        return f"-{_render(t.arg, _PREC['neg'], memo)}", _PREC["neg"]
    if isinstance(t, ToInt):
        return f"int({_render(t.arg, 0, memo)})", _PREC["atom"]
    if isinstance(t, Cmp):
        p = _PREC["cmp"]
        return f"{_render(t.left, p + 1, memo)} {t.op} {_render(t.right, p + 1, memo)}", p
    if isinstance(t, Not):
        if isinstance(t.arg, Var) and t.arg.name.endswith(NONE_SUFFIX):
            return f"{t.arg.name[:-len(NONE_SUFFIX)]} is not None", _PREC["cmp"]
        return f"not {_render(t.arg, _PREC['not'], memo)}", _PREC["not"]
    if isinstance(t, (And, Or)):
        # and/or are associative: print nested chains flat.
        p = _PREC["and" if isinstance(t, And) else "or"]
        parts, stack = [], list(reversed(t.args))
        while stack:
            a = stack.pop()
            if type(a) is type(t):
                stack.extend(reversed(a.args))
            else:
                parts.append(_render(a, p + 1, memo))
        return (" and " if isinstance(t, And) else " or ").join(parts), p
    if isinstance(t, Ite):
        p = _PREC["ite"]
        return (f"{_render(t.then, p + 1, memo)} if {_render(t.cond, p + 1, memo)} "
                f"else {_render(t.orelse, p, memo)}"), p
    raise TypeError(f"not a term: {t!r}")


# ---------------------------------------------------------------- rewriting


def substitute(t: Term, replace) -> Term:
    """``t`` with every node for which ``replace(node)`` gives a term replaced
    by that term (``None``: keep the node and rewrite below it). Nodes are
    rebuilt with the plain constructors, so the meaning is exactly that of
    the substitution; shared sub-terms stay shared (memoised by ``id``)."""
    memo: dict = {}
    stack = [(t, False)]
    while stack:
        node, ready = stack.pop()
        if id(node) in memo:
            continue
        new = replace(node)
        if new is not None:
            memo[id(node)] = new
            continue
        kids = children(node)
        if not kids:
            memo[id(node)] = node
        elif not ready:
            stack.append((node, True))
            stack.extend((k, False) for k in kids if id(k) not in memo)
        else:
            rebuilt = tuple(memo[id(k)] for k in kids)
            memo[id(node)] = node if all(a is b for a, b in zip(rebuilt, kids)) \
                else _with_children(node, rebuilt)
    return memo[id(t)]


def _with_children(t: Term, kids: tuple) -> Term:
    if isinstance(t, Arith):
        return Arith(t.op, kids[0], kids[1], t.sort)
    if isinstance(t, Cmp):
        return Cmp(t.op, kids[0], kids[1])
    if isinstance(t, Neg):
        return Neg(kids[0], t.sort)
    if isinstance(t, ToInt):
        return ToInt(kids[0])
    if isinstance(t, Not):
        return Not(kids[0])
    if isinstance(t, And):
        return And(kids)
    if isinstance(t, Or):
        return Or(kids)
    if isinstance(t, Ite):
        return Ite(*kids)
    if isinstance(t, Op):
        return Op(t.name, kids, t.sort)
    raise TypeError(f"not a term with children: {t!r}")


def nodes(t: Term):
    """Every distinct node of ``t`` once (a DAG walk, by ``id``), parents first."""
    seen, stack = set(), [t]
    while stack:
        n = stack.pop()
        if id(n) in seen:
            continue
        seen.add(id(n))
        yield n
        stack.extend(reversed(children(n)))


def variables(t: Term) -> list:
    """The distinct ``Var`` nodes in ``t``, in the order a walk meets them."""
    return [n for n in nodes(t) if isinstance(n, Var)]


def constants(t: Term, sorts=(INT,), limit: int = 10 ** 6) -> set:
    """The values of the constants of ``t`` of the given sorts (ints beyond
    ``limit`` in magnitude left out: they make poor bounds to print)."""
    return {n.value for n in nodes(t) if isinstance(n, Const) and n.sort in sorts
            and (n.sort != INT or abs(n.value) < limit)}
