"""The tester: what the solver leaves undecided is run and judged.

Each test states what the tester must do for a user, through ``check_one``
(the whole pipeline: read, try to prove, test). Functions that use a
construct the translator refuses (a ``try`` statement, a call to ``sum``)
stand for code the prover cannot follow.
"""

import sys

from refines.verdict import ERROR, REFUTED, TESTED, UNKNOWN

from refines.check import check_function

from helpers import check_one, check_source, load_module


# A bug only a draw finds (no constant points at it): a tiled area is lost
# for wide rooms below ground level.
AREA = '''
        @refines(lambda a, b, result: result == a * b)
        def area(a: int, b: int) -> int:
            try:
                if a > 300 and b < -20:
                    return 0
                return a * b
            finally:
                pass
        '''


def _paste_and_run(regression: str, namespace=None) -> BaseException:
    """Run a printed regression test as a user would after pasting it; the
    exception it fails with (None if it passes)."""
    ns = dict(namespace or {})
    exec(compile(regression, "<pasted>", "exec"), ns)  # noqa: S102
    name = next(k for k in ns if k.startswith("test_"))
    try:
        ns[name]()
    except BaseException as exc:  # noqa: BLE001
        return exc
    return None


def test_an_untranslated_body_with_a_true_spec_is_tested_not_proved(tmp_path):
    r = check_one(tmp_path, '''
        @refines(lambda grades, result: result == sum(grades) // max(len(grades), 1))
        def mean_grade(grades: list[int]) -> int:
            try:
                return sum(grades) // len(grades)
            except ZeroDivisionError:
                return 0
        ''')
    assert r.verdict == TESTED
    assert r.reason.startswith("not proved: not translated: `try` statements")
    assert r.testing.examples >= 100  # the drawn ones, and boundary values on top
    assert r.counterexample is None


def test_a_planted_boundary_bug_is_refuted_with_a_regression_test_that_fails(tmp_path):
    # A ticket machine: at most 8 tickets per purchase, the ninth is refused.
    # The bug: `>` where the rule means `>=` -- only qty == 9 shows it, and the
    # tester tries the constants of the body and their neighbours first.
    source = '''
        MAX_TICKETS = 8

        @refines(lambda qty, result: result == (qty <= MAX_TICKETS),
                 assuming=lambda qty: qty >= 0)
        def may_buy(qty: int) -> bool:
            try:
                return not (qty > MAX_TICKETS + 1)
            finally:
                pass
        '''
    r = check_one(tmp_path, source)
    assert r.verdict == REFUTED
    ce = r.counterexample
    assert ce.found_by == "testing" and ce.confirmed
    assert ce.call == "may_buy(qty=9)"
    assert ce.outcome == {"returned": "True"}
    assert "from refines_case_" in ce.regression_test
    assert "qty = 9" in ce.regression_test
    # Pasted into a test file it fails, on the same assertion the spec makes.
    module = sys.modules[r.function.rsplit(".", 1)[0]]
    failure = _paste_and_run(ce.regression_test)
    assert isinstance(failure, AssertionError)
    # ... and passes once the function is fixed.
    fixed = module.may_buy
    module.may_buy = lambda qty: qty <= 8
    try:
        assert _paste_and_run(ce.regression_test) is None
    finally:
        module.may_buy = fixed


def test_awkward_strings_are_always_tried(tmp_path):
    r = check_one(tmp_path, '''
        @refines(lambda code, result: len(result) == len(code))
        def shout(code: str) -> str:
            try:
                return code.upper()
            finally:
                pass
        ''')
    # "ß".upper() == "SS" (Unicode SpecialCasing.txt): among the boundary strings.
    assert r.verdict == REFUTED
    assert r.counterexample.call == "shout(code='ß')"


def test_the_same_obligation_gives_the_same_counterexample_and_counts(tmp_path):
    # Found by drawing (no constant points at it), then shrunk: the same run
    # every time, because the seed comes from the obligation.
    module, path = load_module(tmp_path, AREA)
    runs = [check_function(module.area, 0, str(path), module.__name__, 20.0) for _ in range(2)]
    assert [r.verdict for r in runs] == [REFUTED, REFUTED]
    assert runs[0].counterexample.call == runs[1].counterexample.call == "area(a=301, b=-21)"
    assert runs[0].testing == runs[1].testing


def test_a_narrow_assuming_is_met_by_the_solvers_inputs(tmp_path):
    # Filtering random ints by `n % 1000 == 0` would reject almost every draw;
    # the solver hands the tester inputs that satisfy it.
    r = check_one(tmp_path, '''
        @refines(lambda n, result: result == n // 1000,
                 assuming=lambda n: n % 1000 == 0 and n != 0)
        def thousands(n: int) -> int:
            try:
                return n // 1000
            finally:
                pass
        ''')
    assert r.verdict == TESTED
    # A few draws show that assuming rejects nearly all of them; the solver is
    # asked for the rest of the budget instead of thousands of rejected draws.
    assert r.testing.narrow
    assert r.testing.from_solver >= 50
    assert r.testing.rejected <= 100


def test_constants_worked_out_from_others_are_boundary_values(tmp_path):
    # A week pass covers two weeks of visits; the bug sits at 2 * WEEK_DAYS.
    r = check_one(tmp_path, '''
        WEEK_DAYS = 7

        @refines(lambda days, result: result == (days >= 2 * WEEK_DAYS),
                 assuming=lambda days: days >= 0)
        def two_weeks(days: int) -> bool:
            try:
                return days > 2 * WEEK_DAYS
            finally:
                pass
        ''')
    assert r.verdict == REFUTED
    assert r.counterexample.call == "two_weeks(days=14)"


def test_lists_get_boundary_lengths_at_the_constants(tmp_path):
    r = check_one(tmp_path, '''
        ROPE_SLOTS = 6

        @refines(lambda ropes, result: result == (len(ropes) <= ROPE_SLOTS))
        def fits(ropes: list[int]) -> bool:
            try:
                return len(ropes) < ROPE_SLOTS
            finally:
                pass
        ''')
    assert r.verdict == REFUTED
    assert r.counterexample.call == "fits(ropes=[0, 0, 0, 0, 0, 0])"


def test_draws_do_not_depend_on_what_else_is_imported(tmp_path):
    # hypothesis also draws from the constants of every local module imported
    # so far; the tester turns that off, so importing another module between
    # two checks changes nothing.
    module, path = load_module(tmp_path, AREA)
    first = check_function(module.area, 0, str(path), module.__name__, 20.0)
    load_module(tmp_path, "TILE_SIZES = (301, -21, 4400, 'slate', 2.75)\n")
    second = check_function(module.area, 0, str(path), module.__name__, 20.0)
    assert first.testing == second.testing
    assert first.counterexample.call == second.counterexample.call


def test_bounds_in_assuming_narrow_the_draws(tmp_path):
    r = check_one(tmp_path, '''
        @refines(lambda minutes, result: 0 <= result <= 4,
                 assuming=lambda minutes: 0 <= minutes < 60)
        def quarter(minutes: int) -> int:
            try:
                return minutes // 15
            finally:
                pass
        ''')
    assert r.verdict == TESTED
    assert r.testing.rejected == 0  # every draw was already inside the bounds


def test_a_run_that_does_not_finish_is_stopped_and_counted(tmp_path):
    # Counting down by two never reaches zero from an odd start.
    r = check_one(tmp_path, '''
        @refines(lambda n, result: result == 0, assuming=lambda n: n >= 0)
        def drain(n: int) -> int:
            try:
                while n != 0:
                    n -= 2
            finally:
                pass
            return n
        ''')
    assert r.verdict == TESTED
    assert r.testing.overran >= 1
    assert r.testing.examples > 0


def test_a_spec_that_raises_at_run_time_is_an_error_with_the_input(tmp_path):
    r = check_one(tmp_path, '''
        @refines(lambda a, b, result: True, assuming=lambda a, b: a // b >= 0)
        def share(a: int, b: int) -> int:
            try:
                return a
            finally:
                pass
        ''')
    assert r.verdict == ERROR
    assert "raised ZeroDivisionError" in r.reason and "b=0" in r.reason


def test_aliasing_is_tried_for_two_lists(tmp_path):
    # Moving a group between two wait lists is wrong when both are one list.
    r = check_one(tmp_path, '''
        @refines(lambda src, dst, result: len(src) + len(dst) == len(old(src)) + len(old(dst)))
        def move_all(src: list[int], dst: list[int]) -> None:
            try:
                dst.extend(src)
                src.clear()
            finally:
                pass
        ''')
    assert r.verdict == REFUTED
    assert r.counterexample.call.startswith("src = [")
    assert "dst=src" in r.counterexample.call
    assert any(n.startswith("aliasing: `dst` is the same object as `src`") for n in r.notes)


def test_a_function_with_star_args_cannot_be_tested(tmp_path):
    r = check_one(tmp_path, '''
        @refines(lambda result: result >= 0)
        def most(*counts: int) -> int:
            return max(counts, default=0)
        ''')
    assert r.verdict == UNKNOWN
    assert "not tested: it cannot be called with drawn arguments" in r.reason


def test_a_coroutine_is_run_to_its_result(tmp_path):
    r = check_one(tmp_path, '''
        @refines(lambda seats, result: result == seats - 1, assuming=lambda seats: seats > 0)
        async def book(seats: int) -> int:
            return seats - 2
        ''')
    assert r.verdict == REFUTED
    assert r.counterexample.call.startswith("asyncio.run(book(seats=")
    assert "asyncio.run(book(" in r.counterexample.regression_test


def test_the_example_budget_is_honoured(tmp_path):
    source = '''
        @refines(lambda a, b, result: result == a + b)
        def add(a: int, b: int) -> int:
            try:
                return a + b
            finally:
                pass
        '''
    (small,) = check_source(tmp_path, source, examples=10)
    (large,) = check_source(tmp_path, source, examples=300)
    drawn = lambda t: t.examples - t.from_solver - t.boundary  # noqa: E731
    assert 0 < drawn(small.testing) <= 10
    assert drawn(large.testing) > 100


def test_objects_without_init_are_drawn_attribute_by_attribute(tmp_path):
    r = check_one(tmp_path, '''
        class Wall:
            height: int
            grade: str

        @refines(lambda w, result: result == (w.height > 12))
        def tall(w: Wall) -> bool:
            try:
                return w.height >= 12
            finally:
                pass
        ''')
    assert r.verdict == REFUTED
    ce = r.counterexample
    assert "height = 12" in ce.regression_test.replace("'height', 12", "height = 12") \
        or "'height', 12" in ce.regression_test
    assert isinstance(_paste_and_run(ce.regression_test), AssertionError)


def test_a_required_exception_becomes_pytest_raises(tmp_path):
    r = check_one(tmp_path, '''
        @refines(lambda qty, result: result >= 0, raises={ValueError: lambda qty: qty < 0})
        def stock(qty: int) -> int:
            try:
                return abs(qty)
            finally:
                pass
        ''')
    assert r.verdict == REFUTED
    text = r.counterexample.regression_test
    assert "with pytest.raises(ValueError):" in text
    assert _paste_and_run(text) is not None  # DID NOT RAISE


def test_old_in_the_relation_becomes_a_copy_taken_before_the_call(tmp_path):
    r = check_one(tmp_path, '''
        @refines(lambda log, entry, result: log == old(log) + [entry])
        def record(log: list[int], entry: int) -> None:
            try:
                if entry != 7:
                    log.append(entry)
            finally:
                pass
        ''')
    assert r.verdict == REFUTED
    text = r.counterexample.regression_test
    assert "old_log = copy.deepcopy(log)" in text and "assert log == old_log + [entry]" in text
    assert isinstance(_paste_and_run(text), AssertionError)
