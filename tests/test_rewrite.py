"""refines.rewrite: the new text of an ``assuming=`` rewrite, and the file helpers.

Every rewrite that is made is checked three ways: the whole new text against
the expected text, ``compile()``, and ``ast``: the new tree is the old one
except for the ``assuming=`` keyword of the edited calls (and an added
``import math``). The specs are a small library-fines and bike-rental scenario.
"""

import ast
import os
import shutil
import stat
from pathlib import Path

import pytest

from refines.rewrite import MAX_LINE, Change, Edit, change, uncommitted, write

from helpers import git

NODEID = "fines.py::late_fee"


# ---------------------------------------------------------------- helpers


def spec_calls(tree):
    """The refines(...) and attach(...) calls in ``tree``, in source order."""
    calls = [n for n in ast.walk(tree) if isinstance(n, ast.Call)
             and (getattr(n.func, "id", None) or getattr(n.func, "attr", None))
             in ("refines", "attach")]
    return sorted(calls, key=lambda c: (c.lineno, c.col_offset))


def assuming_of(call):
    found = [k.value for k in call.keywords if k.arg == "assuming"]
    return ast.unparse(found[0]) if found else None


def without_plain_import_math(tree):
    tree.body = [s for s in tree.body if not (
        isinstance(s, ast.Import) and [(a.name, a.asname) for a in s.names] == [("math", None)])]
    return tree


def check_only_assuming_changed(before: bytes, after: bytes, new: dict) -> None:
    """``after`` compiles, and its tree is ``before``'s except that the spec call
    starting at each line of ``new`` (a line of ``before``) now has
    ``assuming=new[line]``; a module-level ``import math`` may have been added."""
    compile(after, "<rewritten>", "exec")
    old_tree, new_tree = ast.parse(before), ast.parse(after)
    old_calls, new_calls = spec_calls(old_tree), spec_calls(new_tree)
    assert set(new) <= {c.lineno for c in old_calls}
    assert len(old_calls) == len(new_calls)
    for old, fresh in zip(old_calls, new_calls):
        if old.lineno in new:
            expected = ast.unparse(ast.parse(new[old.lineno], mode="eval").body)
            assert assuming_of(fresh) == expected
            for call in (old, fresh):
                call.keywords = [k for k in call.keywords if k.arg != "assuming"]
    # ast.dump leaves out line and column attributes by default
    # (docs.python.org/3/library/ast.html#ast.dump), so layout does not count.
    assert (ast.dump(without_plain_import_math(old_tree))
            == ast.dump(without_plain_import_math(new_tree)))


def planned(tmp_path, source: str, line: int, assuming: str, was=None) -> Change:
    path = tmp_path / "fines.py"
    path.write_bytes(source.encode())
    return change(path, [Edit(path, line, assuming, was, NODEID)])


def rewritten(tmp_path, source: str, line: int, assuming: str, was=None) -> str:
    """The new text, after checking that the edit was made and nothing else changed."""
    c = planned(tmp_path, source, line, assuming, was)
    assert c.refused == []
    assert [e.nodeid for e in c.made] == [NODEID]
    assert c.before == source.encode()
    check_only_assuming_changed(c.before, c.after, {line: assuming})
    return c.after.decode()


def line_of(text: str, needle: str) -> int:
    return next(i for i, t in enumerate(text.splitlines(), 1) if needle in t)


# ---------------------------------------------------------------- replacing a lambda


RENTAL = '''\
"""Bike rental."""
from refines import refines

RATE = 3  # per hour


@refines(
    lambda hours, result: result >= 0,  # never a refund
    # how long a bike can be out
    assuming=lambda hours: hours > -50,   # too loose
    raises={ValueError: lambda hours: hours > 24},
)
def rental_cost(hours: int) -> int:
    if hours > 24:
        raise ValueError("a day at most")
    return hours * RATE
'''

RENTAL_REWRITTEN = '''\
"""Bike rental."""
from refines import refines

RATE = 3  # per hour


@refines(
    lambda hours, result: result >= 0,  # never a refund
    # how long a bike can be out
    assuming=lambda hours: 0 <= hours <= 24,   # too loose
    raises={ValueError: lambda hours: hours > 24},
)
def rental_cost(hours: int) -> int:
    if hours > 24:
        raise ValueError("a day at most")
    return hours * RATE
'''


def test_replacing_a_lambda_keeps_comments_and_the_other_arguments_byte_for_byte(tmp_path):
    line = line_of(RENTAL, "@refines(")
    new = rewritten(tmp_path, RENTAL, line, "lambda hours: 0 <= hours <= 24",
                    was="hours > -50")
    assert new == RENTAL_REWRITTEN


def test_a_was_that_differs_only_in_layout_parentheses_and_comments_still_matches(tmp_path):
    source = ('from refines import refines\n'
              '\n'
              '\n'
              '@refines(lambda days, result: result <= 20,\n'
              '         assuming=lambda days: (days >= -5  # loose\n'
              '                                and days < 400))\n'
              'def late_fee(days: int) -> int:\n'
              '    return days // 20\n')
    # `was` is the lambda body as the checker read it: the text of the body
    # node's span (source.node_text), which ast.get_source_segment also gives.
    (assuming,) = [k.value for k in spec_calls(ast.parse(source))[0].keywords]
    was = ast.get_source_segment(source, assuming.body)
    assert was.startswith("days") and "# loose" in was  # no parentheses, a comment
    new = rewritten(tmp_path, source, 4, "lambda days: days < 400", was=was)
    assert new == ('from refines import refines\n'
                   '\n'
                   '\n'
                   '@refines(lambda days, result: result <= 20,\n'
                   '         assuming=lambda days: days < 400)\n'
                   'def late_fee(days: int) -> int:\n'
                   '    return days // 20\n')


# ---------------------------------------------------------------- adding assuming=


HEAD = "from refines import refines\n\nCAP = 20\n\n\n"
FEE_BODY = "def late_fee(days: int) -> int:\n    return days * 2\n"


def test_a_short_one_line_decorator_stays_on_one_line(tmp_path):
    source = HEAD + "@refines(lambda days, result: result <= CAP)\n" + FEE_BODY
    new = rewritten(tmp_path, source, 6, "lambda days: days <= 10")
    assert new == (HEAD + "@refines(lambda days, result: result <= CAP, "
                          "assuming=lambda days: days <= 10)\n" + FEE_BODY)


def test_a_long_one_line_decorator_gets_assuming_on_its_own_line_under_the_first_argument(
        tmp_path):
    source = (HEAD + "@refines(lambda days, renewals, result: 0 <= result <= CAP * renewals"
                     " + days // 7)\n" + FEE_BODY)
    assuming = "lambda days, renewals: 0 <= days <= 70 and 1 <= renewals <= 3"
    new = rewritten(tmp_path, source, 6, assuming)
    assert new == (HEAD
                   + "@refines(lambda days, renewals, result: 0 <= result <= CAP * renewals"
                     " + days // 7,\n"
                   + "         assuming=lambda days, renewals: 0 <= days <= 70 and"
                     " 1 <= renewals <= 3)\n"
                   + FEE_BODY)
    first, second = new.splitlines()[5:7]
    assert second.index("assuming=") == first.index("lambda")
    assert len(first + " " + second.lstrip()) > MAX_LINE  # it would not have fitted


@pytest.mark.parametrize("source, expected", [
    pytest.param(
        "@refines(\n"
        "    lambda days, result: 0 <= result <= CAP,\n"
        "    raises={ValueError: lambda days: days > 365},\n"
        ")\n",
        "@refines(\n"
        "    lambda days, result: 0 <= result <= CAP,\n"
        "    raises={ValueError: lambda days: days > 365},\n"
        "    assuming=lambda days: 0 <= days <= 10,\n"
        ")\n",
        id="two-arguments"),
    pytest.param(
        "@refines(\n"
        "    lambda days, result: 0 <= result <= CAP,\n"
        ")\n",
        "@refines(\n"
        "    lambda days, result: 0 <= result <= CAP,\n"
        "    assuming=lambda days: 0 <= days <= 10,\n"
        ")\n",
        id="one-argument"),
])
def test_a_multi_line_call_with_a_trailing_comma_gets_a_line_that_keeps_it(
        tmp_path, source, expected):
    new = rewritten(tmp_path, HEAD + source + FEE_BODY, 6, "lambda days: 0 <= days <= 10")
    assert new == HEAD + expected + FEE_BODY


def test_a_multi_line_call_without_a_trailing_comma_gets_an_aligned_last_line(tmp_path):
    source = (HEAD
              + "@refines(lambda days, result: 0 <= result <= CAP,\n"
              + "         raises={ValueError: lambda days: days > 365})\n"
              + FEE_BODY)
    new = rewritten(tmp_path, source, 6, "lambda days: 0 <= days <= 10")
    assert new == (HEAD
                   + "@refines(lambda days, result: 0 <= result <= CAP,\n"
                   + "         raises={ValueError: lambda days: days > 365},\n"
                   + "         assuming=lambda days: 0 <= days <= 10)\n"
                   + FEE_BODY)


DESK_HEAD = 'from refines import refines\n\n\nclass Desk:\n    """A lending desk."""\n\n'
DESK_BODY = "    def fine(self, n: int) -> int:\n        return n\n"


@pytest.mark.parametrize("decorator, expected", [
    pytest.param(
        "    @refines(lambda self, n, result: result >= 0)\n",
        "    @refines(lambda self, n, result: result >= 0, assuming=lambda self, n: n >= 0)\n",
        id="short"),
    pytest.param(
        "    @refines(lambda self, n, result: 0 <= result <= 20 * n + len(self.name))\n",
        "    @refines(lambda self, n, result: 0 <= result <= 20 * n + len(self.name),\n"
        "             assuming=lambda self, n: n >= 0)\n",
        id="long"),
    pytest.param(
        "    @refines(\n"
        "        lambda self, n, result: result >= 0,\n"
        "    )\n",
        "    @refines(\n"
        "        lambda self, n, result: result >= 0,\n"
        "        assuming=lambda self, n: n >= 0,\n"
        "    )\n",
        id="multi-line"),
])
def test_a_method_decorator_keeps_the_class_indentation(tmp_path, decorator, expected):
    new = rewritten(tmp_path, DESK_HEAD + decorator + DESK_BODY, 7, "lambda self, n: n >= 0")
    assert new == DESK_HEAD + expected + DESK_BODY
    assert all(len(t) <= MAX_LINE for t in new.splitlines())


DEPOSIT = ("import refines\nfrom refines import attach\n\n\n"
           "def deposit(bikes: int) -> int:\n    return bikes * 50\n\n\n")


@pytest.mark.parametrize("call", ["attach", "refines.attach"])
def test_a_module_level_attach_call_gets_assuming(tmp_path, call):
    source = DEPOSIT + f"{call}(deposit, lambda bikes, result: result <= 500)\n"
    new = rewritten(tmp_path, source, 9, "lambda bikes: bikes <= 10")
    one_line = (f"{call}(deposit, lambda bikes, result: result <= 500, "
                f"assuming=lambda bikes: bikes <= 10)\n")
    if len(one_line) - 1 <= MAX_LINE:
        assert new == DEPOSIT + one_line
    else:  # past the width: on a line of its own, under the first argument
        assert new == DEPOSIT + (f"{call}(deposit, lambda bikes, result: result <= 500,\n"
                                 + " " * (len(call) + 1)
                                 + "assuming=lambda bikes: bikes <= 10)\n")


@pytest.mark.parametrize("extra", [0, 1])
def test_an_attach_call_that_fits_stays_on_one_line_and_a_longer_one_breaks(tmp_path, extra):
    assuming = "lambda bikes: bikes <= 10"
    bare = f"attach(deposit, lambda bikes, result: result <= , assuming={assuming})"
    relation = "lambda bikes, result: result <= " + "5" * (MAX_LINE + extra - len(bare))
    assert len(f"attach(deposit, {relation}, assuming={assuming})") == MAX_LINE + extra
    new = rewritten(tmp_path, DEPOSIT + f"attach(deposit, {relation})\n", 9, assuming)
    call = new.splitlines()[8:]
    assert len(call) == 1 + extra, new
    assert all(len(t) <= MAX_LINE for t in call), new


@pytest.mark.parametrize("extra", [0, 1])
def test_a_decorator_that_fits_stays_on_one_line_and_a_longer_one_breaks(tmp_path, extra):
    assuming = "lambda days: days <= 10"
    bare = f"@refines(lambda days, result: result <= , assuming={assuming})"
    relation = "lambda days, result: result <= " + "2" * (MAX_LINE + extra - len(bare))
    assert len(f"@refines({relation}, assuming={assuming})") == MAX_LINE + extra
    new = rewritten(tmp_path, HEAD + f"@refines({relation})\n" + FEE_BODY, 6, assuming)
    call = new.splitlines()[5:-2]
    assert len(call) == 1 + extra, new
    assert all(len(t) <= MAX_LINE for t in call), new


def test_a_long_one_line_call_with_two_arguments_breaks_the_line(tmp_path):
    source = (HEAD + "@refines(lambda days, result: result <= CAP, "
                     "raises={KeyError: lambda days: days > 99})\n" + FEE_BODY)
    assert len(source.splitlines()[5]) <= MAX_LINE  # fits before the edit, not after
    new = rewritten(tmp_path, source, 6, "lambda days: 0 <= days <= 10")
    assert all(len(t) <= MAX_LINE for t in new.splitlines()), new


def test_two_edits_in_one_file_are_both_made(tmp_path):
    source = (HEAD + "@refines(lambda days, result: result <= CAP)\n" + FEE_BODY + "\n\n"
              + "def deposit(bikes: int) -> int:\n    return bikes * 50\n\n\n"
              + "attach(deposit, lambda bikes, result: result <= 500)\n")
    source = source.replace("from refines import refines", "from refines import attach, refines")
    path = tmp_path / "fines.py"
    path.write_text(source)
    at = line_of(source, "attach(deposit")
    fee = Edit(path, 6, "lambda days: days <= 10", None, "fines.py::late_fee")
    dep = Edit(path, at, "lambda bikes: bikes <= 10", None, "fines.py::fines.deposit")
    c = change(path, [dep, fee])
    assert c.refused == [] and {e.nodeid for e in c.made} == {fee.nodeid, dep.nodeid}
    check_only_assuming_changed(c.before, c.after, {6: fee.assuming, at: dep.assuming})


# ---------------------------------------------------------------- import math


FLOAT_SPEC = ("@refines(lambda days, result: result <= 20.0)\n"
              "def late_fee(days: float) -> float:\n"
              "    return days * 0.5\n")
FLOAT_DONE = ("@refines(lambda days, result: result <= 20.0, "
              "assuming=lambda days: math.isfinite(days))\n"
              "def late_fee(days: float) -> float:\n"
              "    return days * 0.5\n")
USES_MATH = "lambda days: math.isfinite(days)"


@pytest.mark.parametrize("head, expected", [
    pytest.param(
        '"""Late fees."""\n\nfrom __future__ import annotations\n\nimport os\n'
        'from refines import refines\n\n\n',
        '"""Late fees."""\n\nfrom __future__ import annotations\n\nimport math\nimport os\n'
        'from refines import refines\n\n\n',
        id="docstring-future-imports"),
    pytest.param(
        '"""Late fees."""\n\nfrom refines import refines\n\n\n',
        '"""Late fees."""\n\nimport math\nfrom refines import refines\n\n\n',
        id="docstring-then-from-import"),
    pytest.param(
        'from refines import refines\n\n\n',
        'import math\nfrom refines import refines\n\n\n',
        id="no-docstring"),
    pytest.param(
        # `import math as m` binds only `m` (Language Reference, "The import
        # statement"), so the new text's `math.` still needs `import math`.
        'import math as m\nfrom refines import refines\n\n\n',
        'import math\nimport math as m\nfrom refines import refines\n\n\n',
        id="math-under-another-name"),
])
def test_import_math_goes_after_docstring_and_future_before_the_first_import(
        tmp_path, head, expected):
    spec_line = head.count("\n") + 1
    new = rewritten(tmp_path, head + FLOAT_SPEC, spec_line, USES_MATH)
    assert new == expected + FLOAT_DONE
    assert new.count("import math\n") == 1


def test_import_math_is_not_added_twice(tmp_path):
    head = '"""Late fees."""\nimport math\n\nfrom refines import refines\n\n\n'
    new = rewritten(tmp_path, head + FLOAT_SPEC, 7, USES_MATH)
    assert new == head + FLOAT_DONE


def test_import_math_is_not_added_when_the_new_text_does_not_use_it(tmp_path):
    head = "from refines import refines\n\n\n"
    new = rewritten(tmp_path, head + FLOAT_SPEC, 4, "lambda days: days <= 40.0")
    assert "import math" not in new


# ---------------------------------------------------------------- refusals


FEE_WITH_ASSUMING = (
    "from refines import refines\n"
    "\n"
    "\n"
    "def short_loan(days):\n"
    "    return days < 400\n"
    "\n"
    "\n"
    "@refines(lambda days, result: result <= 20, assuming=lambda days: days < 400)\n"
    "def late_fee(days: int) -> int:\n"
    "    return days // 20\n"
    "\n"
    "\n"
    "@refines(lambda days, result: result <= 20, assuming=short_loan)\n"
    "def lost_fee(days: int) -> int:\n"
    "    return days // 20\n"
    "\n"
    "\n"
    "@refines(lambda days, result: result <= 20)\n"
    "def damage_fee(days: int) -> int:\n"
    "    return days // 20\n")


@pytest.mark.parametrize("line, was, reason", [
    pytest.param(9, "days < 400", "no @refines(...) or attach(...) call starts at line 9 any more",
                 id="a-def-line"),
    pytest.param(1, None, "no @refines(...) or attach(...) call starts at line 1 any more",
                 id="an-import-line"),
    pytest.param(13, "days < 400",
                 "assuming= is `short_loan`, not a lambda; edit it by hand",
                 id="a-named-function"),
    pytest.param(8, "days < 365", "its assuming= changed since the check",
                 id="changed-since"),
    pytest.param(8, None, "it has an assuming= that was not there when it was checked",
                 id="added-since"),
    pytest.param(18, "days < 400", "its assuming= is gone since the check",
                 id="removed-since"),
])
def test_an_edit_that_cannot_be_made_is_refused_with_the_reason(tmp_path, line, was, reason):
    c = planned(tmp_path, FEE_WITH_ASSUMING, line, "lambda days: 0 <= days <= 400", was)
    assert c.after is None and c.made == []
    assert [(e.line, why) for e, why in c.refused] == [(line, reason)]
    assert c.before == FEE_WITH_ASSUMING.encode()
    assert c.diff("fines.py") == ""


def test_a_line_inside_a_multi_line_call_is_not_where_a_call_starts(tmp_path):
    source = (HEAD + "@refines(lambda days, result: 0 <= result <= CAP,\n"
                     "         raises={ValueError: lambda days: days > 365})\n" + FEE_BODY)
    c = planned(tmp_path, source, 7, "lambda days: 0 <= days <= 10")
    assert c.after is None
    assert [why for _, why in c.refused] == [
        "no @refines(...) or attach(...) call starts at line 7 any more"]


def test_another_decorator_call_is_not_a_spec_call(tmp_path):
    source = ("import functools\n\n\n@functools.lru_cache(maxsize=None)\n" + FEE_BODY)
    c = planned(tmp_path, source, 4, "lambda days: days <= 10")
    assert c.after is None and len(c.refused) == 1
    assert "no @refines(...) or attach(...) call starts at line 4" in c.refused[0][1]


def test_a_file_libcst_cannot_parse_is_refused_with_the_parser_message(tmp_path):
    source = "from refines import refines\n\n@refines(lambda x, result: result > 0)\ndef f(:\n"
    with pytest.raises(SyntaxError):
        compile(source, "fines.py", "exec")  # not Python either
    c = planned(tmp_path, source, 3, "lambda x: x > 0")
    assert c.after is None and c.made == []
    ((edit, why),) = c.refused
    assert edit.line == 3
    # libcst raises libcst.ParserSyntaxError (libcst docs, "Parsing"; recalled from memory).
    assert why.startswith("libcst cannot parse the file (ParserSyntaxError: ")


def test_refused_edits_do_not_stop_the_others_in_the_same_file(tmp_path):
    path = tmp_path / "fines.py"
    path.write_text(FEE_WITH_ASSUMING)
    good = Edit(path, 18, "lambda days: days < 400", None, "fines.py::damage_fee")
    bad = Edit(path, 13, "lambda days: days < 400", "days < 400", "fines.py::lost_fee")
    c = change(path, [bad, good])
    assert c.made == [good]
    assert [(e.nodeid, why) for e, why in c.refused] == [
        ("fines.py::lost_fee", "assuming= is `short_loan`, not a lambda; edit it by hand")]
    check_only_assuming_changed(c.before, c.after, {18: good.assuming})


# ---------------------------------------------------------------- the diff


def test_the_diff_is_a_unified_diff_with_a_and_b_paths(tmp_path):
    source = HEAD + "@refines(lambda days, result: result <= CAP)\n" + FEE_BODY
    c = planned(tmp_path, source, 6, "lambda days: days <= 10")
    diff = c.diff("lib/fines.py")
    lines = diff.splitlines()
    # Unified format (GNU diffutils manual, "Unified Format"; difflib.unified_diff
    # in the Python docs): "---"/"+++" file headers, then hunks headed
    # "@@ -start,count +start,count @@" with three lines of context, and the
    # lines prefixed " ", "-" or "+".
    assert lines[:2] == ["--- a/lib/fines.py", "+++ b/lib/fines.py"]
    assert lines[2] == "@@ -3,6 +3,6 @@"
    assert lines[3:] == [
        " CAP = 20",
        " ",
        " ",
        "-@refines(lambda days, result: result <= CAP)",
        "+@refines(lambda days, result: result <= CAP, assuming=lambda days: days <= 10)",
        " def late_fee(days: int) -> int:",
        "     return days * 2",
    ]


def test_the_diff_applies_with_git_apply_and_gives_the_new_text(tmp_path, git_env):
    source = RENTAL
    c = planned(tmp_path, source, line_of(source, "@refines("),
                "lambda hours: 0 <= hours <= 24", was="hours > -50")
    target = tmp_path / "copy"
    (target / "lib").mkdir(parents=True)
    (target / "lib" / "fines.py").write_bytes(c.before)
    (target / "change.diff").write_text(c.diff("lib/fines.py"))
    # git apply strips one leading path component (a/, b/) by default and works
    # outside a repository (git-apply(1), -p<n>; recalled from memory).
    git(target, "apply", "change.diff")
    assert (target / "lib" / "fines.py").read_bytes() == c.after


def test_the_diff_is_empty_when_nothing_changed(tmp_path):
    source = (HEAD + "@refines(lambda days, result: result <= CAP, "
                     "assuming=lambda days: days <= 10)\n" + FEE_BODY)
    same = planned(tmp_path, source, 6, "lambda days: days <= 10", was="days <= 10")
    assert same.after == same.before and same.made
    assert same.diff("fines.py") == ""
    refused = planned(tmp_path, source, 7, "lambda days: days <= 10", was="days <= 10")
    assert refused.after is None
    assert refused.diff("fines.py") == ""


# ---------------------------------------------------------------- layouts found wrong once


def test_a_comment_after_an_argument_is_not_copied_to_the_added_line(tmp_path):
    source = (HEAD
              + "@refines(\n"
              + "    lambda days, result: 0 <= result <= CAP,  # the cap\n"
              + "    raises={ValueError: lambda days: days > 365},\n"
              + ")\n" + FEE_BODY)
    new = rewritten(tmp_path, source, 6, "lambda days: 0 <= days <= 10")
    assert new.count("# the cap") == 1


@pytest.mark.parametrize("source", [
    "@refines(\n"
    "    lambda days, result: 0 <= result <= CAP\n"
    ")\n",
    "@refines(\n"
    "    lambda days, result: 0 <= result <= CAP,\n"
    "    raises={ValueError: lambda days: days > 365}\n"
    ")\n",
], ids=["one-argument", "two-arguments"])
def test_a_closing_parenthesis_on_its_own_line_without_a_trailing_comma(tmp_path, source):
    new = rewritten(tmp_path, HEAD + source + FEE_BODY, 6, "lambda days: 0 <= days <= 10")
    lines = new.splitlines()
    added = next(t for t in lines if "assuming=" in t)
    assert added.startswith("    assuming=")
    assert all(t.strip() or t == "" for t in lines)  # no whitespace-only line


def test_a_changed_last_line_without_a_newline_gives_separate_diff_lines(tmp_path):
    # difflib.unified_diff does not mark a missing final newline (Python issue
    # bpo-2142, "difflib.unified_diff(...) produces invalid patches"); GNU diff
    # writes the line "\\ No newline at end of file" after it (recalled from memory).
    source = DEPOSIT + "attach(deposit, lambda bikes, result: result <= 500)"  # no newline
    c = planned(tmp_path, source, 9, "lambda bikes: bikes <= 10")
    assert c.after is not None and not c.after.endswith(b"\n")
    lines = c.diff("fines.py").splitlines()
    assert "-attach(deposit, lambda bikes, result: result <= 500)" in lines
    assert ("+attach(deposit, lambda bikes, result: result <= 500, "
            "assuming=lambda bikes: bikes <= 10)") in lines


def test_an_assuming_regrouped_since_the_check_is_refused(tmp_path):
    now = "days > 0 or (days < -5 and days != 3)"
    was = "(days > 0 or days < -5) and days != 3"
    assert eval(f"lambda days: {now}")(3) != eval(f"lambda days: {was}")(3)  # not the same
    source = (HEAD + f"@refines(lambda days, result: result <= CAP, "
                     f"assuming=lambda days: {now})\n" + FEE_BODY)
    c = planned(tmp_path, source, 6, "lambda days: days <= 10", was=was)
    assert c.after is None
    assert [why for _, why in c.refused] == ["its assuming= changed since the check"]


# ---------------------------------------------------------------- write


def test_write_replaces_the_text_and_keeps_the_mode(tmp_path):
    path = tmp_path / "fines.py"
    path.write_bytes(b"old\n")
    path.chmod(0o640)
    write(path, b"new text\n")
    assert path.read_bytes() == b"new text\n"
    assert stat.S_IMODE(path.stat().st_mode) == 0o640
    assert sorted(p.name for p in tmp_path.iterdir()) == ["fines.py"]


def test_write_keeps_an_executable_mode_too(tmp_path):
    path = tmp_path / "fines.py"
    path.write_bytes(b"old\n")
    path.chmod(0o751)
    write(path, b"new\n")
    assert stat.S_IMODE(path.stat().st_mode) == 0o751


def test_write_replaces_atomically_by_rename(tmp_path, monkeypatch):
    path = tmp_path / "fines.py"
    path.write_bytes(b"old\n")
    seen = []
    real = os.replace

    def spy(src, dst):
        # The new text is complete in a file of the same folder before the rename.
        seen.append((os.path.dirname(src), Path(src).read_bytes(), os.fspath(dst)))
        return real(src, dst)

    monkeypatch.setattr(os, "replace", spy)
    write(path, b"new\n")
    assert seen == [(str(tmp_path), b"new\n", str(path))]


@pytest.mark.parametrize("failing", ["replace", "fsync"])
def test_a_failed_write_leaves_the_original_and_no_temporary_file(tmp_path, monkeypatch,
                                                                   failing):
    path = tmp_path / "fines.py"
    path.write_bytes(b"original\n")
    path.chmod(0o640)

    def boom(*args):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(os, failing, boom)
    with pytest.raises(OSError, match="No space left"):
        write(path, b"half-written\n")
    monkeypatch.undo()
    assert path.read_bytes() == b"original\n"
    assert stat.S_IMODE(path.stat().st_mode) == 0o640
    assert sorted(p.name for p in tmp_path.iterdir()) == ["fines.py"]


# ---------------------------------------------------------------- uncommitted


@pytest.fixture
def git_env(tmp_path, monkeypatch):
    """git, isolated from the machine's configuration and from any repository
    around ``tmp_path``: GIT_CEILING_DIRECTORIES stops the search for a
    repository at ``tmp_path``, and HOME points there (git(1), "Environment
    Variables"; recalled from memory)."""
    if shutil.which("git") is None:
        pytest.skip("git is not on PATH")
    for name in ("GIT_DIR", "GIT_WORK_TREE", "GIT_INDEX_FILE", "GIT_OBJECT_DIRECTORY"):
        monkeypatch.delenv(name, raising=False)
    monkeypatch.setenv("GIT_CEILING_DIRECTORIES", str(tmp_path))
    monkeypatch.setenv("GIT_CONFIG_NOSYSTEM", "1")
    monkeypatch.setenv("HOME", str(tmp_path))
    return tmp_path



@pytest.fixture
def repo(git_env):
    """A repository with fines.py and rental/bikes.py committed."""
    root = git_env / "repo"
    (root / "rental").mkdir(parents=True)
    (root / "fines.py").write_text("CAP = 20\n")
    (root / "rental" / "bikes.py").write_text("RATE = 3\n")
    git(root, "init", "-q")
    git(root, "add", "fines.py", "rental/bikes.py")
    git(root, "commit", "-q", "-m", "fines")
    return root


def test_a_clean_committed_file_may_be_rewritten(repo):
    assert uncommitted(repo / "fines.py") is None
    assert uncommitted(repo / "rental" / "bikes.py") is None


def test_a_modified_file_has_uncommitted_changes(repo):
    (repo / "fines.py").write_text("CAP = 25\n")
    assert uncommitted(repo / "fines.py") == "it has changes not committed to git"
    assert uncommitted(repo / "rental" / "bikes.py") is None  # only that file counts


def test_a_staged_but_uncommitted_change_counts_as_uncommitted(repo):
    (repo / "rental" / "bikes.py").write_text("RATE = 4\n")
    git(repo, "add", "rental/bikes.py")
    assert uncommitted(repo / "rental" / "bikes.py") == "it has changes not committed to git"


def test_an_untracked_file_is_not_tracked(repo):
    (repo / "rental" / "new.py").write_text("X = 1\n")
    assert uncommitted(repo / "rental" / "new.py") == "it is not tracked by git"


def test_a_file_outside_any_repository(git_env):
    folder = git_env / "loose"
    folder.mkdir()
    (folder / "fines.py").write_text("CAP = 20\n")
    probe = git(folder, "rev-parse", "--show-toplevel", check=False)
    if probe.returncode == 0:
        pytest.skip(f"{folder} is inside a git repository ({probe.stdout.strip()})")
    assert uncommitted(folder / "fines.py") == (
        "it is not in a git repository, so nothing keeps its current text")


def test_uncommitted_without_git_says_so(tmp_path, monkeypatch):
    (tmp_path / "fines.py").write_text("CAP = 20\n")
    monkeypatch.setenv("PATH", str(tmp_path / "no-such-folder"))
    assert uncommitted(tmp_path / "fines.py") == (
        "git is not available, so its changes could not be checked")
