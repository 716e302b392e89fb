"""Request ids, per-request metrics and the JSON request log, in one process.

The cross-worker sums of the metrics are tested against a real gunicorn in tests/deploy.
"""

from __future__ import annotations

import json

import pytest
from prometheus_client import REGISTRY

from service.lifecycle import draining
from service.worker import DrainingServer

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
