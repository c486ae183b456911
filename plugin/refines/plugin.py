"""The pytest plugin (entry point ``pytest11: refines``).

Light by design: nothing heavy (z3, astroid, hypothesis) is imported here or
at collection, so projects without specs pay nothing. The solver loads in the
first item that runs.
"""

from __future__ import annotations

import json
import os
from pathlib import Path
from typing import List, Optional

import pytest

PATHS_KEY = pytest.StashKey[List[Path]]()
USER_PROPERTY = "refines"
REWRITE_PROPERTY = "refines-rewrite"  # what --refines-apply/--refines-diff would change
DEFAULT_TIMEOUT = 10.0
DEFAULT_EXAMPLES = 100


def pytest_addoption(parser: pytest.Parser) -> None:
    group = parser.getgroup("refines", "proving that functions refine their specs")
    group.addoption(
        "--refines-path", action="append", default=[], metavar="PATH",
        help="file or folder whose @refines specs are checked (repeatable; "
             "added to the ini option refines_paths)")
    group.addoption(
        "--refines-timeout", type=float, default=None, metavar="SECONDS",
        help=f"solver budget per obligation (default {DEFAULT_TIMEOUT:g})")
    group.addoption(
        "--refines-report", default=None, metavar="PATH",
        help="write the verdicts as JSON (schema refines-report/1) to PATH")
    group.addoption(
        "--refines-examples", type=int, default=None, metavar="N",
        help=f"examples drawn when an obligation is tested rather than proved "
             f"(default {DEFAULT_EXAMPLES}; the solver's inputs and boundary values come on top)")
    group.addoption(
        "--refines-strict", action="store_true", default=False,
        help="fail obligations that are only tested or unknown, not proved")
    group.addoption(
        "--refines-apply", action="store_true", default=False,
        help="write each refuted spec's suggested assuming= into its source file (only "
             "files committed to git as they are), print the diff, and check the "
             "rewritten files again")
    group.addoption(
        "--refines-diff", action="store_true", default=False,
        help="print the diff --refines-apply would make, and change nothing")
    group.addoption(
        "--refines-allow-uncommitted", action="store_true", default=False,
        help="with --refines-apply, also rewrite files with changes not committed to "
             "git, or not in git at all")
    group.addoption(
        "--refines-explain", action="store_true", default=False,
        help="print, for each spec, the before/after relation the translation computed "
             "and what it guarantees under assuming")
    parser.addini(
        "refines_paths", type="linelist", default=[],
        help="files or folders (relative to the rootdir) whose @refines specs are checked")
    parser.addini(
        "refines_timeout", default=str(DEFAULT_TIMEOUT),
        help="solver budget per obligation in seconds")
    parser.addini(
        "refines_examples", default=str(DEFAULT_EXAMPLES),
        help="examples drawn when an obligation is tested rather than proved")


def pytest_configure(config: pytest.Config) -> None:
    root = config.rootpath
    paths: List[Path] = []
    for raw in config.getini("refines_paths"):
        p = (root / raw).resolve()
        if not p.exists():
            raise pytest.UsageError(
                f"refines_paths in {config.inipath or 'the ini file'}: {raw!r} does not exist "
                f"(paths are relative to the rootdir {root}); list existing files or folders")
        paths.append(p)
    explicit: List[Path] = []
    for raw in config.getoption("refines_path") or []:
        p = Path(raw)
        p = (p if p.is_absolute() else Path(config.invocation_params.dir) / p).resolve()
        if not p.exists():
            raise pytest.UsageError(
                f"--refines-path {raw!r} does not exist; give an existing file or folder")
        explicit.append(p)
    config.stash[PATHS_KEY] = paths + explicit
    config.pluginmanager.register(Gatherer(config), "refines-gatherer")
    timeout = timeout_of(config)
    if timeout <= 0:
        raise pytest.UsageError(f"--refines-timeout must be a positive number of seconds, "
                                f"got {timeout:g}")
    if examples_of(config) < 1:
        raise pytest.UsageError(f"--refines-examples must be at least 1, "
                                f"got {examples_of(config)}")
    if config.getoption("refines_apply") and config.getoption("refines_diff"):
        raise pytest.UsageError("--refines-apply and --refines-diff do not go together: "
                                "--refines-diff only shows the change, --refines-apply makes "
                                "it (and shows it too); choose one")
    if config.getoption("refines_allow_uncommitted") and not config.getoption("refines_apply"):
        raise pytest.UsageError("--refines-allow-uncommitted only has an effect with "
                                "--refines-apply; add --refines-apply to rewrite files")

    # Specs are collected even when no test path names them: the ini paths are
    # added unless the user named what to run; --refines-path always is.
    args_given = config.args_source == pytest.Config.ArgsSource.ARGS
    wanted = explicit + ([] if args_given else paths)
    covered = [_arg_path(config, a) for a in config.args]
    for p in wanted:
        if not any(c is not None and (p == c or c in p.parents) for c in covered):
            config.args.append(str(p))
            covered.append(p)


def _arg_path(config: pytest.Config, arg: str) -> Optional[Path]:
    base = arg.split("::")[0]
    p = Path(base)
    p = p if p.is_absolute() else Path(config.invocation_params.dir) / p
    try:
        return p.resolve()
    except OSError:
        return None


def shown_path(config: pytest.Config, path) -> str:
    """A file path as reports show it: relative to the rootdir when inside it."""
    try:
        return Path(path).resolve().relative_to(config.rootpath).as_posix()
    except ValueError:
        return str(path)


def timeout_of(config: pytest.Config) -> float:
    return _setting(config, "refines_timeout", float, "seconds as a number")


def examples_of(config: pytest.Config) -> int:
    return _setting(config, "refines_examples", int, "a whole number")


def _setting(config: pytest.Config, name: str, convert, expected: str):
    """A value from the command line, else from the ini file (as ``convert``)."""
    value = config.getoption(name)
    if value is None:
        try:
            value = convert(config.getini(name))
        except ValueError:
            raise pytest.UsageError(
                f"{name} in {config.inipath}: expected {expected}, "
                f"got {config.getini(name)!r}") from None
    return convert(value)


def pytest_collect_file(file_path: Path, parent: pytest.Collector):
    if file_path.suffix != ".py" or file_path.name == "conftest.py":
        return None
    paths = parent.config.stash.get(PATHS_KEY, [])
    resolved = file_path.resolve()
    if not any(resolved == p or p in resolved.parents for p in paths):
        return None
    from refines.items import RefinesFile

    return RefinesFile.from_parent(parent, path=file_path)


# How each verdict shows in pytest's progress line: (category, letter, word).
# The category keeps pytest's own counts and exit status; the word says which
# verdict it was, so "proved" is never blurred with "passed" or "tested".
_STATUS = {
    "proved": ("passed", ".", "PROVED"),
    "tested": ("passed", "t", "TESTED (not proved)"),
    "refuted": ("failed", "F", "REFUTED"),
    "error": ("failed", "F", "ERROR"),
    "unknown": ("skipped", "s", "UNKNOWN"),
}


def pytest_report_teststatus(report, config):
    if report.when != "call":
        return None
    for key, value in getattr(report, "user_properties", ()):
        if key == USER_PROPERTY:
            category, letter, word = _STATUS[json.loads(value)["verdict"]]
            if report.outcome != category:  # --refines-strict turned it into a failure
                return report.outcome, "F", word + " (strict)"
            return category, letter, word
    return None


class Gatherer:
    """Gathers verdicts from reports and writes the summary and JSON report.

    Registered per session; under xdist the reports reach the controller with
    their ``user_properties`` (each record as JSON text), so the controller
    alone writes one combined report.
    """

    def __init__(self, config: pytest.Config) -> None:
        self.config = config
        self.results: List[dict] = []
        self.edits: List[dict] = []  # suggestions to write (--refines-apply/--refines-diff)
        self.rewrites: Optional[List[dict]] = None  # what became of them

    def pytest_runtest_logreport(self, report: pytest.TestReport) -> None:
        if report.when != "call":
            return
        for key, value in report.user_properties:
            if key == USER_PROPERTY:
                self.results.append(json.loads(value))
            elif key == REWRITE_PROPERTY:
                self.edits.append(json.loads(value))

    def pytest_terminal_summary(self, terminalreporter) -> None:
        if self.rewrites is not None:
            from refines.report import rewrite_lines

            terminalreporter.section("refines apply" if self.config.getoption("refines_apply")
                                     else "refines diff")
            for line in rewrite_lines(self.rewrites, self.config.getoption("refines_apply")):
                terminalreporter.write_line(line)
        if not self.results:
            return
        from refines.report import summary_lines

        if self.config.getoption("refines_explain"):
            from refines.report import explain_lines

            terminalreporter.section("refines explain")
            for line in explain_lines(self.results):
                terminalreporter.write_line(line)
        terminalreporter.section("refines")
        for line in summary_lines(self.results):
            terminalreporter.write_line(line)
        if self.rewrites and self.config.getoption("refines_apply"):
            from refines.report import rewrite_summary

            terminalreporter.write_line(rewrite_summary(self.rewrites))

    def pytest_sessionfinish(self, session: pytest.Session) -> None:
        if hasattr(self.config, "workerinput"):
            return
        if self.config.getoption("refines_apply") or self.config.getoption("refines_diff"):
            from refines.apply import run

            try:
                self.rewrites = run(self.config, self.edits, timeout_of(self.config),
                                    examples_of(self.config),
                                    lambda p: shown_path(self.config, p))
            except Exception as exc:  # noqa: BLE001 -- never crash the session, write nothing
                why = (f"libcst cannot be imported ({exc}); install it: python -m pip install "
                       f"libcst" if isinstance(exc, ImportError)
                       else f"internal error: {type(exc).__name__}: {exc}")
                self.rewrites = [{"path": "(all files)", "status": f"not written: {why}",
                                  "diff": "", "made": [], "refused": [], "rechecked": []}]
        target = self.config.getoption("refines_report")
        if not target:
            return
        from refines.report import json_report

        path = Path(target)
        if not path.is_absolute():
            path = Path(self.config.invocation_params.dir) / path
        path.parent.mkdir(parents=True, exist_ok=True)
        tmp = path.with_name(path.name + ".tmp")
        tmp.write_text(json.dumps(json_report(self.results, self.rewrites), indent=2) + "\n",
                       encoding="utf-8")
        os.replace(tmp, path)

