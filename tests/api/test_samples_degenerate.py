"""POST /v1/descriptors/samples through HTTP with degenerate input and missing values: nulls
with reasons, never NaN or Infinity; missing values refused unless omitting them is asked for.

Outside reference values are named beside each check: scipy.stats / numpy / statsmodels
computing the same definition on the same data (on data scaled exactly by a power of two where
the originals are extreme).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.stats
from statsmodels.tsa.stattools import acf

from tests.api.samples_cases import PROBLEM, bag_weights, value_of

LOCATION_NAMES = ("mean", "median", "minimum", "maximum")
SPREAD_NAMES = (
    "variance",
    "standard_deviation",
    "coefficient_of_variation",
    "range",
    "interquartile_range",
    "median_absolute_deviation",
    "median_absolute_deviation_normal",
)
SHAPE_NAMES = ("skewness", "kurtosis", "excess_kurtosis")


def assert_nulls_explained(body: dict) -> None:
    """Every null scalar descriptor is named in the descriptors list of some warning."""
    named = {name for warning in body["warnings"] for name in warning["descriptors"]}
    for name, descriptor in body["descriptors"].items():
        if descriptor["value"] is None:
            assert name in named, f"{name} is null but no warning names it: {body['warnings']}"


def warning_codes_for(body: dict, name: str) -> set[str]:
    return {w["code"] for w in body["warnings"] if name in w["descriptors"]}


# ---------------------------------------------------------------------------------------------
# (c) degenerate input: nulls with reasons, never NaN or Infinity
# ---------------------------------------------------------------------------------------------


def test_single_value(describe):
    body = describe([251.4])
    d = body["descriptors"]
    for name in LOCATION_NAMES:
        assert d[name]["value"] == 251.4, name
    for name in SPREAD_NAMES + SHAPE_NAMES + ("lag1_autocorrelation",):
        assert d[name]["value"] is None, name
        assert "single_observation" in warning_codes_for(body, name), name
    assert_nulls_explained(body)
    assert body["size"]["n"] == 1


def test_constant_data(describe):
    body = describe([250.0] * 6)
    d = body["descriptors"]
    assert d["variance"]["value"] == 0.0 and d["standard_deviation"]["value"] == 0.0
    assert d["range"]["value"] == 0.0
    for name in SHAPE_NAMES:
        assert d[name]["value"] is None, name
        assert "constant_data" in warning_codes_for(body, name), name
    assert all(v is None for v in body["moments"]["standardized"])
    for estimate in body["shape_estimators"]["skewness"] + body["shape_estimators"]["excess_kurtosis"]:
        assert estimate["value"] is None
    assert_nulls_explained(body)


@pytest.mark.parametrize("n", [2, 3])
def test_too_few_observations_for_g2(describe, n):
    values = [250.1, 251.7, 249.2][:n]
    body = describe(values)
    d = body["descriptors"]
    for name in ("kurtosis", "excess_kurtosis"):
        assert d[name]["value"] is None
        assert "too_few_observations" in warning_codes_for(body, name)
    if n == 3:
        # G1 needs 3 observations: defined, and equal to scipy.stats.skew(bias=False)
        assert d["skewness"]["value"] == pytest.approx(scipy.stats.skew(values, bias=False), rel=1e-12)
    else:
        assert d["skewness"]["value"] is None
        assert "too_few_observations" in warning_codes_for(body, "skewness")
    assert d["variance"]["value"] == pytest.approx(np.var(values, ddof=1), rel=1e-12)  # numpy.var
    assert_nulls_explained(body)


@pytest.mark.parametrize(
    "values",
    [
        pytest.param([-1.5, 2.0, 3.25, 0.5], id="negative-values"),
        pytest.param([-2.0, 2.1, -1.9, 1.85, -0.02], id="mean-near-zero"),
        pytest.param([0.0, 0.0, 0.0, 0.0], id="mean-zero"),
    ],
)
@pytest.mark.parametrize("convention", ["sample", "population"])
def test_coefficient_of_variation_undefined(describe, values, convention):
    body = describe(values, convention=convention)
    assert value_of(body, "coefficient_of_variation") is None
    reasons = [w for w in body["warnings"] if "coefficient_of_variation" in w["descriptors"]]
    assert reasons, body["warnings"]
    assert all(w["message"] for w in reasons)
    assert_nulls_explained(body)


def test_coefficient_of_variation_of_positive_data(describe):
    x = bag_weights()
    # scipy.stats.variation(ddof=1)
    assert value_of(describe(x.tolist()), "coefficient_of_variation") == pytest.approx(
        scipy.stats.variation(x, ddof=1), rel=1e-12
    )


def test_huge_magnitudes_give_finite_shape(describe):
    base = np.array([1.0, 2.5, -3.0, 5.0, 1.5, 0.25, 4.0, -1.0])
    x = base * 1e150
    body = describe(x.tolist())
    d = body["descriptors"]
    for name in ("mean", "standard_deviation", *SHAPE_NAMES):
        assert d[name]["value"] is not None and math.isfinite(d[name]["value"]), name
    # skewness and kurtosis are scale free: scipy.stats on the data divided by 1e150
    assert d["skewness"]["value"] == pytest.approx(scipy.stats.skew(base, bias=False), rel=1e-10)
    assert d["excess_kurtosis"]["value"] == pytest.approx(scipy.stats.kurtosis(base, bias=False), rel=1e-10)
    assert d["standard_deviation"]["value"] == pytest.approx(np.std(base, ddof=1) * 1e150, rel=1e-12)
    assert_nulls_explained(body)


def test_moments_beyond_float64_are_null_with_warning(describe):
    # The fourth central moment of values near 1e200 is about 1e800: not a float64.
    base = np.array([1.0, 2.5, -3.0, 5.0, 1.5])
    body = describe((base * 1e200).tolist())
    d = body["descriptors"]
    assert d["variance"]["value"] is None
    assert "not_representable" in warning_codes_for(body, "variance")
    assert d["standard_deviation"]["value"] == pytest.approx(np.std(base, ddof=1) * 1e200, rel=1e-12)
    assert d["skewness"]["value"] == pytest.approx(scipy.stats.skew(base, bias=False), rel=1e-10)
    assert body["moments"]["central"][3] is None
    assert_nulls_explained(body)


def test_no_nan_or_infinity_in_any_degenerate_body(client, post_json):
    # post_json parses every body with a parser that rejects NaN / Infinity tokens.
    cases = [
        [1.0],
        [0.0] * 3,
        [5e-324] * 3,
        [1e-300, 2e-300, 3e-300, 4e-300],
        [1e200, -3e200, 2e200, 5e199],
        [-1.0, 1.0],
        [2.0, -2.0, 2.0, -2.0],
    ]
    for values in cases:
        for options in ({}, {"convention": "population", "moment_order": 12}):
            response, body = post_json(client, {"values": values, "options": options})
            assert response.status_code == 200, (values, response.text)
            assert_nulls_explained(body)


# Exact power-of-two scaling moves extreme data into the normal range without rounding, so
# numpy / statsmodels on the scaled data give the reference values for the originals.
@pytest.mark.parametrize(
    "values",
    [
        pytest.param([0.0, 5e-324], id="zero-and-smallest-subnormal"),
        pytest.param([1e-310, 2e-310, 4e-310, 3e-310], id="all-subnormal"),
        pytest.param([5e-324, 1e-323, 5e-324, 2e-323, 1.5e-323], id="subnormal-multiples"),
    ],
)
def test_subnormal_data_are_described(client, post_json, values):
    response, body = post_json(client, {"values": values})
    assert response.status_code == 200, response.text
    x = np.array(values)
    up = 2.0**1000
    # numpy.mean on the data times 2**1000 (exact), scaled back; subnormal results may differ
    # by one unit of the subnormal spacing (5e-324) in the final rounding
    assert value_of(body, "mean") == pytest.approx(np.mean(x * up) / up, rel=1e-12, abs=5e-324)
    assert value_of(body, "maximum") == max(values)
    sd = value_of(body, "standard_deviation")
    if sd is not None:
        assert sd == pytest.approx(np.std(x * up, ddof=1) / up, rel=1e-6, abs=1e-323)
    assert_nulls_explained(body)


@pytest.mark.parametrize(
    "values",
    [
        pytest.param([1.7e308, 1.7e308, 1.0], id="near-max-positive"),
        pytest.param([1.2e308, 3.0e307, 9.0e307, 1.0e307], id="above-2**1023"),
    ],
)
def test_data_near_float64_max_keep_finite_spread(client, post_json, values):
    # Every value and the standard deviation itself are finite floats here, so the service
    # must report them (only variance and higher powers may be beyond float64).
    response, body = post_json(client, {"values": values})
    assert response.status_code == 200, response.text
    x = np.array(values)
    down = 2.0**-600
    scaled = x * down
    expected_sd = float(np.std(scaled, ddof=1)) / down  # numpy.std(ddof=1) on exactly scaled data
    assert math.isfinite(expected_sd)
    d = body["descriptors"]
    assert d["mean"]["value"] == pytest.approx(float(np.mean(scaled)) / down, rel=1e-12)
    assert d["standard_deviation"]["value"] == pytest.approx(expected_sd, rel=1e-12)
    # statsmodels acf(fft=False) lag 1 is scale free: reference on the scaled data
    assert d["lag1_autocorrelation"]["value"] == pytest.approx(acf(scaled, nlags=1, fft=False)[1], rel=1e-10)
    assert body["moments"]["raw"][0] == pytest.approx(float(np.mean(scaled)) / down, rel=1e-12)
    assert_nulls_explained(body)


def test_opposite_extremes_lag1(client, post_json):
    big = 1.7976931348623157e308
    response, body = post_json(client, {"values": [big, -big]})
    assert response.status_code == 200, response.text
    # deviations are +big and -big: r(1) = -big**2 / (2 big**2) = -0.5 exactly
    # (statsmodels acf(fft=False) of [1, -1], the same data scaled, gives -0.5)
    assert acf(np.array([1.0, -1.0]), nlags=1, fft=False)[1] == pytest.approx(-0.5)
    assert value_of(body, "lag1_autocorrelation") == pytest.approx(-0.5, rel=1e-12)


def test_overflowing_standard_deviation_nulls_are_explained(client, post_json):
    big = 1.7976931348623157e308
    response, body = post_json(client, {"values": [big, -big]})
    assert response.status_code == 200, response.text
    # the standard deviation (big * sqrt 2) is beyond float64: null, and so is everything
    # derived from it; each null must be named by a warning
    assert value_of(body, "standard_deviation") is None
    assert value_of(body, "coefficient_of_variation") is None
    assert_nulls_explained(body)


def test_median_deviation_overflow_is_not_an_error(client, post_json):
    # |x - median| of -1e308 from the median 1e308 overflows float64 in the subtraction; the
    # median absolute deviation itself is 0 (two of three deviations are 0). The project runs
    # tests with RuntimeWarning as an error, so an unguarded numpy overflow would show as a 500.
    response, body = post_json(client, {"values": [1e308, -1e308, 1e308]})
    assert response.status_code == 200, response.text
    assert value_of(body, "median_absolute_deviation") == 0.0
    assert_nulls_explained(body)


# ---------------------------------------------------------------------------------------------
# (d) missing values
# ---------------------------------------------------------------------------------------------


def test_missing_values_rejected_by_default(client, post_json):
    response, body = post_json(client, {"values": [250.3, None, 251.0, None]})
    assert response.status_code == 422
    assert response.headers["content-type"].startswith(PROBLEM)
    assert body["status"] == 422
    assert [e["path"] for e in body["errors"]] == ["$.values[1]", "$.values[3]"]


def test_missing_values_omitted_on_request(describe):
    x = bag_weights()
    with_gaps = x.tolist()
    for index in (0, 17, 200, len(with_gaps)):
        with_gaps.insert(index, None)
    body = describe(with_gaps, missing="omit")
    assert body["size"]["omitted"] == 4
    assert body["size"]["n"] == x.size
    assert "missing_values_omitted" in {w["code"] for w in body["warnings"]}
    assert value_of(body, "mean") == pytest.approx(np.mean(x), rel=1e-12)  # numpy.mean
    assert value_of(body, "variance") == pytest.approx(np.var(x, ddof=1), rel=1e-12)  # numpy.var


def test_every_value_missing_is_rejected_even_when_omitting(client, post_json):
    response, body = post_json(client, {"values": [None, None], "options": {"missing": "omit"}})
    assert response.status_code == 422
    assert body["errors"][0]["path"] == "$.values"
