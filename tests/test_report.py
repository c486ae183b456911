"""Rendering verdicts: every line says proved or not; refutations read as a call."""

from refines.report import json_report, render, summary_lines
from refines.verdict import Counterexample, Result


def refuted():
    return Result(
        verdict="refuted", function="gym.fee", path="gym.py", line=7, seconds=0.01,
        counterexample=Counterexample(
            inputs={"age": "14"}, call="fee(age=14)", outcome={"returned": "1100"},
            confirmed=True, violated="result == 1800", violated_at="gym.py:7"),
        exact_precondition="age != 14", suggested_assuming="lambda age: age != 14")


def test_refutation_reads_call_outcome_violation_then_precondition():
    text = render(refuted())
    lines = text.splitlines()
    assert lines[0] == "refuted: gym.fee  [gym.py:7]"
    order = ["confirmed by running", "fee(age=14)", "returned 1100", "violated:",
             "exact precondition:  age != 14", "suggested:           assuming=lambda age"]
    positions = [next(i for i, l in enumerate(lines) if key in l) for key in order]
    assert positions == sorted(positions)


def test_raised_outcome_is_shown_with_its_message():
    r = refuted()
    r.counterexample.outcome = {"raised": "ZeroDivisionError"}
    r.counterexample.detail = "integer division or modulo by zero"
    assert "raised ZeroDivisionError: integer division or modulo by zero" in render(r)


def test_unknown_and_error_show_reason_and_hint():
    r = Result(verdict="unknown", function="gym.loop", path="gym.py", line=3,
               reason="not translated: `for` statements are not translated yet (gym.py:5)",
               hint="supported statements: ...")
    text = render(r, strict=True)
    assert "`for` statements" in text and "Hint: supported" in text
    assert "--refines-strict" in text


def test_summary_lists_what_was_not_proved_and_counts_each_verdict():
    results = [
        {"nodeid": "a.py::f", "verdict": "proved", "reason": None},
        {"nodeid": "a.py::g", "verdict": "unknown", "reason": "not translated: while"},
        {"nodeid": "a.py::h", "verdict": "tested", "reason": "200 examples"},
    ]
    lines = summary_lines(results)
    assert "tested, NOT proved: a.py::h -- 200 examples" in lines
    assert "unknown, NOT proved: a.py::g -- not translated: while" in lines
    assert lines[-1] == "refines: 1 proved, 0 refuted, 1 tested, 1 unknown, 0 error"
    assert not any("a.py::f" in l for l in lines)


def test_json_report_is_sorted_and_counted():
    data = json_report([refuted().to_json("b.py::fee", "b.py"),
                        Result("proved", "a.f", "a.py", 1).to_json("a.py::f", "a.py")])
    assert data["schema"] == "refines-report/1"
    assert [r["nodeid"] for r in data["results"]] == ["a.py::f", "b.py::fee"]
    assert data["summary"]["refuted"] == 1 and data["summary"]["proved"] == 1
