"""HTTP contract of /v1/descriptors/table and /v1/descriptors/bins, tail contributions, and bad input.

Every bad input must come back as application/problem+json whose errors[].path names the
offending field, with status 400 (schema) or 422 (uncomputable), never 500.
"""

from __future__ import annotations

import json
import math
import re
from fractions import Fraction

import numpy as np
import pytest
from litestar.testing import TestClient
from scipy import stats

from tailgauge.api import create_app
from tailgauge.settings import Settings

TABLE = "/v1/descriptors/table"
BINS = "/v1/descriptors/bins"
SAMPLES = "/v1/descriptors/samples"
PROBLEM = "application/problem+json"
DESCRIPTOR_NAMES = {
    "trimmed_mean",
    "winsorized_mean",
    "geometric_mean",
    "harmonic_mean",
    "upper_tail_index",
    "mean",
    "median",
    "variance",
    "standard_deviation",
    "coefficient_of_variation",
    "skewness",
    "kurtosis",
    "excess_kurtosis",
    "minimum",
    "maximum",
    "range",
    "interquartile_range",
    "median_absolute_deviation",
    "median_absolute_deviation_normal",
    "lag1_autocorrelation",
    # robust shape and L-moments (names fixed by the robust-shape issue), plus our own extras
    "quartile_skewness",
    "octile_kurtosis",
    "octile_excess_kurtosis",
    "medcouple",
    "half_sample_mode",
    "mean_median_gap",
    "l_location",
    "l_scale",
    "l_skewness",
    "l_kurtosis",
}


def _no_constants(token: str):
    raise ValueError(f"response contains the non-JSON token {token}")


@pytest.fixture(scope="module")
def api():
    with TestClient(create_app(Settings())) as client:
        yield client


def post(client: TestClient, path: str, body) -> tuple[int, str, dict]:
    content = body if isinstance(body, (bytes, str)) else json.dumps(body, allow_nan=False)
    response = client.post(path, content=content, headers={"content-type": "application/json"})
    return (
        response.status_code,
        response.headers["content-type"],
        json.loads(response.text, parse_constant=_no_constants),
    )


def ok(client: TestClient, path: str, body) -> dict:
    status, media, parsed = post(client, path, body)
    assert status == 200, parsed
    assert media.startswith("application/json")
    return parsed


def codes(parsed: dict) -> set[str]:
    return {w["code"] for w in parsed["warnings"]}


def outcomes(values, weights) -> list[dict]:
    return [{"value": float(v), "weight": float(w)} for v, w in zip(values, weights)]


# ---------------------------------------------------------------------------------------------
# the contract of a successful answer
# ---------------------------------------------------------------------------------------------


def test_counts_table_answer(api):
    # An invented tally: seats taken per table at a community dinner; 2 appears twice and is merged.
    body = {"outcomes": outcomes([4, 2, 6, 2, 8], [3, 1, 5, 2, 1]), "weight_kind": "counts"}
    parsed = ok(api, TABLE, body)
    assert parsed["kind"] == "table"
    assert parsed["size"] == {
        "n": 12,
        "total_weight": 12.0,
        "omitted": 0,
        "distinct_values": 4,
        "zero_weight": 0,
        "effective_n": None,
    }
    assert set(parsed["descriptors"]) == DESCRIPTOR_NAMES
    for entry in parsed["descriptors"].values():
        assert set(entry) == {"value", "estimator", "standard_error_under_normality", "interval", "standard_error", "classical_interval"}
        assert entry["interval"] is None and entry["standard_error"] is None  # no options.interval
        assert isinstance(entry["estimator"], str) and entry["estimator"]
    repeated = np.repeat([4.0, 2.0, 6.0, 2.0, 8.0], [3, 1, 5, 2, 1])
    d = parsed["descriptors"]
    assert d["mean"]["value"] == pytest.approx(repeated.mean(), rel=1e-15)
    assert d["variance"]["value"] == pytest.approx(repeated.var(ddof=1), rel=1e-14)
    assert d["median"]["value"] == float(np.median(repeated))
    assert d["minimum"]["value"] == 2.0 and d["maximum"]["value"] == 8.0
    assert d["lag1_autocorrelation"]["value"] is None and "no_observation_order" in codes(parsed)
    assert parsed["modes"]["values"] == [6.0] and parsed["modes"]["count"] == 5.0
    tail = parsed["tail_contributions"]
    assert tail["complete"] is True
    assert [o["value"] for o in tail["outcomes"]] == [2.0, 4.0, 6.0, 8.0]  # merged, in value order
    assert [o["weight"] for o in tail["outcomes"]] == [3.0, 3.0, 5.0, 1.0]
    assert parsed["grouping"] is None
    conventions = parsed["conventions"]
    assert conventions["convention"] == "sample"
    assert conventions["weights"] == "frequency"
    assert conventions["quantile_type"] == 7
    assert conventions["variance_divisor"] == "n - 1"
    assert (conventions["skewness"], conventions["kurtosis"]) == ("G1", "G2")


def test_probability_table_answer(api):
    body = {"outcomes": outcomes([1, 2, 3], [0.25, 0.5, 0.25]), "weight_kind": "probabilities"}
    parsed = ok(api, TABLE, body)
    assert parsed["kind"] == "table"
    assert parsed["size"]["n"] is None
    assert parsed["size"]["total_weight"] == 1.0
    assert parsed["conventions"]["convention"] == "population"
    assert parsed["conventions"]["weights"] == "probability"
    assert parsed["conventions"]["quantile_type"] == 1
    assert parsed["descriptors"]["mean"]["value"] == 2.0
    assert parsed["descriptors"]["variance"]["value"] == 0.5
    assert parsed["descriptors"]["excess_kurtosis"]["value"] == pytest.approx(2.0 - 3.0, rel=1e-15)
    assert parsed["grouping"] is None


def test_normalize_option_over_http(api):
    body = {
        "outcomes": outcomes([1, 2, 3], [1, 2, 1]),
        "weight_kind": "probabilities",
        "options": {"normalize": True},
    }
    parsed = ok(api, TABLE, body)
    assert "probabilities_normalized" in codes(parsed)
    assert parsed["descriptors"]["variance"]["value"] == 0.5


def test_bins_answer(api):
    # Invented: minutes waited at a clinic's front desk, in 5-minute bins.
    body = {"edges": [0, 5, 10, 15, 20], "counts": [6, 10, 3, 1]}
    parsed = ok(api, BINS, body)
    assert parsed["kind"] == "bins"
    assert parsed["size"]["n"] == 20 and parsed["size"]["distinct_values"] == 4
    midpoints = np.repeat([2.5, 7.5, 12.5, 17.5], [6, 10, 3, 1])
    d = parsed["descriptors"]
    assert d["mean"]["value"] == pytest.approx(midpoints.mean(), rel=1e-15)
    assert d["variance"]["value"] == pytest.approx(midpoints.var(ddof=1), rel=1e-14)
    assert d["median"]["value"] == pytest.approx(5 + (10 - 6) / 10 * 5, rel=1e-15)
    assert d["minimum"]["value"] is None and d["maximum"]["value"] is None and d["range"]["value"] is None
    assert "grouped_extremes" in codes(parsed)
    assert parsed["grouping"] == {
        "bins": 4,
        "bin_width": 5.0,
        "equal_widths": True,
        "open_lower": False,
        "open_upper": False,
        "open_bin_weight": 0.0,
        "lowest_edge": 0.0,
        "highest_edge": 20.0,
        "sheppard_correction_applied": False,
        "modal_classes": [
            # 5 + (10 - 6) / ((10 - 6) + (10 - 3)) * 5
            {
                "lower": 5.0,
                "upper": 10.0,
                "count": 10.0,
                "grouped_mode": pytest.approx(5 + 20 / 11, rel=1e-15),
            }
        ],
        "known_summary": None,  # bins carry no count, sum, min or max of their own
    }
    assert parsed["conventions"]["quantile_type"] is None
    assert parsed["conventions"]["quantile_definition"].startswith("grouped")
    tail = parsed["tail_contributions"]
    assert tail["complete"] is True
    assert [o["value"] for o in tail["outcomes"]] == [2.5, 7.5, 12.5, 17.5]
    third = sum(o["third"] for o in tail["outcomes"])
    assert third == pytest.approx(stats.skew(midpoints, bias=True), rel=1e-12)


def test_bins_open_upper_and_sheppard_option(api):
    body = {"edges": [0, 5, 10, None], "counts": [6, 10, 3], "options": {"sheppard_correction": True}}
    parsed = ok(api, BINS, body)
    assert parsed["grouping"]["open_upper"] is True and parsed["grouping"]["highest_edge"] is None
    assert parsed["moments"] is None and "open_bin_holds_data" in codes(parsed)
    assert parsed["descriptors"]["median"]["value"] == pytest.approx(5 + (9.5 - 6) / 10 * 5, rel=1e-15)
    body = {"edges": [0, 5, 10, 15], "counts": [6, 10, 3], "options": {"sheppard_correction": True}}
    equal = ok(api, BINS, body)
    assert equal["grouping"]["sheppard_correction_applied"] is True


# ---------------------------------------------------------------------------------------------
# bad input: located problems, never a 500
# ---------------------------------------------------------------------------------------------

BAD_INPUTS = [
    pytest.param(
        TABLE,
        {
            "outcomes": outcomes([1, 2, 3], [1, 2, 1]) + [{"value": 4.0, "weight": -1.0}],
            "weight_kind": "counts",
        },
        400,
        "$.outcomes[3].weight",
        "at least 0",
        id="negative-weight",
    ),
    pytest.param(
        TABLE,
        {"outcomes": outcomes([1, 2], [0, 0]), "weight_kind": "counts"},
        422,
        "$.outcomes",
        "zero",
        id="all-zero-weights",
    ),
    pytest.param(
        TABLE,
        {"outcomes": outcomes([1, 2], [0.5, 0.6]), "weight_kind": "probabilities"},
        422,
        "$.outcomes",
        "off by +0.1",
        id="probabilities-not-summing-to-one",
    ),
    pytest.param(
        BINS, {"edges": [0, 1, 2], "counts": [1, 2, 3]}, 422, "$.edges", "k + 1", id="length-mismatch"
    ),
    pytest.param(
        BINS, {"edges": [0, 1, 1, 3], "counts": [1, 2, 3]}, 422, "$.edges[2]", "increase", id="repeated-edge"
    ),
    pytest.param(
        BINS,
        {"edges": [0, 2, 1, 3], "counts": [1, 2, 3]},
        422,
        "$.edges[2]",
        "increase",
        id="decreasing-edge",
    ),
    pytest.param(
        BINS,
        {"edges": [0, 1, None, 3], "counts": [1, 2, 3]},
        422,
        "$.edges[2]",
        "null",
        id="null-interior-edge",
    ),
    pytest.param(
        BINS,
        {"edges": [None, 0, 1, None], "counts": [3, 0, 4]},
        422,
        "$.counts",
        "open-ended",
        id="data-only-in-open-bins",
    ),
    pytest.param(
        BINS,
        {"edges": [None, 0, None], "counts": [3, 4]},
        422,
        "$.counts",
        "open-ended",
        id="two-open-bins-only",
    ),
    pytest.param(
        SAMPLES, {"values": [1, 2, 3], "weights": [1, 2]}, 422, "$.weights", "2 entries", id="weights-length"
    ),
    pytest.param(
        TABLE,
        {"outcomes": outcomes([1], [1]), "weight_kind": "counts", "extra": 1},
        400,
        "$.extra",
        "unknown field",
        id="unknown-top-level-field",
    ),
    pytest.param(
        TABLE,
        {"outcomes": [{"value": 1, "weight": 1, "probability": 1}], "weight_kind": "counts"},
        400,
        "$.outcomes[0].probability",
        "unknown field",
        id="unknown-outcome-field",
    ),
    pytest.param(
        BINS,
        {"edges": [0, 1], "counts": [1], "options": {"normalize": True}},
        400,
        "$.options.normalize",
        "unknown field",
        id="table-option-on-bins",
    ),
    pytest.param(
        TABLE,
        {"outcomes": outcomes([1], [1]), "weight_kind": "counts", "options": {"sheppard_correction": True}},
        400,
        "$.options.sheppard_correction",
        "unknown field",
        id="bins-option-on-table",
    ),
    pytest.param(
        TABLE,
        {"outcomes": outcomes([1], [1]), "weight_kind": "weights"},
        400,
        "$.weight_kind",
        "",
        id="unknown-weight-kind",
    ),
    pytest.param(
        TABLE,
        {"outcomes": outcomes([1, 2], [1, 1])},
        400,
        "$.weight_kind",
        "weight_kind",
        id="missing-weight-kind",
    ),
]


@pytest.mark.parametrize("path, body, status, where, says", BAD_INPUTS)
def test_bad_input_is_a_located_problem(api, path, body, status, where, says):
    got, media, problem = post(api, path, body)
    assert got == status, problem
    assert media.startswith(PROBLEM)
    assert problem["status"] == status
    assert problem["type"].startswith("urn:tailgauge:problem:")
    assert [e["path"] for e in problem["errors"]] == [where], problem
    assert says in problem["errors"][0]["message"] or says in problem["detail"], problem


@pytest.mark.parametrize("token", ["NaN", "Infinity", "-Infinity"])
def test_non_json_number_tokens_are_rejected_at_their_byte(api, token):
    # JSON has no NaN or Infinity. msgspec 0.23 reports a decode error with the byte offset of the
    # first invalid character (for -Infinity the "I" after the sign), which must lie in the token.
    text = (
        '{"outcomes": [{"value": 1, "weight": 1}, {"value": %s, "weight": 1}], "weight_kind": "counts"}'
        % token
    )
    got, media, problem = post(api, TABLE, text)
    assert got == 400 and media.startswith(PROBLEM)
    assert problem["type"].endswith("invalid-body")
    (error,) = problem["errors"]
    assert error["path"].startswith("$")
    match = re.search(r"\(byte (\d+)\)", error["message"])
    assert match, error
    start = text.index(token)
    assert start <= int(match[1]) < start + len(token)


def test_nan_token_error_names_the_field(api):
    # The contract: errors[].path names the offending field, here the second outcome's value.
    text = '{"outcomes": [{"value": 1, "weight": 1}, {"value": NaN, "weight": 1}], "weight_kind": "counts"}'
    got, media, problem = post(api, TABLE, text)
    assert got == 400 and media.startswith(PROBLEM)
    assert [e["path"] for e in problem["errors"]] == ["$.outcomes[1].value"], problem


def test_weight_token_nan_in_samples_weights_is_rejected(api):
    text = '{"values": [1, 2], "weights": [1, NaN]}'
    got, media, problem = post(api, SAMPLES, text)
    assert got == 400 and media.startswith(PROBLEM)


# ---------------------------------------------------------------------------------------------
# tail contributions
# ---------------------------------------------------------------------------------------------


def test_table_contributions_sum_to_g1_and_b2(api):
    rng = np.random.default_rng(8128)
    values = rng.integers(0, 30, size=25).astype(np.float64) ** 1.5  # right-skewed, some repeats
    counts = rng.integers(1, 50, size=25).astype(np.float64)
    parsed = ok(api, TABLE, {"outcomes": outcomes(values, counts), "weight_kind": "counts"})
    repeated = np.repeat(values, counts.astype(np.int64))
    g1 = stats.skew(repeated, bias=True)  # scipy 1.17.1: plug-in m3 / m2^1.5
    b2 = stats.kurtosis(repeated, fisher=False, bias=True)  # plug-in m4 / m2^2
    tail = parsed["tail_contributions"]
    assert tail["complete"] is True
    assert len(tail["outcomes"]) == np.unique(values).size
    assert sum(o["third"] for o in tail["outcomes"]) == pytest.approx(g1, rel=1e-12)
    assert sum(o["fourth"] for o in tail["outcomes"]) == pytest.approx(b2, rel=1e-12)
    assert tail["standardized_third"] == pytest.approx(g1, rel=1e-12)
    assert tail["standardized_fourth"] == pytest.approx(b2, rel=1e-12)
    assert all(o["fourth"] >= 0.0 for o in tail["outcomes"])
    g1_row = next(r for r in parsed["shape_estimators"]["skewness"] if r["estimator"] == "g1")
    g2_row = next(r for r in parsed["shape_estimators"]["excess_kurtosis"] if r["estimator"] == "g2")
    assert g1_row["value"] == pytest.approx(g1, rel=1e-12)
    assert g2_row["value"] + 3.0 == pytest.approx(b2, rel=1e-12)


def test_probability_table_contributions_sum_to_g1_and_b2(api):
    support = np.arange(11.0)
    pmf = stats.binom.pmf(support, 10, 0.3)  # scipy 1.17.1
    parsed = ok(api, TABLE, {"outcomes": outcomes(support, pmf / pmf.sum()), "weight_kind": "probabilities"})
    tail = parsed["tail_contributions"]
    # Binomial(10, 0.3) (Johnson, Kemp & Kotz 2005, ch. 3):
    # g1 = (1 - 2p) / sqrt(np(1-p)), b2 = 3 + (1 - 6p(1-p)) / (np(1-p)).
    npq = 10 * 0.3 * 0.7
    assert sum(o["third"] for o in tail["outcomes"]) == pytest.approx(0.4 / math.sqrt(npq), rel=1e-12)
    assert sum(o["fourth"] for o in tail["outcomes"]) == pytest.approx(3 + (1 - 6 * 0.21) / npq, rel=1e-12)


def test_samples_list_only_the_ten_largest_contributors(api):
    rng = np.random.default_rng(99)
    values = np.round(rng.standard_t(4, size=200), 6)
    parsed = ok(api, SAMPLES, {"values": values.tolist()})
    tail = parsed["tail_contributions"]
    assert np.unique(values).size > 10
    assert tail["complete"] is False
    listed = [o["value"] for o in tail["outcomes"]]
    assert len(listed) == 10
    # Unit weights and distinct values: the largest fourth-power shares belong to the ten values
    # farthest from the mean.
    farthest = values[np.argsort(-np.abs(values - values.mean()))[:10]]
    assert listed == sorted(farthest.tolist())
    assert tail["standardized_third"] == pytest.approx(stats.skew(values, bias=True), rel=1e-12)
    b2 = stats.kurtosis(values, fisher=False, bias=True)
    assert tail["standardized_fourth"] == pytest.approx(b2, rel=1e-12)
    assert sum(o["fourth"] for o in tail["outcomes"]) < tail["standardized_fourth"]


def test_samples_with_few_distinct_values_list_them_all(api):
    values = [1, 2, 2, 3, 3, 3, 9, 9, 2, 1, 3]
    parsed = ok(api, SAMPLES, {"values": values})
    tail = parsed["tail_contributions"]
    assert tail["complete"] is True
    assert [o["value"] for o in tail["outcomes"]] == [1.0, 2.0, 3.0, 9.0]
    assert [o["weight"] for o in tail["outcomes"]] == [2.0, 3.0, 4.0, 2.0]
    third = sum(o["third"] for o in tail["outcomes"])
    assert third == pytest.approx(stats.skew(values, bias=True), rel=1e-12)


# ---------------------------------------------------------------------------------------------
# zero skewness is not symmetry
# ---------------------------------------------------------------------------------------------


def _zero_third_moment_table() -> tuple[list[float], list[float]]:
    """Values 5, 9, 11, 14 with weights 1, w, 1, 2: choose w so the third central moment is 0.

    About 10 the deviations are -5, -1, 1, 4. The mean is 10 when -5 - w + 1 + 8 = 0, i.e. w = 4,
    and then the third central moment is (-125 - w + 1 + 128) / (w + 4) = 0 as well. The table is
    plainly asymmetric: F(9) = 5/8 puts the median at 9, below the mean, and Q1 = 9, Q3 = 12.5.
    """
    values = [5, 9, 11, 14]
    w = Fraction(4)  # the root of 4 - w = 0
    weights = [Fraction(1), w, Fraction(1), Fraction(2)]
    total = sum(weights)
    mean = sum(p * v for p, v in zip(weights, values)) / total
    assert mean == 10
    assert sum(p * (v - mean) ** 3 for p, v in zip(weights, values)) == 0  # exact arithmetic
    return [float(v) for v in values], [float(p / total) for p in weights]  # eighths: exact doubles


def test_asymmetry_warning_for_zero_skewness_with_asymmetric_quartiles(api):
    values, probabilities = _zero_third_moment_table()
    parsed = ok(api, TABLE, {"outcomes": outcomes(values, probabilities), "weight_kind": "probabilities"})
    assert parsed["descriptors"]["skewness"]["value"] == 0.0
    assert parsed["descriptors"]["median"]["value"] == 9.0
    (note,) = [w for w in parsed["warnings"] if w["code"] == "asymmetry_despite_small_skewness"]
    assert note["descriptors"] == ["skewness"]
    # The same table as counts 1000, 4000, 1000, 2000 of a sample: at n = 8000 the asymmetry is significant.
    counts = [p * 8000 for p in probabilities]
    sample = ok(api, TABLE, {"outcomes": outcomes(values, counts), "weight_kind": "counts"})
    assert abs(sample["descriptors"]["skewness"]["value"]) < 1e-12
    assert "asymmetry_despite_small_skewness" in codes(sample)


def test_no_asymmetry_warning_for_a_symmetric_table(api):
    values, probabilities = [0, 1, 2, 3, 4], [0.125, 0.25, 0.25, 0.25, 0.125]
    parsed = ok(api, TABLE, {"outcomes": outcomes(values, probabilities), "weight_kind": "probabilities"})
    assert parsed["descriptors"]["skewness"]["value"] == 0.0
    assert "asymmetry_despite_small_skewness" not in codes(parsed)
    body = {"outcomes": outcomes(values, [1000 * 8 * p for p in probabilities]), "weight_kind": "counts"}
    counts = ok(api, TABLE, body)
    assert "asymmetry_despite_small_skewness" not in codes(counts)


def test_fractional_bin_counts_with_intervals_are_an_input_problem_not_a_budget_rejection(api):
    """Resampling bins needs whole counts: that is a rule of the input (422 uncomputable-input at
    $.counts, checked before anything is computed), not a limit of the server, so the budget
    rejection counter does not move."""
    from prometheus_client import REGISTRY

    before = REGISTRY.get_sample_value("tailgauge_budget_rejections_total")
    assert before is not None
    body = {"edges": [0, 1, 2, 3], "counts": [1.5, 2.0, 1.0], "options": {"interval": {"resamples": 200}}}
    status, media, problem = post(api, BINS, body)
    assert status == 422 and media.startswith(PROBLEM), problem
    assert problem["type"] == "urn:tailgauge:problem:uncomputable-input", problem
    assert [e["path"] for e in problem["errors"]] == ["$.counts"], problem
    assert "whole" in problem["detail"], problem
    assert REGISTRY.get_sample_value("tailgauge_budget_rejections_total") == before
