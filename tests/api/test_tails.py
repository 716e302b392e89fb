"""The tail options over HTTP: options.thresholds, tail_levels, trim_proportion and tail_count on
every descriptor endpoint, the members exceedances and tail_means, their bounds (400 naming the
field), options.descriptors with the new names, and the merge endpoint's answer (a located 422
for thresholds and tail levels; the descriptors tuned by trim_proportion and tail_count null with
not_available_from_states).

Outside references: scipy.stats.binomtest(k, n).proportion_ci(method="exact") (scipy 1.17.1) for
an exceedance interval; the numbers of the fictional scenarios are worked out beside each check.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from scipy import stats

SAMPLES = "/v1/descriptors/samples"
TABLE = "/v1/descriptors/table"
BINS = "/v1/descriptors/bins"
MERGE = "/v1/descriptors/merge"
COMPARE = "/v1/comparisons"
JSON = {"content-type": "application/json"}
STATE = {"count": 4, "mean": 2.5, "central_sums": [5.0, 0.0, 10.25], "minimum": 1, "maximum": 4}


def _post(client, path, body):
    response = client.post(path, content=json.dumps(body), headers=JSON)
    return response, response.json()


def test_every_descriptor_endpoint_answers_the_tail_members(client):
    latencies = [float(x) for x in np.round(np.random.default_rng(1).lognormal(4.8, 0.5, 200), 1)]
    options = {"thresholds": [300.0], "tail_levels": [0.99]}
    samples, body = _post(client, SAMPLES, {"values": latencies, "options": options})
    assert samples.status_code == 200
    (exceedance,) = body["exceedances"]
    k = sum(x > 300.0 for x in latencies)
    want = stats.binomtest(k, 200).proportion_ci(method="exact")
    assert exceedance["count_above"] == k and exceedance["interval"]["method"] == "clopper_pearson"
    assert exceedance["interval"]["low"] == pytest.approx(want.low, rel=1e-9)
    # The worst 1% of 200 is the two largest.
    assert body["tail_means"][0]["upper"]["value"] == pytest.approx(np.mean(sorted(latencies)[-2:]), rel=1e-14)
    values, counts = np.unique(latencies, return_counts=True)
    table, table_body = _post(client, TABLE, {
        "weight_kind": "counts", "outcomes": [{"value": v, "weight": int(c)} for v, c in zip(values, counts)],
        "options": options,
    })
    assert table.status_code == 200
    assert table_body["exceedances"] == body["exceedances"] and table_body["tail_means"] == body["tail_means"]
    bins, bins_body = _post(client, BINS, {"edges": [0, 100, 200, 300, 500, 1000], "counts": [10, 90, 60, 30, 10],
                                           "options": {"thresholds": [250.0], "tail_levels": [0.95]}})
    assert bins.status_code == 200
    # (250, 300] holds half of 60 above 250, plus 40 above 300: 70 of 200.
    assert bins_body["exceedances"][0]["proportion_above"] == 0.35 and bins_body["exceedances"][0]["interpolated"]
    # The top 5% (10 counts) is the bin (500, 1000]: mean 750.
    assert bins_body["tail_means"][0]["upper"]["value"] == pytest.approx(750.0)


def test_without_the_options_the_members_are_empty_lists(client):
    response, body = _post(client, SAMPLES, {"values": [1.0, 2.0, 4.0, 8.0]})
    assert response.status_code == 200
    assert body["exceedances"] == [] and body["tail_means"] == []
    assert body["descriptors"]["trimmed_mean"]["value"] == pytest.approx(3.75)
    assert body["descriptors"]["geometric_mean"]["value"] == pytest.approx(64 ** 0.25)


@pytest.mark.parametrize("options, path", [
    ({"trim_proportion": 0.5}, "$.options.trim_proportion"),
    ({"trim_proportion": -0.1}, "$.options.trim_proportion"),
    ({"tail_levels": [1.0]}, "$.options.tail_levels[0]"),
    ({"tail_levels": [0.0]}, "$.options.tail_levels[0]"),
    ({"tail_levels": [0.5] * 21}, "$.options.tail_levels"),
    ({"thresholds": [1.0] * 101}, "$.options.thresholds"),
    ({"tail_count": 0}, "$.options.tail_count"),
])
def test_option_bounds_are_located_400s(client, options, path):
    response, body = _post(client, SAMPLES, {"values": [1.0, 2.0, 3.0], "options": options})
    assert response.status_code == 400
    assert [error["path"] for error in body["errors"]] == [path]


def test_a_tail_count_beyond_the_data_is_a_located_422(client):
    response, body = _post(client, SAMPLES, {"values": list(range(1, 61)), "options": {"tail_count": 60}})
    assert response.status_code == 422
    assert body["errors"][0]["path"] == "$.options.tail_count"


@pytest.mark.parametrize("option", ["thresholds", "tail_levels"])
def test_merged_states_refuse_what_needs_the_values(client, option):
    response, body = _post(client, MERGE, {"states": [STATE], "options": {option: [0.9]}})
    assert response.status_code == 422
    assert body["errors"][0]["path"] == f"$.options.{option}"


def test_merged_states_leave_the_new_descriptors_null_with_their_reason(client):
    response, body = _post(client, MERGE, {"states": [STATE], "options": {"trim_proportion": 0.2, "tail_count": 2}})
    assert response.status_code == 200
    reasons = {name: w["code"] for w in body["warnings"] for name in w["descriptors"]}
    for name in ("trimmed_mean", "winsorized_mean", "geometric_mean", "harmonic_mean", "upper_tail_index"):
        assert body["descriptors"][name]["value"] is None
        assert reasons[name] == "not_available_from_states"
    assert body["exceedances"] == [] and body["tail_means"] == []


def test_options_descriptors_accepts_the_new_names(client):
    values = [float(x) for x in np.random.default_rng(2).pareto(2.0, 100) + 1.0]
    response, body = _post(client, SAMPLES, {"values": values, "options": {
        "descriptors": ["tail", "trimmed_mean", "exceedances"], "thresholds": [2.0], "tail_levels": [0.9]}})
    assert response.status_code == 200
    assert set(body["descriptors"]) == {"upper_tail_index", "trimmed_mean"}
    assert len(body["exceedances"]) == 1 and "tail_means" not in body


def test_comparisons_carry_each_sides_tail_members(client):
    first = [float(x) for x in np.random.default_rng(3).exponential(100.0, 80)]
    second = [float(x) for x in np.random.default_rng(4).exponential(130.0, 80)]
    response, body = _post(client, COMPARE, {
        "first": {"kind": "samples", "values": first}, "second": {"kind": "samples", "values": second},
        "options": {"thresholds": [300.0], "tail_levels": [0.95], "interval": {"resamples": 200, "seed": 5}},
    })
    assert response.status_code == 200
    for side in ("first", "second"):
        assert body[side]["tail_means"][0]["upper"]["interval"] is not None
        assert body[side]["exceedances"][0]["threshold"] == 300.0
    assert body["differences"]["trimmed_mean"]["interval"] is not None
