"""The end of the suggestion workflow: write the tightened ``assuming=`` into
the source and check the file again, in the same pytest run.

At the end of the session (on the controller under xdist), each refuted
obligation with a suggestion is one ``rewrite.Edit``. Per file:

1. the file must be the one that was checked (same SHA-256 as when its items
   ran); otherwise it is left alone;
2. libcst makes the new text (``rewrite.change``); the diff is shown;
3. with ``--refines-diff`` that is all. With ``--refines-apply``, a file that
   is not committed to git as it is now (changes not committed, untracked, no
   repository) is left alone unless ``--refines-allow-uncommitted`` is given;
   then the file is replaced atomically (``rewrite.write``);
4. the rewritten module is imported again and every spec in it is checked
   again (``check``), and those verdicts are reported beside the change.

Everything is returned as plain data; ``report.rewrite_lines`` prints it.
"""

from __future__ import annotations

import hashlib
import json
from pathlib import Path
from typing import Callable, Dict, List

from refines.rewrite import Edit, change, uncommitted, write


def run(config, edits: List[dict], timeout: float, examples: int,
        show: Callable[[Path], str]) -> List[dict]:
    """One entry per file: ``{"path", "status", "diff", "made", "refused",
    "rechecked"}``; ``status`` is "diff only", "written" or "not written: why"."""
    apply = config.getoption("refines_apply")
    forced = config.getoption("refines_allow_uncommitted")
    by_file: Dict[str, List[dict]] = {}
    seen = set()
    for e in edits:
        if (e["file"], e["line"]) in seen:
            continue  # one spec run twice (xdist's --dist each, say): one edit
        seen.add((e["file"], e["line"]))
        by_file.setdefault(e["file"], []).append(e)
    out = []
    for file, records in sorted(by_file.items()):
        path = Path(file)
        entry = {"path": show(path), "status": "", "diff": "", "made": [], "refused": [],
                 "rechecked": []}
        out.append(entry)
        try:
            now = hashlib.sha256(path.read_bytes()).hexdigest()
        except OSError as exc:
            entry["status"] = f"not written: it cannot be read ({exc})"
            continue
        if any(r["digest"] != now for r in records):
            entry["status"] = ("not written: it changed after its specs were checked; "
                               "run again to get suggestions for the current text")
            entry["refused"] = [{"nodeid": r["nodeid"], "why": "the file changed"}
                                for r in records]
            continue
        try:
            planned = change(path, [Edit(path, r["line"], r["assuming"], r["was"],
                                         r["nodeid"])
                                    for r in sorted(records, key=lambda r: r["line"])])
        except ImportError:
            raise  # libcst missing: said once for the whole run
        except Exception as exc:  # noqa: BLE001 -- this file is left alone, the rest goes on
            entry["status"] = f"not written: internal error: {type(exc).__name__}: {exc}"
            continue
        entry["made"] = [e.nodeid for e in planned.made]
        entry["refused"] = [{"nodeid": e.nodeid, "why": why} for e, why in planned.refused]
        entry["diff"] = planned.diff(show(path))
        if planned.after is None:
            entry["status"] = "not written: no suggestion could be put in place"
            continue
        if not apply:
            entry["status"] = "diff only"
            continue
        why = None if forced else uncommitted(path)
        if why is not None:
            entry["status"] = (f"not written: {why} (commit it first, or pass "
                               f"--refines-allow-uncommitted)")
            continue
        try:
            write(path, planned.after)
        except OSError as exc:
            entry["status"] = f"not written: {exc}"
            continue
        entry["status"] = "written"
        entry["rechecked"] = recheck(config, path, timeout, examples, show)
    return out


def recheck(config, path: Path, timeout: float, examples: int,
            show: Callable[[Path], str]) -> List[dict]:
    """Import the rewritten file again and check every spec in it."""
    from refines.check import check_attached, check_function
    from refines.items import _without_assert_rewriting, import_spec_file, obligations

    shown = show(path)
    try:
        module = import_spec_file(config, path)
        with _without_assert_rewriting():
            module = _fresh(module, path)  # the old text may be imported already
    except Exception as exc:  # noqa: BLE001 -- report it; the run goes on
        return [{"nodeid": shown, "verdict": "error",
                 "reason": f"the rewritten file could not be imported: "
                           f"{type(exc).__name__}: {exc}"}]
    records = []
    as_shown = lambda p: show(Path(p))  # noqa: E731
    for name, fn, index, att in obligations(module):
        if att is not None:
            result = check_attached(att, vars(module), timeout, show=as_shown,
                                    examples=examples)
        else:
            result = check_function(fn, index, str(path), module.__name__, timeout,
                                    show=as_shown, examples=examples)
        records.append(json.loads(json.dumps(result.to_json(f"{shown}::{name}", shown))))
    return records


def _fresh(module, path: Path):
    """``module`` run again from its new text, under the same name. The text is
    compiled from the file itself, never from a cached ``.pyc``, which could be
    taken for current when the rewrite keeps the file's size and modification
    second."""
    import importlib.util
    import sys

    locations = [str(path.parent)] if path.name == "__init__.py" else None
    spec = importlib.util.spec_from_file_location(module.__name__, path,
                                                  submodule_search_locations=locations)
    fresh = importlib.util.module_from_spec(spec)
    code = compile(path.read_bytes(), str(path), "exec")
    sys.modules[module.__name__] = fresh
    exec(code, vars(fresh))  # noqa: S102 -- the user's module, as importing it does
    return fresh
