"""Turning verdicts into text and JSON. No other module prints."""

from __future__ import annotations

from typing import Dict, Iterable, List, Optional

from refines.verdict import ERROR, REFUTED, TESTED, UNKNOWN, VERDICTS, Result

SCHEMA = "refines-report/1"


def render(result: Result, strict: bool = False) -> str:
    """The failure text of one obligation: what happened, then what to do."""
    head = f"{result.verdict}: {result.function}  [{result.path}:{result.line}]"
    lines = [head]
    ce = result.counterexample
    if result.verdict == REFUTED and ce is not None:
        how = "found by testing, " if ce.found_by == "testing" else ""
        lines.append("  the spec does not hold; counterexample "
                     + (f"({how}confirmed by running the function):" if ce.confirmed
                        else "(NOT confirmed by running the function):"))
        lines.append(f"      {ce.call}")
        if "raised" in ce.outcome:
            lines.append(f"      raised {ce.outcome['raised']}"
                         + (f": {ce.detail}" if ce.detail else ""))
        else:
            lines.append(f"      returned {ce.outcome['returned']}")
            if ce.detail:
                lines.append(f"      ({ce.detail})")
        lines.append(f"  violated:            {ce.violated}"
                     + (f"  [{ce.violated_at}]" if ce.violated_at else ""))
        lines.extend(_preconditions(result))
        if result.suggested_assuming is not None:
            lines.append(f"  suggested:           assuming={result.suggested_assuming}")
        if result.precondition_note:
            lines.append(f"  note: {result.precondition_note}")
        if ce.regression_test:
            lines.append("  regression test (paste it into your tests; it fails until "
                         "the bug is fixed):")
            lines.extend("      " + line for line in ce.regression_test.rstrip().splitlines())
    else:
        if result.reason:
            lines.append(f"  {result.reason}")
        if result.testing is not None:
            lines.append(f"  tested on {result.testing.describe()}: none broke the spec")
        if strict and result.verdict in (TESTED, UNKNOWN):
            lines.append("  (failed because --refines-strict asks for a proof)")
    if result.hint:
        lines.append(f"  Hint: {result.hint}")
    for note in result.notes:
        lines.append("  " + note.rstrip().replace("\n", "\n  "))
    return "\n".join(lines)


def _preconditions(result: Result) -> List[str]:
    """The exact precondition, then the simpler sufficient ones."""
    lines = []
    if result.exact_precondition is not None:
        if result.precondition_scope == "translation":
            lines.append(f"  precondition:        {result.exact_precondition}")
            lines.append("      (the weakest condition under which the function meets the "
                         "spec whatever its untranslated parts do: sufficient, but the "
                         "function may meet the spec on more inputs)")
        else:
            lines.append(f"  exact precondition:  {result.exact_precondition}")
            lines.append("      (the weakest condition on the inputs under which the "
                         "function meets the spec)")
    for text in result.sufficient_preconditions:
        lines.append(f"  sufficient:          {text}")
    if result.sufficient_preconditions:
        lines.append("      (simpler, but stronger than necessary: "
                     + ("each implies" if len(result.sufficient_preconditions) > 1
                        else "it implies") + " the precondition above and leaves out "
                     "some inputs that meet the spec)")
    return lines


def one_line(result: Result) -> str:
    """A single line for skip reasons and summaries."""
    text = f"refines {result.verdict}: {result.reason or ''}".rstrip()
    if result.hint:
        text += f" -- hint: {result.hint}"
    return text


def counts(results: Iterable[dict]) -> Dict[str, int]:
    out = {v: 0 for v in VERDICTS}
    for r in results:
        out[r["verdict"]] += 1
    return out


def summary_lines(results: List[dict]) -> List[str]:
    """The terminal summary: what was not proved, then one count line."""
    lines = []
    for verdict, label in ((TESTED, "tested, NOT proved"), (UNKNOWN, "unknown, NOT proved"),
                           (REFUTED, "refuted"), (ERROR, "error")):
        for r in results:
            if r["verdict"] == verdict:
                why = f" -- {r['reason']}" if r.get("reason") else ""
                if verdict == TESTED and r.get("testing"):
                    why = f" -- {r['testing']['examples']} examples passed; {r.get('reason')}"
                if verdict == REFUTED and (r.get("counterexample") or {}).get("found_by") \
                        == "testing":
                    why = " -- found by testing"
                lines.append(f"{label}: {r['nodeid']}{why}")
    for r in results:  # a proof that rests on an assumption, or on parts left
        for note in r.get("notes") or ():  # untranslated, says which
            if r["verdict"] == "proved" and note.startswith(("assumed: ", "untranslated: ")):
                lines.append(f"proved, {note}: {r['nodeid']}")
    c = counts(results)
    lines.append("refines: " + ", ".join(f"{c[v]} {v}" for v in VERDICTS))
    return lines


def json_report(results: List[dict], rewrites: Optional[List[dict]] = None) -> dict:
    ordered = sorted(results, key=lambda r: r["nodeid"])
    out = {"schema": SCHEMA, "summary": counts(ordered), "results": ordered}
    if rewrites is not None:  # --refines-apply or --refines-diff
        out["rewrites"] = rewrites
    return out


def rewrite_lines(rewrites: List[dict], applying: bool) -> List[str]:
    """``--refines-apply`` / ``--refines-diff``: per file, what was done with the
    suggestions, the diff, and the verdicts of checking the rewritten file."""
    if not rewrites:
        return ["no refuted spec has a suggested assuming= to write"]
    lines: List[str] = []
    for w in rewrites:
        if lines:
            lines.append("")
        lines.append(f"{w['path']}: {w['status']}")
        for r in w["refused"]:
            lines.append(f"  left as it is: {r['nodeid']}: {r['why']}")
        if w["diff"]:
            lines.extend("  " + line for line in w["diff"].rstrip("\n").splitlines())
        if w["rechecked"]:
            lines.append("  checked again after the rewrite:")
            for r in w["rechecked"]:
                why = f" -- {r['reason']}" if r.get("reason") and r["verdict"] != "proved" else ""
                mark = "  (assuming= rewritten)" if r["nodeid"] in w["made"] else ""
                lines.append(f"    {r['verdict']}: {r['nodeid']}{mark}{why}")
    if not applying and any(w["diff"] for w in rewrites):
        lines.append("")
        lines.append("nothing was written; run with --refines-apply to make these changes "
                     "(files committed to git only) and check them again")
    return lines





def explain_lines(results: List[dict]) -> List[str]:
    """``--refines-explain``: per obligation, what the translation believes the
    body does, and what that guarantees about the result under ``assuming``."""
    lines: List[str] = []
    for r in sorted(results, key=lambda r: r["nodeid"]):
        e = r.get("explanation")
        if e is None:
            continue
        if lines:
            lines.append("")
        lines.append(f"{r['nodeid']}  [{r['path']}:{r['line']}]  ({r['verdict']})")
        if not e.get("relation") and e.get("note") and "guarantee" not in e:
            lines.append(f"  no explanation: {e['note']}")
            continue
        lines.append("  what the body does, as translated (`when` reads the arguments "
                     "as passed):")
        cases = e.get("relation") or []
        width = max((len(c["when"]) for c in cases if c["when"] != "always"), default=0)
        for c in cases:
            when, then = c["when"], c["then"]
            if when == "always":
                lines.append(f"      always: {then}")
            elif width <= 40:
                lines.append(f"      when {when + ':':<{width + 1}}  {then}")
            else:
                lines.append(f"      when {when}:")
                lines.append(f"          {then}")
        if e.get("unknowns"):
            lines.append(f"      ({e['unknowns']})")
        where = (f"under assuming ({e['assuming']})" if e.get("assuming")
                 else "for every input")
        label = ("the strongest condition it guarantees" if e.get("guarantee_kind")
                 == "strongest" else "facts the solver proves, not necessarily the strongest")
        lines.append(f"  {where}, about the result ({label}):")
        lines.extend(f"      {g}" for g in e.get("guarantee") or ())
        if e.get("note"):
            lines.append(f"  note: {e['note']}")
    return lines


def rewrite_summary(rewrites: List[dict]) -> str:
    """One line after the counts: what --refines-apply rewrote, and how the
    rewritten specs fared when checked again (the counts above are from before)."""
    made = [n for w in rewrites for n in w["made"] if w["status"] == "written"]
    again = {r["nodeid"]: r["verdict"] for w in rewrites for r in w["rechecked"]}
    verdicts = [again.get(n, "not checked") for n in made]
    kept = sum(len(w["made"]) for w in rewrites if w["status"] != "written")
    text = (f"refines apply: {len(made)} assuming= rewritten, checked again: "
            + (", ".join(f"{verdicts.count(v)} {v}" for v in dict.fromkeys(verdicts))
               if made else "nothing"))
    if kept:
        text += f"; {kept} not written (see above)"
    return text + " (the counts above are from before the rewrite)"
