"""End to end through pytester: collection, outcomes, options, the JSON report."""

import json
import math

import pytest

SPECS = '''
from refines import refines, old

LIMIT = 10


@refines(lambda x, result: result > x)
def bump(x: int) -> int:
    return x + 1


@refines(lambda x, result: result > 5)
def shifted(x: int) -> int:
    return x + 1


@refines(lambda n, result: result >= 0)
def looping(n: int) -> int:
    total = 0
    for i in range(n):
        total += i
    return total


@refines(lambda tag, result: result == tag)
def untyped(tag):
    return tag


@refines(lambda y, result: result == y)
def misnamed(x: int) -> int:
    return x


@refines(lambda x, result: result >= 0)
@refines(lambda x, result: result <= LIMIT, assuming=lambda x: x <= LIMIT)
def clamp(x: int) -> int:
    return max(0, min(x, LIMIT))
'''


def line_of(pytester, filename, needle):
    """The 1-based line of the first line containing ``needle``."""
    lines = (pytester.path / filename).read_text().splitlines()
    return next(i for i, text in enumerate(lines, 1) if needle in text)


@pytest.fixture
def project(pytester):
    pytester.makepyfile(specs=SPECS)
    pytester.makepyprojecttoml('[tool.pytest.ini_options]\nrefines_paths = ["specs.py"]\n')
    return pytester


def test_verdicts_map_to_pytest_outcomes(project):
    spec_line = line_of(project, "specs.py", "result > 5")
    result = project.runpytest("-p", "no:cacheprovider")
    result.assert_outcomes(passed=4, failed=2, skipped=1)
    result.stdout.fnmatch_lines([
        "*refuted: specs.shifted*",
        "*shifted(x=4)*",
        "*returned 5*",
        f"*violated:*result > 5*specs.py:{spec_line}*",
        "*exact precondition:  x > 4*",
        "*suggested:*assuming=lambda x: x > 4*",
        "*error: specs.misnamed*",
        "*specs.py:*the relation names `y`, which is not a parameter*",
        "*refines: 3 proved, 1 refuted, 1 tested, 1 unknown, 1 error*",
    ])


def test_a_loop_is_tested_and_the_summary_says_it_is_not_proved(project):
    loop_line = line_of(project, "specs.py", "for i in range")
    result = project.runpytest("-p", "no:cacheprovider", "-k", "looping")
    result.assert_outcomes(passed=1)
    result.stdout.fnmatch_lines([
        f"tested, NOT proved: specs.py::looping -- * examples passed; not proved: *"
        f"{loop_line}*",
        "*refines: 0 proved, 0 refuted, 1 tested, 0 unknown, 0 error*"])


def test_what_can_be_neither_proved_nor_called_is_skipped_with_the_reason(project):
    result = project.runpytest("-rs", "-p", "no:cacheprovider", "-k", "untyped")
    result.assert_outcomes(skipped=1)
    result.stdout.fnmatch_lines(
        ["*parameter `tag` has no type hint*not tested: parameter `tag` has no type hint*"])


def test_node_ids_and_stacked_specs(project):
    result = project.runpytest("--collect-only", "-q", "-p", "no:cacheprovider")
    result.stdout.fnmatch_lines([
        "specs.py::bump", "specs.py::shifted", "specs.py::looping", "specs.py::untyped",
        "specs.py::misnamed", "specs.py::clamp", "specs.py::clamp[[]2[]]",
    ])


def test_strict_fails_tested_and_unknown(project):
    for name in ("looping", "untyped"):
        result = project.runpytest("--refines-strict", "-p", "no:cacheprovider", "-k", name)
        result.assert_outcomes(failed=1)
        result.stdout.fnmatch_lines(["*failed because --refines-strict asks for a proof*"])


def test_keyword_selection_and_exitfirst(project):
    project.runpytest("-k", "bump or clamp", "-p", "no:cacheprovider").assert_outcomes(passed=3)
    result = project.runpytest("-x", "-p", "no:cacheprovider")
    result.assert_outcomes(passed=1, failed=1)


def test_last_failed_reruns_only_refutations(project):
    project.runpytest()
    result = project.runpytest("--lf")
    result.assert_outcomes(failed=2)


def test_junitxml_lists_each_obligation(project):
    result = project.runpytest("--junitxml=out.xml", "-p", "no:cacheprovider")
    xml = (project.path / "out.xml").read_text()
    assert xml.count("<testcase") == 7
    assert 'name="shifted"' in xml
    result.assert_outcomes(passed=4, failed=2, skipped=1)


def _report(pytester, *args):
    pytester.runpytest("--refines-report=report.json", "-p", "no:cacheprovider", *args)
    return json.loads((pytester.path / "report.json").read_text())


def test_json_report_follows_the_schema(project):
    data = _report(project)
    assert data["schema"] == "refines-report/1"
    assert data["summary"] == {"proved": 3, "refuted": 1, "tested": 1, "unknown": 1,
                               "error": 1}
    keys = {"nodeid", "function", "path", "line", "verdict", "seconds", "reason",
            "counterexample", "exact_precondition", "precondition_scope",
            "sufficient_preconditions", "suggested_assuming", "precondition_note", "notes",
            "testing", "explanation"}
    assert all(set(r) == keys for r in data["results"])
    by_id = {r["nodeid"]: r for r in data["results"]}
    shifted = by_id["specs.py::shifted"]
    assert shifted["function"] == "specs.shifted"
    assert shifted["path"] == "specs.py"
    assert shifted["line"] == line_of(project, "specs.py", "result > 5")
    assert shifted["verdict"] == "refuted"
    regression = shifted["counterexample"].pop("regression_test")
    assert shifted["counterexample"] == {
        "inputs": {"x": "4"}, "call": "shifted(x=4)", "outcome": {"returned": "5"},
        "confirmed": True, "violated": "result > 5", "found_by": "solver"}
    assert "result = shifted(x=x)" in regression and "assert result > 5" in regression
    assert shifted["testing"] is None
    assert shifted["exact_precondition"] == "x > 4"
    assert shifted["suggested_assuming"] == "lambda x: x > 4"
    assert shifted["precondition_scope"] == "function"
    assert shifted["sufficient_preconditions"] == []
    assert by_id["specs.py::bump"]["verdict"] == "proved"
    assert by_id["specs.py::bump"]["reason"] is None
    looping = by_id["specs.py::looping"]
    assert looping["verdict"] == "tested"
    assert looping["reason"].startswith("not proved: ")
    assert looping["testing"]["examples"] >= 50 and looping["testing"]["seed"]
    assert by_id["specs.py::untyped"]["verdict"] == "unknown"
    assert by_id["specs.py::misnamed"]["verdict"] == "error"
    assert {"specs.py::clamp", "specs.py::clamp[2]"} <= set(by_id)
    assert all(isinstance(r["seconds"], float) for r in data["results"])


def test_xdist_writes_one_combined_report(project):
    pytest.importorskip("xdist")
    serial = _report(project)
    parallel = _report(project, "-n", "2")
    # Times differ, and so may the tester's counts: which runs the watchdog
    # stops depends on how fast the machine is at that moment.
    strip = lambda d: [{k: v for k, v in r.items() if k not in ("seconds", "testing")}  # noqa: E731
                       for r in d["results"]]
    assert parallel["summary"] == serial["summary"]
    assert strip(parallel) == strip(serial)


def test_exact_precondition_evaluates_to_the_spec(pytester):
    # The printed precondition must be Python that eval accepts with the
    # parameters bound, and agree with running the function against the spec.
    pytester.makepyfile(specs='''
from refines import refines

@refines(lambda a, b, result: 0 <= result <= 100,
         raises={ValueError: lambda a, b: a < 0})
def mix(a: int, b: int) -> int:
    if a < 0:
        raise ValueError("negative")
    if b > 3:
        return a * 2 - b
    return a + b // 2
''')
    data = _report(pytester, "--refines-path", "specs.py")
    (r,) = data["results"]
    assert r["verdict"] == "refuted"
    pre = r["exact_precondition"]
    import importlib.util

    spec = importlib.util.spec_from_file_location("specs_eval", pytester.path / "specs.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    for a in range(-5, 70, 3):
        for b in range(-60, 60, 7):
            try:
                out = mod.mix(a, b)
                meets = a >= 0 and 0 <= out <= 100
            except ValueError:
                meets = a < 0
            assert eval(pre, {"math": math}, {"a": a, "b": b}) == meets, (a, b, pre)


def test_applying_the_suggestion_proves_the_spec(pytester):
    src = '''
from refines import refines

@refines(lambda climbers, result: 0 <= result <= 12, assuming={assuming})
def lanes(climbers: int) -> int:
    return (climbers + 1) // 2
'''
    pytester.makepyfile(specs=src.format(assuming="lambda climbers: climbers >= 0"))
    data = _report(pytester, "--refines-path", "specs.py")
    suggestion = data["results"][0]["suggested_assuming"]
    assert suggestion == "lambda climbers: 0 <= climbers <= 24"
    pytester.makepyfile(specs=src.format(assuming=suggestion))
    again = _report(pytester, "--refines-path", "specs.py")
    assert again["results"][0]["verdict"] == "proved"


def test_ini_paths_are_added_to_testpaths_runs(pytester):
    pytester.makepyfile(specs=SPECS)
    pytester.mkdir("tests")
    pytester.path.joinpath("tests", "test_plain.py").write_text("def test_ok():\n    pass\n")
    pytester.makepyprojecttoml('[tool.pytest.ini_options]\nrefines_paths = ["specs.py"]\n'
                               'testpaths = ["tests"]\n')
    result = pytester.runpytest("-p", "no:cacheprovider")
    result.assert_outcomes(passed=5, failed=2, skipped=1)
    # Naming a test file explicitly runs just that file.
    only = pytester.runpytest("tests/test_plain.py", "-p", "no:cacheprovider")
    only.assert_outcomes(passed=1)


def test_missing_paths_and_bad_timeout_are_usage_errors(pytester):
    pytester.makepyprojecttoml('[tool.pytest.ini_options]\nrefines_paths = ["nowhere"]\n')
    result = pytester.runpytest()
    assert result.ret == pytest.ExitCode.USAGE_ERROR
    result.stderr.fnmatch_lines(["*refines_paths*'nowhere' does not exist*"])
    pytester.makepyprojecttoml("")
    bad = pytester.runpytest("--refines-path", "missing.py")
    assert bad.ret == pytest.ExitCode.USAGE_ERROR
    bad.stderr.fnmatch_lines(["*--refines-path 'missing.py' does not exist*"])
    neg = pytester.runpytest("--refines-timeout", "0")
    neg.stderr.fnmatch_lines(["*--refines-timeout must be a positive number*"])


def test_a_module_that_fails_to_import_is_a_collection_error(pytester):
    pytester.makepyfile(broken="import no_such_module_here\n")
    pytester.makepyfile(good="from refines import refines\n\n"
                             "@refines(lambda x, result: result == x)\n"
                             "def same(x: int) -> int:\n    return x\n")
    result = pytester.runpytest("--refines-path", "broken.py", "--refines-path", "good.py",
                                "--continue-on-collection-errors")
    result.stdout.fnmatch_lines(["*could not import*broken.py*", "*ModuleNotFoundError*"])
    result.assert_outcomes(passed=1, errors=1)


def test_projects_without_specs_are_untouched(pytester):
    pytester.makepyfile(test_plain="def test_ok():\n    pass\n")
    result = pytester.runpytest()
    result.assert_outcomes(passed=1)
    assert "refines" not in result.stdout.str().split("short test summary")[0].lower() \
        or "refines:" not in result.stdout.str()


def test_verbose_lines_name_the_verdict(project):
    result = project.runpytest("-v", "-p", "no:cacheprovider")
    result.stdout.fnmatch_lines_random([
        "*specs.py::bump PROVED*", "*specs.py::shifted REFUTED*",
        "*specs.py::looping TESTED (not proved)*", "*specs.py::untyped UNKNOWN*",
        "*specs.py::misnamed ERROR*",
    ])
    strict = project.runpytest("-v", "--refines-strict", "-k", "looping or untyped",
                               "-p", "no:cacheprovider")
    strict.stdout.fnmatch_lines_random(["*specs.py::looping TESTED (not proved) (strict)*",
                                        "*specs.py::untyped UNKNOWN (strict)*"])


def test_skips_point_at_the_users_function(project):
    result = project.runpytest("-rs", "-k", "untyped", "-p", "no:cacheprovider")
    line = line_of(project, "specs.py", "def untyped")
    result.stdout.fnmatch_lines([f"UNKNOWN [[]1[]] specs.py:{line - 1}: refines unknown:*"])
    assert "items.py" not in result.stdout.str()


def test_junitxml_properties_carry_the_json_record(project):
    project.runpytest("--junitxml=out.xml", "-k", "shifted", "-p", "no:cacheprovider")
    import xml.etree.ElementTree as ET

    prop = ET.parse(project.path / "out.xml").find(".//property[@name='refines']")
    record = json.loads(prop.get("value"))
    assert record["verdict"] == "refuted" and record["exact_precondition"] == "x > 4"


def test_spec_modules_named_on_the_command_line_keep_plain_asserts(pytester):
    # pytest rewrites asserts of files named on the command line; a spec module
    # is imported as Python would, so its AssertionError carries only its message.
    pytester.makepyfile(gear='''
from refines import refines

@refines(lambda ropes, result: result == ropes)
def inspected(ropes: int) -> int:
    assert ropes >= 0, "negative rope count"
    return ropes
''')
    result = pytester.runpytest("gear.py", "--refines-path", "gear.py", "-p", "no:cacheprovider")
    result.stdout.fnmatch_lines(["*raised AssertionError: negative rope count"])
    assert "assert -1 >= 0" not in result.stdout.str()


def test_spec_above_another_decorator_reports_the_users_line(pytester):
    pytester.makepyfile(cases='''
import functools
from refines import refines

def logged(fn):
    @functools.wraps(fn)
    def wrapper(*args, **kwargs):
        return fn(*args, **kwargs)
    return wrapper

@refines(lambda x, result: result == x)
@logged
def above(x: int) -> int:
    return x
''')
    data = _report(pytester, "--refines-path", "cases.py")
    (r,) = data["results"]
    assert r["verdict"] == "tested"  # the wrapper it describes is called, not translated
    assert r["line"] == line_of(pytester, "cases.py", "@refines(")
    assert r["function"] == "cases.above"


def test_a_proof_resting_on_an_assumption_is_listed_with_it(pytester):
    # str(n) is taken to succeed below the interpreter's digit limit (not
    # modelled); the summary says so beside the proved obligation, and the JSON
    # record carries the note.
    import sys

    if not getattr(sys, "get_int_max_str_digits", lambda: 0)():
        pytest.skip("no int string conversion limit in this interpreter")
    pytester.makeini("[pytest]\nrefines_paths = badge.py\n")
    pytester.makepyfile(badge=(
        "from refines import refines\n\n"
        "@refines(lambda n, result: len(result) >= 1)\n"
        "def badge(n: int) -> str:\n"
        "    return str(n)\n"))
    result = pytester.runpytest("-p", "no:cacheprovider", "--refines-report=report.json")
    result.assert_outcomes(passed=1)
    result.stdout.fnmatch_lines(["proved, assumed: str() of an int at line 5 is taken to "
                                 "succeed*: badge.py::badge"])
    record = json.loads((pytester.path / "report.json").read_text())["results"][0]
    assert any(n.startswith("assumed: str() of an int") for n in record["notes"])


def test_attached_specs_are_items_of_the_attaching_file(pytester):
    pytester.makepyfile(stdlib_specs='''
import calendar
from refines import attach

attach(calendar.isleap, lambda year, result: result == (year % 4 == 0),
       hints={"year": int})
attach(abs, lambda x, result: result >= 0, hints={"x": int})
''')
    ids = pytester.runpytest("--refines-path", "stdlib_specs.py", "--collect-only", "-q",
                             "-p", "no:cacheprovider")
    ids.stdout.fnmatch_lines(["stdlib_specs.py::calendar.isleap",
                              "stdlib_specs.py::builtins.abs"])
    data = _report(pytester, "--refines-path", "stdlib_specs.py")
    by_id = {r["nodeid"]: r for r in data["results"]}
    leap = by_id["stdlib_specs.py::calendar.isleap"]
    assert leap["verdict"] == "refuted" and leap["function"] == "calendar.isleap"
    assert leap["path"] == "stdlib_specs.py"
    assert leap["line"] == line_of(pytester, "stdlib_specs.py", "attach(calendar.isleap")
    assert by_id["stdlib_specs.py::builtins.abs"]["verdict"] == "tested"


def test_testing_leaves_no_files_in_the_project(pytester):
    pytester.makepyfile(loops='''
from refines import refines

@refines(lambda word, result: result <= len(word))
def vowels(word: str) -> int:
    n = 0
    for ch in word:
        if ch in "aeiou":
            n += 1
    return n
''')
    before = sorted(p.name for p in pytester.path.iterdir())
    result = pytester.runpytest("--refines-path", "loops.py", "-p", "no:cacheprovider")
    result.assert_outcomes(passed=1)
    assert sorted(p.name for p in pytester.path.iterdir()) == before  # no .hypothesis/


def test_the_example_count_is_an_option_and_an_ini_value(pytester):
    pytester.makepyfile(specs='''
from refines import refines

@refines(lambda a, b, result: result == a + b)
def add(a: int, b: int) -> int:
    try:
        return a + b
    finally:
        pass
''')
    few = _report(pytester, "--refines-path", "specs.py", "--refines-examples", "5")
    t = few["results"][0]["testing"]
    assert 0 < t["examples"] - t["from_solver"] - t["boundary"] <= 5
    pytester.makeini("[pytest]\nrefines_examples = 7\n")
    ini = _report(pytester, "--refines-path", "specs.py")
    t = ini["results"][0]["testing"]
    assert 0 < t["examples"] - t["from_solver"] - t["boundary"] <= 7
    bad = pytester.runpytest("--refines-path", "specs.py", "--refines-examples", "0")
    assert bad.ret == pytest.ExitCode.USAGE_ERROR
    bad.stderr.fnmatch_lines(["*--refines-examples must be at least 1*"])


def test_a_refutation_found_by_testing_shows_a_regression_test(pytester):
    pytester.makepyfile(specs='''
from refines import refines

SEATS = 40

@refines(lambda booked, result: result == (booked >= SEATS), assuming=lambda booked: booked >= 0)
def full(booked: int) -> bool:
    try:
        return booked > SEATS
    finally:
        pass
''')
    result = pytester.runpytest("--refines-path", "specs.py", "-p", "no:cacheprovider")
    result.assert_outcomes(failed=1)
    result.stdout.fnmatch_lines([
        "*counterexample (found by testing, confirmed by running the function):",
        "*full(booked=40)",
        "*returned False",
        "*regression test (paste it into your tests; it fails until the bug is fixed):",
        "*def test_full_counterexample():",
        "*from specs import full, SEATS",
        "*booked = 40",
        "*result = full(booked=booked)",
        "*assert result == (booked >= SEATS)",
        "*tested, not proved, because: not translated: `try` statements*",
        "refuted: specs.py::full -- found by testing",
    ])


def test_loops_end_to_end_tested_refuted_and_proved_through(pytester):
    # A loop with a true spec is tested; a loop bug is refuted by testing with a
    # regression test; an untranslated part that does not matter is proved,
    # and the summary names the part.
    pytester.makepyfile(loops='''
from refines import refines

@refines(lambda holds, result: 0 <= result <= len(holds))
def jugs(holds: list[str]) -> int:
    n = 0
    for h in holds:
        if h.startswith("J"):
            n += 1
    return n

RESERVED_LANES = 3

@refines(lambda lanes, result: result == max(lanes - RESERVED_LANES, 0),
         assuming=lambda lanes: lanes >= 0)
def open_lanes(lanes: int) -> int:
    free = 0
    while lanes > RESERVED_LANES + 1:
        lanes -= 1
        free += 1
    return free

@refines(lambda name, result: result.startswith("CRUX-"))
def tag(name: str) -> str:
    return "CRUX-" + name.strip().upper()
''')
    result = pytester.runpytest("--refines-path", "loops.py", "-v", "-p", "no:cacheprovider")
    result.assert_outcomes(passed=2, failed=1)
    result.stdout.fnmatch_lines_random([
        "*loops.py::jugs TESTED (not proved)*",
        "*loops.py::open_lanes REFUTED*",
        "*loops.py::tag PROVED*",
        "*counterexample (found by testing, confirmed by running the function):",
        "*open_lanes(lanes=*)",
        "*def test_open_lanes_counterexample():",
        "proved, untranslated: proved whatever these parts do: *`name.strip()`*: loops.py::tag",
    ])
