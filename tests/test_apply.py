"""--refines-diff and --refines-apply end to end, through pytester.

The project is a library-fines and bike-rental module with specs that are
refuted and have a suggested ``assuming=``, one that is proved, and one that
nothing can meet (no suggestion). The expected new text is built from the
suggestions the same run reports (``--refines-report``), so these tests pin
where and how the suggestion is written, not what it is.
"""

import difflib
import json
import shutil

import pytest

from helpers import commit, git

FINES = '''\
"""Library fines and bike rentals."""
from refines import attach, refines

CAP = 20


@refines(lambda days, result: result <= CAP)
def late_fee(days: int) -> int:
    return days * 2


@refines(lambda hours, result: result >= 0,
         assuming=lambda hours: hours > -50)  # rentals never refund
def rental_cost(hours: int) -> int:
    return hours * 3


@refines(lambda copies, result: result != result)
def never_fits(copies: int) -> int:
    return copies


@refines(lambda pages, result: result >= 1)
def shelf_slots(pages: int) -> int:
    return 1 + max(pages, 0) // 100


def deposit(bikes: int) -> int:
    return bikes * 50


attach(deposit, lambda bikes, result: result <= 500)
'''

FEE = "fines.py::late_fee"
RENTAL = "fines.py::rental_cost"
NEVER = "fines.py::never_fits"
SHELF = "fines.py::shelf_slots"
DEPOSIT = "fines.py::fines.deposit"  # an attached spec is named after its target

# One spec only, for the runs that are about the file rather than the specs.
LATE = '''\
from refines import refines

CAP = 20


@refines(lambda days, result: result <= CAP)
def late_fee(days: int) -> int:
    return days * 2
'''

LATE_DECORATOR = "@refines(lambda days, result: result <= CAP)"


def expected_fines(suggested: dict, only=None) -> str:
    """FINES with each suggestion written where --refines-apply writes it."""
    text = FINES
    places = {
        FEE: ("@refines(lambda days, result: result <= CAP)\n",
              "@refines(lambda days, result: result <= CAP, assuming={})\n"),
        RENTAL: ("         assuming=lambda hours: hours > -50)  # rentals never refund\n",
                 "         assuming={})  # rentals never refund\n"),
        DEPOSIT: ("attach(deposit, lambda bikes, result: result <= 500)\n",
                  "attach(deposit, lambda bikes, result: result <= 500, assuming={})\n"),
    }
    for nodeid, (old, new) in places.items():
        if only is None or nodeid in only:
            assert text.count(old) == 1
            text = text.replace(old, new.format(suggested[nodeid]))
    return text


def run(pytester, *args):
    return pytester.runpytest("-p", "no:cacheprovider", *args)


def report(pytester, path, *args):
    result = run(pytester, f"--refines-report={path}", *args)
    return result, json.loads(path.read_text())


def suggestions(data) -> dict:
    return {r["nodeid"]: r["suggested_assuming"] for r in data["results"]
            if r["suggested_assuming"]}


def files_of(folder) -> dict:
    """Every file under ``folder`` with its bytes. ``__pycache__`` is left out:
    importing a module may write bytecode there (Python's own doing)."""
    return {p.relative_to(folder).as_posix(): p.read_bytes()
            for p in sorted(folder.rglob("*"))
            if p.is_file() and "__pycache__" not in p.parts}


def indented(diff: str) -> list:
    """The diff as the terminal section prints it."""
    return ["  " + line for line in diff.rstrip("\n").splitlines()]


def contains_run(lines: list, run_of_lines: list) -> bool:
    n = len(run_of_lines)
    assert n, "an empty run is in every output"
    return any(lines[i:i + n] == run_of_lines for i in range(len(lines) - n + 1))


def make_project(pytester, source):
    # Written as is: pytester.makepyfile drops the last newline (observed).
    (pytester.path / "fines.py").write_text(source)
    pytester.makepyprojecttoml('[tool.pytest.ini_options]\nrefines_paths = ["fines.py"]\n')
    return pytester


@pytest.fixture
def project(pytester):
    return make_project(pytester, FINES)


@pytest.fixture
def late(pytester):
    return make_project(pytester, LATE)


@pytest.fixture
def git_env(pytester, monkeypatch):
    """git isolated from the machine: no repository above the project is found
    (GIT_CEILING_DIRECTORIES), no system configuration, and HOME (pytester sets
    it to the project folder) has none (git(1), "Environment Variables";
    recalled from memory)."""
    if shutil.which("git") is None:
        pytest.skip("git is not on PATH")
    for name in ("GIT_DIR", "GIT_WORK_TREE", "GIT_INDEX_FILE", "GIT_OBJECT_DIRECTORY"):
        monkeypatch.delenv(name, raising=False)
    monkeypatch.setenv("GIT_CEILING_DIRECTORIES", str(pytester.path.parent))
    monkeypatch.setenv("GIT_CONFIG_NOSYSTEM", "1")
    return pytester



# ---------------------------------------------------------------- --refines-diff


def test_diff_prints_the_change_and_writes_nothing(project, tmp_path):
    before = files_of(project.path)
    result, data = report(project, tmp_path / "report.json", "--refines-diff")
    assert files_of(project.path) == before
    result.assert_outcomes(passed=1, failed=4)
    result.stdout.fnmatch_lines([
        "*= refines diff =*",
        "fines.py: diff only",
        "  --- a/fines.py",
        "  +++ b/fines.py",
        "  -@refines(lambda days, result: result <= CAP)",
        "  +@refines(lambda days, result: result <= CAP, assuming=lambda days: *)",
        "  -         assuming=lambda hours: hours > -50)  # rentals never refund",
        "  +         assuming=lambda hours: *)  # rentals never refund",
        "  -attach(deposit, lambda bikes, result: result <= 500)",
        "  +attach(deposit, lambda bikes, result: result <= 500, assuming=lambda bikes: *)",
        "nothing was written; run with --refines-apply to make these changes *",
    ])
    assert "  checked again after the rewrite:" not in result.outlines
    (entry,) = data["rewrites"]
    assert entry["path"] == "fines.py" and entry["status"] == "diff only"
    assert entry["made"] == [FEE, RENTAL, DEPOSIT] and entry["refused"] == []
    assert entry["rechecked"] == []
    assert contains_run(result.outlines, indented(entry["diff"]))
    # The diff leads from the file as it is to the text --refines-apply writes.
    after = expected_fines(suggestions(data))
    assert entry["diff"] == "".join(difflib.unified_diff(
        FINES.splitlines(keepends=True), after.splitlines(keepends=True),
        "a/fines.py", "b/fines.py"))


# ---------------------------------------------------------------- --refines-apply


def test_apply_rewrites_a_committed_file_and_checks_it_again(project, git_env, tmp_path):
    commit(project.path)
    result, data = report(project, tmp_path / "report.json", "--refines-apply")
    suggested = suggestions(data)
    assert set(suggested) == {FEE, RENTAL, DEPOSIT}
    assert (project.path / "fines.py").read_text() == expected_fines(suggested)
    result.stdout.fnmatch_lines([
        "*= refines apply =*",
        "fines.py: written",
        "  --- a/fines.py",
        "  +++ b/fines.py",
        "  checked again after the rewrite:",
        f"    proved: {FEE}  (assuming= rewritten)",
        f"    proved: {RENTAL}  (assuming= rewritten)",
        f"    refuted: {NEVER}*",
        f"    proved: {SHELF}",
        f"    proved: {DEPOSIT}  (assuming= rewritten)",
    ])
    lines = result.outlines
    assert f"    proved: {SHELF}" in lines  # not marked: its spec was not touched
    assert not any(NEVER in line and "rewritten" in line for line in lines)
    assert "nothing was written" not in result.stdout.str()

    (entry,) = data["rewrites"]
    assert set(entry) == {"path", "status", "diff", "made", "refused", "rechecked"}
    assert entry["path"] == "fines.py" and entry["status"] == "written"
    assert entry["diff"].startswith("--- a/fines.py\n+++ b/fines.py\n@@ ")
    assert contains_run(lines, indented(entry["diff"]))
    assert entry["made"] == [FEE, RENTAL, DEPOSIT] and entry["refused"] == []
    assert {r["nodeid"]: r["verdict"] for r in entry["rechecked"]} == {
        FEE: "proved", RENTAL: "proved", NEVER: "refuted", SHELF: "proved",
        DEPOSIT: "proved"}
    assert all(set(r) == set(data["results"][0]) for r in entry["rechecked"])

    again, later = report(project, tmp_path / "again.json")
    again.assert_outcomes(passed=4, failed=1)
    assert {r["nodeid"]: r["verdict"] for r in later["results"]} == {
        FEE: "proved", RENTAL: "proved", NEVER: "refuted", SHELF: "proved",
        DEPOSIT: "proved"}
    assert "rewrites" not in later  # neither option given


def test_apply_with_xdist_makes_the_same_rewrite(project, git_env):
    pytest.importorskip("xdist")
    commit(project.path)
    serial = run(project, "--refines-apply")
    serial.stdout.fnmatch_lines(["fines.py: written"])
    written = (project.path / "fines.py").read_bytes()
    assert written != FINES.encode()
    git(project.path, "checkout", "--", "fines.py")
    assert (project.path / "fines.py").read_text() == FINES
    parallel = run(project, "--refines-apply", "-n", "2")
    assert parallel.outlines.count("fines.py: written") == 1  # by the controller alone
    parallel.stdout.fnmatch_lines([
        "fines.py: written",
        "  checked again after the rewrite:",
        f"    proved: {FEE}  (assuming= rewritten)",
    ])
    assert (project.path / "fines.py").read_bytes() == written


def test_keyword_selection_rewrites_only_the_selected_spec(project, git_env, tmp_path):
    commit(project.path)
    result, data = report(project, tmp_path / "report.json", "--refines-apply",
                          "-k", "late_fee")
    result.assert_outcomes(failed=1)
    assert (project.path / "fines.py").read_text() == \
        expected_fines(suggestions(data), only={FEE})
    (entry,) = data["rewrites"]
    assert entry["made"] == [FEE]
    # The whole rewritten file is checked again, selected or not.
    result.stdout.fnmatch_lines([f"    proved: {FEE}  (assuming= rewritten)",
                                 f"    refuted: {RENTAL}*"])


STATES = {
    "uncommitted": "it has changes not committed to git",
    "untracked": "it is not tracked by git",
    "no-repository": "it is not in a git repository, so nothing keeps its current text",
}


@pytest.mark.parametrize("state", list(STATES))
def test_a_file_git_does_not_hold_is_left_alone_unless_allowed(late, git_env, tmp_path,
                                                               state):
    path = late.path / "fines.py"
    if state == "uncommitted":
        commit(late.path)
        path.write_text(LATE + "# waived for staff\n")
    elif state == "untracked":
        commit(late.path, "pyproject.toml")
    else:
        probe = git(late.path, "rev-parse", "--show-toplevel", check=False)
        if probe.returncode == 0:
            pytest.skip(f"the project is inside a git repository ({probe.stdout.strip()})")
    source = path.read_text()

    refused = run(late, "--refines-apply")
    assert path.read_text() == source
    refused.stdout.fnmatch_lines([
        "*= refines apply =*",
        f"fines.py: not written: {STATES[state]} (commit it first, or pass "
        f"--refines-allow-uncommitted)",
        f"  -{LATE_DECORATOR}",
        f"  +{LATE_DECORATOR[:-1]}, assuming=lambda days: *)",
    ])
    assert "  checked again after the rewrite:" not in refused.outlines

    allowed, data = report(late, tmp_path / "report.json", "--refines-apply",
                           "--refines-allow-uncommitted")
    (suggestion,) = suggestions(data).values()
    assert path.read_text() == source.replace(
        LATE_DECORATOR, f"{LATE_DECORATOR[:-1]}, assuming={suggestion})")
    allowed.stdout.fnmatch_lines([
        "fines.py: written",
        "  checked again after the rewrite:",
        f"    proved: {FEE}  (assuming= rewritten)",
    ])


# ---------------------------------------------------------------- what is not written


def test_a_refuted_spec_without_a_suggestion_is_not_touched(pytester):
    source = ("from refines import refines\n\n\n"
              "@refines(lambda copies, result: result != result)\n"
              "def never_fits(copies: int) -> int:\n    return copies\n")
    (pytester.path / "fines.py").write_text(source)
    result = run(pytester, "--refines-path", "fines.py", "--refines-apply",
                 "--refines-allow-uncommitted")
    result.assert_outcomes(failed=1)
    assert "suggested:" not in result.stdout.str()
    result.stdout.fnmatch_lines(["*= refines apply =*",
                                 "no refuted spec has a suggested assuming= to write"])
    assert (pytester.path / "fines.py").read_text() == source


def test_an_assuming_that_is_a_named_function_is_left_as_it_is(pytester):
    source = ("from refines import refines\n\nCAP = 20\n\n\n"
              "def short_loan(days):\n    return days > -30\n\n\n"
              "@refines(lambda days, result: result <= CAP, assuming=short_loan)\n"
              "def late_fee(days: int) -> int:\n    return days * 2\n")
    (pytester.path / "fines.py").write_text(source)
    result = run(pytester, "--refines-path", "fines.py", "--refines-apply",
                 "--refines-allow-uncommitted")
    result.stdout.fnmatch_lines([
        "*suggested:*assuming=lambda days: *",  # there was something to write
        "*= refines apply =*",
        "fines.py: not written: no suggestion could be put in place",
        f"  left as it is: {FEE}: assuming= is `short_loan`, not a lambda; edit it by hand",
    ])
    assert (pytester.path / "fines.py").read_text() == source


EDITS_AFTER_THE_RUN = '''\
from pathlib import Path

import pytest


@pytest.hookimpl(tryfirst=True)
def pytest_sessionfinish(session):
    # Runs before the plugin's own pytest_sessionfinish, which has no tryfirst:
    # pluggy calls tryfirst implementations first, the others in LIFO
    # registration order (pluggy docs, "Call time order"; recalled from memory).
    # Without tryfirst the plugin's hook, registered later (in
    # pytest_configure), would run first and write the file: checked by hand.
    spec = Path(__file__).with_name("fines.py")
    spec.write_text(spec.read_text() + "# edited while the checks ran\\n")
'''


def test_a_file_edited_after_its_specs_ran_is_not_written(late):
    late.makeconftest(EDITS_AFTER_THE_RUN)
    result = run(late, "--refines-apply", "--refines-allow-uncommitted")
    result.assert_outcomes(failed=1)
    result.stdout.fnmatch_lines([
        "*= refines apply =*",
        "fines.py: not written: it changed after its specs were checked; run again to get "
        "suggestions for the current text",
        f"  left as it is: {FEE}: the file changed",
    ])
    # Only the conftest's edit is there: it did run first, and nothing was written.
    assert (late.path / "fines.py").read_text() == LATE + "# edited while the checks ran\n"
    assert "  checked again after the rewrite:" not in result.outlines


# ---------------------------------------------------------------- bad input


@pytest.mark.parametrize("args,needle", [
    (("--refines-apply", "--refines-diff"), "*--refines-apply and --refines-diff do not go "
                                            "together*choose one*"),
    (("--refines-allow-uncommitted",), "*--refines-allow-uncommitted only has an effect with "
                                       "--refines-apply*"),
])
def test_options_that_do_not_go_together_are_usage_errors(late, args, needle):
    before = files_of(late.path)
    result = run(late, *args)
    assert result.ret == pytest.ExitCode.USAGE_ERROR
    result.stderr.fnmatch_lines([needle])
    assert files_of(late.path) == before


def test_without_libcst_nothing_is_written_and_the_session_ends_normally(late, monkeypatch):
    # An import of a module set to None in sys.modules raises ImportError
    # (Python Language Reference, "The module cache"; recalled from memory).
    monkeypatch.setitem(__import__("sys").modules, "libcst", None)
    before = files_of(late.path)
    result = run(late, "--refines-apply", "--refines-allow-uncommitted")
    result.assert_outcomes(failed=1)
    result.stdout.fnmatch_lines(["*not written: libcst cannot be imported*install it*"])
    assert files_of(late.path) == before
