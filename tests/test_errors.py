"""Every row of the message table is triggered by its snippet, with its verdict."""

import pytest

from refines.errors import MESSAGES, format_message
from refines.verdict import ERROR, UNKNOWN

from helpers import check_source


@pytest.mark.parametrize("key", sorted(MESSAGES))
def test_every_message_row_is_reached_by_its_snippet(tmp_path, key):
    msg = MESSAGES[key]
    results = check_source(tmp_path, msg.snippet)
    assert results, f"snippet for {key!r} declares no spec"
    expected = UNKNOWN if msg.kind == "unsupported" else ERROR
    hits = [r for r in results if r.message_key == key]
    assert hits, [(r.verdict, r.message_key, r.reason) for r in results]
    for r in hits:
        assert r.verdict == expected
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
