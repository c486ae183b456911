"""Shared helpers for the tests: turn source text into checked obligations."""

from __future__ import annotations

import importlib.util
import itertools
import sys
import textwrap
from pathlib import Path
from typing import List

from refines.check import check_attached, check_function
from refines.items import attached_specs, specced_functions
from refines.source import runtime_specs

HEADER = "from refines import attach, refines, old\n\n"
_counter = itertools.count()


def load_module(tmp_path: Path, source: str, header: str = HEADER):
    """Write ``source`` as a fresh module under ``tmp_path`` and import it."""
    name = f"refines_case_{next(_counter)}"
    path = tmp_path / f"{name}.py"
    path.write_text(header + textwrap.dedent(source), encoding="utf-8")
    spec = importlib.util.spec_from_file_location(name, path)
    module = importlib.util.module_from_spec(spec)
    sys.modules[name] = module
    spec.loader.exec_module(module)
    return module, path


def check_source(tmp_path: Path, source: str, timeout: float = 20.0,
                 header: str = HEADER, examples: int = 100) -> List:
    """Every obligation in ``source``, checked, in source order (attached
    specs last, in the order of their attach calls)."""
    module, path = load_module(tmp_path, source, header)
    results = []
    show = lambda p: Path(p).name  # noqa: E731
    for fn in specced_functions(module):
        for index in range(len(runtime_specs(fn))):
            results.append(check_function(fn, index, str(path), module.__name__, timeout,
                                          show=show, examples=examples))
    for att in attached_specs(module):
        results.append(check_attached(att, vars(module), timeout, show=show,
                                      examples=examples))
    return results


def check_one(tmp_path: Path, source: str, **kw):
    results = check_source(tmp_path, source, **kw)
    assert len(results) == 1, results
    return results[0]


def git(cwd, *args, check: bool = True):
    """Run git in ``cwd`` with a fixed identity and no signing, so that tests
    never depend on (or touch) the machine's git configuration."""
    import subprocess

    return subprocess.run(
        ["git", "-c", "user.email=t@t", "-c", "user.name=t", "-c", "commit.gpgsign=false",
         "-c", "init.defaultBranch=main", *args],
        cwd=cwd, check=check, capture_output=True, text=True)


def commit(folder, *paths, message: str = "specs") -> None:
    """A new repository in ``folder`` with ``paths`` (all files: none given) committed."""
    git(folder, "init", "-q")
    git(folder, "add", *(paths or ["-A"]))
    git(folder, "commit", "-q", "-m", message)
