"""The public surface is tiny and must not drift by accident."""

import subprocess
import sys

import refines


def test_exported_names_are_exactly_these():
    assert sorted(refines.__all__) == ["attach", "old", "refines"]
    for name in refines.__all__:
        assert getattr(refines, name) is not None


def test_decorator_returns_the_function_itself():
    def fare(x: int) -> int:
        return x

    decorated = refines.refines(lambda x, result: result == x)(fare)
    assert decorated is fare
    assert fare(3) == 3


def test_stacked_specs_are_kept_in_source_order():
    from refines.source import runtime_specs

    first = lambda x, result: result >= 0  # noqa: E731
    second = lambda x, result: result == x  # noqa: E731

    @refines.refines(first)
    @refines.refines(second)
    def f(x: int) -> int:
        return x

    assert [s.relation for s in runtime_specs(f)] == [first, second]


def test_bad_arguments_are_rejected_at_decoration_time():
    import pytest

    with pytest.raises(TypeError, match="relation"):
        refines.refines(3)
    with pytest.raises(TypeError, match="exception classes"):
        refines.refines(lambda result: True, raises={"ValueError": lambda: True})
    with pytest.raises(TypeError, match="assuming"):
        refines.refines(lambda result: True, assuming=True)


def test_plugin_and_package_import_nothing_heavy():
    code = ("import sys, refines, refines.plugin, refines.items; "
            "heavy = [m for m in ('z3', 'astroid', 'hypothesis') if m in sys.modules]; "
            "print(heavy); sys.exit(1 if heavy else 0)")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert proc.returncode == 0, proc.stdout + proc.stderr
