"""Rewriting ``assuming=`` in the user's source: the text of the change.

Only ever called when the user asked (``--refines-apply`` or ``--refines-diff``).
An edit names a file, the line of a ``@refines(...)`` decorator or an
``attach(...)`` call, what ``assuming=`` was when the spec was checked, and
the lambda to put there. The rewrite goes through libcst, which keeps the
file's formatting and comments: only the value of the ``assuming`` argument
changes, or one argument is added after the last, on a line of its own when
the call already spans lines. ``import math`` is added when the new text uses
``math`` and the module does not import it.

Nothing here decides *whether* to write: ``apply`` does (version control, the
user's flags). ``write`` replaces a file atomically: the new text goes to a
temporary file in the same folder, which is flushed to disk and then renamed
over the original, keeping its permissions.
"""

from __future__ import annotations

import ast
import difflib
import os
import re
import shutil
import subprocess
import tempfile
from dataclasses import dataclass, field
from pathlib import Path
from typing import Dict, List, Optional, Sequence, Tuple

SPEC_CALLS = ("refines", "attach")
MAX_LINE = 88  # an added argument goes on a line of its own past this width


@dataclass
class Edit:
    """One ``assuming=`` to rewrite."""

    path: Path
    line: int  # where the @refines(...) or attach(...) call starts
    assuming: str  # the new value: a lambda, as Python text
    was: Optional[str]  # the assuming expression when checked (None: there was none)
    nodeid: str = ""


@dataclass
class Change:
    """The new text of one file, and the edits that could not be made."""

    path: Path
    before: bytes
    after: Optional[bytes]  # None when no edit could be made
    made: List[Edit] = field(default_factory=list)
    refused: List[Tuple[Edit, str]] = field(default_factory=list)  # (edit, why)

    def diff(self, shown: str) -> str:
        """A unified diff from the old text to the new (empty if no change)."""
        if self.after is None:
            return ""
        return unified_diff(self.before.decode("utf-8", "replace"),
                            self.after.decode("utf-8", "replace"), shown)


NO_NEWLINE = "\\ No newline at end of file\n"


def unified_diff(before: str, after: str, shown: str, context: int = 3) -> str:
    """``difflib.unified_diff``'s hunks, with a last line that has no newline
    ended and followed by the marker line patch tools read, as git writes it
    (difflib leaves such a line unended, which runs two lines together)."""
    a, b = before.splitlines(keepends=True), after.splitlines(keepends=True)
    if a == b:
        return ""
    out = [f"--- a/{shown}\n", f"+++ b/{shown}\n"]

    def line(mark: str, text: str) -> None:
        out.append(mark + (text if text.endswith("\n") else text + "\n" + NO_NEWLINE))

    for group in difflib.SequenceMatcher(None, a, b).get_grouped_opcodes(context):
        i1, i2, j1, j2 = group[0][1], group[-1][2], group[0][3], group[-1][4]
        out.append(f"@@ -{_span(i1, i2)} +{_span(j1, j2)} @@\n")
        for tag, x1, x2, y1, y2 in group:
            if tag == "equal":
                for t in a[x1:x2]:
                    line(" ", t)
                continue
            for t in a[x1:x2]:
                line("-", t)
            for t in b[y1:y2]:
                line("+", t)
    return "".join(out)


def _span(start: int, end: int) -> str:
    """A hunk's range as the unified format writes it (1-based; ``n,0`` when empty)."""
    length = end - start
    if length == 1:
        return f"{start + 1}"
    return f"{start + 1 if length else start},{length}"


def change(path: Path, edits: Sequence[Edit]) -> Change:
    """The file at ``path`` with ``edits`` made (as far as they can be)."""
    import libcst as cst

    before = path.read_bytes()
    out = Change(path, before, None)
    try:
        module = cst.parse_module(before)
    except Exception as exc:  # noqa: BLE001 -- a file libcst cannot read is left alone
        out.refused = [(e, f"libcst cannot parse the file ({type(exc).__name__}: {exc})")
                       for e in edits]
        return out
    wrapper = cst.MetadataWrapper(module, unsafe_skip_copy=True)
    finder = _Finder({e.line for e in edits})
    wrapper.visit(finder)
    replacements: Dict[int, object] = {}  # id(call) -> new call
    for e in edits:
        call = finder.calls.get(e.line)
        if call is None:
            out.refused.append((e, f"no @refines(...) or attach(...) call starts at line "
                                   f"{e.line} any more"))
            continue
        why = _check_was(module, call, e)
        if why:
            out.refused.append((e, why))
            continue
        try:
            new_value = cst.parse_expression(e.assuming)
        except Exception as exc:  # noqa: BLE001 -- cannot happen for checked text
            out.refused.append((e, f"the suggestion does not parse ({exc})"))
            continue
        replacements[id(call)] = _with_assuming(module, call, new_value, finder.columns[e.line],
                                                finder.indents[e.line], finder.starts[e.line])
        out.made.append(e)
    if not out.made:
        return out
    new = module.visit(_Replace(replacements))
    if any("math." in e.assuming for e in out.made) and not _imports_math(new):
        new = _add_import_math(new)
    out.after = new.bytes
    return out


def _callee(call) -> str:
    import libcst as cst

    f = call.func
    if isinstance(f, cst.Name):
        return f.value
    if isinstance(f, cst.Attribute):
        return f.attr.value
    return ""


def _Finder(lines):  # noqa: N802 -- a class made where libcst is imported
    import libcst as cst
    from libcst.metadata import PositionProvider

    class Finder(cst.CSTVisitor):
        METADATA_DEPENDENCIES = (PositionProvider,)

        def __init__(self) -> None:
            super().__init__()
            self.calls: Dict[int, cst.Call] = {}
            self.columns: Dict[int, int] = {}  # column of the first argument
            self.indents: Dict[int, int] = {}  # column where the call's statement starts
            self.starts: Dict[int, int] = {}  # column where the call itself starts
            self.depth = 0

        def visit_Decorator(self, node: cst.Decorator) -> None:
            self._take(node.decorator, self.get_metadata(PositionProvider, node).start.column)

        def visit_Expr(self, node: cst.Expr) -> None:
            self._take(node.value, self.get_metadata(PositionProvider, node).start.column)

        def _take(self, expr, indent: int) -> None:
            if not isinstance(expr, cst.Call) or _callee(expr) not in SPEC_CALLS:
                return
            start = self.get_metadata(PositionProvider, expr).start
            if start.line in lines and start.line not in self.calls:
                self.calls[start.line] = expr
                first = expr.args[0] if expr.args else None
                self.columns[start.line] = (self.get_metadata(PositionProvider, first).start
                                            .column if first is not None else start.column + 1)
                self.indents[start.line] = indent
                self.starts[start.line] = start.column

    return Finder()


def _check_was(module, call, e: Edit) -> str:
    """Why the call is no longer the one checked (its assuming= differs), or ""."""
    import libcst as cst

    current = next((a for a in call.args if a.keyword is not None
                    and a.keyword.value == "assuming"), None)
    if current is None:
        return "" if e.was is None else "its assuming= is gone since the check"
    value = current.value
    if not isinstance(value, cst.Lambda):
        return (f"assuming= is `{module.code_for_node(value)}`, not a lambda; edit it by "
                f"hand")
    if e.was is None:
        return "it has an assuming= that was not there when it was checked"
    body = module.code_for_node(value.body)
    if _structure(body) != _structure(e.was):
        return "its assuming= changed since the check"
    return ""


def _structure(text: str) -> str:
    """The expression's syntax tree, so that layout, comments and redundant
    parentheses do not count, and a regrouping does."""
    try:
        return ast.dump(ast.parse("(\n" + text + "\n)", mode="eval"))
    except SyntaxError:
        return re.sub(r"\s", "", text)


def _with_assuming(module, call, value, column: int, indent: int, start: int):
    """``call`` with ``assuming=value``: the keyword's value replaced, or the
    argument added after the last one. ``column``: where the first argument
    starts; ``indent``: the statement's indentation; ``start``: the column of
    the call on its first line (after a decorator's ``@``)."""
    import libcst as cst

    args = list(call.args)
    for i, a in enumerate(args):
        if a.keyword is not None and a.keyword.value == "assuming":
            args[i] = a.with_changes(value=value)
            return call.with_changes(args=args)
    new_arg = cst.Arg(value=value, keyword=cst.Name("assuming"),
                      equal=cst.AssignEqual(whitespace_before=cst.SimpleWhitespace(""),
                                            whitespace_after=cst.SimpleWhitespace("")))
    last = args[-1]
    # What follows the last argument -- a trailing comma, or the space before
    # `)` (a line break when `)` is on a line of its own) -- moves to the new one.
    trailing, before_close = last.comma, last.whitespace_after_arg
    layout = None  # the line break and indentation one argument is separated by
    if len(args) >= 2 and isinstance(args[-2].comma, cst.Comma) and isinstance(
            args[-2].comma.whitespace_after, cst.ParenthesizedWhitespace):
        layout = args[-2].comma.whitespace_after
    elif isinstance(call.whitespace_before_args, cst.ParenthesizedWhitespace):
        layout = call.whitespace_before_args  # one argument, on a line of its own
    if layout is not None:
        # The same line break and indentation, without a comment it may carry.
        space = cst.ParenthesizedWhitespace(first_line=cst.TrailingWhitespace(),
                                            empty_lines=[], indent=layout.indent,
                                            last_line=layout.last_line)
    else:
        text = module.code_for_node(call)
        added = len(module.code_for_node(value)) + len(", assuming=")
        if "\n" not in text and start + len(text) + added <= MAX_LINE:
            space = cst.SimpleWhitespace(" ")
        else:  # on a line of its own, under the first argument
            space = cst.ParenthesizedWhitespace(
                first_line=cst.TrailingWhitespace(), empty_lines=[], indent=True,
                last_line=cst.SimpleWhitespace(" " * max(0, column - indent)))
    args[-1] = last.with_changes(comma=cst.Comma(whitespace_after=space),
                                 whitespace_after_arg=cst.SimpleWhitespace(""))
    new_arg = new_arg.with_changes(whitespace_after_arg=before_close)
    if isinstance(trailing, cst.Comma):
        new_arg = new_arg.with_changes(comma=trailing)
    args.append(new_arg)
    return call.with_changes(args=args)


def _Replace(replacements):  # noqa: N802
    import libcst as cst

    class Replace(cst.CSTTransformer):
        def leave_Call(self, original, updated):
            return replacements.get(id(original), updated)

    return Replace()


def _imports_math(module) -> bool:
    import libcst as cst

    for stmt in module.body:
        if isinstance(stmt, cst.SimpleStatementLine):
            for small in stmt.body:
                if isinstance(small, cst.Import) and any(
                        isinstance(n.name, cst.Name) and n.name.value == "math"
                        and n.asname is None for n in small.names):
                    return True
    return False


def _add_import_math(module):
    """``import math`` before the module's first import (a standard-library
    module goes first), after its docstring and ``from __future__`` imports."""
    import libcst as cst

    body = list(module.body)
    at = None
    for i, stmt in enumerate(body):
        first = stmt.body[0] if isinstance(stmt, cst.SimpleStatementLine) and stmt.body else None
        if isinstance(first, cst.ImportFrom) and isinstance(first.module, cst.Name) \
                and first.module.value == "__future__":
            at = i + 1
        elif isinstance(first, (cst.Import, cst.ImportFrom)):
            at = i if at is None else at
            break
        elif i == 0 and isinstance(first, cst.Expr) and isinstance(
                first.value, (cst.SimpleString, cst.ConcatenatedString)):
            at = 1  # after the docstring
        else:
            break
    at = 0 if at is None else at
    stmt = cst.parse_statement("import math\n")
    if at < len(body):
        # Take over the blank lines above the statement it goes before.
        stmt = stmt.with_changes(leading_lines=body[at].leading_lines)
        body[at] = body[at].with_changes(leading_lines=[])
    body.insert(at, stmt)
    return module.with_changes(body=body)


# ---------------------------------------------------------------- the file system


def uncommitted(path: Path) -> Optional[str]:
    """Why ``path`` must not be rewritten without --refines-allow-uncommitted:
    it has changes not committed to git, is not tracked, is not in a
    repository, or git cannot say. None when it matches the last commit."""
    folder = path.parent
    try:
        top = subprocess.run(["git", "rev-parse", "--show-toplevel"], cwd=folder,
                             capture_output=True, text=True, timeout=30)
    except (OSError, subprocess.SubprocessError):
        return "git is not available, so its changes could not be checked"
    if top.returncode != 0:
        return "it is not in a git repository, so nothing keeps its current text"
    try:
        tracked = subprocess.run(["git", "ls-files", "--error-unmatch", "--", path.name],
                                 cwd=folder, capture_output=True, text=True, timeout=30)
        status = subprocess.run(["git", "status", "--porcelain", "--", path.name],
                                cwd=folder, capture_output=True, text=True, timeout=30)
    except (OSError, subprocess.SubprocessError):
        return "git could not be asked about it"
    if tracked.returncode != 0:
        return "it is not tracked by git"
    if status.returncode != 0:
        return f"git status failed: {status.stderr.strip()}"
    if status.stdout.strip():
        return "it has changes not committed to git"
    return None


def write(path: Path, data: bytes) -> None:
    """Replace ``path`` with ``data`` atomically, keeping its permissions."""
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".refines-tmp",
                               dir=str(path.parent))
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        shutil.copymode(path, tmp)
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
