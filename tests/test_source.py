"""Reading functions and specs from source."""

from refines.verdict import ERROR, PROVED, REFUTED, UNKNOWN

from helpers import check_one, check_source


def test_source_text_is_quoted_exactly_even_with_non_ascii(tmp_path):
    r = check_one(tmp_path, '''
        # Prices in öre (Swedish cents): the comment is non-ASCII on purpose.
        @refines(lambda kr, result: result == kr * 100 and result > 0)  # ≥ 1 öre
        def to_ore(kr: int) -> int:
            return kr * 100
        ''')
    assert r.verdict == REFUTED
    assert r.counterexample.violated == "result > 0"


def test_redefined_function_uses_the_live_definition(tmp_path):
    results = check_source(tmp_path, '''
        def price(x: int) -> int:
            return -1

        @refines(lambda x, result: result == x)
        def price(x: int) -> int:
            return x
        ''')
    assert [r.verdict for r in results] == [PROVED]


def test_relation_defined_in_another_module(tmp_path):
    (tmp_path / "shared_specs.py").write_text(
        "def is_nonnegative(result):\n    return result >= 0\n")
    import sys

    sys.path.insert(0, str(tmp_path))
    try:
        r = check_one(tmp_path, '''
            from shared_specs import is_nonnegative

            @refines(is_nonnegative)
            def fee(x: int) -> int:
                return abs(x)
            ''')
    finally:
        sys.path.remove(str(tmp_path))
    assert r.verdict == PROVED


def test_unannotated_parameter_is_unknown_with_its_name(tmp_path):
    r = check_one(tmp_path, '''
        @refines(lambda x, result: result == x)
        def same(x):
            return x
        ''')
    assert r.verdict == UNKNOWN
    assert "parameter `x`" in r.reason


def test_assuming_may_not_mention_result(tmp_path):
    r = check_one(tmp_path, '''
        @refines(lambda x, result: True, assuming=lambda result: result > 0)
        def same(x: int) -> int:
            return x
        ''')
    assert r.verdict == ERROR
    assert "`result`" in r.reason and "allowed names: x" in r.hint


def test_keyword_only_and_positional_only_parameters_are_called_correctly(tmp_path):
    r = check_one(tmp_path, '''
        @refines(lambda a, b, result: result == a - b + 1)
        def gap(a: int, /, *, b: int) -> int:
            return a - b
        ''')
    assert r.verdict == REFUTED
    # The pasteable call passes `a` positionally and `b` by keyword.
    call = r.counterexample.call
    assert call.startswith("gap(") and "a=" not in call and ", b=" in call
    gap = lambda a, /, *, b: a - b  # noqa: E731 -- the call must be valid Python
    eval(call, {"gap": gap})


def test_functions_under_other_decorators_are_read_through_them(tmp_path):
    results = check_source(tmp_path, '''
        import functools

        def logged(fn):
            @functools.wraps(fn)
            def wrapper(*args, **kwargs):
                return fn(*args, **kwargs)
            return wrapper

        @logged
        @refines(lambda x, result: result == x + 1)
        def inc(x: int) -> int:
            return x + 1
        ''')
    assert [r.verdict for r in results] == [PROVED]
