"""The JSON log line (service/tailgauge/runtime/logs.py): one line per record, whatever the logged strings hold.

Regression: a logged path with a raw U+2028 split the line for tools that treat Unicode line
separators as breaks; every such character is now a \\u escape, and the line still decodes to the
same strings.
"""

from __future__ import annotations

import json
import logging

import pytest

from tailgauge.runtime.logs import JsonFormatter

BREAKERS = ["\u2028", "\u2029", "\x85", "\n", "\r", "\x00", "\x1b", "\x7f", "\x9b", "\ud800"]
# What a terminal escape becomes in a decoded field: ESC alone is dropped; the C1 CSI (U+009B)
# with the final byte it introduces ("b" here, in CSI's final range @ to ~) is dropped with it.
DECODED = {"\x1b": "/docs/assets/ab", "\x9b": "/docs/assets/a"}


def _record(message: str, *args, **extra) -> logging.LogRecord:
    record = logging.LogRecord("tailgauge.requests", logging.INFO, __file__, 1, message, args, None)
    record.__dict__.update(extra)
    return record


@pytest.mark.parametrize("character", BREAKERS)
def test_separators_and_controls_are_escaped_in_every_field(character):
    path = f"/docs/assets/a{character}b"
    line = JsonFormatter().format(_record("unhandled error on GET %s", path, route=path, status=404))
    assert character in DECODED or "\\u" in line or "\\n" in line or "\\r" in line
    assert not any(ord(c) < 0x20 or 0x7F <= ord(c) <= 0x9F or c in "\u2028\u2029" or 0xD800 <= ord(c) <= 0xDFFF
                   for c in line)
    assert len(line.splitlines()) == 1 and len(line.split("\u2028")) == 1
    parsed = json.loads(line)
    shown = DECODED.get(character, path)
    assert parsed["message"] == f"unhandled error on GET {shown}" and parsed["route"] == shown


def test_other_text_stays_readable():
    line = JsonFormatter().format(_record("café ✓ 面包"))
    assert json.loads(line)["message"] == "café ✓ 面包" and "café ✓ 面包" in line


def test_an_exception_with_a_separator_stays_on_one_line():
    try:
        raise ValueError("bad\u2028name")
    except ValueError:
        import sys

        record = logging.LogRecord("tailgauge.api", logging.ERROR, __file__, 1, "failed", None, sys.exc_info())
    line = JsonFormatter().format(record)
    assert len(line.splitlines()) == 1 and "bad\u2028name" in json.loads(line)["exception"]


# Issue 20: uvicorn logs its messages with a ``color_message`` extra holding ANSI colours.
def test_terminal_fields_are_dropped_and_escape_sequences_stripped():
    record = _record("Started server process [%d]", 4242,
                     color_message="Started server process [\x1b[36m%d\x1b[0m]",
                     path="/v1/\x1b[2J\x1b]0;owned\x07x", note="\x1b[1;31mred\x1b[0m text")
    line = JsonFormatter().format(record)
    parsed = json.loads(line)
    assert "color_message" not in parsed
    assert parsed["message"] == "Started server process [4242]"
    assert parsed["path"] == "/v1/x" and parsed["note"] == "red text"
    assert "\\u001b" not in line and "\x1b" not in line and "\\u009b" not in line


def test_the_trace_of_the_request_is_on_every_line_while_it_is_set():
    from tailgauge.runtime.logs import trace_context

    token = trace_context.set(("4bf92f3577b34da6a3ce929d0e0e4736", "00f067aa0ba902b7"))
    try:
        inside = json.loads(JsonFormatter().format(_record("request")))
    finally:
        trace_context.reset(token)
    outside = json.loads(JsonFormatter().format(_record("request")))
    assert inside["trace_id"] == "4bf92f3577b34da6a3ce929d0e0e4736" and inside["span_id"] == "00f067aa0ba902b7"
    assert "trace_id" not in outside and "span_id" not in outside
