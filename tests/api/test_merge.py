"""Partial states over HTTP: options.partial_state, POST /v1/descriptors/merge, and the Dask recipe.

Outside references: exact fractions for the merge formulas (Pebay 2008, SAND2008-6212), the
service's own /v1/descriptors/samples on the concatenated data (itself checked against NIST
StRD and scipy), and datasketches' stated rank error for sketch quantiles.
"""

from __future__ import annotations

import base64
import json
from fractions import Fraction

import dask.array as da
import msgspec
import numpy as np
import pytest

from tailgauge.core import partial_state
from tailgauge.core.sketches import kll_sketch_bytes
from tailgauge.recipes.dask_states import chunk_summaries

SAMPLES = "/v1/descriptors/samples"
MERGE = "/v1/descriptors/merge"
JSON = {"content-type": "application/json"}
MOMENT_DESCRIPTORS = ("mean", "variance", "standard_deviation", "coefficient_of_variation", "skewness",
                      "kurtosis", "excess_kurtosis", "minimum", "maximum", "range")


def _post(client, path, body):
    response = client.post(path, content=json.dumps(body), headers=JSON)
    return response, response.json()


def _state_json(state) -> dict:
    return {"count": state.count, "mean": state.mean, "central_sums": list(state.central_sums),
            "minimum": state.minimum, "maximum": state.maximum}


def _exact_central_sums(values, order):
    exact = [Fraction(v) for v in values]
    mean = sum(exact) / len(exact)
    return mean, [sum((x - mean) ** j for x in exact) for j in range(2, order + 1)]


def test_samples_endpoint_returns_the_partial_state(make_client):
    client = make_client(request_log=False)
    values = [2.5, 3.25, 9.0, 4.75, 1.5]
    _, body = _post(client, SAMPLES, {"values": values, "options": {"partial_state": True, "moment_order": 6}})
    state = body["partial_state"]
    assert state["count"] == 5 and state["minimum"] == 1.5 and state["maximum"] == 9.0
    mean, sums = _exact_central_sums(values, 6)  # exact arithmetic
    assert state["mean"] == pytest.approx(float(mean), rel=1e-15)
    assert state["central_sums"] == pytest.approx([float(m) for m in sums], rel=1e-13)
    _, plain = _post(client, SAMPLES, {"values": values})
    assert plain["partial_state"] is None


def test_merge_of_the_worked_example_is_exact(make_client):
    client = make_client(request_log=False)
    states = [_post(client, SAMPLES, {"values": part, "options": {"partial_state": True}})[1]["partial_state"]
              for part in ([1, 2, 3, 4], [10, 20])]
    response, body = _post(client, MERGE, {"states": states})
    assert response.status_code == 200
    merged = body["partial_state"]
    # Pebay 2008: n = 6, mean 20/3, M2 = 790/3, M3 = 18500/9, M4 = 301186/9 (exact fractions).
    assert merged["count"] == 6
    assert merged["mean"] == pytest.approx(20 / 3, rel=1e-15)
    assert merged["central_sums"] == pytest.approx([790 / 3, 18500 / 9, 301186 / 9], rel=1e-14)
    assert body["kind"] == "states" and body["size"]["n"] == 6
    assert body["descriptors"]["variance"]["value"] == pytest.approx(790 / 3 / 5, rel=1e-14)
    assert body["descriptors"]["median"]["value"] is None
    assert "not_available_from_states" in [w["code"] for w in body["warnings"]]


def test_merge_equals_describing_the_concatenation(make_client):
    client = make_client(request_log=False)
    rng = np.random.default_rng(31)
    parts = [rng.lognormal(1.0, 0.6, size=int(s)) for s in rng.integers(1, 400, size=60)]
    states = [_state_json(partial_state(p)) for p in parts]
    _, merged = _post(client, MERGE, {"states": states})
    _, direct = _post(client, SAMPLES, {"values": np.concatenate(parts).tolist()})
    for name in MOMENT_DESCRIPTORS:
        assert merged["descriptors"][name]["value"] == pytest.approx(
            direct["descriptors"][name]["value"], rel=1e-12
        ), name
    assert merged["moments"]["central"] == pytest.approx(direct["moments"]["central"], rel=1e-11)


def test_dask_recipe_through_the_http_endpoint(make_client):
    """The documented recipe: per-chunk states and sketches from real dask, merged over HTTP."""
    client = make_client(request_log=False)
    values = np.random.default_rng(12).gamma(3.0, 1.5, size=200_000)
    array = da.from_array(values, chunks=20_000)
    states, sketches = chunk_summaries(array, scheduler="threads")
    body = {
        "states": [_state_json(s) for s in states],
        "sketches": [base64.b64encode(blob).decode() for blob in sketches],
        "options": {"probabilities": [0.05, 0.25, 0.5, 0.75, 0.95]},
    }
    response, merged = _post(client, MERGE, body)
    assert response.status_code == 200, merged
    _, direct = _post(client, SAMPLES, {"values": values.tolist(), "options": {"probabilities": [0.5]}})
    for name in MOMENT_DESCRIPTORS:
        assert merged["descriptors"][name]["value"] == pytest.approx(
            direct["descriptors"][name]["value"], rel=1e-12
        ), name
    bound = merged["sketches"]["normalized_rank_error"]
    ordered = np.sort(values)
    for quantile in merged["quantiles"]:
        # Rank of the returned value in the exact data, within the sketch's stated error.
        rank = np.searchsorted(ordered, quantile["value"], side="right") / values.size
        assert abs(rank - quantile["probability"]) <= bound + 1.0 / values.size
    assert "approximate_quantiles" in [w["code"] for w in merged["warnings"]]


def test_merge_in_msgpack_with_raw_sketch_bytes(make_client):
    client = make_client(request_log=False)
    parts = [np.arange(1.0, 101.0), np.arange(101.0, 201.0)]
    body = {"states": [_state_json(partial_state(p)) for p in parts],
            "sketches": [kll_sketch_bytes(p) for p in parts]}
    packed = client.post(MERGE, content=msgspec.msgpack.encode(body),
                         headers={"content-type": "application/msgpack", "accept": "application/msgpack"})
    assert packed.status_code == 200
    answer = msgspec.msgpack.decode(packed.content)
    assert answer["descriptors"]["mean"]["value"] == pytest.approx(100.5)
    assert answer["descriptors"]["median"]["value"] == pytest.approx(100.5, abs=200 * 0.02)


@pytest.mark.parametrize(
    ("body", "status", "path"),
    [
        ({"states": []}, 400, "$.states"),
        ({"states": [{"count": 3, "mean": 5, "central_sums": [-1, 0, 0], "minimum": 1, "maximum": 9}]}, 422,
         "$.states[0].central_sums"),
        ({"states": [{"count": 3, "mean": 50, "central_sums": [1, 0, 1], "minimum": 1, "maximum": 9}]}, 422,
         "$.states[0].mean"),
        ({"states": [{"count": 3, "mean": 5, "central_sums": [1, 0], "minimum": 1, "maximum": 9}]}, 400,
         "$.states[0].central_sums"),
        ({"states": [{"count": 2, "mean": 1.5, "central_sums": [0.5, 0, 0.125], "minimum": 1, "maximum": 2}],
          "sketches": [base64.b64encode(b"not a sketch at all").decode()]}, 422, "$.sketches[0]"),
        ({"states": [{"count": 2, "mean": 1.5, "central_sums": [0.5, 0, 0.125], "minimum": 1, "maximum": 2}],
          "options": {"interval": {"resamples": 999}}}, 400, "$.options.interval"),
    ],
)
def test_bad_merges_name_the_field(make_client, body, status, path):
    client = make_client(request_log=False)
    response, problem = _post(client, MERGE, body)
    assert response.status_code == status, problem
    assert path in [error["path"] for error in problem["errors"]], problem


def test_partial_state_of_reliability_weights_is_refused(make_client):
    client = make_client(request_log=False)
    response, problem = _post(client, SAMPLES, {"values": [1, 2, 3], "weights": [0.5, 1, 2],
                                                "weight_kind": "reliability",
                                                "options": {"partial_state": True}})
    assert response.status_code == 422
    assert [e["path"] for e in problem["errors"]] == ["$.options.partial_state"]


@pytest.mark.parametrize("cut", [None, 20])
def test_a_sketch_with_a_hostile_level_offset_is_a_located_422(make_client, cut):
    """Regression: this 176-byte sketch (k = 8, 31 values, 3 levels) with its first level offset set
    to 0xFFFFFFFF killed a gunicorn worker by SIGSEGV in the native decoder; so did its first 20 bytes."""
    good = kll_sketch_bytes(np.arange(31.0), k=8)
    hostile = good[:20] + b"\xff\xff\xff\xff" + good[24:]
    assert len(hostile) == 176 and hostile[18] == 3
    blob = hostile if cut is None else good[:cut]
    client = make_client(request_log=False)
    state = _state_json(partial_state(np.arange(31.0)))
    body = {"states": [state], "sketches": [base64.b64encode(blob).decode()]}
    response, problem = _post(client, MERGE, body)
    assert response.status_code == 422, problem
    assert [error["path"] for error in problem["errors"]] == ["$.sketches[0]"], problem
    # The same request with the intact sketch is answered.
    body = {"states": [state], "sketches": [base64.b64encode(good).decode()]}
    response, answer = _post(client, MERGE, body)
    assert response.status_code == 200 and answer["sketches"]["n"] == 31, answer
