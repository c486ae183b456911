"""The str and list methods beyond the exactly modelled ones, by a table.

A mixin of ``translate.Translator``, used where ``calls.str_method`` and
``heap.list_method`` give up. Each row of ``STR_METHODS`` and ``LIST_METHODS``
says, from the Python Library Reference ("String Methods", "Mutable Sequence
Types" and the list documentation):

* the parameters, in order, what each accepts and its default, and whether
  they may be passed by keyword (most str methods take positional arguments
  only); a wrong number or kind of argument raises TypeError, as in Python;
* the shape of the result: a fresh value (an *opaque* one: nothing is known
  about it beyond the facts below), or an exact value where the rule is easy
  to state (``removeprefix``, ``list.insert``, ``list.clear``);
* what raises, exactly (``split('')`` raises ValueError, a fill character
  that is not one character raises TypeError, a width outside C's ssize_t
  raises OverflowError);
* facts about the result that hold for every pre-state (``count`` is not
  negative, ``ljust`` keeps ``s`` at the front), which narrow the path where
  the value is made;
* the effect on the heap: ``sort`` and ``reverse`` replace the list's
  contents by a fresh sequence of the same length; the str methods have none.

With constant arguments throughout, the method is simply run by CPython.
A method that is in neither table is refused, as before.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable, Optional, Tuple

from astroid import nodes

from refines import heap, ir
from refines.calls import STR_METHODS as MODELLED_STR_METHODS
from refines.opaque import SSIZE

_REQUIRED = object()


@dataclass(frozen=True)
class Param:
    name: str
    # "str", "str|None", "index" (C's ssize_t), "slice-index" (an int, clamped,
    # or None), "slice-int" (an int, clamped), "fill" (one character), "flag"
    # (a bool), "none" (only None), "item" and "iterable" (any value)
    accepts: str
    default: object = _REQUIRED


@dataclass(frozen=True)
class Method:
    params: Tuple[Param, ...]
    result: str  # "str", "int", "bool", "list:str", "parts", "none"
    keywords: bool = False  # the arguments may be passed by keyword
    keyword_only: bool = False  # they must be (list.sort)
    # (translator, subject, arguments by name, result) -> a fact; or raises
    facts: Optional[Callable] = None
    check: Optional[Callable] = None  # (translator, subject, args, node): raises
    effect: str = ""  # "shuffle": the list's contents become a fresh same-length sequence


def _len(s: ir.Term) -> ir.Term:
    return ir.str_len(s)


def _not_longer(t, s, a, r):
    return ir.cmp("<=", _len(r), _len(s))


def _padded(how: str):
    # ljust/rjust/center/zfill: "padding is done using the specified fillchar
    # ... The original string is returned if width is less than or equal to
    # len(s)" (str documentation).
    def facts(t, s, a, r):
        w, n = a["width"], _len(s)
        wider = ir.cmp(">", w, n)
        out = [ir.cmp("==", _len(r), ir.ite(wider, w, n)),
               ir.implies(ir.not_(wider), ir.cmp("==", r, s))]
        if how == "ljust":
            out.append(ir.op("startswith", r, s, sort=ir.BOOL))
        elif how == "rjust":
            out.append(ir.op("endswith", r, s, sort=ir.BOOL))
        elif how == "center":
            out.append(ir.op("contains", s, r, sort=ir.BOOL))
        return ir.and_(*out)
    return facts


def _count_range(t, s, a, r):
    # At most one match per position, plus one for the empty string.
    return ir.and_(ir.cmp(">=", r, ir.const(0)),
                   ir.cmp("<=", r, ir.arith("+", _len(s), ir.const(1))))


def _false_when_empty(t, s, a, r):
    # "... and there is at least one character" (each str.is* method but two)
    return ir.implies(ir.cmp("==", _len(s), ir.const(0)), ir.not_(r))


def _true_when_empty(t, s, a, r):
    # str.isascii and str.isprintable are True for the empty string.
    return ir.implies(ir.cmp("==", _len(s), ir.const(0)), r)


def _empty_separator(t, s, a, node):
    sep = a.get("sep")
    if sep is None or sep is ir.NONE:
        return
    if isinstance(sep, ir.Opt):
        t.raise_when(ir.and_(ir.not_(sep.none), ir.cmp("==", sep.value, ir.const(""))),
                     ValueError, node.lineno, "empty separator")
    else:
        t.raise_when(ir.cmp("==", sep, ir.const("")), ValueError, node.lineno, "empty separator")


def _split_facts(t, s, a, r):
    # With a separator, the result has at least one item, and is [s] when
    # the separator does not occur (str.split documentation).
    sep = a.get("sep")
    if sep is None or sep is ir.NONE:
        return ir.TRUE
    none, sep = (sep.none, sep.value) if isinstance(sep, ir.Opt) else (ir.FALSE, sep)
    items = t.contents(r)
    single = ir.op("seq_unit", s, sort=items.sort)
    return ir.implies(ir.not_(none), ir.and_(
        ir.cmp(">=", ir.op("len", items, sort=ir.INT), ir.const(1)),
        ir.implies(ir.not_(ir.op("contains", sep, s, sort=ir.BOOL)),
                   ir.cmp("==", items, single))))


def _parts(last: bool):
    # "Split the string at the first (last) occurrence of sep, and return a
    # 3-tuple ...; if the separator is not found, return a 3-tuple containing
    # the string itself, followed by two empty strings" (or, for rpartition,
    # two empty strings followed by the string itself).
    def facts(t, s, a, r):
        head, sep, tail = r.items
        sep_in = ir.op("contains", a["sep"], s, sort=ir.BOOL)
        empty = ir.const("")
        missing = (ir.and_(ir.cmp("==", head, empty), ir.cmp("==", sep, empty),
                           ir.cmp("==", tail, s)) if last else
                   ir.and_(ir.cmp("==", head, s), ir.cmp("==", sep, empty),
                           ir.cmp("==", tail, empty)))
        return ir.and_(
            ir.cmp("==", ir.arith("+", ir.arith("+", head, sep), tail), s),
            ir.implies(sep_in, ir.cmp("==", sep, a["sep"])),
            ir.implies(ir.not_(sep_in), missing))
    return facts


def _same_when_short(t, items, a, r):
    # Sorting or reversing a list of at most one item leaves it as it is.
    n = ir.op("len", items, sort=ir.INT)
    return ir.implies(ir.cmp("<=", n, ir.const(1)), ir.cmp("==", r, items))


_CASE = Method((), "str")
_STRIP = Method((Param("chars", "str|None", None),), "str", facts=_not_longer)
_IS = Method((), "bool", facts=_false_when_empty)
_SPLIT = Method((Param("sep", "str|None", None), Param("maxsplit", "index", -1)),
                "list:str", keywords=True, check=_empty_separator, facts=_split_facts)


def _pad(how):
    params = (Param("width", "index"),) if how == "zfill" else \
        (Param("width", "index"), Param("fillchar", "fill", " "))
    return Method(params, "str", facts=_padded(how))


STR_METHODS = {
    **{m: _CASE for m in ("upper", "lower", "casefold", "title", "capitalize", "swapcase")},
    **{m: _STRIP for m in ("strip", "lstrip", "rstrip")},
    **{m: _pad(m) for m in ("zfill", "ljust", "rjust", "center")},
    "count": Method((Param("sub", "str"), Param("start", "slice-index", None),
                     Param("end", "slice-index", None)), "int", facts=_count_range),
    **{m: _IS for m in ("isalnum", "isalpha", "isdecimal", "isdigit", "isidentifier",
                        "islower", "isnumeric", "isspace", "istitle", "isupper")},
    "isascii": Method((), "bool", facts=_true_when_empty),
    "isprintable": Method((), "bool", facts=_true_when_empty),
    "split": _SPLIT,
    "rsplit": _SPLIT,
    "splitlines": Method((Param("keepends", "flag", False),), "list:str", keywords=True),
    "partition": Method((Param("sep", "str"),), "parts", check=_empty_separator,
                        facts=_parts(False)),
    "rpartition": Method((Param("sep", "str"),), "parts", check=_empty_separator,
                         facts=_parts(True)),
    "replace": Method((Param("old", "str"), Param("new", "str"), Param("count", "index", -1)),
                      "str"),
    "removeprefix": Method((Param("prefix", "str"),), "exact"),
    "removesuffix": Method((Param("suffix", "str"),), "exact"),
    "join": Method((Param("iterable", "iterable"),), "exact"),
}

LIST_METHODS = {
    "sort": Method((Param("key", "none", None), Param("reverse", "flag", False)), "none",
                   keywords=True, keyword_only=True, effect="shuffle"),
    "reverse": Method((), "none", effect="shuffle"),
    "count": Method((Param("value", "item"),), "int"),
    # list.index's window takes ints only: index(x, None) raises TypeError.
    "index": Method((Param("value", "item"), Param("start", "slice-int", None),
                     Param("stop", "slice-int", None)), "exact"),
    "insert": Method((Param("index", "index"), Param("object", "item")), "exact"),
    "remove": Method((Param("value", "item"),), "exact"),
    "clear": Method((), "exact"),
    "copy": Method((), "exact"),
}


class Methods:
    """Translator methods for the table's str and list methods."""

    def method_call(self, node: nodes.Call) -> ir.Value:
        """``subject.name(...)`` for a value: the str and list methods
        modelled (calls, heap), then the table's (methods), then a method of
        an object of a modelled class, which is not translated (opaque)."""
        func = node.func
        name = func.attrname
        subject = self.expr(func.expr)
        if isinstance(subject, ir.Opt):
            self.raise_when(subject.none, AttributeError, node.lineno,
                            f"'NoneType' object has no attribute '{name}'")
            subject = subject.value
        args = [self.expr(a) for a in node.args]
        kwargs = {k.arg: self.expr(k.value) for k in node.keywords or []}
        if ir.is_false(self.live):
            return ir.const(0)  # an argument always raises: the call never happens
        result = None
        if isinstance(subject, ir.Ref) and subject.kind.startswith("list:"):
            if not kwargs:
                result = self.list_method(subject, name, args, node)
            if result is None:
                result = self.table_method(subject, name, args, kwargs, node)
            if result is None:
                return self.refuse("method", node.lineno, {
                    "method": "list." + name, "allowed": ", ".join(
                        "list." + m for m in ("append", "extend", "pop") + tuple(LIST_METHODS))})
        elif isinstance(subject, ir.Term) and subject.sort == ir.STR:
            if not kwargs:
                result = self.str_method(name, subject, args, node)
            if result is None:
                result = self.table_method(subject, name, args, kwargs, node)
            if result is None:
                return self.refuse("method", node.lineno, {
                    "method": "str." + name, "allowed": ", ".join(
                        "str." + m for m in MODELLED_STR_METHODS + tuple(STR_METHODS))})
        elif isinstance(subject, ir.Ref) and self.role == "body":
            result = self.call_method_of_object(node, subject, name,
                                                args + list(kwargs.values()))
        if result is not None:
            return result
        return self.refuse("call", node.lineno, {"callee": func.as_string()})


    def table_method(self, subject, name: str, args: list, kwargs: dict, node):
        """``subject.name(*args, **kwargs)`` by the table; None when the
        method is in neither table (the caller refuses it)."""
        is_list = isinstance(subject, ir.Ref)
        rule = (LIST_METHODS if is_list else STR_METHODS).get(name)
        if rule is None:
            return None
        owner = "list" if is_list else "str"
        bound = self.bind_arguments(rule, f"{owner}.{name}", args, kwargs, node)
        if bound is None:
            return ir.NONE  # a TypeError for the arguments: nothing follows
        converted = {}
        for p in rule.params:
            if p.name in bound:
                converted[p.name] = self.argument(p, bound[p.name], f"{owner}.{name}", node)
            if ir.is_false(self.live):
                return ir.NONE
        if rule.check is not None:
            rule.check(self, subject, converted, node)
            if ir.is_false(self.live):
                return ir.NONE
        if is_list:
            return self.list_table_method(subject, name, rule, converted, node)
        folded = self.folded_str_method(subject, name, rule, converted, node)
        if folded is not None:
            return folded
        if rule.result == "exact":
            return self.exact_str_method(subject, name, converted, node)
        self.abstracted_method(node)
        result = self.fresh_of(rule.result)
        if rule.facts is not None:
            self.constrain(rule.facts(self, subject, converted, result))
        return result

    def abstracted_method(self, node, owner: str = "str") -> None:
        self.untranslated_part(
            f"the method call `{node.as_string()}` (line {node.lineno})",
            ("method", {"method": f"{owner}.{node.func.attrname}",
                        "allowed": "those listed in the docs; the others are abstracted "
                                   "in function bodies only, not in specs"}))

    # ------------------------------------------------------------ arguments

    def bind_arguments(self, rule: Method, what: str, args, kwargs, node) -> Optional[dict]:
        """Arguments by parameter name, Python's way; None after a TypeError."""
        names = [p.name for p in rule.params]

        def wrong(why):
            self.raise_when(ir.TRUE, TypeError, node.lineno, f"{what}(): {why}")
            return None
        if rule.keyword_only and args:
            return wrong("takes no positional arguments")
        if kwargs and not rule.keywords:
            return wrong("takes no keyword arguments")
        if len(args) > len(names):
            return wrong(f"takes at most {len(names)} arguments ({len(args)} given)")
        bound = dict(zip(names, args))
        for key, value in kwargs.items():
            if key not in names or key in bound:
                return wrong(f"unexpected or repeated argument '{key}'")
            bound[key] = value
        for p in rule.params:
            if p.name not in bound and p.default is _REQUIRED:
                return wrong(f"missing argument '{p.name}'")
        return bound

    def argument(self, p: Param, v: ir.Value, what: str, node) -> ir.Value:
        """An argument converted as CPython's argument parsing does, raising
        TypeError (and OverflowError for C's ssize_t) where it would."""
        def bad(why):
            self.raise_when(ir.TRUE, TypeError, node.lineno, f"{what}(): {why}")
            return ir.const(0)
        if p.accepts in ("item", "iterable"):
            return v
        if isinstance(v, ir.Ref) and not v.kind.startswith("list:"):
            return self.refuse("method", node.lineno, {
                "method": what, "allowed": f"{what} with an object argument is not modelled"})
        if p.accepts in ("none",):
            if v is not ir.NONE:
                return self.refuse("method", node.lineno, {
                    "method": what, "allowed": f"{what} without a {p.name} function"})
            return v
        if p.accepts == "flag":
            if not (isinstance(v, ir.Term) and v.sort == ir.BOOL):
                return self.refuse("method", node.lineno, {
                    "method": what, "allowed": f"{what} with {p.name} a bool"})
            return v
        optional = p.accepts in ("str|None", "slice-index")
        if v is ir.NONE:
            return v if optional else bad(f"{p.name} must not be None")
        if isinstance(v, ir.Opt) and not optional:
            self.raise_when(v.none, TypeError, node.lineno, f"{what}(): {p.name} is None")
            v = v.value
        value = v.value if isinstance(v, ir.Opt) else v
        wanted = (ir.STR,) if p.accepts in ("str", "str|None", "fill") else (ir.INT, ir.BOOL)
        if not (isinstance(value, ir.Term) and value.sort in wanted):
            if isinstance(v, ir.Opt):  # fine where it is None, a TypeError elsewhere
                self.raise_when(ir.not_(v.none), TypeError, node.lineno,
                                f"{what}(): {p.name} of the wrong type")
                return ir.NONE
            return bad(f"{p.name} of the wrong type")
        if p.accepts in ("str", "str|None", "fill"):
            if p.accepts == "fill":
                self.raise_when(ir.cmp("!=", _len(value), ir.const(1)), TypeError, node.lineno,
                                "The fill character must be exactly one character long")
            return v
        if p.accepts == "index":
            n = ir.as_int(value)
            self.raise_when(ir.or_(ir.cmp(">=", n, ir.const(SSIZE)),
                                   ir.cmp("<", n, ir.const(-SSIZE))), OverflowError,
                            node.lineno, "Python int too large to convert to C ssize_t")
            return n
        return v if isinstance(v, ir.Opt) else ir.as_int(value)  # a slice index: clamped

    # ------------------------------------------------------------ str

    def fresh_of(self, result: str) -> ir.Value:
        if result == "str":
            return ir.opaque(ir.STR)
        if result == "int":
            return ir.opaque(ir.INT)
        if result == "bool":
            return ir.opaque(ir.BOOL)
        if result == "parts":
            return ir.Tup(tuple(ir.opaque(ir.STR) for _ in range(3)))
        if result == "none":
            return ir.NONE
        kind = heap.list_kind(ir.STR)  # "list:str": split makes a new list
        return self.new_list(kind, ir.opaque(ir.seq_sort(ir.STR)))

    def folded_str_method(self, s, name, rule, args, node) -> Optional[ir.Value]:
        """With constants throughout, CPython runs the method itself."""
        values = [s] + list(args.values())
        if not all(isinstance(v, ir.Const) or v is ir.NONE for v in values):
            return None
        if name == "join":
            return None  # its argument is a container: see exact_str_method
        plain = {k: None if v is ir.NONE else v.value for k, v in args.items()}
        positional = [] if rule.keywords else list(plain.values())
        try:
            value = getattr(s.value, name)(*positional, **(plain if rule.keywords else {}))
        except (TypeError, ValueError, OverflowError) as exc:
            self.raise_when(ir.TRUE, type(exc), node.lineno, str(exc))
            return ir.NONE
        return self.python_value(value, node)

    def python_value(self, value, node) -> Optional[ir.Value]:
        from refines.strings import str_const

        if isinstance(value, str):
            return str_const(value, node.lineno)
        if isinstance(value, (bool, int)):
            return ir.const(value)
        if isinstance(value, tuple):
            return ir.Tup(tuple(self.python_value(v, node) for v in value))
        kind = heap.list_kind(ir.STR)
        contents = ir.empty_seq(ir.STR)
        for item in value:
            contents = ir.arith("+", contents, ir.op("seq_unit", str_const(item, node.lineno),
                                                     sort=contents.sort))
        return self.new_list(kind, contents)

    def exact_str_method(self, s, name, args, node) -> ir.Value:
        if name in ("removeprefix", "removesuffix"):
            # "If the string starts (ends) with the prefix (suffix) string,
            # return string[len(prefix):] (string[:-len(suffix)]); otherwise,
            # return a copy of the original string."
            affix = args["prefix" if name == "removeprefix" else "suffix"]
            n = _len(affix)
            if name == "removeprefix":
                hit = ir.op("startswith", s, affix, sort=ir.BOOL)
                cut = ir.op("slice_from", s, n, sort=ir.STR)
            else:
                hit = ir.and_(ir.op("endswith", s, affix, sort=ir.BOOL),
                              ir.cmp(">", n, ir.const(0)))
                cut = ir.op("slice_to", s, ir.arith("-", _len(s), n), sort=ir.STR)
            return ir.ite(hit, cut, s)
        return self.str_join(s, args["iterable"], node)

    def str_join(self, sep: ir.Term, items: ir.Value, node) -> ir.Value:
        """``sep.join(items)``: for a list of strs, a tuple of strs, or a str
        (its characters); an item that is not a str raises TypeError."""
        what = "str.join"
        if isinstance(items, ir.Opt):
            self.raise_when(items.none, TypeError, node.lineno, "can only join an iterable")
            items = items.value
        if isinstance(items, ir.Tup):
            parts = []
            for item in items.items:
                if isinstance(item, ir.Opt):
                    self.raise_when(item.none, TypeError, node.lineno,
                                    "sequence item: expected str instance, NoneType found")
                    item = item.value
                if not (isinstance(item, ir.Term) and item.sort == ir.STR):
                    self.raise_when(ir.TRUE, TypeError, node.lineno,
                                    "sequence item: expected str instance")
                    return ir.const("")
                parts.append(item)
            out = parts[0] if parts else ir.const("")
            for part in parts[1:]:
                out = ir.arith("+", ir.arith("+", out, sep), part)
            return out
        if isinstance(items, ir.Ref) and items.kind.startswith("list:"):
            if heap.elem_sort(items.kind) != ir.STR:
                n = ir.op("len", self.contents(items), sort=ir.INT)
                self.raise_when(ir.cmp(">", n, ir.const(0)), TypeError, node.lineno,
                                "sequence item 0: expected str instance")
                return ir.const("")
            self.abstracted_method(node)
            return ir.opaque(ir.STR)
        if isinstance(items, ir.Term) and items.sort == ir.STR:
            self.abstracted_method(node)
            return ir.opaque(ir.STR)
        if isinstance(items, ir.Ref):
            return self.refuse("method", node.lineno, {
                "method": what, "allowed": "str.join of a list, a tuple or a str"})
        self.raise_when(ir.TRUE, TypeError, node.lineno, "can only join an iterable")
        return ir.const("")

    # ------------------------------------------------------------ lists

    def list_table_method(self, v: ir.Ref, name: str, rule: Method, args: dict, node):
        items = self.contents(v)
        key = heap.field_key(v.kind)
        n = ir.op("len", items, sort=ir.INT)
        if rule.effect == "shuffle":
            # sort() and reverse() keep the items and the length, in another order.
            self.abstracted_method(node, "list")
            after = ir.opaque(items.sort)
            self.constrain(ir.and_(ir.cmp("==", ir.op("len", after, sort=ir.INT), n),
                                   _same_when_short(self, items, args, after)))
            self.write_field(key, v.ref, after)
            return ir.NONE
        if name == "clear":
            self.write_field(key, v.ref, ir.empty_seq(heap.elem_sort(v.kind)))
            return ir.NONE
        if name == "copy":
            return self.new_list(v.kind, items)
        if name == "count":
            x = args["value"]
            if isinstance(x, ir.Ref):
                return self.refuse("method", node.lineno, {
                    "method": "list.count", "allowed": "list.count of a number, str or None"})
            self.abstracted_method(node, "list")
            r = ir.opaque(ir.INT)
            self.constrain(ir.and_(ir.cmp(">=", r, ir.const(0)), ir.cmp("<=", r, n)))
            return r
        if name == "insert":
            # list.insert(i, x) is xs[:i] + [x] + xs[i:], with Python's slice
            # bounds (a negative i counts from the end; both ends are clamped).
            x = self.list_item_value(v, args["object"], node)
            if x is None:
                return ir.NONE
            at = args["index"]
            unit = ir.op("seq_unit", x, sort=items.sort)
            self.write_field(key, v.ref, ir.arith("+", ir.arith(
                "+", ir.op("slice_to", items, at, sort=items.sort), unit),
                ir.op("slice_from", items, at, sort=items.sort)))
            return ir.NONE
        # index and remove: the first item equal to x; ValueError when none is.
        x = args["value"]
        window = [args.get("start"), args.get("stop")]
        found = self.compare("in", x, v, node)
        if ir.is_false(self.live):
            return ir.NONE
        windowed = any(w is not None and w is not ir.NONE for w in window)
        if windowed:
            # A window: ValueError also under a condition not modelled.
            self.abstracted_method(node, "list")
            self.raise_when(ir.or_(ir.not_(found), ir.opaque(ir.BOOL)), ValueError,
                            node.lineno, "x is not in list (within the window)")
        else:
            self.raise_when(ir.not_(found), ValueError, node.lineno, "x is not in list")
        if ir.is_false(self.live):
            return ir.NONE
        item = x if heap.elem_sort(v.kind) != ir.INT else ir.as_int(x)
        if windowed:
            # The index found holds x and lies in the list.
            k = ir.opaque(ir.INT)
            self.constrain(ir.and_(ir.cmp(">=", k, ir.const(0)), ir.cmp("<", k, n),
                                   ir.cmp("==", ir.op("nth", items, k, sort=item.sort), item)))
            return k
        self.abstracted_method(node, "list")
        k = ir.opaque(ir.INT)
        before = ir.op("slice_to", items, k, sort=items.sort)
        self.constrain(ir.and_(
            ir.cmp(">=", k, ir.const(0)), ir.cmp("<", k, n),
            ir.cmp("==", ir.op("nth", items, k, sort=item.sort), item),
            ir.not_(ir.op("seq_contains", item, before, sort=ir.BOOL))))
        if name == "index":
            return k
        self.write_field(key, v.ref, ir.arith("+", before, ir.op(
            "slice_from", items, ir.arith("+", k, ir.const(1)), sort=items.sort)))
        return ir.NONE

    def list_item_value(self, v: ir.Ref, x: ir.Value, node) -> Optional[ir.Term]:
        """``x`` as an item of ``v``'s kind (what ``append`` accepts)."""
        sort = heap.elem_sort(v.kind)
        if not isinstance(x, ir.Term) or heap._kind(x) != heap._kind_of_sort(sort) or (
                sort == ir.BOOL and x.sort != ir.BOOL):
            self.refuse("mixed", node.lineno, {
                "construct": node.as_string(),
                "shapes": f"a {heap.describe(v.kind)} and the value inserted"})
            return None
        return x if sort != ir.INT else ir.as_int(x)
