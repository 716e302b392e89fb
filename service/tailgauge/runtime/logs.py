"""Structured logs: one JSON object per line, for the app and for gunicorn's own messages.

Kept free of the web stack so gunicorn's master can load the formatter from its configuration.
"""

from __future__ import annotations

import json
import logging
import re
import sys
import time
from contextvars import ContextVar

# Attributes every LogRecord has; anything else passed in ``extra=`` becomes a field of the line.
_STANDARD = set(vars(logging.LogRecord("", 0, "", 0, "", None, None))) | {"message", "asctime", "taskName"}
# Characters json.dumps(ensure_ascii=False) leaves raw that some log tools treat as line breaks or
# that no terminal should receive: DEL and the C1 controls (NEL, U+0085, among them), the Unicode
# line and paragraph separators, and lone surrogates (which cannot even be written as UTF-8).
# They can only occur inside JSON strings, where a \uXXXX escape means the same character.
_UNSAFE = re.compile("[\x7f-\x9f\u2028\u2029\ud800-\udfff]")
# Fields that exist only to colour a terminal (uvicorn adds ``color_message``, the message with
# ANSI colours): dropped, the plain message is already there.
_TERMINAL_FIELDS = frozenset({"color_message"})
# Terminal escape sequences inside any logged string (a colour, a cursor move, a title change,
# or a caller's path that carries one): CSI (ESC [ or the C1 CSI) with its parameters, OSC up to
# its terminator, any other ESC with the character it introduces; then any lone ESC left.
_ESCAPES = re.compile(
    "(?:\x1b\\[|\x9b)[0-?]*[ -/]*[@-~]?|\x1b\\][^\x07\x1b]*(?:\x07|\x1b\\\\)?|\x1b[@-Z\\\\-_]|\x1b"
)
# The trace of the request being handled (trace id, span id), set by tailgauge.api.tracing when
# tracing is on: every line logged while the request runs carries both.
trace_context: ContextVar[tuple[str, str] | None] = ContextVar("tailgauge_trace_context", default=None)


def _escape(match: re.Match) -> str:
    return f"\\u{ord(match[0]):04x}"


def _plain(value):
    """``value`` without terminal escape sequences when it is a string; anything else as it is."""
    if isinstance(value, str) and ("\x1b" in value or "\x9b" in value):
        return _ESCAPES.sub("", value)
    return value


class JsonFormatter(logging.Formatter):
    """``{"time", "level", "logger", "message", ...extra fields}``; exceptions as one string field."""

    def format(self, record: logging.LogRecord) -> str:
        line = {
            "time": time.strftime("%Y-%m-%dT%H:%M:%S", time.gmtime(record.created))
            + f".{int(record.msecs):03d}Z",
            "level": record.levelname.lower(),
            "logger": record.name,
            "message": _plain(record.getMessage()),
        }
        for key, value in vars(record).items():
            if key not in _STANDARD and key not in _TERMINAL_FIELDS and not key.startswith("_"):
                line[key] = _plain(value)
        trace = trace_context.get()
        if trace is not None:
            line.setdefault("trace_id", trace[0])
            line.setdefault("span_id", trace[1])
        if record.exc_info:
            line["exception"] = _plain(self.formatException(record.exc_info))
        # json.dumps escapes the C0 controls (a path's newline or NUL) itself; _UNSAFE the rest.
        return _UNSAFE.sub(_escape, json.dumps(line, default=str, ensure_ascii=False))


class _StderrHandler(logging.StreamHandler):
    """Writes to whatever ``sys.stderr`` is at the time of each record (test runners swap it)."""

    def __init__(self) -> None:
        super().__init__()

    @property
    def stream(self):
        return sys.stderr

    @stream.setter
    def stream(self, _value) -> None:
        pass


def configure(level: int = logging.INFO) -> None:
    """Send the ``tailgauge`` loggers to stderr as JSON lines (idempotent)."""
    logger = logging.getLogger("tailgauge")
    if any(isinstance(handler, _StderrHandler) for handler in logger.handlers):
        return
    handler = _StderrHandler()
    handler.setFormatter(JsonFormatter())
    logger.addHandler(handler)
    logger.setLevel(level)
    logger.propagate = False


__all__ = ["JsonFormatter", "configure", "trace_context"]
