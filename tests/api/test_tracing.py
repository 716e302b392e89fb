"""Tracing (service/tailgauge/api/tracing.py; issue 20), checked with the SDK's in-memory exporter.

The OTLP exporter's factory is replaced by one that hands out an ``InMemorySpanExporter`` (and
counts how often it is asked), so the app is configured exactly as in production by
``OTEL_TRACES_EXPORTER=otlp`` and nothing leaves the process. The W3C trace-context values are
the example of the Trace Context recommendation (section 3.2.2.1, from memory of the text).
"""

from __future__ import annotations

import ast
import json
import os
import subprocess
import sys

import pytest
from litestar.testing import TestClient
from opentelemetry.sdk.trace.export.in_memory_span_exporter import InMemorySpanExporter
from opentelemetry.trace import SpanKind, StatusCode

from tailgauge.api import create_app, tracing
from tailgauge.settings import Settings

SAMPLES = "/v1/descriptors/samples"
TRACE_ID = "4bf92f3577b34da6a3ce929d0e0e4736"
PARENT_ID = "00f067aa0ba902b7"
TRACEPARENT = f"00-{TRACE_ID}-{PARENT_ID}-01"
# Invented scenario: litres of water a greenhouse's misting line used on seven mornings.
BODY = {"values": [12.5, 14.0, 11.75, 13.25, 15.5, 12.0, 13.0],
        "options": {"interval": {"method": "percentile", "resamples": 2000, "seed": 7}}}
OTEL_NAMES = ("OTEL_TRACES_EXPORTER", "OTEL_EXPORTER_OTLP_ENDPOINT", "OTEL_EXPORTER_OTLP_TRACES_ENDPOINT",
              "OTEL_SDK_DISABLED", "OTEL_SERVICE_NAME", "OTEL_RESOURCE_ATTRIBUTES")


@pytest.fixture
def no_otel_variables(monkeypatch):
    for name in OTEL_NAMES:
        monkeypatch.delenv(name, raising=False)


@pytest.fixture
def exporters(monkeypatch, no_otel_variables):
    """Every exporter the app asks for: in-memory ones, in the order made."""
    made: list[InMemorySpanExporter] = []

    def in_memory():
        made.append(InMemorySpanExporter())
        return made[-1]

    monkeypatch.setitem(tracing.EXPORTERS, "otlp", in_memory)
    monkeypatch.setitem(tracing.EXPORTERS, "console", in_memory)
    return made


@pytest.fixture
def traced(monkeypatch, exporters):
    """(client, finished spans, stderr reader) for an app built with OTEL_TRACES_EXPORTER=otlp."""
    monkeypatch.setenv("OTEL_TRACES_EXPORTER", "otlp")
    monkeypatch.setenv("OTEL_SERVICE_NAME", "greenhouse-test")
    app = create_app(Settings(request_log=True))
    assert app.tracing is not None and len(exporters) == 1

    def spans():
        app.tracing.provider.force_flush()
        return exporters[0].get_finished_spans()

    with TestClient(app) as client:
        yield client, spans
    app.tracing.provider.shutdown()


def _request_lines(text: str) -> list[dict]:
    lines = [json.loads(line) for line in text.splitlines() if line.strip()]
    return [line for line in lines if line.get("logger") == "tailgauge.requests"]


def test_a_traceparent_gives_a_span_of_that_trace_and_the_same_trace_id_in_the_log(traced, capsys):
    client, spans = traced
    capsys.readouterr()
    response = client.post(SAMPLES, json=BODY, headers={"traceparent": TRACEPARENT})
    assert response.status_code == 200
    (span,) = spans()
    assert f"{span.context.trace_id:032x}" == TRACE_ID
    assert f"{span.parent.span_id:016x}" == PARENT_ID and span.parent.is_remote
    assert span.kind is SpanKind.SERVER and span.name == f"POST {SAMPLES}"
    assert span.attributes["http.route"] == SAMPLES
    assert span.attributes["http.request.method"] == "POST"
    assert span.attributes["http.response.status_code"] == 200
    assert span.attributes["tailgauge.values"] == 7 and span.attributes["tailgauge.resamples"] == 2000
    assert span.attributes["tailgauge.request_id"] == response.headers["x-request-id"]
    assert span.resource.attributes["service.name"] == "greenhouse-test"
    # The answer names the server span as the parent of whatever the caller does next.
    assert response.headers["traceparent"] == f"00-{TRACE_ID}-{span.context.span_id:016x}-01"
    (line,) = _request_lines(capsys.readouterr().err)
    assert line["trace_id"] == TRACE_ID and line["span_id"] == f"{span.context.span_id:016x}"
    assert line["request_id"] == response.headers["x-request-id"]


def test_without_a_traceparent_a_new_trace_starts_and_the_log_names_it(traced, capsys):
    client, spans = traced
    capsys.readouterr()
    for sent in (None, "00-00000000000000000000000000000000-00f067aa0ba902b7-01", "garbage"):
        response = client.get("/v1/catalog", headers={} if sent is None else {"traceparent": sent})
        assert response.status_code == 200
    finished = spans()
    assert len(finished) == 3
    lines = _request_lines(capsys.readouterr().err)
    assert [line["trace_id"] for line in lines] == [f"{span.context.trace_id:032x}" for span in finished]
    assert all(span.parent is None and f"{span.context.trace_id:032x}" != TRACE_ID for span in finished)
    assert len({span.context.trace_id for span in finished}) == 3
    assert {span.name for span in finished} == {"GET /v1/catalog"}
    assert all("tailgauge.values" not in span.attributes for span in finished)


def test_unmatched_and_refused_requests_are_spans_too(traced):
    client, spans = traced
    assert client.get("/nowhere").status_code == 404
    assert client.post(SAMPLES, content=b"{", headers={"content-type": "application/json"}).status_code == 400
    missing, refused = spans()
    assert missing.name == "GET unmatched" and missing.attributes["http.response.status_code"] == 404
    assert refused.attributes["http.route"] == SAMPLES and refused.attributes["http.response.status_code"] == 400
    assert refused.status.status_code is not StatusCode.ERROR  # a 4xx is the caller's error, not the server's


def test_without_the_variables_no_exporter_is_made_and_nothing_changes(exporters, capsys):
    app = create_app(Settings(request_log=True))
    assert app.tracing is None and exporters == []
    with TestClient(app) as client:
        capsys.readouterr()
        response = client.post(SAMPLES, json=BODY, headers={"traceparent": TRACEPARENT})
    assert response.status_code == 200 and "traceparent" not in response.headers
    (line,) = _request_lines(capsys.readouterr().err)
    assert "trace_id" not in line and "span_id" not in line
    assert exporters == []


@pytest.mark.parametrize(
    ("environ", "names"),
    [
        ({}, []),
        ({"OTEL_SERVICE_NAME": "x"}, []),
        ({"OTEL_TRACES_EXPORTER": "none"}, []),
        ({"OTEL_TRACES_EXPORTER": ""}, []),
        ({"OTEL_TRACES_EXPORTER": "otlp"}, ["otlp"]),
        ({"OTEL_TRACES_EXPORTER": "OTLP, console,otlp"}, ["otlp", "console"]),
        ({"OTEL_TRACES_EXPORTER": "otlp,none"}, []),
        ({"OTEL_EXPORTER_OTLP_ENDPOINT": "http://collector:4318"}, ["otlp"]),
        ({"OTEL_EXPORTER_OTLP_TRACES_ENDPOINT": "http://collector:4318/v1/traces"}, ["otlp"]),
        ({"OTEL_TRACES_EXPORTER": "none", "OTEL_EXPORTER_OTLP_ENDPOINT": "http://collector:4318"}, []),
        ({"OTEL_TRACES_EXPORTER": "otlp", "OTEL_SDK_DISABLED": "true"}, []),
        ({"OTEL_TRACES_EXPORTER": "otlp", "OTEL_SDK_DISABLED": "false"}, ["otlp"]),
    ],
)
def test_which_variables_turn_tracing_on(environ, names):
    assert tracing.exporter_names(environ) == names


def test_an_unknown_exporter_alone_leaves_tracing_off(exporters, caplog):
    assert tracing.from_environment({"OTEL_TRACES_EXPORTER": "zipkin"}) is None
    assert exporters == [] and "zipkin" in caplog.text


def test_without_the_extra_the_variables_only_warn(exporters, monkeypatch, caplog):
    # An entry of None in sys.modules makes the import fail as if the package were not installed.
    monkeypatch.setitem(sys.modules, "opentelemetry.sdk.trace", None)
    assert tracing.from_environment({"OTEL_TRACES_EXPORTER": "otlp"}) is None
    assert exporters == [] and "the otel extra is not installed" in caplog.text


def test_the_service_name_defaults_to_tailgauge(monkeypatch, exporters):
    monkeypatch.setenv("OTEL_TRACES_EXPORTER", "otlp")
    own = tracing.from_environment()
    try:
        own.tracer.start_span("probe").end()
        own.provider.force_flush()
        (span,) = exporters[-1].get_finished_spans()
        assert span.resource.attributes["service.name"] == "tailgauge"
        assert span.resource.attributes["service.version"] == own.tracer.instrumentation_info.version
    finally:
        own.provider.shutdown()


def test_off_the_service_never_imports_the_sdk_and_a_request_imports_nothing(tmp_path):
    # A fresh interpreter: the app module as gunicorn loads it, then one request through it.
    # litestar itself, when OpenTelemetry is installed, imports the bare ``opentelemetry`` package
    # and its HTTP attribute names once while building any app (Litestar._patch_opentelemetry_middleware);
    # no SDK, API tracer, propagator or exporter module may be imported, at start or per request.
    script = """
import os, sys
from litestar.testing import TestClient
from tailgauge import asgi
def loaded():
    return sorted(name for name in sys.modules if name.startswith("opentelemetry"))
at_start = loaded()
with TestClient(asgi.app) as client:
    answer = client.post("/v1/descriptors/samples", json={"values": [1, 2, 3]}, headers={"traceparent": "%s"})
    assert answer.status_code == 200 and "traceparent" not in answer.headers
assert loaded() == at_start, (at_start, loaded())
print(at_start)
""" % TRACEPARENT
    environ = {k: v for k, v in os.environ.items() if not k.startswith(("OTEL_", "TAILGAUGE_"))}
    result = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, timeout=120,
                            cwd=tmp_path, env=environ)
    assert result.returncode == 0, result.stderr[-2000:]
    loaded = ast.literal_eval(result.stdout.strip().splitlines()[-1])  # the printed list of module names
    assert not [name for name in loaded if name.startswith(("opentelemetry.sdk", "opentelemetry.exporter",
                                                            "opentelemetry.trace", "opentelemetry.propagate"))]
