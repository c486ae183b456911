"""pytest collectors and items: one item per obligation.

Collection imports the user's module (as pytest imports test modules) and
reads the specs from the function objects; it does not parse or solve, so
it stays fast. Everything heavy happens in ``runtest``.
"""

from __future__ import annotations

import contextlib
import hashlib
import inspect
import json
import sys
from pathlib import Path
from typing import Callable, Iterator, List, Optional, Tuple

import pytest

from refines.declare import ATTACHED_ATTRIBUTE, SPECS_ATTRIBUTE


class RefinesFailure(Exception):
    """Raised by an item whose verdict fails; carries the result."""

    def __init__(self, result) -> None:
        super().__init__(result.verdict)
        self.result = result


def specced_functions(module) -> List[Callable]:
    """Functions of ``module`` (and methods of its classes) that carry specs."""
    found = []
    for obj in list(vars(module).values()):
        candidates = [obj]
        if inspect.isclass(obj) and obj.__module__ == module.__name__:
            candidates = [getattr(v, "__func__", v) for v in vars(obj).values()]
        for c in candidates:
            if not (callable(c) and getattr(c, SPECS_ATTRIBUTE, None)):
                continue
            # Through other decorators to the function as written: that body is
            # translated, so that body is replayed. Specs that sit above another
            # decorator stay on the wrapper, which the check reports as such.
            inner = inspect.unwrap(c)
            fn = inner if getattr(inner, SPECS_ATTRIBUTE, None) else c
            if (inspect.isfunction(fn) and inspect.unwrap(fn).__module__ == module.__name__
                    and fn not in found):
                found.append(fn)
    found.sort(key=lambda f: inspect.unwrap(f).__code__.co_firstlineno)
    return found


def attached_specs(module) -> list:
    """The specs ``module`` attached with ``attach`` while it was imported."""
    return list(vars(module).get(ATTACHED_ATTRIBUTE, ()))


@contextlib.contextmanager
def _without_assert_rewriting():
    """Import spec modules as Python does. pytest rewrites the asserts of test
    modules, and of any file named on the command line; a spec module is
    neither, and its asserts must behave as they do in production (the
    translation models plain asserts)."""
    try:
        from _pytest.assertion.rewrite import AssertionRewritingHook
    except ImportError:  # pragma: no cover -- a pytest without the hook
        yield
        return
    hooks = [(i, h) for i, h in enumerate(sys.meta_path)
             if isinstance(h, AssertionRewritingHook)]
    for _, h in reversed(hooks):
        sys.meta_path.remove(h)
    try:
        yield
    finally:
        for i, h in hooks:
            sys.meta_path.insert(i, h)


def obligations(module) -> Iterator[Tuple[str, Callable, int, object]]:
    """``(name, function, index, attached)`` for every spec ``module`` holds,
    in the order items are made: decorated functions by line, each stacked
    spec after the first named ``f[2]``, ``f[3]``; then attached specs."""
    for fn in specced_functions(module):
        count = len(getattr(fn, SPECS_ATTRIBUTE))
        for index in range(count):
            name = fn.__qualname__ if index == 0 else f"{fn.__qualname__}[{index + 1}]"
            yield name, fn, index, None
    seen: dict = {}
    for att in attached_specs(module):  # specs attached to functions defined elsewhere
        base = att.function
        seen[base] = seen.get(base, 0) + 1
        yield (base if seen[base] == 1 else f"{base}[{seen[base]}]"), att.target, 0, att


def import_spec_file(config: pytest.Config, path: Path):
    """Import a file under the refines paths as pytest imports a test module,
    but with its asserts as Python runs them."""
    from _pytest.pathlib import import_path

    with _without_assert_rewriting():
        return import_path(path, mode=config.getoption("importmode"), root=config.rootpath,
                           consider_namespace_packages=config.getini(
                               "consider_namespace_packages"))


def _digest(path: Path) -> Optional[str]:
    """The SHA-256 of a file as it is now (None if it cannot be read: then no
    rewrite will match it)."""
    try:
        return hashlib.sha256(path.read_bytes()).hexdigest()
    except OSError:
        return None


class RefinesFile(pytest.File):
    """A source file under the refines paths."""

    def collect(self) -> Iterator[pytest.Item]:
        try:
            module = import_spec_file(self.config, self.path)
        except Exception as exc:  # noqa: BLE001 -- report, do not crash the session
            raise self.CollectError(
                f"refines: could not import {self.path} to read its specs:\n"
                f"  {type(exc).__name__}: {exc}\n"
                f"Hint: the file must import cleanly (as a test module would).") from exc
        for name, fn, index, att in obligations(module):
            yield RefinesItem.from_parent(self, name=name, fn=fn, index=index,
                                          module_name=module.__name__, attached=att)


class RefinesItem(pytest.Item):
    """One obligation: one ``@refines`` spec of one function."""

    def __init__(self, *, fn: Callable, index: int, module_name: str, attached=None,
                 **kwargs) -> None:
        super().__init__(**kwargs)
        self.fn = fn
        self.index = index
        self.module_name = module_name
        self.attached = attached  # a declare.Attached, for a spec attached with attach()
        self.result = None

    def runtest(self) -> None:
        from refines.check import check_attached, check_function
        from refines.plugin import USER_PROPERTY, examples_of, timeout_of
        from refines.verdict import ERROR, REFUTED, TESTED, UNKNOWN

        explain = self.config.getoption("refines_explain")
        rewrite = self.config.getoption("refines_apply") or self.config.getoption("refines_diff")
        # The file as checked: a rewrite at the end of the session leaves it
        # alone if it changed in the meantime.
        digest = _digest(self.path) if rewrite else None
        if self.attached is not None:
            module = sys.modules.get(self.module_name)
            result = check_attached(self.attached, vars(module) if module else {},
                                    timeout_of(self.config), show=self.show,
                                    examples=examples_of(self.config), explain=explain)
        else:
            result = check_function(self.fn, self.index, str(self.path), self.module_name,
                                    timeout_of(self.config), show=self.show,
                                    examples=examples_of(self.config), explain=explain)
        self.result = result
        # JSON text: readable in --junitxml properties, and plain data for xdist.
        self.user_properties.append((USER_PROPERTY, json.dumps(
            result.to_json(self.nodeid, self.rel_path))))
        if rewrite and result.verdict == REFUTED and result.suggested_assuming:
            from refines.plugin import REWRITE_PROPERTY

            self.user_properties.append((REWRITE_PROPERTY, json.dumps({
                "nodeid": self.nodeid, "file": str(self.path), "line": result.line,
                "assuming": result.suggested_assuming, "was": result.assuming_text,
                "digest": digest})))
        strict = self.config.getoption("refines_strict")
        if result.verdict in (REFUTED, ERROR):
            raise RefinesFailure(result)
        if result.verdict in (TESTED, UNKNOWN) and strict:
            raise RefinesFailure(result)
        if result.verdict == UNKNOWN:
            from refines.report import one_line

            # Reported at the user's function, not at this line of the plugin.
            raise pytest.skip.Exception(one_line(result), _use_item_location=True)

    def show(self, path: str) -> str:
        """A file path as reports show it: relative to the rootdir when inside it."""
        from refines.plugin import shown_path

        return shown_path(self.config, path)

    @property
    def rel_path(self) -> str:
        return self.show(str(self.path))

    def repr_failure(self, excinfo, style=None):
        if isinstance(excinfo.value, RefinesFailure):
            from refines.report import render

            return render(excinfo.value.result,
                          strict=self.config.getoption("refines_strict"))
        return super().repr_failure(excinfo)

    def reportinfo(self):
        if self.attached is not None:
            return self.path, self.attached.line - 1, f"refines: {self.name}"
        line: Optional[int] = inspect.unwrap(self.fn).__code__.co_firstlineno - 1
        return self.path, line, f"refines: {self.name}"
