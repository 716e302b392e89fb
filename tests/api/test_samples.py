"""POST /v1/descriptors/samples through HTTP: certified accuracy, the response contract,
degenerate input, missing values and every kind of bad request.

Outside reference values are named beside each check: the NIST StRD certified values, and
scipy.stats / numpy / statsmodels computing the same definition on the same data.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
import scipy.stats
from statsmodels.tsa.stattools import acf

SAMPLES = "/v1/descriptors/samples"
PROBLEM = "application/problem+json"
STRD = Path(__file__).resolve().parents[1] / "reference" / "strd"

TOP_LEVEL_KEYS = {
    "kind",
    "size",
    "descriptors",
    "moments",
    "quantiles",
    "modes",
    "shape_estimators",
    "conventions",
    "warnings",
}
SCALAR_NAMES = (
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
)
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

# Hyndman & Fan (1996) type -> the numpy.quantile method implementing the same definition.
NUMPY_QUANTILE_METHOD = {
    1: "inverted_cdf",
    2: "averaged_inverted_cdf",
    3: "closest_observation",
    4: "interpolated_inverted_cdf",
    5: "hazen",
    6: "weibull",
    7: "linear",
    8: "median_unbiased",
    9: "normal_unbiased",
}
PROBABILITIES = [0.0, 0.01, 0.05, 0.1, 0.25, 1 / 3, 0.5, 0.6, 0.75, 0.9, 0.95, 0.99, 1.0]


def bag_weights() -> np.ndarray:
    """Invented data: net weights (g) of 250 g bags from the fictional Hollowfern Roastery's
    filling line, read to 0.1 g (so some weights repeat), with a few overfilled bags."""
    rng = np.random.default_rng(20240611)
    weights = rng.normal(251.2, 1.6, size=397)
    overfilled = rng.random(397) < 0.04
    weights[overfilled] += rng.exponential(6.0, size=int(overfilled.sum()))
    return np.round(weights, 1)


def thermostat_offsets() -> np.ndarray:
    """Invented data: hourly offsets (degrees C) of a greenhouse thermostat at the fictional
    Marrowby nursery from its set point; serially correlated and of both signs."""
    rng = np.random.default_rng(77)
    noise = rng.standard_t(5, size=240)
    out = np.empty_like(noise)
    out[0] = noise[0]
    for i in range(1, noise.size):
        out[i] = 0.6 * out[i - 1] + noise[i]
    return out


def value_of(body: dict, name: str):
    return body["descriptors"][name]["value"]


def assert_nulls_explained(body: dict) -> None:
    """Every null scalar descriptor is named in the descriptors list of some warning."""
    named = {name for warning in body["warnings"] for name in warning["descriptors"]}
    for name, descriptor in body["descriptors"].items():
        if descriptor["value"] is None:
            assert name in named, f"{name} is null but no warning names it: {body['warnings']}"


def warning_codes_for(body: dict, name: str) -> set[str]:
    return {w["code"] for w in body["warnings"] if name in w["descriptors"]}


# ---------------------------------------------------------------------------------------------
# (a) NIST StRD univariate datasets, sent as the decimal text of the files
# ---------------------------------------------------------------------------------------------


def read_strd(path: Path) -> tuple[dict[str, str], list[str]]:
    header: dict[str, str] = {}
    data: list[str] = []
    for line in path.read_text().splitlines():
        if line.startswith("#"):
            key, sep, rest = line[1:].strip().partition(":")
            if sep and key in ("certified_mean", "certified_sd", "certified_r1", "n"):
                header[key] = rest.strip()
        elif line.strip():
            data.append(line.strip())
    return header, data


# Significant digits of the standard deviation that float64 can deliver once each decimal value
# has been read (the README's "about 8.3 / 9.5 / 13.8 / 15" figures, taken 0.1 lower because they
# are rounded: exact rational arithmetic on the float64-read inputs gives 8.25, 9.46 and 13.84).
SD_DIGITS = {"NumAcc4": 8.2, "NumAcc3": 9.4, "Michelso": 13.7}
# r(1) has its own ceiling. Evaluating r(1) in exact rational arithmetic (fractions.Fraction) on
# the float64-read inputs lands this far from the certified value: Michelso 3.6e-14 (13.4
# digits), NumAcc3 5.8e-13 (12.2), NumAcc4 9.3e-12 (11.0), the others below 5e-16. r(1) is a
# ratio of two quadratic forms of the deviations, so the common scaling error that costs sd its
# digits cancels; what remains is first order in the error of the mean through the end terms of
# the lag-1 sum, and float64 cannot hold the mean exactly either (half an ulp of 1e7 is 9e-10,
# times |d_1| + |d_n| / |sum d_i d_i+1| ~ 0.02 gives ~2e-11 for NumAcc4). The tolerances sit a
# little below those digit counts.
R1_DIGITS = {"NumAcc4": 10.8, "NumAcc3": 12.0, "Michelso": 13.3}
# The mean of each dataset is exactly representable to well beyond 15 digits after reading.
MEAN_DIGITS = 15.0
DEFAULT_DIGITS = 15.0


def relative_error(got: float, certified: float) -> float:
    return abs(got - certified) / abs(certified)


@pytest.mark.parametrize("path", sorted(STRD.glob("*.txt")), ids=lambda p: p.stem)
def test_nist_strd_certified_values(client, post_json, path):
    header, data = read_strd(path)
    assert len(data) == int(header["n"])
    # The values travel as the file's own decimal text: no float round trip on the client side.
    body = '{"values":[' + ",".join(data) + "]}"
    response, parsed = post_json(client, body)
    assert response.status_code == 200, response.text
    assert parsed["size"]["n"] == int(header["n"])
    descriptors = parsed["descriptors"]
    name = path.stem
    checks = (
        ("mean", "certified_mean", MEAN_DIGITS),
        ("standard_deviation", "certified_sd", SD_DIGITS.get(name, DEFAULT_DIGITS)),
        ("lag1_autocorrelation", "certified_r1", R1_DIGITS.get(name, DEFAULT_DIGITS)),
    )
    for descriptor, key, digits in checks:
        certified = float(header[key])  # NIST StRD certified value for this dataset
        got = descriptors[descriptor]["value"]
        assert got is not None, f"{name}: {descriptor} is null"
        assert relative_error(got, certified) <= 10.0**-digits, (
            f"{name} {descriptor}: got {got!r}, NIST certified {certified!r}, "
            f"{-math.log10(max(relative_error(got, certified), 1e-300)):.2f} digits < {digits}"
        )
    assert descriptors["standard_deviation"]["estimator"].startswith("square root of the sample")


# ---------------------------------------------------------------------------------------------
# (b) the response contract and values against scipy.stats / numpy / statsmodels
# ---------------------------------------------------------------------------------------------


def test_response_contract_keys(describe):
    body = describe(bag_weights().tolist())
    assert TOP_LEVEL_KEYS <= set(body), sorted(TOP_LEVEL_KEYS - set(body))
    assert body["kind"] == "samples"
    for name in SCALAR_NAMES:
        assert name in body["descriptors"], name
        descriptor = body["descriptors"][name]
        assert "value" in descriptor and "estimator" in descriptor
        assert isinstance(descriptor["estimator"], str) and descriptor["estimator"]
        assert isinstance(descriptor["value"], float), f"{name}: {descriptor['value']!r}"
    assert set(body["size"]) >= {"n", "omitted"}
    assert body["size"]["n"] == 397 and body["size"]["omitted"] == 0
    assert body["warnings"] == []
    assert {"skewness", "excess_kurtosis"} <= set(body["shape_estimators"])


def test_default_conventions_are_named(describe):
    body = describe(bag_weights().tolist())
    conventions = body["conventions"]
    assert conventions["convention"] == "sample"
    assert conventions["variance_divisor"] == "n - 1"
    assert conventions["skewness"] == "G1"
    assert conventions["kurtosis"] == "G2"
    assert conventions["quantile_type"] == 7
    assert "type 7" in conventions["quantile_definition"]
    d = body["descriptors"]
    assert "n - 1" in d["variance"]["estimator"]
    assert d["skewness"]["estimator"] == "G1"
    assert d["excess_kurtosis"]["estimator"].startswith("G2")
    assert d["kurtosis"]["estimator"].startswith("G2 + 3")
    assert "type 7" in d["interquartile_range"]["estimator"]


def test_default_values_match_scipy_and_numpy(describe):
    x = bag_weights()
    body = describe(x.tolist())
    d = {name: value_of(body, name) for name in SCALAR_NAMES}
    close = dict(rel=1e-12)
    assert d["mean"] == pytest.approx(np.mean(x), **close)  # numpy.mean
    assert d["median"] == pytest.approx(np.median(x), **close)  # numpy.median
    assert d["variance"] == pytest.approx(np.var(x, ddof=1), **close)  # numpy.var(ddof=1)
    assert d["standard_deviation"] == pytest.approx(np.std(x, ddof=1), **close)  # numpy.std(ddof=1)
    # scipy.stats.variation(ddof=1) = std(ddof=1) / mean
    assert d["coefficient_of_variation"] == pytest.approx(scipy.stats.variation(x, ddof=1), **close)
    # scipy.stats.skew(bias=False) is G1; scipy.stats.kurtosis(bias=False) is G2
    g1_adjusted = scipy.stats.skew(x, bias=False)
    g2_adjusted = scipy.stats.kurtosis(x, fisher=True, bias=False)
    assert d["skewness"] == pytest.approx(g1_adjusted, rel=1e-10)
    assert d["excess_kurtosis"] == pytest.approx(g2_adjusted, rel=1e-10)
    assert d["kurtosis"] == pytest.approx(g2_adjusted + 3.0, rel=1e-10)
    assert d["kurtosis"] == pytest.approx(d["excess_kurtosis"] + 3.0, rel=1e-15)
    assert d["minimum"] == np.min(x) and d["maximum"] == np.max(x)  # numpy.min / numpy.max
    assert d["range"] == pytest.approx(np.ptp(x), **close)  # numpy.ptp
    q1, q3 = np.quantile(x, [0.25, 0.75], method="linear")  # numpy.quantile, type 7
    assert d["interquartile_range"] == pytest.approx(q3 - q1, **close)
    # scipy.stats.median_abs_deviation (scale=1 and scale="normal")
    assert d["median_absolute_deviation"] == pytest.approx(scipy.stats.median_abs_deviation(x), **close)
    assert d["median_absolute_deviation_normal"] == pytest.approx(
        scipy.stats.median_abs_deviation(x, scale="normal"), **close
    )
    # statsmodels acf (no FFT): sum (x_i - m)(x_i+1 - m) / sum (x_i - m)^2
    assert d["lag1_autocorrelation"] == pytest.approx(acf(x, nlags=1, fft=False)[1], rel=1e-10)


def test_lag1_autocorrelation_of_correlated_signed_data(describe):
    x = thermostat_offsets()
    body = describe(x.tolist())
    # statsmodels.tsa.stattools.acf(fft=False), lag 1
    assert value_of(body, "lag1_autocorrelation") == pytest.approx(acf(x, nlags=1, fft=False)[1], rel=1e-10)
    assert value_of(body, "lag1_autocorrelation") > 0.3


def test_standard_errors_under_normality(describe):
    x = bag_weights()
    n = x.size
    d = describe(x.tolist())["descriptors"]
    # Textbook normal-theory standard errors of G1 and G2 (as printed by common packages):
    # SES = sqrt(6 n (n-1) / ((n-2)(n+1)(n+3))), SEK = 2 SES sqrt((n^2 - 1) / ((n-3)(n+5))).
    ses = math.sqrt(6.0 * n * (n - 1) / ((n - 2) * (n + 1) * (n + 3)))
    sek = 2.0 * ses * math.sqrt((n * n - 1.0) / ((n - 3) * (n + 5)))
    assert d["skewness"]["standard_error_under_normality"] == pytest.approx(ses, rel=1e-13)
    assert d["excess_kurtosis"]["standard_error_under_normality"] == pytest.approx(sek, rel=1e-13)


@pytest.mark.parametrize("quantile_type", range(1, 10))
def test_quantile_types_match_numpy(describe, quantile_type):
    x = bag_weights()
    body = describe(x.tolist(), probabilities=PROBABILITIES, quantile_type=quantile_type)
    assert body["conventions"]["quantile_type"] == quantile_type
    assert f"type {quantile_type}" in body["conventions"]["quantile_definition"]
    method = NUMPY_QUANTILE_METHOD[quantile_type]
    expected = np.quantile(x, PROBABILITIES, method=method)  # numpy.quantile(method=...)
    assert [q["probability"] for q in body["quantiles"]] == PROBABILITIES
    got = [q["value"] for q in body["quantiles"]]
    np.testing.assert_allclose(got, expected, rtol=1e-13, err_msg=f"type {quantile_type} ({method})")
    q1, q3 = np.quantile(x, [0.25, 0.75], method=method)
    assert value_of(body, "interquartile_range") == pytest.approx(q3 - q1, rel=1e-12)


def test_quantiles_of_small_odd_sample_match_numpy(describe):
    # Few values and awkward probabilities exercise the boundary branches of each type.
    x = np.array([12.5, 3.0, 7.25, 7.25, 40.0])
    probabilities = [0.0, 0.1, 0.2, 0.3, 0.4, 0.5, 0.7, 0.8, 0.9, 1.0]
    for quantile_type, method in NUMPY_QUANTILE_METHOD.items():
        body = describe(x.tolist(), probabilities=probabilities, quantile_type=quantile_type)
        got = [q["value"] for q in body["quantiles"]]
        expected = np.quantile(x, probabilities, method=method)  # numpy.quantile(method=...)
        np.testing.assert_allclose(got, expected, rtol=1e-14, err_msg=f"type {quantile_type} ({method})")


def test_default_probabilities(describe):
    x = bag_weights()
    body = describe(x.tolist())
    probabilities = [q["probability"] for q in body["quantiles"]]
    assert probabilities == [0.01, 0.05, 0.1, 0.25, 0.5, 0.75, 0.9, 0.95, 0.99]
    expected = np.quantile(x, probabilities, method="linear")  # numpy.quantile, type 7
    np.testing.assert_allclose([q["value"] for q in body["quantiles"]], expected, rtol=1e-13)


def test_population_convention(describe):
    x = bag_weights()
    body = describe(x.tolist(), convention="population")
    d = body["descriptors"]
    c = body["conventions"]
    assert c["convention"] == "population" and "n - 1" not in c["variance_divisor"]
    assert c["skewness"] == "g1" and c["kurtosis"] == "g2"
    assert "divisor n)" in d["variance"]["estimator"] and "n - 1" not in d["variance"]["estimator"]
    assert d["skewness"]["estimator"] == "g1"
    assert d["excess_kurtosis"]["estimator"].startswith("g2")
    assert d["variance"]["value"] == pytest.approx(np.var(x, ddof=0), rel=1e-12)  # numpy.var(ddof=0)
    assert d["standard_deviation"]["value"] == pytest.approx(np.std(x, ddof=0), rel=1e-12)
    # scipy.stats.skew / kurtosis with bias=True are the plug-in g1 / g2
    assert d["skewness"]["value"] == pytest.approx(scipy.stats.skew(x, bias=True), rel=1e-10)
    g2 = scipy.stats.kurtosis(x, bias=True)
    assert d["excess_kurtosis"]["value"] == pytest.approx(g2, rel=1e-10)
    assert d["kurtosis"]["value"] == pytest.approx(g2 + 3.0, rel=1e-10)
    # scipy.stats.variation(ddof=0)
    assert d["coefficient_of_variation"]["value"] == pytest.approx(scipy.stats.variation(x), rel=1e-12)


def _b1_b2(x: np.ndarray) -> tuple[float, float]:
    """Joanes & Gill (1998) b1 = m3 / s^3 and b2 = m4 / s^4 - 3 with s the n - 1 standard
    deviation, computed directly with numpy from their definitions."""
    deviations = x - np.mean(x)
    s = np.std(x, ddof=1)
    return float(np.mean(deviations**3) / s**3), float(np.mean(deviations**4) / s**4 - 3.0)


@pytest.mark.parametrize(
    ("convention", "skewness_estimator", "kurtosis_estimator"),
    [
        ("sample", "g1", "g2"),
        ("sample", "b1", "b2"),
        ("population", "G1", "G2"),
        ("population", "b1", "g2"),
        ("sample", "G1", "b2"),
    ],
)
def test_explicit_estimators(describe, convention, skewness_estimator, kurtosis_estimator):
    x = bag_weights()
    body = describe(
        x.tolist(),
        convention=convention,
        skewness_estimator=skewness_estimator,
        kurtosis_estimator=kurtosis_estimator,
    )
    b1, b2 = _b1_b2(x)
    skewness_reference = {
        "g1": scipy.stats.skew(x, bias=True),  # scipy.stats.skew(bias=True)
        "G1": scipy.stats.skew(x, bias=False),  # scipy.stats.skew(bias=False)
        "b1": b1,  # numpy, from the definition
    }
    kurtosis_reference = {
        "g2": scipy.stats.kurtosis(x, bias=True),  # scipy.stats.kurtosis(bias=True)
        "G2": scipy.stats.kurtosis(x, bias=False),  # scipy.stats.kurtosis(bias=False)
        "b2": b2,  # numpy, from the definition
    }
    d = body["descriptors"]
    assert body["conventions"]["skewness"] == skewness_estimator
    assert body["conventions"]["kurtosis"] == kurtosis_estimator
    assert d["skewness"]["estimator"] == skewness_estimator
    assert d["excess_kurtosis"]["estimator"].split()[0] == kurtosis_estimator
    assert d["kurtosis"]["estimator"].startswith(f"{kurtosis_estimator} + 3")
    assert d["skewness"]["value"] == pytest.approx(skewness_reference[skewness_estimator], rel=1e-10)
    expected_excess = kurtosis_reference[kurtosis_estimator]
    assert d["excess_kurtosis"]["value"] == pytest.approx(expected_excess, rel=1e-10)
    assert d["kurtosis"]["value"] == pytest.approx(expected_excess + 3.0, rel=1e-10)
    # the variance divisor still follows the convention
    ddof = 1 if convention == "sample" else 0
    assert d["variance"]["value"] == pytest.approx(np.var(x, ddof=ddof), rel=1e-12)


def test_shape_estimators_list_every_family(describe):
    x = bag_weights()
    body = describe(x.tolist())
    b1, b2 = _b1_b2(x)
    skew = {e["estimator"]: e["value"] for e in body["shape_estimators"]["skewness"]}
    kurt = {e["estimator"]: e["value"] for e in body["shape_estimators"]["excess_kurtosis"]}
    assert set(skew) == {"g1", "G1", "b1"} and set(kurt) == {"g2", "G2", "b2"}
    assert skew["g1"] == pytest.approx(scipy.stats.skew(x, bias=True), rel=1e-10)
    assert skew["G1"] == pytest.approx(scipy.stats.skew(x, bias=False), rel=1e-10)
    assert skew["b1"] == pytest.approx(b1, rel=1e-10)
    assert kurt["g2"] == pytest.approx(scipy.stats.kurtosis(x, bias=True), rel=1e-10)
    assert kurt["G2"] == pytest.approx(scipy.stats.kurtosis(x, bias=False), rel=1e-10)
    assert kurt["b2"] == pytest.approx(b2, rel=1e-10)


@pytest.mark.parametrize("moment_order", [1, 2, 3, 4, 7, 12])
def test_moment_order_sets_list_lengths(describe, moment_order):
    x = bag_weights()
    body = describe(x.tolist(), moment_order=moment_order)
    moments = body["moments"]
    assert moments["order"] == moment_order
    for kind in ("raw", "central", "standardized"):
        assert len(moments[kind]) == moment_order, kind
    m2 = scipy.stats.moment(x, order=2)
    for k in range(1, moment_order + 1):
        # numpy: raw moment mean(x^k); scipy.stats.moment: central moment of order k
        assert moments["raw"][k - 1] == pytest.approx(np.mean(x**k), rel=1e-10), f"raw {k}"
        central = scipy.stats.moment(x, order=k)
        assert moments["central"][k - 1] == pytest.approx(central, rel=1e-8, abs=1e-10 * m2 ** (k / 2)), k
        standardized = central / m2 ** (k / 2)
        assert moments["standardized"][k - 1] == pytest.approx(standardized, rel=1e-8, abs=1e-10), k
    # a higher moment order does not change the descriptors
    default = describe(x.tolist())
    assert body["descriptors"] == default["descriptors"]


def test_modes_with_ties(describe):
    x = np.array([3.5, 1.0, 2.0, 3.5, 2.0, 9.0, 2.0, 3.5, 0.5])
    body = describe(x.tolist())
    values, counts = np.unique(x, return_counts=True)  # numpy.unique counts
    top = counts.max()
    assert body["modes"]["values"] == values[counts == top].tolist()
    assert body["modes"]["count"] == top
    assert body["modes"]["tied"] == int(np.sum(counts == top))
    assert body["modes"]["distinct_values"] == values.size
    assert body["modes"]["truncated"] is False


def test_modes_truncated_to_the_configured_limit(make_client, describe):
    small = make_client(max_modes_listed=2)
    body = describe([4.0, 1.0, 1.0, 3.0, 3.0, 2.0, 2.0, 4.0], _client=small)
    assert body["modes"]["values"] == [1.0, 2.0]
    assert body["modes"]["tied"] == 4 and body["modes"]["truncated"] is True
    assert "modes_truncated" in {w["code"] for w in body["warnings"]}


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


# ---------------------------------------------------------------------------------------------
# (e) bad input: problem details, never a 500
# ---------------------------------------------------------------------------------------------

JSON = {"content-type": "application/json"}

# (id, body bytes, headers, expected status, expected problem slug, expected error path or None)
BAD_REQUESTS = [
    ("empty-values", b'{"values":[]}', JSON, 400, "invalid-body", "$.values"),
    ("values-not-a-list", b'{"values":"250.1"}', JSON, 400, "invalid-body", "$.values"),
    ("string-value", b'{"values":[250.1,"251.0"]}', JSON, 400, "invalid-body", "$.values[1]"),
    ("boolean-value", b'{"values":[250.1,true]}', JSON, 400, "invalid-body", "$.values[1]"),
    ("object-value", b'{"values":[250.1,2,{"g":1}]}', JSON, 400, "invalid-body", "$.values[2]"),
    ("missing-values", b'{"options":{}}', JSON, 400, "invalid-body", "$.values"),
    ("unknown-top-level", b'{"values":[1],"valeus":[1]}', JSON, 400, "invalid-body", "$.valeus"),
    ("unknown-option", b'{"values":[1],"options":{"ddof":1}}', JSON, 400, "invalid-body", "$.options.ddof"),
    ("options-not-object", b'{"values":[1],"options":[]}', JSON, 400, "invalid-body", "$.options"),
    ("bad-convention", b'{"values":[1],"options":{"convention":"unbiased"}}', JSON, 400, "invalid-body",
     "$.options.convention"),
    ("bad-skewness-family", b'{"values":[1],"options":{"skewness_estimator":"G2"}}', JSON, 400,
     "invalid-body", "$.options.skewness_estimator"),
    ("bad-missing-policy", b'{"values":[1],"options":{"missing":"zero"}}', JSON, 400, "invalid-body",
     "$.options.missing"),
    ("overflowing-number", b'{"values":[1e400]}', JSON, 400, "invalid-body", "$.values[0]"),
    ("overflowing-negative", b'{"values":[2,-1e400]}', JSON, 400, "invalid-body", "$.values[1]"),
    ("huge-integer", b'{"values":[1' + b"0" * 400 + b"]}", JSON, 400, "invalid-body", "$.values[0]"),
    # NaN and Infinity are not JSON tokens; the syntax error's byte offset is mapped to the
    # path of the value being read.
    ("nan-token", b'{"values":[1,NaN]}', JSON, 400, "invalid-body", "$.values[1]"),
    ("infinity-token", b'{"values":[Infinity]}', JSON, 400, "invalid-body", "$.values[0]"),
    ("minus-infinity-token", b'{"values":[-Infinity]}', JSON, 400, "invalid-body", "$.values[0]"),
    ("truncated-json", b'{"values":[1,2', JSON, 400, "invalid-body", "$"),
    ("empty-body", b"", JSON, 400, "invalid-body", "$"),
    ("not-json", b"values=1,2,3", JSON, 400, "invalid-body", "$"),
    ("top-level-array", b"[1,2,3]", JSON, 400, "invalid-body", "$"),
    ("top-level-number", b"3", JSON, 400, "invalid-body", "$"),
    ("probability-above-one", b'{"values":[1],"options":{"probabilities":[0.5,1.5]}}', JSON, 400,
     "invalid-body", "$.options.probabilities[1]"),
    ("probability-below-zero", b'{"values":[1],"options":{"probabilities":[-0.01]}}', JSON, 400,
     "invalid-body", "$.options.probabilities[0]"),
    ("quantile-type-0", b'{"values":[1],"options":{"quantile_type":0}}', JSON, 400, "invalid-body",
     "$.options.quantile_type"),
    ("quantile-type-10", b'{"values":[1],"options":{"quantile_type":10}}', JSON, 400, "invalid-body",
     "$.options.quantile_type"),
    ("quantile-type-float", b'{"values":[1],"options":{"quantile_type":7.5}}', JSON, 400, "invalid-body",
     "$.options.quantile_type"),
    ("moment-order-13", b'{"values":[1],"options":{"moment_order":13}}', JSON, 400, "invalid-body",
     "$.options.moment_order"),
    ("moment-order-0", b'{"values":[1],"options":{"moment_order":0}}', JSON, 400, "invalid-body",
     "$.options.moment_order"),
    ("too-many-probabilities", b'{"values":[1],"options":{"probabilities":[' + b",".join([b"0.5"] * 1001)
     + b"]}}", JSON, 400, "invalid-body", "$.options.probabilities"),
    ("null-in-values", b'{"values":[1,null]}', JSON, 422, "uncomputable-input", "$.values[1]"),
    ("text-plain", b'{"values":[1]}', {"content-type": "text/plain"}, 415, "unsupported-media-type",
     "header.content-type"),
    ("no-content-type", b'{"values":[1]}', {}, 415, "unsupported-media-type", "header.content-type"),
    ("form-content-type", b"values=1", {"content-type": "application/x-www-form-urlencoded"}, 415,
     "unsupported-media-type", "header.content-type"),
    ("accept-html", b'{"values":[1]}', {**JSON, "accept": "text/html"}, 406, "not-acceptable",
     "header.accept"),
]


def assert_problem(response, body, status: int, slug: str, path: str | None) -> None:
    assert response.status_code == status, response.text
    assert response.headers["content-type"].split(";")[0] == PROBLEM
    assert set(body) >= {"type", "title", "status", "detail", "errors"}
    assert body["status"] == status
    assert body["type"].endswith(slug), body["type"]
    assert isinstance(body["title"], str) and body["title"]
    assert isinstance(body["detail"], str) and body["detail"]
    if path is not None:
        assert path in [e["path"] for e in body["errors"]], body["errors"]
        assert all(e["message"] for e in body["errors"])


@pytest.mark.parametrize(
    ("body", "headers", "status", "slug", "path"),
    [case[1:] for case in BAD_REQUESTS],
    ids=[case[0] for case in BAD_REQUESTS],
)
def test_bad_request_is_a_problem(client, strict_json, body, headers, status, slug, path):
    response = client.post(SAMPLES, content=body, headers=headers)
    assert_problem(response, strict_json(response), status, slug, path)


def test_content_type_with_charset_is_accepted(client, strict_json):
    response = client.post(
        SAMPLES, content=b'{"values":[1,2]}', headers={"content-type": "application/json; charset=utf-8"}
    )
    assert response.status_code == 200
    assert strict_json(response)["size"]["n"] == 2


@pytest.mark.parametrize(
    "accept", ["application/json", "*/*", "application/*", "text/html, application/json;q=0.5"]
)
def test_accept_headers_that_allow_json(client, accept):
    response = client.post(SAMPLES, content=b'{"values":[1,2]}', headers={**JSON, "accept": accept})
    assert response.status_code == 200, response.text


def test_moment_order_limit_from_settings(make_client, post_json):
    limited = make_client(max_moment_order=6)
    response, body = post_json(limited, {"values": [1.0, 2.0, 4.0], "options": {"moment_order": 8}})
    assert_problem(response, body, 422, "limit-exceeded", "$.options.moment_order")
    response, body = post_json(limited, {"values": [1.0, 2.0, 4.0], "options": {"moment_order": 6}})
    assert response.status_code == 200 and len(body["moments"]["raw"]) == 6


def test_probability_count_limit_from_settings(make_client, post_json):
    limited = make_client(max_probabilities=3)
    too_many = {"values": [1.0, 2.0], "options": {"probabilities": [0.1, 0.2, 0.3, 0.4]}}
    response, body = post_json(limited, too_many)
    assert_problem(response, body, 422, "limit-exceeded", "$.options.probabilities")
    response, _ = post_json(limited, {"values": [1.0, 2.0], "options": {"probabilities": [0.1, 0.2, 0.3]}})
    assert response.status_code == 200


def test_value_count_limit_from_settings(make_client, post_json):
    limited = make_client(max_values=10)
    response, body = post_json(limited, {"values": [float(i) for i in range(11)]})
    assert_problem(response, body, 413, "body-too-large", "$.values")
    # nulls count as observations for the limit, omitted or not
    response, body = post_json(
        limited, {"values": [float(i) for i in range(10)] + [None], "options": {"missing": "omit"}}
    )
    assert_problem(response, body, 413, "body-too-large", "$.values")
    response, body = post_json(limited, {"values": [float(i) for i in range(10)]})
    assert response.status_code == 200 and body["size"]["n"] == 10


def test_body_size_limit_from_settings(make_client, post_json):
    limited = make_client(max_body_bytes=2048)
    big = json.dumps({"values": [251.3] * 500}).encode()
    assert len(big) > 2048
    response, body = post_json(limited, big)
    assert_problem(response, body, 413, "body-too-large", None)
    small = json.dumps({"values": [251.3] * 250}).encode()
    assert len(small) <= 2048
    response, body = post_json(limited, small)
    assert response.status_code == 200 and body["size"]["n"] == 250


def test_get_on_post_route_is_405(client, strict_json):
    response = client.get(SAMPLES)
    assert_problem(response, strict_json(response), 405, "method-not-allowed", None)


@pytest.mark.parametrize("path", ["/v1/descriptors/sample", "/v2/descriptors/samples", "/nothing"])
def test_unknown_path_is_404(client, strict_json, path):
    response = client.post(path, content=b'{"values":[1]}', headers=JSON)
    assert_problem(response, strict_json(response), 404, "not-found", None)
    response = client.get(path)
    assert_problem(response, strict_json(response), 404, "not-found", None)


def test_service_still_healthy_after_every_bad_request(client, make_client, strict_json):
    for _, body, headers, status, _, _ in BAD_REQUESTS:
        response = client.post(SAMPLES, content=body, headers=headers)
        assert response.status_code == status
    assert client.get(SAMPLES).status_code == 405
    assert client.get("/nothing").status_code == 404
    limited = make_client(max_values=10, max_body_bytes=2048, max_moment_order=6)
    extra = [
        limited.post(SAMPLES, content=b'{"values":[' + b"1," * 10 + b"1]}", headers=JSON),
        limited.post(SAMPLES, content=b'{"values":[' + b"1.5," * 600 + b"1]}", headers=JSON),
        limited.post(SAMPLES, content=b'{"values":[1],"options":{"moment_order":8}}', headers=JSON),
    ]
    assert [r.status_code for r in extra] == [413, 413, 422]
    for app_client in (client, limited):
        live = app_client.get("/health/live")
        assert live.status_code == 200 and strict_json(live) == {"status": "ok"}
        assert app_client.get("/health/ready").status_code == 200
        response = app_client.post(SAMPLES, content=b'{"values":[1,2,3]}', headers=JSON)
        assert response.status_code == 200 and strict_json(response)["descriptors"]["mean"]["value"] == 2.0
