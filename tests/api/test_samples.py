"""POST /v1/descriptors/samples through HTTP: certified accuracy, the response contract, and
every descriptor, quantile type, estimator family and moment against an outside reference.

Outside reference values are named beside each check: the NIST StRD certified values, and
scipy.stats / numpy / statsmodels computing the same definition on the same data (the Hyndman &
Fan (1996) quantile types as numpy.quantile methods; Joanes & Gill's (1998) b1 and b2 from their
definitions with numpy).

Degenerate input and missing values are checked in test_samples_degenerate.py, bad requests and
the limits in test_samples_bad_requests.py.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
import scipy.stats
from statsmodels.tsa.stattools import acf

from tests.api.samples_cases import bag_weights, value_of

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
