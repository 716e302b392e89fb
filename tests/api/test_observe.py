"""Request ids, per-request metrics and the JSON request log, in one process.

The cross-worker sums of the metrics are tested against a real gunicorn in tests/deploy.
"""

from __future__ import annotations

import json

import pytest
from prometheus_client import REGISTRY

from tailgauge.runtime.lifecycle import draining
from tailgauge.runtime.worker import DrainingServer

SAMPLES = "/v1/descriptors/samples"
JSON = {"content-type": "application/json"}


def _sample(name, **labels):
    return REGISTRY.get_sample_value(name, labels) or 0.0


def test_a_sent_request_id_is_echoed(make_client):
    client = make_client(request_log=False)
    response = client.post(SAMPLES, content=b'{"values":[1,2]}', headers={**JSON, "x-request-id": "bag-run-42"})
    assert response.headers["x-request-id"] == "bag-run-42"


@pytest.mark.parametrize("sent", [None, "", "has spaces", "x" * 129, "semi;colon"])
def test_a_missing_or_unusable_request_id_is_replaced(make_client, sent):
    client = make_client(request_log=False)
    headers = dict(JSON)
    if sent is not None:
        headers["x-request-id"] = sent
    response = client.post(SAMPLES, content=b'{"values":[1,2]}', headers=headers)
    generated = response.headers["x-request-id"]
    assert generated != sent and len(generated) == 32 and int(generated, 16) >= 0


def test_errors_and_unknown_paths_carry_a_request_id_too(make_client):
    client = make_client(request_log=False)
    assert client.get("/nothing-here").headers["x-request-id"]
    assert client.post(SAMPLES, content=b"{", headers=JSON).headers["x-request-id"]


def test_requests_values_and_resamples_are_counted(make_client):
    client = make_client(request_log=False)
    labels = {"route": SAMPLES, "method": "POST", "status": "200"}
    before = _sample("tailgauge_http_requests_total", **labels)
    values_before = _sample("tailgauge_request_values_sum", endpoint="samples")
    resamples_before = _sample("tailgauge_resamples_total", endpoint="samples")
    body = json.dumps({"values": [1, 2, 3, 4, 10], "options": {"interval": {"resamples": 300, "seed": 5}}})
    for _ in range(3):
        assert client.post(SAMPLES, content=body, headers=JSON).status_code == 200
    assert _sample("tailgauge_http_requests_total", **labels) == before + 3
    assert _sample("tailgauge_request_values_sum", endpoint="samples") == values_before + 15
    assert _sample("tailgauge_resamples_total", endpoint="samples") == resamples_before + 900
    latency = _sample("tailgauge_http_request_duration_seconds_count", **labels)
    assert latency >= 3


def test_unknown_paths_share_one_label(make_client):
    client = make_client(request_log=False)
    labels = {"route": "unmatched", "method": "GET", "status": "404"}
    before = _sample("tailgauge_http_requests_total", **labels)
    for i in range(4):
        client.get(f"/random-{i}")
    assert _sample("tailgauge_http_requests_total", **labels) == before + 4
    exposition = client.get("/metrics").text
    assert "/random-" not in exposition


def test_metrics_endpoint_serves_the_text_format(make_client):
    client = make_client(request_log=False)
    response = client.get("/metrics")
    assert response.status_code == 200
    assert response.headers["content-type"].startswith("text/plain")
    assert "# TYPE tailgauge_http_requests_total counter" in response.text


def test_one_json_log_line_per_request(make_client, capsys):
    client = make_client()
    capsys.readouterr()
    client.post(SAMPLES, content=b'{"values":[1,2,3]}', headers={**JSON, "x-request-id": "log-check-1"})
    lines = [json.loads(line) for line in capsys.readouterr().err.splitlines() if line.startswith("{")]
    mine = [line for line in lines if line.get("request_id") == "log-check-1"]
    assert len(mine) == 1
    entry = mine[0]
    assert entry["route"] == SAMPLES and entry["status"] == 200 and entry["values"] == 3
    assert entry["level"] == "info" and entry["duration_ms"] >= 0


@pytest.fixture
def clear_draining():
    draining.clear()
    yield
    draining.clear()


def test_readiness_turns_false_while_draining(make_client, clear_draining):
    client = make_client(request_log=False)
    assert client.get("/health/ready").json() == {"status": "ok", "notes": []}
    draining.set()
    response = client.get("/health/ready")
    assert response.status_code == 503 and response.json() == {"status": "draining", "notes": []}
    assert client.get("/health/live").status_code == 200


def test_the_worker_marks_draining_when_told_to_exit(clear_draining):
    import signal

    from uvicorn.config import Config

    server = DrainingServer(Config(app=lambda *a: None))
    server.handle_exit(signal.SIGTERM, None)
    assert draining.is_set() and server.should_exit


def _call(app, method: str, path: str, messages: list[dict], headers=()) -> list[dict]:
    """Drive the ASGI app directly: ``messages`` are what the client sends, the answer is what it gets."""
    import anyio

    sent: list[dict] = []
    incoming = list(messages)

    async def receive():
        if incoming:
            return incoming.pop(0)
        await anyio.sleep(3600)  # the client sends nothing more

    async def send(message):
        sent.append(message)

    scope = {"type": "http", "asgi": {"version": "3.0"}, "http_version": "1.1", "method": method, "scheme": "http",
             "path": path, "raw_path": path.encode(), "query_string": b"", "root_path": "",
             "headers": [(b"host", b"test"), *headers], "client": ("127.0.0.1", 1), "server": ("127.0.0.1", 80)}
    anyio.run(app, scope, receive, send)
    return sent


# Regression: a client that hung up mid-body was counted and logged as a 500.
def test_a_client_hanging_up_mid_body_is_counted_and_logged_as_499(make_client, caplog):
    client = make_client(request_log=True)
    labels = {"route": SAMPLES, "method": "POST"}
    before = {status: _sample("tailgauge_http_requests_total", **labels, status=status) for status in ("499", "500")}
    headers = [(b"content-type", b"application/json"), (b"content-length", b"1000")]
    with caplog.at_level("INFO", logger="tailgauge.requests"):
        _call(client.app, "POST", SAMPLES, [{"type": "http.request", "body": b'{"values": [1, 2', "more_body": True},
                                            {"type": "http.disconnect"}], headers)
    assert _sample("tailgauge_http_requests_total", **labels, status="499") == before["499"] + 1
    assert _sample("tailgauge_http_requests_total", **labels, status="500") == before["500"]
    (line,) = [record for record in caplog.records if record.name == "tailgauge.requests"]
    assert line.status == 499 and line.route == SAMPLES
    assert not [record for record in caplog.records if record.levelname in ("ERROR", "CRITICAL")]


def test_a_complete_answer_is_not_499_even_if_the_client_leaves_after_it(make_client):
    client = make_client(request_log=False)
    labels = {"route": "/health/live", "method": "GET", "status": "200"}
    before = _sample("tailgauge_http_requests_total", **labels)
    sent = _call(client.app, "GET", "/health/live", [{"type": "http.request", "body": b""}, {"type": "http.disconnect"}])
    assert sent[0]["status"] == 200
    assert _sample("tailgauge_http_requests_total", **labels) == before + 1


GET_ROUTES = ["/health/live", "/health/ready", "/metrics", "/openapi.json", "/docs", "/v1/catalog",
              "/docs/assets/swagger-ui.css"]


# Regression: HEAD answered 405 on every GET route but the static assets.
@pytest.mark.parametrize("path", GET_ROUTES)
def test_head_answers_every_get_route_with_the_get_headers_and_no_body(make_client, path):
    client = make_client(request_log=False)
    # Plain answers, so that Content-Length can be compared with the body (httpx asks for gzip).
    plain = {"accept-encoding": "identity"}
    got, head = client.get(path, headers=plain), client.head(path, headers=plain)
    assert got.status_code == head.status_code == 200
    assert head.content == b""
    # /metrics grows between the two requests (the GET itself is counted): its length differs.
    ignored = {"x-request-id", "date"} | ({"content-length"} if path == "/metrics" else set())
    assert {k: v for k, v in head.headers.items() if k not in ignored} == {
        k: v for k, v in got.headers.items() if k not in ignored
    }
    assert int(head.headers["content-length"]) > 0
    if path != "/metrics":
        assert int(head.headers["content-length"]) == len(got.content)


def test_head_is_counted_as_head_and_post_routes_still_refuse_it(make_client):
    client = make_client(request_log=False)
    labels = {"route": "/v1/catalog", "method": "HEAD", "status": "200"}
    before = _sample("tailgauge_http_requests_total", **labels)
    client.head("/v1/catalog")
    assert _sample("tailgauge_http_requests_total", **labels) == before + 1
    response = client.head(SAMPLES)
    assert response.status_code == 405 and "POST" in response.headers["allow"]


def test_invented_methods_share_one_label(make_client):
    client = make_client(request_log=False)
    before = _sample("tailgauge_http_requests_total", route="unmatched", method="other", status="404")
    for i in range(5):
        client.request(f"BREW{i}", "/nowhere")
    assert _sample("tailgauge_http_requests_total", route="unmatched", method="other", status="404") == before + 5
    assert _sample("tailgauge_http_requests_total", route="unmatched", method="BREW1", status="404") == 0.0


# Regression (issue 20): /metrics answered "text/plain; version=1.0.0; charset=utf-8; charset=utf-8".
def test_metrics_type_has_one_charset_and_the_build_is_described(make_client):
    import platform

    import numpy

    import tailgauge

    client = make_client(request_log=False)
    answer = client.get("/metrics")
    assert answer.headers["content-type"] == "text/plain; version=1.0.0; charset=utf-8"
    assert answer.headers["content-type"].count("charset") == 1
    labels = {"version": tailgauge.__version__, "python": platform.python_version(), "numpy": numpy.__version__}
    assert _sample("tailgauge_build_info", **labels) == 1.0
