"""The suggestion workflow on a corpus of refuted specs (suggestion_corpus.py).

Two checks for every refuted obligation of the corpus:

* **The printed conditions mean what they say.** Inputs are drawn without
  regard to ``assuming`` (boundary values and hypothesis draws over each
  parameter's type), the function is run on each, and the run is judged by
  the spec's own lambdas (``replay.judge``). ``eval`` of the printed exact
  precondition must agree with that judgement on every input; where the
  precondition is exact only for the translation (untranslated parts), it
  must imply it. Each simpler sufficient precondition must imply it, and the
  suggested ``assuming`` must agree with "``assuming`` holds and the spec is
  met" (imply it, for the translation's).
* **Applying every suggestion makes its spec prove.** The corpus is put in a
  git repository, ``pytest --refines-apply`` rewrites it, and a second run
  proves every rewritten spec (the one spec nothing can meet stays refuted,
  untouched).

One outside check: the corpus attaches a spec to ``calendar.isleap``, real
code nobody here wrote; the exact precondition for "a year is leap exactly
when divisible by 4" is compared with the standard library's own function
(Python Library Reference, calendar.isleap; the Gregorian rule, recalled
from memory: divisible by 4, except centuries not divisible by 400).
"""

import copy
import dataclasses
import json
import math
import shutil
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from refines import examples, replay
from refines.check import check_attached, check_function
from refines.items import obligations
from refines.source import read_attached, read_obligation
from refines.verdict import REFUTED

from helpers import commit, load_module

CORPUS = (Path(__file__).parent / "suggestion_corpus.py").read_text(encoding="utf-8")
NO_SUGGESTION = {"never_met"}
DRAWS = 150
SIZE = 20  # obligations in the corpus (checked below, so none is left out)


@pytest.fixture(scope="module")
def corpus(tmp_path_factory):
    """(name, obligation, result) for every spec in the corpus."""
    module, path = load_module(tmp_path_factory.mktemp("corpus"), CORPUS, header="")
    out = []
    show = lambda p: Path(p).name  # noqa: E731
    for name, fn, index, att in obligations(module):
        if att is not None:
            ob = read_attached(att, vars(module), show)
            result = check_attached(att, vars(module), 20.0, show=show)
        else:
            ob = read_obligation(fn, index, str(path), module.__name__, show)
            result = check_function(fn, index, str(path), module.__name__, 20.0, show=show)
        out.append((name, ob, result))
    return out


def test_every_spec_of_the_corpus_is_refuted_and_all_but_one_get_a_suggestion(corpus):
    assert len(corpus) == SIZE
    for name, _, result in corpus:
        assert result.verdict == REFUTED, (name, result.reason)
        if name in NO_SUGGESTION:
            assert result.suggested_assuming is None and result.precondition_note
        else:
            assert result.suggested_assuming is not None, (name, result.precondition_note)
            assert result.exact_precondition is not None, name


def _holds(text, inputs):
    """``eval`` of a printed condition on copies of the inputs (None: it raised)."""
    try:
        return bool(eval(text, {"math": math}, copy.deepcopy(inputs)))  # noqa: S307
    except Exception:  # noqa: BLE001
        return None


def _meets(ob, inputs):
    """Run the function on the inputs and judge the run with the spec's lambdas."""
    pre = replay.before(inputs)
    run = replay.run(ob, inputs)
    return replay.judge(ob, inputs, run, pre).holds, pre


@pytest.mark.parametrize("index", range(SIZE))
def test_printed_preconditions_agree_with_running_the_function(corpus, index):
    name, ob, result = corpus[index]
    if result.exact_precondition is None:
        assert name in NO_SUGGESTION
        return
    # Draws over the whole type: the exact precondition ignores `assuming`.
    plan = examples.plan(dataclasses.replace(ob, assuming=None))
    exact_for_function = result.precondition_scope == "function"
    suggestion = result.suggested_assuming.split(":", 1)[1] \
        if result.suggested_assuming else None
    seen = {"meets": 0, "breaks": 0}

    def judge_one(inputs):
        meets, pre = _meets(ob, inputs)
        seen["meets" if meets else "breaks"] += 1
        exact = _holds(result.exact_precondition, pre)
        assert exact is not None, f"{result.exact_precondition} raised on {pre}"
        if exact_for_function:
            assert exact == meets, (result.exact_precondition, pre, meets)
        else:
            assert not exact or meets, (result.exact_precondition, pre)
        for text in result.sufficient_preconditions:
            assert _holds(text, pre) in (False, None) or meets, (text, pre)
            assert not _holds(text, pre) or exact, (text, result.exact_precondition, pre)
        if suggestion is not None:
            allowed = replay.assuming_holds(ob, pre) and meets
            got = _holds(suggestion, pre)
            assert got is not None, (suggestion, pre)
            if exact_for_function:
                assert got == allowed, (suggestion, pre)
            else:
                assert not got or allowed, (suggestion, pre)

    for param in ob.names:  # each boundary value, the others at their first one
        base = {n: plan.boundary[n][0] for n in ob.names if plan.boundary.get(n)}
        for value in plan.boundary.get(param, []):
            if len(base) == len(ob.names):
                judge_one(copy.deepcopy(dict(base, **{param: value})))

    strategy = st.fixed_dictionaries(plan.strategies)
    if plan.shares:  # a list passed twice, as the tester does
        strategy = st.tuples(strategy, st.booleans()).map(
            lambda pair: dict(pair[0], **({q: pair[0][p] for q, p in plan.shares.items()}
                                          if pair[1] else {})))

    @settings(max_examples=DRAWS, derandomize=True, database=None, deadline=None,
              suppress_health_check=list(HealthCheck))
    @given(strategy)
    def draws(inputs):
        judge_one(inputs)

    draws()
    if result.exact_precondition == "False":  # nothing meets the spec, and nothing did
        assert seen["breaks"] and not seen["meets"], (name, seen)
    else:  # not vacuous: the inputs reach both sides of the precondition
        assert seen["meets"] and seen["breaks"], (name, seen)


def test_the_isleap_precondition_matches_the_standard_library(corpus):
    # calendar.isleap(y) == (y % 4 == 0) exactly where the printed precondition
    # holds, over four centuries and more (Gregorian rule, recalled from memory).
    import calendar

    result = next(r for name, _, r in corpus if name == "calendar.isleap")
    assert result.exact_precondition is not None
    for year in range(-2000, 2401):
        agrees = calendar.isleap(year) == (year % 4 == 0)
        assert eval(result.exact_precondition, {}, {"year": year}) == agrees, year


def _report(pytester, *args):
    out = pytester.path / "report.json"
    run = pytester.runpytest("-p", "no:cacheprovider", f"--refines-report={out}", *args)
    return run, json.loads(out.read_text())


@pytest.mark.skipif(shutil.which("git") is None, reason="needs git")
def test_applying_every_suggestion_makes_its_spec_prove(pytester):
    pytester.makepyfile(orchard=CORPUS)
    pytester.makepyprojecttoml('[tool.pytest.ini_options]\nrefines_paths = ["orchard.py"]\n')
    commit(pytester.path, message="corpus")
    first, data = _report(pytester, "--refines-apply")
    refuted = {r["nodeid"] for r in data["results"] if r["verdict"] == "refuted"}
    suggested = {r["nodeid"] for r in data["results"] if r["suggested_assuming"]}
    assert refuted == {r["nodeid"] for r in data["results"]}
    assert {n.split("::")[1] for n in refuted - suggested} == NO_SUGGESTION
    (rewrite,) = data["rewrites"]
    assert rewrite["status"] == "written", rewrite
    assert set(rewrite["made"]) == suggested and not rewrite["refused"]
    text = (pytester.path / "orchard.py").read_text()
    compile(text, "orchard.py", "exec")
    assert "import math\n" in text  # the NaN suggestion needs it
    again = {r["nodeid"]: r["verdict"] for r in rewrite["rechecked"]}
    assert again == {n: ("refuted" if n.split("::")[1] in NO_SUGGESTION else "proved")
                     for n in refuted}, again
    # A plain second run agrees with the check made right after the rewrite.
    second, data = _report(pytester)
    verdicts = {r["nodeid"]: r["verdict"] for r in data["results"]}
    assert verdicts == again
    second.stdout.fnmatch_lines([f"*refines: {len(refuted) - 1} proved, 1 refuted*"])
