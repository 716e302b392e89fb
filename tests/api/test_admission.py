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


def test_gate_holds_at_most_its_capacity_and_busy_is_503():
    gate = admission.MemoryGate(100)
    entered = threading.Event()
    release = threading.Event()

    def holder():
        with gate.hold(80, time.monotonic() + 5):
            entered.set()
            release.wait(5)

    thread = threading.Thread(target=holder)
    thread.start()
    assert entered.wait(5)
    with pytest.raises(ApiProblem) as busy:
        with gate.hold(30, time.monotonic() + 0.05):
            pass
    assert busy.value.slug == "server-busy" and busy.value.headers == {"Retry-After": "1"}
    # A waiting request goes ahead once the holder finishes.
    threading.Timer(0.05, release.set).start()
    with gate.hold(30, time.monotonic() + 5) as ticket:
        assert gate.held == 30
        ticket.resize(90)
        assert gate.held == 90
    thread.join(5)
    assert gate.held == 0
