"""POST /v1/comparisons and options.score over HTTP: shape, located errors, outside references.

The numeric core of comparisons is tested in tests/core/test_compare.py; here the wire form.
"""

from __future__ import annotations

import json

import msgspec
import numpy as np
import pytest
from scipy import stats

COMPARE = "/v1/comparisons"
JSON = {"content-type": "application/json"}
# Efron & Tibshirani (1993), An Introduction to the Bootstrap, Table 2.1: the mouse data.
TREATMENT = [16, 23, 38, 94, 99, 141, 197]
CONTROL = [10, 27, 31, 40, 46, 50, 52, 104, 146]


def _post(client, body, path=COMPARE):
    response = client.post(path, content=json.dumps(body), headers=JSON)
    return response, response.json()


def _samples(values, **extra):
    return {"kind": "samples", "values": values, **extra}


def test_mouse_data_mean_difference_and_welch_standard_error(make_client):
    client = make_client(request_log=False)
    response, body = _post(
        client,
        {"first": _samples(CONTROL), "second": _samples(TREATMENT),
         "options": {"interval": {"method": "percentile", "resamples": 4000, "seed": 11}}},
    )
    assert response.status_code == 200
    mean = body["differences"]["mean"]
    # E&T 1993 ch. 2: difference 30.63, standard error 28.93 from the sample variances.
    assert mean["value"] == pytest.approx(30.63, abs=0.005)
    assert mean["classical_standard_error"] == pytest.approx(28.93, abs=0.005)
    assert mean["interval"]["low"] < 30.63 < mean["interval"]["high"]
    assert body["first"]["descriptors"]["mean"]["value"] == pytest.approx(np.mean(CONTROL))
    assert body["second"]["descriptors"]["mean"]["value"] == pytest.approx(np.mean(TREATMENT))


def test_differences_are_second_minus_first_of_the_two_descriptions(make_client):
    client = make_client(request_log=False)
    rng = np.random.default_rng(8)
    first, second = rng.gamma(2.0, 2.0, 300).tolist(), rng.gamma(3.0, 2.0, 250).tolist()
    _, body = _post(client, {"first": _samples(first), "second": _samples(second)})
    for name, contrast in body["differences"].items():
        a = body["first"]["descriptors"][name]["value"]
        b = body["second"]["descriptors"][name]["value"]
        if a is None or b is None:
            assert contrast["value"] is None
        else:
            assert contrast["value"] == pytest.approx(b - a, rel=1e-12, abs=1e-12), name
    for name, contrast in body["ratios"].items():
        a = body["first"]["descriptors"][name]["value"]
        b = body["second"]["descriptors"][name]["value"]
        assert contrast["value"] == pytest.approx(b / a, rel=1e-12), name
    # scipy reference for the two-sample test on the same data.
    reference = stats.ks_2samp(first, second)
    assert body["distribution_test"]["statistic"] == pytest.approx(reference.statistic, rel=1e-12)
    assert body["distribution_test"]["p_value"] == pytest.approx(reference.pvalue, rel=1e-9)
    shifts = {s["probability"]: s["value"] for s in body["quantile_shifts"]}
    for q in body["second"]["quantiles"]:
        p = q["probability"]
        first_q = next(x["value"] for x in body["first"]["quantiles"] if x["probability"] == p)
        assert shifts[p] == pytest.approx(q["value"] - first_q, rel=1e-12, abs=1e-12)


def test_inputs_of_different_kinds(make_client):
    client = make_client(request_log=False)
    response, body = _post(
        client,
        {
            "first": {"kind": "table", "outcomes": [{"value": 1, "weight": 4}, {"value": 2, "weight": 6}],
                      "weight_kind": "counts"},
            "second": {"kind": "bins", "edges": [0, 1, 2, 3], "counts": [2, 3, 5]},
        },
    )
    assert response.status_code == 200
    assert body["first"]["kind"] == "table" and body["second"]["kind"] == "bins"
    # table mean (4 x 1 + 6 x 2) / 10 = 1.6; bin midpoints (2 x 0.5 + 3 x 1.5 + 5 x 2.5) / 10 = 1.8
    assert body["differences"]["mean"]["value"] == pytest.approx(1.8 - 1.6)


def test_bins_on_the_same_edges_get_a_chi_square_test(make_client):
    client = make_client(request_log=False)
    edges, a, b = [0, 10, 20, 30, 40], [12, 30, 25, 8], [20, 28, 15, 12]
    _, body = _post(client, {"first": {"kind": "bins", "edges": edges, "counts": a},
                             "second": {"kind": "bins", "edges": edges, "counts": b}})
    reference = stats.chi2_contingency(np.array([a, b]), correction=False)
    test = body["distribution_test"]
    assert test["test"] == "chi_square_homogeneity"
    assert test["statistic"] == pytest.approx(reference.statistic, rel=1e-12)
    assert test["p_value"] == pytest.approx(reference.pvalue, rel=1e-9)
    assert test["degrees_of_freedom"] == reference.dof


@pytest.mark.parametrize(
    ("body", "status", "path"),
    [
        ({"first": _samples([1, None]), "second": _samples([1, 2])}, 422, "$.first.values[1]"),
        ({"first": _samples([1, 2]), "second": {"kind": "bins", "edges": [0, 1], "counts": [1, 2]}}, 422,
         "$.second.edges"),
        ({"first": _samples([1, 2]), "second": {"kind": "sketch", "edges": [0, 1]}}, 400, "$.second.kind"),
        ({"first": _samples([1, 2]), "second": {"kind": "histogram", "layout": "explicit", "edges": [0, 1]}}, 400,
         "$.second.edges"),
        ({"first": _samples([1, 2])}, 400, "$.second"),
        ({"first": _samples([1, 2], weights=[1]), "second": _samples([1, 2])}, 422, "$.first.weights"),
        ({"first": _samples([1, 2]), "second": _samples([3, 4]), "colour": 1}, 400, "$.colour"),
    ],
)
def test_errors_name_the_field_of_the_right_input(make_client, body, status, path):
    client = make_client(request_log=False)
    response, problem = _post(client, body)
    assert response.status_code == status, problem
    assert path in [error["path"] for error in problem["errors"]], problem


def test_value_limit_counts_both_inputs(make_client):
    client = make_client(request_log=False, max_values=10)
    response, _ = _post(client, {"first": _samples(list(range(5))), "second": _samples(list(range(5)))})
    assert response.status_code == 200
    response, problem = _post(client, {"first": _samples(list(range(6))), "second": _samples(list(range(5)))})
    assert response.status_code == 413


def test_comparison_in_msgpack_equals_json(make_client):
    client = make_client(request_log=False)
    body = {"first": _samples(CONTROL), "second": _samples(np.array(TREATMENT, dtype=float).tobytes())}
    packed = client.post(COMPARE, content=msgspec.msgpack.encode(body),
                         headers={"content-type": "application/msgpack", "accept": "application/msgpack"})
    listed = client.post(COMPARE, content=json.dumps({"first": _samples(CONTROL), "second": _samples(TREATMENT)}),
                         headers=JSON)
    assert packed.status_code == 200
    assert msgspec.msgpack.decode(packed.content) == listed.json()


def test_scores_on_a_descriptor_endpoint_follow_the_hand_formulas(make_client):
    client = make_client(request_log=False)
    values = [12.1, 12.4, 11.8, 12.9, 12.2, 13.4, 12.0]
    _, body = _post(client, {"values": values, "options": {"score": [12.5, 14.0]}}, "/v1/descriptors/samples")
    mean, sd = np.mean(values), np.std(values, ddof=1)
    median = np.median(values)
    mad = stats.median_abs_deviation(values, scale="normal")  # scipy reference
    points = body["scores"]["points"]
    assert [p["value"] for p in points] == [12.5, 14.0]
    for point in points:
        assert point["z"] == pytest.approx((point["value"] - mean) / sd, rel=1e-12)
        assert point["robust_z"] == pytest.approx((point["value"] - median) / mad, rel=1e-12)


def test_scores_against_constant_data_are_null_with_a_reason(make_client):
    client = make_client(request_log=False)
    _, body = _post(client, {"values": [5.0] * 6, "options": {"score": [5.0, 6.0]}}, "/v1/descriptors/samples")
    assert [p["z"] for p in body["scores"]["points"]] == [None, None]
    assert [p["robust_z"] for p in body["scores"]["points"]] == [None, None]
    assert "score_undefined" in [w["code"] for w in body["warnings"]]


def test_no_scores_member_unless_asked(make_client):
    client = make_client(request_log=False)
    _, body = _post(client, {"values": [1, 2, 3]}, "/v1/descriptors/samples")
    assert body["scores"] is None
