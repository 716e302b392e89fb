"""Limits in the binary forms and the wall clock: just under passes, just over is the right problem.

The list-form limits (values, body bytes, moment order, probabilities, resampling budget) are
tested beside their endpoints in test_samples_bad_requests.py and test_intervals.py.
"""

from __future__ import annotations

import re

import msgspec
import numpy as np

from tailgauge.settings import Settings

SAMPLES = "/v1/descriptors/samples"
BINS = "/v1/descriptors/bins"
MSGPACK = {"content-type": "application/msgpack"}


def _post(client, body, path=SAMPLES):
    return client.post(path, content=msgspec.msgpack.encode(body), headers=MSGPACK)


def _problem(response, status, slug, path):
    assert response.status_code == status, response.text
    problem = response.json()
    assert problem["type"] == f"urn:tailgauge:problem:{slug}"
    if path is not None:
        assert path in [error["path"] for error in problem["errors"]]
    return problem


def test_value_count_limit_applies_to_float64_bytes(make_client):
    client = make_client(request_log=False, max_values=100)
    under = _post(client, {"values": np.arange(100.0).tobytes()})
    assert under.status_code == 200 and under.json()["size"]["n"] == 100
    over = _post(client, {"values": np.arange(101.0).tobytes()})
    _problem(over, 413, "body-too-large", "$.values")


def test_bin_count_limit_applies_to_float64_bytes(make_client):
    client = make_client(request_log=False, max_values=4)
    under = _post(client, {"edges": [0, 1, 2, 3, 4], "counts": np.ones(4).tobytes()}, BINS)
    assert under.status_code == 200
    over = _post(client, {"edges": [0, 1, 2, 3, 4, 5], "counts": np.ones(5).tobytes()}, BINS)
    _problem(over, 413, "body-too-large", "$.counts")


def test_body_size_limit_counts_the_binary_body(make_client):
    limit = 4096
    client = make_client(request_log=False, max_body_bytes=limit)
    # A msgpack map {"values": bin32} costs 1 + 7 + 5 header bytes plus 8 per value.
    header = len(msgspec.msgpack.encode({"values": b"\x00" * 300})) - 300
    fits = (limit - header) // 8
    under = _post(client, {"values": np.linspace(0.0, 1.0, fits).tobytes()})
    assert under.status_code == 200
    over = _post(client, {"values": np.linspace(0.0, 1.0, fits + 1).tobytes()})
    _problem(over, 413, "body-too-large", None)


def test_default_limits_take_a_million_values_as_bytes(make_client):
    defaults = Settings()
    body = msgspec.msgpack.encode({"values": np.random.default_rng(7).normal(size=1_000_000).tobytes()})
    assert len(body) <= defaults.max_body_bytes and 1_000_000 <= defaults.max_values
    client = make_client(request_log=False)
    response = client.post(SAMPLES, content=body, headers=MSGPACK)
    assert response.status_code == 200
    assert response.json()["size"]["n"] == 1_000_000


def test_time_model_refuses_a_long_resampling_at_once(make_client):
    """100,000 distinct values x 50,000 resamples is minutes of work: refused before it starts,
    with the resamples that would fit (the deadline inside the stages is tested in
    tests/core/test_cost.py)."""
    client = make_client(request_log=False, max_request_seconds=1, max_resample_work=10**12)
    values = np.random.default_rng(3).normal(size=100_000).tobytes()
    quick = _post(client, {"values": values[:8000], "options": {"interval": {"method": "percentile", "resamples": 200, "seed": 1}}})
    assert quick.status_code == 200
    slow = _post(
        client,
        {"values": values, "options": {"interval": {"method": "percentile", "resamples": 50_000, "seed": 1}}},
    )
    problem = _problem(slow, 422, "limit-exceeded", "$.options.interval.resamples")
    assert "beyond this server's 1 s per request" in problem["detail"]
    assert re.search(r"at most (\d+)", problem["detail"])


def test_budget_rejections_are_counted(make_client):
    from prometheus_client import REGISTRY

    client = make_client(request_log=False, max_resample_work=10_000)
    before = REGISTRY.get_sample_value("tailgauge_budget_rejections_total")
    over = _post(client, {"values": list(range(100)), "options": {"interval": {"resamples": 101, "seed": 1}}})
    _problem(over, 422, "limit-exceeded", "$.options.interval.resamples")
    assert REGISTRY.get_sample_value("tailgauge_budget_rejections_total") == before + 1
