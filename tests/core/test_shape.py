"""Skewness and excess kurtosis in the three families of Joanes & Gill (1998), and their
normal-theory standard errors.

References named beside each check:

* scipy.stats.skew / scipy.stats.kurtosis (reference library, scipy 1.17.x as pinned in
  pyproject.toml): ``bias=True`` is the plug-in g1, g2; ``bias=False`` the adjusted
  Fisher-Pearson G1, G2.
* D. N. Joanes and C. A. Gill, "Comparing measures of sample skewness and kurtosis",
  The Statistician 47(1), 183-189, 1998: b1 = g1 ((n - 1)/n)^(3/2), b2 = (g2 + 3)((n - 1)/n)^2 - 3.
* The exact variances of g1 and g2 in normal samples, R. A. Fisher, "The moments of the
  distribution for normal samples of measures of departure from normality", Proc. Royal
  Society A 130, 16-28, 1930 (as quoted by Joanes & Gill 1998):
  var(g1) = 6 (n - 2) / ((n + 1)(n + 3)),
  var(g2) = 24 n (n - 2)(n - 3) / ((n + 1)^2 (n + 3)(n + 5)).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.stats

from tailgauge.core import shape
from tailgauge.core.describe import DescribeOptions, describe
from tailgauge.core.weighted import WeightedData, WeightMeaning, from_array

SIZES = (4, 5, 10, 50, 500)


def skewed_sample(n: int, seed: int) -> np.ndarray:
    # Gamma(shape 2): skewness 1.41 and excess kurtosis 3 in the population, so every estimator
    # is far from zero and relative comparisons are meaningful.
    return np.random.default_rng(seed).gamma(2.0, 3.0, size=n) + 10.0


def estimators(values: np.ndarray) -> dict[str, tuple[float | None, float | None]]:
    """family -> (value, standard error) from describe()'s side-by-side table."""
    result = describe(from_array(values), DescribeOptions(), kind="samples")
    rows = result.shape_estimators.skewness + result.shape_estimators.excess_kurtosis
    return {row.estimator: (row.value, row.standard_error_under_normality) for row in rows}


@pytest.mark.parametrize("n", SIZES)
def test_plug_in_and_adjusted_match_scipy(n):
    x = skewed_sample(n, seed=n)
    found = estimators(x)
    # scipy 1.17 (reference library).
    reference = {
        "g1": scipy.stats.skew(x, bias=True),
        "G1": scipy.stats.skew(x, bias=False),
        "g2": scipy.stats.kurtosis(x, fisher=True, bias=True),
        "G2": scipy.stats.kurtosis(x, fisher=True, bias=False),
    }
    for family, expected in reference.items():
        assert found[family][0] == pytest.approx(expected, rel=1e-12, abs=0), family


@pytest.mark.parametrize("n", SIZES)
def test_b_family_matches_joanes_gill_conversion(n):
    x = skewed_sample(n, seed=100 + n)
    found = estimators(x)
    g1 = scipy.stats.skew(x, bias=True)  # scipy 1.17 (reference library)
    g2 = scipy.stats.kurtosis(x, fisher=True, bias=True)
    ratio = (n - 1) / n
    # Joanes & Gill (1998).
    assert found["b1"][0] == pytest.approx(g1 * ratio**1.5, rel=1e-12, abs=0)
    assert found["b2"][0] == pytest.approx((g2 + 3.0) * ratio**2 - 3.0, rel=1e-12, abs=0)


@pytest.mark.parametrize("n", SIZES)
def test_b_family_is_moment_over_sample_sd_power(n):
    """The definition behind the conversion: m3 / s^3 and m4 / s^4 - 3 with s the sample sd."""
    x = skewed_sample(n, seed=200 + n)
    found = estimators(x)
    d = x - x.mean()
    s = math.sqrt(float(np.sum(d * d)) / (n - 1))
    assert found["b1"][0] == pytest.approx(float(np.mean(d**3)) / s**3, rel=1e-11, abs=0)
    assert found["b2"][0] == pytest.approx(float(np.mean(d**4)) / s**4 - 3.0, rel=1e-11, abs=0)


@pytest.mark.parametrize(
    ("convention", "skewness_estimator", "kurtosis_estimator", "expected_skew", "expected_kurt"),
    [
        (None, None, None, "G1", "G2"),
        ("sample", None, None, "G1", "G2"),
        ("population", None, None, "g1", "g2"),
        (None, "b1", "b2", "b1", "b2"),
        (None, "g1", "G2", "g1", "G2"),
    ],
)
def test_headline_descriptors_use_the_chosen_family(
    convention, skewness_estimator, kurtosis_estimator, expected_skew, expected_kurt
):
    x = skewed_sample(40, seed=7)
    table = estimators(x)
    options = DescribeOptions(
        convention=convention, skewness_estimator=skewness_estimator, kurtosis_estimator=kurtosis_estimator
    )
    result = describe(from_array(x), options, kind="samples")
    skewness = result.descriptors["skewness"]
    excess = result.descriptors["excess_kurtosis"]
    kurtosis = result.descriptors["kurtosis"]
    assert (skewness.value, skewness.standard_error_under_normality) == table[expected_skew]
    assert (excess.value, excess.standard_error_under_normality) == table[expected_kurt]
    assert kurtosis.value == pytest.approx(table[expected_kurt][0] + 3.0, rel=1e-15)


def test_frequency_weights_give_the_repeated_sample_shape():
    rng = np.random.default_rng(11)
    values = np.round(rng.gamma(2.0, 1.0, size=30), 2)
    counts = rng.integers(1, 5, size=30)
    weighted = WeightedData(
        values=values, weights=counts.astype(np.float64), meaning=WeightMeaning.FREQUENCY, ordered=False
    )
    repeated = np.repeat(values, counts)
    result = describe(weighted, DescribeOptions(), kind="table")
    found = {
        row.estimator: row.value
        for row in result.shape_estimators.skewness + result.shape_estimators.excess_kurtosis
    }
    # scipy 1.17 (reference library), on the repeated sample.
    assert found["G1"] == pytest.approx(scipy.stats.skew(repeated, bias=False), rel=1e-12)
    assert found["g1"] == pytest.approx(scipy.stats.skew(repeated, bias=True), rel=1e-12)
    assert found["G2"] == pytest.approx(scipy.stats.kurtosis(repeated, bias=False), rel=1e-12)
    assert found["g2"] == pytest.approx(scipy.stats.kurtosis(repeated, bias=True), rel=1e-12)


def test_too_few_observations_give_none_only_for_the_adjusted_families():
    # G1 needs n >= 3 and G2 n >= 4 (their formulas divide by n - 2 and n - 3); g1, b1, g2 and b2
    # are defined from n = 2 (issue 15: they were null at n = 2, and g2, b2 at n = 3).
    three = estimators(np.array([1.0, 2.0, 4.0]))
    assert all(three[f][0] is not None for f in ("g1", "G1", "b1", "g2", "b2"))
    assert three["G2"] == (None, None)
    two = estimators(np.array([1.0, 2.0]))
    assert two["G1"] == two["G2"] == (None, None)
    assert all(two[f][0] is not None for f in ("g1", "b1", "g2", "b2"))


@pytest.mark.parametrize("values", [[1.0, 2.0], [-3.5, 10.25], [1.0, 2.0, 4.0], [0.0, 0.0, 7.0], [5.0, -1.0, 2.5]])
def test_families_at_two_and_three_values_match_scipy_and_joanes_gill(values):
    """Issue 15 regression. scipy 1.17 (reference library) with bias=True gives g1 and g2 (for two
    distinct values g1 = 0 and g2 = -2; for three, g2 = -1.5); b1 = g1 ((n-1)/n)^1.5 and
    b2 = (g2 + 3)((n-1)/n)^2 - 3 (Joanes & Gill 1998). The exact normal-theory standard errors
    are 0 there: every sample of that size gives the same g1 (n = 2) and g2 (n = 2, 3)."""
    x = np.array(values)
    n = x.size
    g1 = float(scipy.stats.skew(x, bias=True))
    g2 = float(scipy.stats.kurtosis(x, fisher=True, bias=True))
    ratio = (n - 1) / n
    reference = {"g1": g1, "b1": g1 * ratio**1.5, "g2": g2, "b2": (g2 + 3.0) * ratio**2 - 3.0}
    for convention in ("sample", "population"):
        result = describe(from_array(x), DescribeOptions(convention=convention), kind="samples")
        rows = result.shape_estimators.skewness + result.shape_estimators.excess_kurtosis
        found = {row.estimator: (row.value, row.standard_error_under_normality) for row in rows}
        for family, expected in reference.items():
            assert found[family][0] == pytest.approx(expected, rel=1e-12, abs=1e-15), (family, convention)
        assert found["g2"][1] == 0.0 and math.copysign(1.0, found["g2"][1]) == 1.0
        if n == 2:
            assert found["g1"][1] == 0.0 and found["G1"] == (None, None)
        else:
            assert found["G1"][0] == pytest.approx(float(scipy.stats.skew(x, bias=False)), rel=1e-12)
        assert found["G2"] == (None, None)
        # Which families appear depends on n alone, not on the convention.
        if convention == "sample":
            sample_defined = {family for family, (value, _) in found.items() if value is not None}
        else:
            assert {family for family, (value, _) in found.items() if value is not None} == sample_defined


# --- standard errors under normality: a seeded Monte Carlo ----------------------------------


def variance_with_error(draws: np.ndarray) -> tuple[float, float]:
    """Sample variance of the draws and its standard error,
    sqrt((mu4 - sigma^4 (N - 3)/(N - 1)) / N) (the variance of the sample variance)."""
    count = draws.size
    centred = draws - draws.mean()
    variance = float(np.sum(centred**2) / (count - 1))
    mu4 = float(np.mean(centred**4))
    return variance, math.sqrt((mu4 - variance**2 * (count - 3) / (count - 1)) / count)


@pytest.mark.parametrize("n", (8, 20))
def test_standard_errors_match_monte_carlo_under_normality(n):
    replications = 20000
    samples = np.random.default_rng(2024 + n).standard_normal((replications, n))
    # scipy 1.17 (reference library), one estimate per row.
    g1 = scipy.stats.skew(samples, axis=1, bias=True)
    g2 = scipy.stats.kurtosis(samples, axis=1, fisher=True, bias=True)
    ratio = (n - 1) / n
    draws = {
        "g1": g1,
        "G1": scipy.stats.skew(samples, axis=1, bias=False),
        "b1": g1 * ratio**1.5,  # Joanes & Gill (1998)
        "g2": g2,
        "G2": scipy.stats.kurtosis(samples, axis=1, fisher=True, bias=False),
        "b2": (g2 + 3.0) * ratio**2 - 3.0,
    }
    for family, values in draws.items():
        if family.endswith("1"):
            error = shape.skewness(0.0, float(n), family).standard_error
        else:
            error = shape.excess_kurtosis(0.0, float(n), family).standard_error
        observed, observed_error = variance_with_error(values)
        # Four Monte Carlo standard errors of the variance estimate.
        assert abs(error**2 - observed) <= 4.0 * observed_error, (
            f"{family}, n = {n}: service variance {error**2:.5f}, Monte Carlo {observed:.5f} "
            f"+- {observed_error:.5f}"
        )


@pytest.mark.parametrize("n", (8, 20, 100))
def test_plug_in_standard_errors_are_fishers_exact_formulas(n):
    # Fisher (1930) via Joanes & Gill (1998); the Monte Carlo above confirms them numerically,
    # this pins the closed forms for sizes the Monte Carlo does not visit.
    var_g1 = 6.0 * (n - 2) / ((n + 1) * (n + 3))
    var_g2 = 24.0 * n * (n - 2) * (n - 3) / ((n + 1) ** 2 * (n + 3) * (n + 5))
    assert shape.skewness(0.3, float(n), "g1").standard_error == pytest.approx(math.sqrt(var_g1), rel=1e-14)
    assert shape.excess_kurtosis(0.3, float(n), "g2").standard_error == pytest.approx(
        math.sqrt(var_g2), rel=1e-14
    )


def test_monte_carlo_rejects_the_large_sample_approximations():
    """The Monte Carlo check has teeth: the asymptotic 6/n and 24/n (wrong at n = 20) fail it."""
    n, replications = 20, 20000
    samples = np.random.default_rng(2044).standard_normal((replications, n))
    g1_var, g1_error = variance_with_error(scipy.stats.skew(samples, axis=1, bias=True))
    g2_var, g2_error = variance_with_error(scipy.stats.kurtosis(samples, axis=1, bias=True))
    assert abs(6.0 / n - g1_var) > 4.0 * g1_error
    assert abs(24.0 / n - g2_var) > 4.0 * g2_error
