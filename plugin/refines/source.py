"""Reading a decorated function and its specs from source (astroid).

Runtime objects say *what* was declared (the spec callables, the exception
classes); the source says *how* it was written (the expressions to
translate, their lines). This module pairs the two into an ``Obligation``.
"""

from __future__ import annotations

import builtins
import inspect
import os
import types
import typing
from dataclasses import dataclass
from typing import Callable, Dict, List, Optional, Tuple

import astroid
from astroid import nodes

from refines import heap, ir
from refines.declare import SPECS_ATTRIBUTE, Spec, attach, refines
from refines.errors import SpecError, Untranslatable

_SORTS = {int: ir.INT, bool: ir.BOOL, float: ir.FLOAT, str: ir.STR}


@dataclass(frozen=True)
class SpecPart:
    """One expression of a spec (the relation, the assuming, a raises entry)."""

    role: str  # "relation", "assuming" or "raises <Class>"
    params: Tuple[str, ...]
    body: nodes.NodeNG
    line: int
    path: str
    text: str  # the expression as written
    globals: dict
    runtime: Callable


@dataclass(frozen=True)
class Obligation:
    """Everything needed to check one spec of one function: by proof when its
    body can be translated, by testing when it can be called."""

    fn: Callable  # what a run calls: the function, the wrapper, the attached target
    qualname: str
    module: str
    path: str  # the file that holds the spec
    line: int  # line of the @refines decorator (or of the attach call)
    names: Tuple[str, ...]  # the parameters, in order
    kinds: Tuple[str, ...]  # "positional-only" / "positional" / "keyword" per parameter
    hints: Tuple[object, ...]  # each parameter's type hint at run time (None: none)
    relation: SpecPart
    assuming: Optional[SpecPart]
    raises: Tuple[Tuple[type, SpecPart], ...]
    show: Callable[[str], str] = str  # a file path as the report shows it
    # For a proof: the body and the parameters' sorts. Both are None when the
    # function cannot be translated, and ``untranslated`` says why.
    fn_node: Optional[nodes.FunctionDef] = None
    params: Optional[Tuple[ir.Var, ...]] = None
    untranslated: Optional[Untranslatable] = None
    untestable: str = ""  # why it cannot be called with generated arguments
    call_name: str = ""  # how a call to it is written (``fee``, ``Account.pay``)
    is_async: bool = False

    def where(self, path: str, line: int) -> str:
        return f"{self.show(path)}:{line}"

    @property
    def function(self) -> str:
        return f"{self.module}.{self.qualname}"

    @property
    def param_names(self) -> Tuple[str, ...]:
        return self.names


_MODULE_CACHE: Dict[Tuple[str, int, int], Tuple[nodes.Module, List[bytes]]] = {}


def parse_file(path: str) -> Tuple[nodes.Module, List[bytes]]:
    """Parse a file once per version of it (keyed by mtime and size)."""
    st = os.stat(path)
    key = (os.path.abspath(path), st.st_mtime_ns, st.st_size)
    if key not in _MODULE_CACHE:
        with open(path, "rb") as fh:
            raw = fh.read()
        module = astroid.parse(raw.decode("utf-8"), path=path)
        _MODULE_CACHE[key] = (module, raw.splitlines())
    return _MODULE_CACHE[key]


def node_text(node: nodes.NodeNG, lines: List[bytes]) -> str:
    """The source text of ``node`` exactly as written (offsets are UTF-8 bytes)."""
    try:
        first, last = node.lineno - 1, node.end_lineno - 1
        if first == last:
            chunk = lines[first][node.col_offset:node.end_col_offset]
        else:
            parts = [lines[first][node.col_offset:]]
            parts += lines[first + 1:last]
            parts.append(lines[last][:node.end_col_offset])
            chunk = b"\n".join(parts)
        return chunk.decode("utf-8")
    except (TypeError, IndexError, UnicodeDecodeError):
        return node.as_string()


def runtime_specs(fn: Callable) -> Tuple[Spec, ...]:
    """The specs of ``fn`` in source order (top decorator first)."""
    return tuple(reversed(getattr(fn, SPECS_ATTRIBUTE, ())))


def _lookup(expr: nodes.NodeNG, globals_: dict):
    """The object a (dotted) name denotes at module level, or None."""
    dotted = []
    cur = expr
    while isinstance(cur, nodes.Attribute):
        dotted.append(cur.attrname)
        cur = cur.expr
    if not isinstance(cur, nodes.Name):
        return None
    obj = globals_.get(cur.name, getattr(builtins, cur.name, None))
    for attr in reversed(dotted):
        obj = getattr(obj, attr, None)
    return obj


def _resolves_to(expr: nodes.NodeNG, globals_: dict, target: object) -> bool:
    return target is not None and _lookup(expr, globals_) is target


def find_function(fn: Callable, path: str) -> Tuple[nodes.FunctionDef, List[bytes]]:
    """The ``def`` of ``fn`` (the function as written) in ``path``, at any depth."""
    module, lines = parse_file(path)
    first_line = fn.__code__.co_firstlineno
    candidates = [n for n in module.nodes_of_class(nodes.FunctionDef)
                  if n.name == fn.__name__]
    for n in candidates:
        starts = [n.lineno] + [d.lineno for d in (n.decorators.nodes if n.decorators else [])]
        if first_line in starts:
            return n, lines
    if candidates:
        return candidates[-1], lines
    raise Untranslatable("no-source", first_line, {"qualname": fn.__qualname__})


def read_obligation(fn: Callable, index: int, path: str, module: str,
                    show: Callable[[str], str] = str) -> Obligation:
    """Pair the ``index``-th (0-based, source order) spec of ``fn`` with its source.

    ``show`` turns a file path into the form reports use (relative to the rootdir).
    The spec is always read; the body and the parameters' sorts only when they
    can be translated (``Obligation.untranslated`` says why not).
    """
    written = inspect.unwrap(fn)  # the function as written, under any wrapper
    fn_node, lines = find_function(written, path)
    specs = runtime_specs(fn)
    globals_ = written.__globals__
    decorators = [d for d in (fn_node.decorators.nodes if fn_node.decorators else [])
                  if isinstance(d, nodes.Call) and _resolves_to(d.func, globals_, refines)]
    if len(decorators) != len(specs):
        raise SpecError("spec-decorators", fn_node.lineno, {
            "runtime": len(specs), "source": len(decorators), "qualname": fn.__qualname__},
            path=path)
    call = decorators[index]
    names, kinds, hints, untestable = runtime_params(fn, _method_of(fn_node, globals_))
    if "result" in names:
        raise SpecError("spec-result-param", fn_node.lineno, path=path)
    relation, assuming, raises = read_spec_parts(call, call.args[:1], specs[index], names,
                                                 path, lines)
    params, untranslated = None, None
    try:
        if written is not fn:
            raise Untranslatable("wrapped", written.__code__.co_firstlineno,
                                 {"qualname": written.__qualname__})
        if "<locals>" in fn.__qualname__ or fn.__qualname__.count(".") > 1:
            raise Untranslatable("nested", fn.__code__.co_firstlineno,
                                 {"qualname": fn.__qualname__})
        if isinstance(fn_node, nodes.AsyncFunctionDef):
            raise Untranslatable("async", fn_node.lineno, {"qualname": fn.__qualname__})
        params, _ = read_params(fn_node, globals_, dict(zip(names, hints)))
    except Untranslatable as exc:
        untranslated = exc
    return Obligation(
        fn=fn, qualname=fn.__qualname__, module=module, path=path, line=call.lineno,
        names=names, kinds=kinds, hints=hints, relation=relation, assuming=assuming,
        raises=raises, show=show, fn_node=None if untranslated else fn_node,
        params=params, untranslated=untranslated, untestable=untestable,
        call_name=fn.__name__ if "." not in fn.__qualname__ else fn.__qualname__,
        is_async=inspect.iscoroutinefunction(written))


def read_attached(att, globals_: dict, show: Callable[[str], str] = str) -> Obligation:
    """The obligation of a spec attached with ``attach`` (``refines.declare.Attached``):
    the spec from the ``attach(...)`` call in the attaching file, the function
    from wherever it is defined. ``globals_`` are the attaching module's."""
    target, qualname, module = att.target, att.qualname, att.module
    tree, lines = parse_file(att.path)
    calls = [c for c in tree.nodes_of_class(nodes.Call)
             if c.lineno <= att.line <= (c.end_lineno or c.lineno)
             and _resolves_to(c.func, globals_, attach)]
    calls.sort(key=lambda c: (c.lineno != att.line, c.lineno))
    if not calls:
        raise SpecError("spec-form", att.line, {"role": "attached spec"}, path=att.path)
    call = calls[0]
    self_class = _owner_class(target, module, qualname)
    try:
        names, kinds, hints, untestable = runtime_params(target, self_class, att.hints)
    except (ValueError, TypeError) as exc:
        raise Untranslatable("attach-signature", att.line,
                             {"qualname": qualname, "why": str(exc)}) from None
    unknown = sorted(set(att.hints) - set(names))
    if unknown:
        raise SpecError("spec-names", call.lineno, {
            "role": "hints", "name": unknown[0], "allowed_what": "a parameter of the function",
            "allowed": ", ".join(names)}, path=att.path)
    if "result" in names:
        raise SpecError("spec-result-param", call.lineno, path=att.path)
    relation, assuming, raises = read_spec_parts(call, call.args[1:2], att.spec, names,
                                                 att.path, lines)
    fn_node, params, untranslated = None, None, None
    try:
        written = inspect.unwrap(target)
        if not inspect.isfunction(target) or written is not target:
            raise Untranslatable("no-source", att.line, {
                "qualname": qualname,
                "why": ("a wrapper made by a decorator" if written is not target
                        else "built into the interpreter or written in C")})
        source_path = inspect.getsourcefile(target)
        if not source_path or not os.path.exists(source_path):
            raise Untranslatable("no-source", att.line, {
                "qualname": qualname, "why": "its source file is not installed"})
        if "<locals>" in qualname or qualname.count(".") > 1:
            raise Untranslatable("nested", att.line, {"qualname": qualname})
        fn_node, _ = find_function(target, source_path)
        if isinstance(fn_node, nodes.AsyncFunctionDef):
            raise Untranslatable("async", att.line, {"qualname": qualname})
        params = params_from_hints(names, hints, fn_node, att.line)
    except Untranslatable as exc:
        fn_node, params, untranslated = None, None, exc
    return Obligation(
        fn=target, qualname=qualname, module=module, path=att.path, line=call.lineno,
        names=names, kinds=kinds, hints=hints, relation=relation, assuming=assuming,
        raises=raises, show=show, fn_node=fn_node, params=params,
        untranslated=untranslated, untestable=untestable, call_name=qualname,
        is_async=inspect.iscoroutinefunction(target))


def _owner_class(target: Callable, module: str, qualname: str) -> Optional[type]:
    """The class ``target`` is a plain method of (its first parameter is an
    instance of it), if it is one."""
    import sys

    if qualname.count(".") != 1 or "<" in qualname:
        return None
    owner = getattr(sys.modules.get(module), qualname.split(".")[0], None)
    if owner is None:
        owner = getattr(target, "__objclass__", None)
    if not isinstance(owner, type):
        return None
    raw = owner.__dict__.get(qualname.split(".")[1])
    if isinstance(raw, (staticmethod, classmethod)):
        return None
    return owner


def params_from_hints(names: Tuple[str, ...], hints: Tuple[object, ...], fn_node,
                      line: int) -> Tuple[ir.Var, ...]:
    """The parameters' sorts from run-time type hints (for attached targets,
    whose hints may come from ``attach(hints=...)``)."""
    params = []
    for name, hint in zip(names, hints):
        if hint is None:
            raise Untranslatable("param-untyped", line, {"name": name})
        found = runtime_sort(hint)
        if found is None:
            raise Untranslatable("param-type", line, {
                "name": name, "hint_text": getattr(hint, "__name__", None) or str(hint)})
        params.append(ir.Var(name, *found))
    _one_list_kind(params, line)
    return tuple(params)


def runtime_sort(hint: object):
    """``(sort, optional, kind)`` for a run-time type hint, or None if it is not
    modelled. Optional lists and objects are not modelled yet."""
    origin, args = typing.get_origin(hint), typing.get_args(hint)
    if origin is typing.Union or origin is types.UnionType:
        members = [a for a in args if a is not type(None)]
        if len(members) != 1 or len(members) == len(args):
            return None
        found = runtime_sort(members[0])
        if found is None or found[0] == ir.REF:
            return None
        return found[0], True, ""
    if isinstance(hint, type) and hint in _SORTS:
        return _SORTS[hint], False, ""
    if origin in (list, typing.List) and len(args) == 1 and args[0] in heap.LIST_ELEMENTS:
        return ir.REF, False, heap.list_kind(heap.LIST_ELEMENTS[args[0]])
    if isinstance(hint, type) and hint.__module__ not in ("builtins", "typing"):
        kind = heap.class_kind(hint)
        return None if kind is None else (ir.REF, False, kind)
    return None


def read_spec_parts(call: nodes.Call, relation_args: list, spec: Spec,
                    names: Tuple[str, ...], path: str, lines: List[bytes]):
    """The relation, assuming and raises of one spec, read from the call that
    declares it (``@refines(...)`` or ``attach(...)``)."""
    if not relation_args:
        raise SpecError("spec-form", call.lineno, {"role": "relation"}, path=path)
    relation = read_part(relation_args[0], spec.relation, "relation", names + ("result",),
                         "a parameter of the function or `result`", path, lines)
    keywords = {k.arg: k.value for k in (call.keywords or ())}
    assuming = None
    if spec.assuming is not None:
        assuming = read_part(keywords.get("assuming"), spec.assuming, "assuming",
                             names, "a parameter of the function", path, lines)
    raises: List[Tuple[type, SpecPart]] = []
    if spec.raises:
        dict_node = keywords.get("raises")
        if not isinstance(dict_node, nodes.Dict) or len(dict_node.items) != len(spec.raises):
            raise SpecError("spec-raises", (dict_node or call).lineno, path=path)
        for (key_node, value_node), (cls, condition) in zip(dict_node.items,
                                                             spec.raises.items()):
            raises.append((cls, read_part(
                value_node, condition, f"raises {cls.__name__}", names,
                "a parameter of the function", path, lines)))
    return relation, assuming, tuple(raises)


_KINDS = {inspect.Parameter.POSITIONAL_ONLY: "positional-only",
          inspect.Parameter.POSITIONAL_OR_KEYWORD: "positional",
          inspect.Parameter.KEYWORD_ONLY: "keyword"}


def runtime_params(fn: Callable, self_class: Optional[type] = None,
                   extra_hints: Optional[dict] = None):
    """``(names, kinds, hints, untestable)`` of ``fn`` as it is called: from its
    signature and type hints (``extra_hints`` win). ``self_class`` is the hint
    of an unannotated first parameter (a method's ``self``). ``untestable`` is
    why it cannot be called with generated arguments ("" when it can)."""
    sig = inspect.signature(fn)  # follows __wrapped__, as a call does
    written = inspect.unwrap(fn)
    try:
        declared = typing.get_type_hints(written)
    except Exception:  # noqa: BLE001 -- unresolvable hints: read them one by one
        declared = {}
    names, kinds, hints, untestable = [], [], [], ""
    for i, (name, prm) in enumerate(sig.parameters.items()):
        if prm.kind not in _KINDS:
            untestable = untestable or (
                f"its parameter `{'*' if prm.kind == prm.VAR_POSITIONAL else '**'}{name}` "
                "takes any number of arguments")
            continue
        hint = (extra_hints or {}).get(name, declared.get(name))
        if hint is None and prm.annotation is not inspect.Parameter.empty:
            hint = prm.annotation
            if isinstance(hint, str):
                try:
                    hint = eval(hint, getattr(written, "__globals__", {}))  # noqa: S307
                except Exception:  # noqa: BLE001 -- left unresolved
                    pass
        if hint is None and i == 0 and self_class is not None:
            hint = self_class
        names.append(name)
        kinds.append(_KINDS[prm.kind])
        hints.append(hint)
    return tuple(names), tuple(kinds), tuple(hints), untestable


def read_params(fn_node: nodes.FunctionDef, globals_: dict, hints: Dict[str, object]):
    """The parameters' sorts; ``hints`` are their run-time type hints
    (``runtime_params``), the annotations as Python resolved them."""
    args = fn_node.args
    if args.vararg:
        raise Untranslatable("signature", fn_node.lineno, {"construct": "*" + args.vararg})
    if args.kwarg:
        raise Untranslatable("signature", fn_node.lineno, {"construct": "**" + args.kwarg})
    groups = [(args.posonlyargs or [], args.posonlyargs_annotations or [], "positional-only"),
              (args.args or [], args.annotations or [], "positional"),
              (args.kwonlyargs or [], args.kwonlyargs_annotations or [], "keyword")]
    params, kinds = [], []
    for arg_nodes, written, kind_name in groups:
        for i, arg in enumerate(arg_nodes):
            ann = written[i] if i < len(written) else None
            if ann is None and not params and _method_of(fn_node, globals_) is not None:
                # `self` of a method: an instance of its class.
                kind = heap.class_kind(_method_of(fn_node, globals_))
                if kind is None:
                    raise Untranslatable("param-type", fn_node.lineno, {
                        "name": arg.name,
                        "hint_text": fn_node.parent.name + " (a class without annotated "
                                                           "attributes)"})
                params.append(ir.Var(arg.name, ir.REF, False, kind))
                kinds.append(kind_name)
                continue
            sort, optional, kind = param_type(arg.name, ann, hints.get(arg.name), fn_node)
            params.append(ir.Var(arg.name, sort, optional, kind))
            kinds.append(kind_name)
    _one_list_kind(params, fn_node.lineno)
    return tuple(params), tuple(kinds)


def _one_list_kind(params, line: int) -> None:
    lists = sorted({p.kind for p in params if p.kind.startswith("list:")})
    if len(lists) > 1:
        # One list object can fit two such hints ([] is a list[int] and a
        # list[str]; [True] a list[bool] and a list[int]); the model keeps
        # kinds apart, so it would miss that aliasing.
        first = next(p for p in params if p.kind == lists[1])
        raise Untranslatable("param-type", line, {
            "name": first.name, "hint_text": heap.describe(lists[1]) + " beside a "
            + heap.describe(lists[0]) + " parameter (one list may be both)"})


def _method_of(fn_node: nodes.FunctionDef, globals_: dict):
    """The class a function is a method of (a module-level class), if any."""
    parent = fn_node.parent
    if isinstance(parent, nodes.ClassDef) and isinstance(parent.parent, nodes.Module):
        cls = globals_.get(parent.name)
        if isinstance(cls, type) and not any(
                isinstance(d, nodes.Name) and d.name in ("staticmethod", "classmethod")
                for d in (fn_node.decorators.nodes if fn_node.decorators else [])):
            return cls
    return None


def param_type(name: str, ann: Optional[nodes.NodeNG], hint: object, fn_node):
    """The sort a parameter's run-time hint names (``int``, ``Optional[str]``,
    ``float | None``, ``list[int]``, a class, or the same written as a string),
    whether it may also be None, and its kind; ``ann`` is the annotation as
    written, for the message."""
    if ann is None:
        raise Untranslatable("param-untyped", fn_node.lineno, {"name": name})
    found = runtime_sort(hint) if hint is not None else None
    if found is None:
        text = ann.value if isinstance(ann, nodes.Const) and isinstance(ann.value, str) \
            else ann.as_string()
        raise Untranslatable("param-type", ann.lineno, {"name": name, "hint_text": text})
    return found


def read_part(node: Optional[nodes.NodeNG], runtime: Callable, role: str,
              allowed: Tuple[str, ...], allowed_what: str, path: str,
              lines: List[bytes]) -> SpecPart:
    """Find the expression of one spec callable and check its parameter names."""
    part_path, part_lines = path, lines
    if isinstance(node, nodes.Lambda):
        params = [a.name for a in node.args.args or []]
        body, fn_like = node.body, node
    else:
        code = getattr(runtime, "__code__", None)
        if code is None:
            raise SpecError("spec-form", getattr(node, "lineno", 0), {"role": role}, path=path)
        part_path = code.co_filename
        module, part_lines = parse_file(part_path)
        fn_like = _find_callable(module, code)
        if fn_like is None:
            raise SpecError("spec-form", code.co_firstlineno, {"role": role}, path=part_path)
        params = [a.name for a in fn_like.args.args or []]
        body = fn_like.body if isinstance(fn_like, nodes.Lambda) else _single_return(fn_like)
        if body is None:
            raise SpecError("spec-form", fn_like.lineno, {"role": role}, path=part_path)
    a = fn_like.args
    if a.vararg or a.kwarg or a.kwonlyargs or a.posonlyargs:
        raise SpecError("spec-form", fn_like.lineno, {"role": role}, path=part_path)
    for name in params:
        if name not in allowed:
            raise SpecError("spec-names", fn_like.lineno, {
                "role": role, "name": name, "allowed_what": allowed_what,
                "allowed": ", ".join(allowed)}, path=part_path)
    return SpecPart(role=role, params=tuple(params), body=body, line=body.lineno,
                    path=part_path, text=node_text(body, part_lines),
                    globals=getattr(runtime, "__globals__", {}), runtime=runtime)


def _find_callable(module: nodes.Module, code):
    line = code.co_firstlineno
    if code.co_name == "<lambda>":
        found = [n for n in module.nodes_of_class(nodes.Lambda) if n.lineno == line]
        return found[0] if len(found) == 1 else None
    for n in module.nodes_of_class(nodes.FunctionDef):
        starts = [n.lineno] + [d.lineno for d in (n.decorators.nodes if n.decorators else [])]
        if n.name == code.co_name and line in starts:
            return n
    return None


def _single_return(fn_node: nodes.FunctionDef) -> Optional[nodes.NodeNG]:
    body = list(fn_node.body)
    if body and isinstance(body[0], nodes.Expr) and isinstance(body[0].value, nodes.Const) \
            and isinstance(body[0].value.value, str):
        body = body[1:]
    if len(body) == 1 and isinstance(body[0], nodes.Return) and body[0].value is not None:
        return body[0].value
    return None
