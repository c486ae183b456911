"""Every row of the message table is triggered by its snippet, with its verdict."""

import pytest

from refines.errors import MESSAGES, format_message
from refines.verdict import ERROR, REFUTED, TESTED, UNKNOWN

from helpers import check_source

# Unsupported constructs send the obligation to testing; these rows are about
# functions that cannot be called with drawn arguments either, so they stay unknown.
UNTESTABLE = {"param-untyped", "signature", "attach-signature"}


@pytest.mark.parametrize("key", sorted(MESSAGES))
def test_every_message_row_is_reached_by_its_snippet(tmp_path, key):
    msg = MESSAGES[key]
    results = check_source(tmp_path, msg.snippet, examples=20)
    assert results, f"snippet for {key!r} declares no spec"
    if msg.kind == "spec":
        expected = {ERROR}
    elif key in UNTESTABLE:
        expected = {UNKNOWN}
    else:
        expected = {TESTED, REFUTED}  # the tester decides which
    hits = [r for r in results if r.message_key == key]
    assert hits, [(r.verdict, r.message_key, r.reason) for r in results]
    for r in hits:
        assert r.verdict in expected, (r.verdict, r.reason)
        if r.verdict == REFUTED:
            assert r.counterexample.found_by == "testing"
            continue
        # The reason names file and line, and the hint says what to do.
        assert ".py:" in r.reason
        assert r.hint


@pytest.mark.parametrize("key", sorted(MESSAGES))
def test_messages_format_without_missing_fields(key):
    fields = {name: "X" for name in ("construct", "callee", "op", "types", "hint", "type",
                                     "name", "hint_text", "shapes", "qualname", "role",
                                     "allowed_what", "allowed", "exception", "inputs",
                                     "runtime", "source", "method", "attr", "cls", "why")}
    text, hint = format_message(key, **fields)
    assert text and hint and "{" not in text
