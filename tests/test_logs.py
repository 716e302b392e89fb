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


def _record(message: str, *args, **extra) -> logging.LogRecord:
    record = logging.LogRecord("tailgauge.requests", logging.INFO, __file__, 1, message, args, None)
    record.__dict__.update(extra)
    return record


@pytest.mark.parametrize("character", BREAKERS)
def test_separators_and_controls_are_escaped_in_every_field(character):
    path = f"/docs/assets/a{character}b"
    line = JsonFormatter().format(_record("unhandled error on GET %s", path, route=path, status=404))
    assert "\\u" in line or "\\n" in line or "\\r" in line
    assert not any(ord(c) < 0x20 or 0x7F <= ord(c) <= 0x9F or c in "\u2028\u2029" or 0xD800 <= ord(c) <= 0xDFFF
                   for c in line)
    assert len(line.splitlines()) == 1 and len(line.split("\u2028")) == 1
    parsed = json.loads(line)
    assert parsed["message"] == f"unhandled error on GET {path}" and parsed["route"] == path


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
