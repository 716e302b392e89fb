"""A real gunicorn with uvicorn workers (deploy/gunicorn.conf.py, 2 workers): what it writes (issue 20).

stderr: every line is one JSON object without terminal escapes (raw, or as a JSON \\u001b escape)
and without uvicorn's ``color_message`` field, gunicorn's and uvicorn's own lines included.
Tracing on (``OTEL_TRACES_EXPORTER=console``, spans on stdout): a request sent with a
``traceparent`` is logged with its trace id, exported as a span of that trace with its route,
input size and resample count, and answered with the server span's ``traceparent``.
"""

from __future__ import annotations

import gzip
import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import httpx
import pytest

from tests.system.server import free_port

ROOT = Path(__file__).resolve().parents[2]
SAMPLES = "/v1/descriptors/samples"
TRACE_ID = "4bf92f3577b34da6a3ce929d0e0e4736"
TRACEPARENT = f"00-{TRACE_ID}-00f067aa0ba902b7-01"
# Invented scenario: seconds a lift door stayed open on nine stops.
BODY = {"values": [3.1, 2.8, 4.0, 3.3, 5.6, 2.9, 3.0, 3.7, 4.4],
        "options": {"interval": {"resamples": 1000, "seed": 11}}}


@pytest.fixture(scope="module")
def served(tmp_path_factory):
    """Start gunicorn, send the requests, stop it; (stderr text, stdout text, answers)."""
    pytest.importorskip("opentelemetry.sdk")  # the otel extra (part of the test extra)
    root = tmp_path_factory.mktemp("server-logs")
    port = free_port()
    environ = {k: v for k, v in os.environ.items() if not k.startswith(("TAILGAUGE_", "OTEL_"))}
    environ.update(
        BIND=f"127.0.0.1:{port}", WEB_CONCURRENCY="2", WORKER_TMP_DIR=str(root), HOME=str(root),
        PROMETHEUS_MULTIPROC_DIR=str(root / "metrics"), PYTHONUNBUFFERED="1",
        OTEL_TRACES_EXPORTER="console", OTEL_SERVICE_NAME="lift-doors", OTEL_BSP_SCHEDULE_DELAY="100",
    )
    (root / "metrics").mkdir()
    stderr_path, stdout_path = root / "stderr.log", root / "stdout.log"
    with stderr_path.open("wb") as stderr, stdout_path.open("wb") as stdout:
        process = subprocess.Popen(
            [sys.executable, "-m", "gunicorn", "--config", "deploy/gunicorn.conf.py", "tailgauge.asgi:app"],
            cwd=ROOT, env=environ, stdin=subprocess.DEVNULL, stdout=stdout, stderr=stderr,
        )
    base = f"http://127.0.0.1:{port}"
    answers = {}
    try:
        deadline = time.monotonic() + 60
        while stderr_path.read_text().count("Application startup complete") < 2:
            if process.poll() is not None or time.monotonic() > deadline:
                pytest.fail("gunicorn did not start: " + stderr_path.read_text()[-3000:])
            time.sleep(0.2)
        with httpx.Client(base_url=base, timeout=60) as client:
            answers["traced"] = client.post(
                SAMPLES, content=gzip.compress(json.dumps(BODY).encode()),
                headers={"content-type": "application/json", "content-encoding": "gzip",
                         "accept-encoding": "gzip", "traceparent": TRACEPARENT, "x-request-id": "lift-7"})
            answers["missing"] = client.get("/no/such/\x1b[2Jpath".replace("\x1b", "%1B"))
            answers["broken"] = client.post(SAMPLES, content=b'{"values": [1, 2,',
                                            headers={"content-type": "application/json"})
            answers["metrics"] = client.get("/metrics")
        deadline = time.monotonic() + 20
        while TRACE_ID not in stdout_path.read_text() and time.monotonic() < deadline:
            time.sleep(0.2)
    finally:
        process.send_signal(signal.SIGTERM)
        try:
            process.wait(timeout=40)
        except subprocess.TimeoutExpired:
            process.kill()
            process.wait()
    return stderr_path.read_text(encoding="utf-8"), stdout_path.read_text(encoding="utf-8"), answers


def test_every_line_is_one_json_object_without_terminal_escapes(served):
    stderr, _, answers = served
    assert [answers[key].status_code for key in ("traced", "missing", "broken", "metrics")] == [200, 404, 400, 200]
    lines = [line for line in stderr.splitlines() if line.strip()]
    records = []
    for line in lines:
        assert "\x1b" not in line and "\\u001b" not in line and "\x9b" not in line and "\\u009b" not in line, line
        record = json.loads(line)
        assert isinstance(record, dict), line
        assert "color_message" not in record, line
        records.append(record)
    loggers = {record["logger"] for record in records}
    # uvicorn's own lines are there (they are the ones that carried color_message), and gunicorn's.
    assert {"uvicorn.error", "gunicorn.error", "tailgauge.requests"} <= loggers, loggers
    assert any(record["message"].startswith("Started server process") for record in records)
    assert sum(record["message"].startswith("Booting worker with pid") for record in records) == 2
    missing = [r for r in records if r["logger"] == "tailgauge.requests" and r["status"] == 404]
    assert missing and missing[0]["route"] == "unmatched"


def test_the_traced_request_logs_its_trace_id_and_exports_its_span(served):
    stderr, stdout, answers = served
    traced = answers["traced"]
    assert traced.status_code == 200 and traced.headers["content-encoding"] == "gzip"
    assert traced.json()["descriptors"]["mean"]["value"] == pytest.approx(32.8 / 9, abs=1e-12)  # hand sum: 32.8
    (line,) = [json.loads(text) for text in stderr.splitlines()
               if '"tailgauge.requests"' in text and '"lift-7"' in text]
    assert line["trace_id"] == TRACE_ID and line["values"] == 9 and line["resamples"] == 1000
    assert traced.headers["traceparent"] == f"00-{TRACE_ID}-{line['span_id']}-01"
    # ConsoleSpanExporter writes each span as an indented JSON object; read them one after another.
    spans, decoder, at = [], json.JSONDecoder(), 0
    while (start := stdout.find("{", at)) >= 0:
        span, at = decoder.raw_decode(stdout, start)
        spans.append(span)
    (span,) = [s for s in spans if s["context"]["trace_id"] == f"0x{TRACE_ID}"]
    assert span["context"]["span_id"] == f"0x{line['span_id']}"
    assert span["parent_id"] == "0x00f067aa0ba902b7" and span["kind"] == "SpanKind.SERVER"
    assert span["name"] == f"POST {SAMPLES}"
    assert span["attributes"]["http.route"] == SAMPLES
    assert span["attributes"]["tailgauge.values"] == 9 and span["attributes"]["tailgauge.resamples"] == 1000
    assert span["resource"]["attributes"]["service.name"] == "lift-doors"
    # The untraced requests are spans too, each of a trace of its own, and their lines name them.
    others = [json.loads(text) for text in stderr.splitlines()
              if '"tailgauge.requests"' in text and '"lift-7"' not in text]
    assert others and all(len(other["trace_id"]) == 32 and other["trace_id"] != TRACE_ID for other in others)
