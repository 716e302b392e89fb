"""Memory bounded before decoding and while computing (service/tailgauge/api/admission.py)."""

from __future__ import annotations

import re
import threading
import time

import msgspec
import numpy as np
import pytest

from tailgauge.api import admission
from tailgauge.api.media import JSON_CODEC, MSGPACK_CODEC
from tailgauge.api.problems import ApiProblem
from tailgauge.settings import Settings

SAMPLES = "/v1/descriptors/samples"
TABLE = "/v1/descriptors/table"
MSGPACK = {"content-type": "application/msgpack"}


def _problem(response, status, slug, path):
    assert response.status_code == status, response.text
    problem = response.json()
    assert problem["type"] == f"urn:tailgauge:problem:{slug}"
    assert path in [error["path"] for error in problem["errors"]], problem
    return problem


def test_messagepack_array_header_beyond_the_values_is_refused_before_decoding():
    """Regression: 30e6 fixints in a 30 MB body reached 1.44 GB before their 413."""
    settings = Settings(max_values=1000)
    count = 300_000  # beyond twice the values plus the slack for options (102,000 here)
    body = b"\x81\xa6values\xdd" + count.to_bytes(4, "big") + b"\x01" * count
    with pytest.raises(ApiProblem) as refused:
        admission.decoding_bytes(body, MSGPACK_CODEC, settings)
    assert refused.value.slug == "body-too-large"
    assert refused.value.errors[0].path == "$.values"


def test_decoding_bound_covers_what_msgspec_allocates():
    """The bound is above tracemalloc's peak of decoding, for numbers and for outcome objects."""
    import tracemalloc

    from tailgauge.api.schemas import SamplesRequest, TableRequest

    settings = Settings()
    rng = np.random.default_rng(4)
    bodies = [
        (msgspec.json.encode({"values": rng.integers(0, 9, 200_000).tolist()}), JSON_CODEC, SamplesRequest),
        (msgspec.msgpack.encode({"values": rng.integers(0, 9, 200_000).tolist()}), MSGPACK_CODEC, SamplesRequest),
        (
            msgspec.msgpack.encode(
                {"outcomes": [{"value": int(v), "weight": 1} for v in range(100_000)], "weight_kind": "counts"}
            ),
            MSGPACK_CODEC,
            TableRequest,
        ),
    ]
    for body, codec, kind in bodies:
        bound = admission.decoding_bytes(body, codec, settings)
        tracemalloc.start()
        try:
            decoded = codec.decode(body, kind)
            peak = tracemalloc.get_traced_memory()[1]
        finally:
            tracemalloc.stop()
        del decoded
        assert peak + len(body) <= bound, (codec.name, kind.__name__, peak, bound)


def test_memory_refusal_names_resamples_that_are_admitted_when_resent(make_client):
    client = make_client(request_log=False, max_request_memory_bytes=64 * 1024 * 1024)
    outcomes = [{"value": float(v), "weight": float(1 + v % 7)} for v in range(40)]

    def body(resamples):
        return msgspec.msgpack.encode({
            "outcomes": outcomes, "weight_kind": "counts",
            "options": {"probabilities": np.linspace(0.01, 0.99, 500).tolist(),
                        "interval": {"method": "percentile", "resamples": resamples, "seed": 3}},
        })

    refused = client.post(TABLE, content=body(1_000_000), headers=MSGPACK)
    problem = _problem(refused, 422, "limit-exceeded", "$.options.interval.resamples")
    allowed = int(re.search(r"at most (\d+)", problem["detail"]).group(1))
    assert 100 <= allowed < 1_000_000
    resent = client.post(TABLE, content=body(allowed), headers=MSGPACK)
    assert resent.status_code == 200, resent.text
    assert resent.json()["resampling"]["resamples"] == allowed


def _inflight(name: str) -> float:
    from prometheus_client import REGISTRY

    return REGISTRY.get_sample_value(name) or 0.0


def test_gate_refuses_what_does_not_fit_at_once_with_retry_after_from_the_plans():
    gate = admission.MemoryGate(100)
    entered = threading.Event()
    release = threading.Event()
    planned_bytes = _inflight("tailgauge_inflight_planned_bytes")
    planned_requests = _inflight("tailgauge_inflight_requests")

    def holder():
        with gate.hold(20, time.monotonic() + 600) as ticket:
            ticket.resize(80, seconds=10.5)  # its plan: about 10.5 s from now
            entered.set()
            release.wait(30)

    thread = threading.Thread(target=holder)
    thread.start()
    assert entered.wait(30)
    assert _inflight("tailgauge_inflight_planned_bytes") - planned_bytes == 80
    assert _inflight("tailgauge_inflight_requests") - planned_requests == 1
    refused: list[ApiProblem] = []

    def latecomer():
        # A deadline an hour away: a gate that queued would keep this thread until the holder ends.
        try:
            with gate.hold(30, time.monotonic() + 3600):
                pass
        except ApiProblem as error:
            refused.append(error)

    late = threading.Thread(target=latecomer)
    late.start()
    late.join(30)  # only guards a hang
    assert not late.is_alive(), "the gate queued a request that did not fit instead of refusing it"
    busy = refused[0]
    assert busy.slug == "server-busy"
    # The holder's plan ends in 10.5 s at most: that is when 30 bytes will fit again.
    assert int(busy.headers["Retry-After"]) in (10, 11), busy.headers
    # What fits beside it is admitted, and a ticket grows within the capacity.
    with gate.hold(15, time.monotonic() + 5) as ticket:
        assert gate.held == 95
        ticket.resize(20)
        assert gate.held == 100
        with pytest.raises(ApiProblem):
            ticket.resize(21)
        assert gate.held == 80  # the refused resize let go of what the ticket held
    release.set()
    thread.join(30)
    assert gate.held == 0
    assert _inflight("tailgauge_inflight_planned_bytes") == planned_bytes
    assert _inflight("tailgauge_inflight_requests") == planned_requests


def test_memory_is_given_back_after_large_plans_only(monkeypatch):
    calls = []
    monkeypatch.setattr(admission.memory, "give_back", lambda: calls.append(True) or True)
    gate = admission.MemoryGate(1000, trim_after=500)

    @admission.giving_back
    def request(planned: int, gate=gate):
        before = len(calls)
        with gate.hold(10, time.monotonic() + 5) as ticket:
            ticket.resize(planned)
        assert len(calls) == before  # never while the request's frames (and arrays) are alive
        return planned

    assert request(499) == 499 and calls == []
    assert request(500) == 500 and calls == [True]
    assert request(1000, admission.MemoryGate(1000, trim_after=0)) == 1000 and calls == [True]


def test_worker_pool_below_one_request_is_refused_at_start():
    from tailgauge.settings import SettingsError

    with pytest.raises(SettingsError, match="max_worker_memory_bytes"):
        Settings(max_request_memory_bytes=64 * 2**20, max_worker_memory_bytes=32 * 2**20)


def test_busy_worker_answers_a_503_problem_with_retry_after_and_metrics_show_it(make_client):
    pool = 24 * 2**20 + 17  # a gate of its own (gates are per configured size)
    client = make_client(request_log=False, max_request_memory_bytes=pool, max_worker_memory_bytes=pool)
    gate = admission.gate_for(client.app.state.settings)
    body = {"values": [1.0, 2.0, 4.0, 8.0]}
    with gate.hold(pool - 100, time.monotonic() + 30):
        scraped = client.get("/metrics").text
        refused = client.post(SAMPLES, json=body)
    problem = _problem(refused, 503, "server-busy", "$")
    assert refused.headers["content-type"].startswith("application/problem+json")
    assert int(refused.headers["retry-after"]) >= 1
    assert "retry" in problem["detail"]
    planned = re.search(r"^tailgauge_inflight_planned_bytes (\S+)$", scraped, re.MULTILINE)
    assert planned and float(planned.group(1)) >= pool - 100, scraped[:2000]
    assert re.search(r"^tailgauge_inflight_requests [1-9]", scraped, re.MULTILINE)
    assert client.post(SAMPLES, json=body).status_code == 200  # room again once the holder is done
    after = client.get("/metrics").text
    assert re.search(r"^tailgauge_admission_refusals_total [1-9]", after, re.MULTILINE), after[:2000]
