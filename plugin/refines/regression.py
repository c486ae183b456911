"""A pytest function that fails on a counterexample: what a refutation hands
the user to paste into their own tests, so the bug stays fixed.

The test is built from the spec as written: the arguments as Python
literals, ``old(e)`` as a copy of ``e`` taken before the call, the relation as
an ``assert``, a required exception as ``pytest.raises``. Before it is shown it
is run once, and only a test that fails on the counterexample is shown.
"""

from __future__ import annotations

import ast
import builtins
import dataclasses
import enum
import types
from typing import Any, Dict, List, Optional

from refines import replay
from refines.source import Obligation
from refines.verdict import REFUTED, Counterexample, Result


def refute(result: Result, ob: Obligation, pre: Dict[str, Any], run: replay.Run,
           judgement: replay.Judgement, found_by: str, limit: Optional[float]) -> Result:
    """Make ``result`` the refutation by this run: the counterexample as the
    report shows it (``pre``: the inputs before the call), the aliasing it
    needs, and the regression test."""
    result.verdict = REFUTED
    alias = replay.shared(ob, pre)
    if alias:
        result.notes.append("aliasing: " + "; ".join(
            f"`{a}` is the same object as `{b}`" for a, b in alias.items())
            + " -- the counterexample needs it, and a repr cannot show it")
    result.counterexample = Counterexample(
        inputs={k: replay.shown(v) for k, v in pre.items()},
        call=replay.call_text(ob, pre), outcome=run.outcome, confirmed=True,
        violated=judgement.violated, violated_at=judgement.violated_at,
        detail=judgement.detail or (str(run.raised) if run.raised else ""),
        found_by=found_by, regression_test=regression_test(ob, replay.before(pre), limit))
    return result


class _CannotWrite(Exception):
    """A value or a name the test could not spell in Python."""


def regression_test(ob: Obligation, pre: Dict[str, Any], limit: Optional[float]) -> str:
    """The text of a failing pytest function for the inputs ``pre`` (as they
    were before the call), or "" when none could be written faithfully. It
    never raises: a refutation stands without it."""
    try:
        return _checked(ob, pre, limit)
    except Exception:  # noqa: BLE001 -- an aid; the counterexample is shown anyway
        return ""


def _checked(ob: Obligation, pre: Dict[str, Any], limit: Optional[float]) -> str:
    try:
        text, name = _write(ob, pre)
    except (_CannotWrite, SyntaxError, ValueError):
        return ""
    try:
        namespace: dict = {}
        exec(compile(text, f"<regression test for {ob.function}>", "exec"), namespace)  # noqa: S102
        with replay.watchdog(limit):
            namespace[name]()
    except (KeyboardInterrupt, replay.Overrun):
        return ""
    except BaseException:  # noqa: BLE001 -- it fails, as it must
        return text
    return ""  # it passed: it would not guard against the bug


def _write(ob: Obligation, pre: Dict[str, Any]):
    imports: List[str] = []
    body: List[str] = []
    fn_module, fn_top = _function_import(ob)
    if fn_module:
        _add(imports, f"from {fn_module} import {fn_top}")
    alias = replay.shared(ob, pre)
    for name in ob.names:
        if name in alias:
            body.append(f"{name} = {alias[name]}")
        else:
            body.extend(_bind(name, pre[name], imports))
    call_parts = [name if kind == "positional-only" else f"{name}={name}"
                  for name, kind in zip(ob.names, ob.kinds)]
    call = f"{ob.call_name}({', '.join(call_parts)})"
    if ob.is_async:
        _add(imports, "import asyncio")
        call = f"asyncio.run({call})"
    required = [cls for cls, part in ob.raises if replay._call_part(part, pre)]
    if required:
        _add(imports, "import pytest")
        classes = [_class_name(cls, imports) for cls in required]
        spelled = classes[0] if len(classes) == 1 else "(" + ", ".join(classes) + ")"
        body.append(f"with pytest.raises({spelled}):")
        body.append(f"    {call}")
    else:
        rel = ob.relation
        tree = ast.parse("(\n" + rel.text + "\n)", mode="eval")  # as written, on many lines too
        olds: Dict[str, str] = {}  # the text of each old(e) -> the name it is read into
        tree = _replace_olds(tree, olds, rel)
        if olds:
            # One deep copy of them all, taken before the call: two names for
            # one object stay one object, as in the pre-state.
            _add(imports, "import copy")
            names, exprs = list(olds.values()), list(olds)
            if len(olds) == 1:
                body.append(f"{names[0]} = copy.deepcopy({exprs[0]})")
            else:
                body.append(f"{', '.join(names)} = copy.deepcopy(({', '.join(exprs)}))")
        for free in _free_names(tree, set(ob.names) | {"result"} | set(olds.values())):
            imports_for = _global_import(free, rel.globals)
            if imports_for:
                _add(imports, imports_for)
        body.append(f"result = {call}")
        condition = rel.text.strip() if not olds and "\n" not in rel.text \
            else ast.unparse(tree.body)
        body.append(f"assert {condition}")
    imports = _grouped(imports)
    name = "test_" + _identifier(ob.call_name) + "_counterexample"
    where = ob.where(ob.path, ob.line)
    lines = [f"def {name}():", f'    """The counterexample pytest-refines found to the spec at {where}."""']
    lines += ["    " + i for i in imports] + ["    " + b for b in body]
    return "\n".join(lines) + "\n", name


def _grouped(imports: List[str]) -> List[str]:
    """``from m import a`` and ``from m import b`` as ``from m import a, b``."""
    out: List[str] = []
    names: Dict[str, List[str]] = {}
    for line in imports:
        if line.startswith("from ") and " import " in line:
            module, name = line[5:].split(" import ", 1)
            if module not in names:
                names[module] = []
                out.append(module)
            names[module].append(name)
        else:
            out.append(line)
    return [f"from {m} import {', '.join(names[m])}" if m in names else m for m in out]


def _add(lines: List[str], line: str) -> None:
    if line not in lines:
        lines.append(line)


def _identifier(text: str) -> str:
    return "".join(c if c.isalnum() else "_" for c in text).strip("_").lower() or "function"


def _function_import(ob: Obligation):
    if "<" in ob.qualname:
        raise _CannotWrite("a function defined inside another cannot be imported")
    if ob.module in ("builtins", "__main__"):
        return None, None
    return ob.module, ob.call_name.split(".")[0]


def _class_name(cls: type, imports: List[str]) -> str:
    if cls.__module__ == "builtins":
        return cls.__qualname__
    if "<" in cls.__qualname__:
        raise _CannotWrite(f"{cls!r} cannot be imported")
    _add(imports, f"from {cls.__module__} import {cls.__qualname__.split('.')[0]}")
    return cls.__qualname__


def _global_import(name: str, globals_: dict) -> Optional[str]:
    if name not in globals_:
        if hasattr(builtins, name):
            return None
        raise _CannotWrite(f"the spec names {name}, which its module does not define")
    value = globals_[name]
    if isinstance(value, types.ModuleType):
        return f"import {value.__name__}" if value.__name__ == name \
            else f"import {value.__name__} as {name}"
    module = globals_.get("__name__")
    if not module or module == "__main__":
        raise _CannotWrite("the spec's module cannot be imported")
    return f"from {module} import {name}"


def _free_names(tree: ast.AST, bound: set) -> List[str]:
    """Names the expression reads from its module (not those bound inside it
    by a lambda or a comprehension)."""
    inner = {n.id for n in ast.walk(tree) if isinstance(n, ast.Name)
             and isinstance(n.ctx, ast.Store)}
    inner |= {n.arg for n in ast.walk(tree) if isinstance(n, ast.arg)}
    out: List[str] = []
    for n in ast.walk(tree):
        if isinstance(n, ast.Name) and isinstance(n.ctx, ast.Load) \
                and n.id not in bound | inner and n.id not in out:
            out.append(n.id)
    return out


def _replace_olds(tree: ast.Expression, olds: Dict[str, str], part) -> ast.Expression:
    """Each ``old(e)`` replaced by a name (``old_waiting`` for ``old(waiting)``,
    ``old_0``... otherwise); ``olds`` maps the text of ``e`` to it."""
    from refines.declare import old

    class Reader(ast.NodeTransformer):
        def visit_Call(self, node: ast.Call):
            func = node.func
            target = None
            if isinstance(func, ast.Name):
                target = part.globals.get(func.id)
            elif isinstance(func, ast.Attribute) and isinstance(func.value, ast.Name):
                target = getattr(part.globals.get(func.value.id), func.attr, None)
            if target is old and len(node.args) == 1 and not node.keywords:
                text = ast.unparse(node.args[0])
                if text not in olds:
                    arg = node.args[0]
                    olds[text] = (f"old_{arg.id}" if isinstance(arg, ast.Name)
                                  else f"old_{len(olds)}")
                return ast.copy_location(ast.Name(olds[text], ast.Load()), node)
            return self.generic_visit(node)

    return ast.fix_missing_locations(Reader().visit(tree))


# ---------------------------------------------------------------- values


def _bind(name: str, value: Any, imports: List[str]) -> List[str]:
    """Statements that bind ``name`` to a value equal to ``value``."""
    cls = type(value)
    if _plain_object(value):
        spelled = _class_name(cls, imports)
        lines = [f"{name} = {spelled}.__new__({spelled})"]
        for attr, v in vars(value).items():
            lines.append(f"object.__setattr__({name}, {attr!r}, {_expr(v, imports)})")
        return lines
    return [f"{name} = {_expr(value, imports)}"]


def _plain_object(value: Any) -> bool:
    cls = type(value)
    return (cls.__module__ not in ("builtins",) and not dataclasses.is_dataclass(value)
            and not isinstance(value, enum.Enum) and hasattr(value, "__dict__")
            and cls.__repr__ is object.__repr__)


def _expr(value: Any, imports: List[str]) -> str:
    """A Python expression equal to ``value``."""
    if value is None or isinstance(value, (bool, int, str, bytes)):
        return replay.shown(value) if isinstance(value, int) and not isinstance(value, bool) \
            else repr(value)
    if isinstance(value, float):
        return replay.literal(value)
    if isinstance(value, tuple) and type(value) is tuple:
        inner = ", ".join(_expr(v, imports) for v in value)
        return f"({inner},)" if len(value) == 1 else f"({inner})"
    if type(value) is list:
        return "[" + ", ".join(_expr(v, imports) for v in value) + "]"
    if type(value) in (set, frozenset):
        if not value:
            return "set()" if type(value) is set else "frozenset()"
        inner = "{" + ", ".join(sorted(_expr(v, imports) for v in value)) + "}"
        return inner if type(value) is set else f"frozenset({inner})"
    if type(value) is dict:
        return "{" + ", ".join(f"{_expr(k, imports)}: {_expr(v, imports)}"
                               for k, v in value.items()) + "}"
    if isinstance(value, enum.Enum):
        return f"{_class_name(type(value), imports)}.{value.name}"
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        fields = dataclasses.fields(value)
        if all(f.init for f in fields):
            args = ", ".join(f"{f.name}={_expr(getattr(value, f.name), imports)}" for f in fields)
            return f"{_class_name(type(value), imports)}({args})"
    raise _CannotWrite(f"no literal for {type(value).__qualname__} values")

