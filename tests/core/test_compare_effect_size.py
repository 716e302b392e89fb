"""The standardized mean difference and Welch's interval (tailgauge.core.compare.effect_size),
against outside references.

References used below, each named again beside its check:

* L. V. Hedges and I. Olkin, *Statistical Methods for Meta-Analysis*, Academic Press, 1985, ch. 5:
  the exact small-sample factor J(m) = Gamma(m/2) / (sqrt(m/2) Gamma((m-1)/2)) (evaluated here
  with scipy.special.gamma, and in closed form for m = 2, 3, 4);
* M. Borenstein, L. V. Hedges, J. P. T. Higgins, H. R. Rothstein, *Introduction to Meta-Analysis*,
  Wiley, 2009, ch. 4: worked example with means 103 and 100, sds 5.5 and 4.5, n = 50 each, giving
  d = 0.5970, V_d = 0.0418, g = 0.5924, V_g = 0.0411 (values recalled from memory, not looked up;
  the closed forms are also evaluated in the test);
* B. Efron and R. J. Tibshirani, *An Introduction to the Bootstrap*, Chapman & Hall, 1993, ch. 2,
  Table 2.1: the mouse survival data (tests/core/comparison_cases.py);
* scipy 1.17.1: ``stats.ttest_ind(equal_var=False).confidence_interval``.

Every random generator is seeded; nothing here depends on timing.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import special, stats

from tailgauge.core import DescribeOptions, WeightMeaning, compare, from_array, from_bins, from_samples
from tailgauge.core.compare import hedges_correction
from tests.core.comparison_cases import (  # noqa: F401 (two_samples is a fixture)
    MOUSE_CONTROL,
    MOUSE_TREATMENT,
    SAMPLES,
    interval,
    named,
    of_arrays,
    table,
    two_samples,
    warned,
)


# ----------------------------------------------------------------------------------------------
# Standardized mean difference: Hedges & Olkin (1985)
# ----------------------------------------------------------------------------------------------


def test_hedges_correction_closed_forms_and_gamma_ratio():
    """J(m) = Gamma(m/2) / (sqrt(m/2) Gamma((m-1)/2)) (Hedges & Olkin 1985, ch. 5): J(2) = 1/sqrt(pi),
    J(3) = sqrt(pi)/(2 sqrt(1.5)), J(4) = sqrt(2/pi) from Gamma(1/2) = sqrt(pi); other m against
    scipy.special.gamma directly, and the usual approximation 1 - 3/(4m - 1) close for large m."""
    assert hedges_correction(2.0) == pytest.approx(1.0 / math.sqrt(math.pi), rel=1e-14)
    assert hedges_correction(3.0) == pytest.approx(math.sqrt(math.pi) / (2.0 * math.sqrt(1.5)), rel=1e-14)
    assert hedges_correction(4.0) == pytest.approx(math.sqrt(2.0 / math.pi), rel=1e-14)
    for m in (5.0, 14.0, 37.5, 98.0, 300.0):
        want = special.gamma(m / 2.0) / (math.sqrt(m / 2.0) * special.gamma((m - 1.0) / 2.0))
        assert hedges_correction(m) == pytest.approx(want, rel=1e-12), m
    # J(m) = 1 - 3/(4m) - 7/(32 m^2) + O(m^-3), the approximation 1 - 3/(4m) - 3/(16 m^2) + ...:
    # they part by about 1/(32 m^2), which must hold for large m too (no loss of digits near 1).
    for m in (50.0, 1000.0, 1e6, 1e9):
        gap = (1.0 - 3.0 / (4.0 * m - 1.0)) - hedges_correction(m)
        assert 0.5 / (32.0 * m * m) - 1e-15 < gap < 2.0 / (32.0 * m * m) + 1e-15, m
    assert 0.0 < 1.0 - hedges_correction(1e12) < 1e-12


def test_hedges_g_on_the_mouse_data_equals_the_textbook_formula():
    """Worked dataset: Efron & Tibshirani (1993) Table 2.1; formula of Hedges & Olkin (1985), ch. 5,
    evaluated here independently with numpy and scipy.special.gamma."""
    result = compare(from_array(MOUSE_CONTROL), from_array(MOUSE_TREATMENT), DescribeOptions(), kinds=SAMPLES)
    effect = result.standardized_mean_difference
    n1, n2 = MOUSE_CONTROL.size, MOUSE_TREATMENT.size
    m = n1 + n2 - 2
    pooled = math.sqrt(
        ((n1 - 1) * np.var(MOUSE_CONTROL, ddof=1) + (n2 - 1) * np.var(MOUSE_TREATMENT, ddof=1)) / m
    )
    d = (MOUSE_TREATMENT.mean() - MOUSE_CONTROL.mean()) / pooled
    j = special.gamma(m / 2) / (math.sqrt(m / 2) * special.gamma((m - 1) / 2))
    assert effect.first_n == n1 and effect.second_n == n2 and effect.degrees_of_freedom == m
    assert effect.pooled_standard_deviation == pytest.approx(pooled, rel=1e-13)
    assert effect.uncorrected == pytest.approx(d, rel=1e-13)
    assert effect.correction_factor == pytest.approx(j, rel=1e-13)
    assert effect.value == pytest.approx(j * d, rel=1e-13)
    # Var(g) = J^2 [(n1 + n2) / (n1 n2) + d^2 / (2 (n1 + n2))] (Borenstein et al. 2009, ch. 4).
    var_d = (n1 + n2) / (n1 * n2) + d * d / (2 * (n1 + n2))
    assert effect.standard_error_under_normality == pytest.approx(j * math.sqrt(var_d), rel=1e-13)
    assert effect.interval is None and effect.standard_error is None  # no interval asked for


def test_hedges_g_matches_the_published_worked_example():
    """Borenstein et al. (2009), ch. 4: means 103 / 100, sds 5.5 / 4.5, n = 50 each; d = 0.5970,
    V_d = 0.0418, g = 0.5924, V_g = 0.0411 (recalled from memory). The data are built to have
    exactly those means and sample sds."""
    rng = np.random.default_rng(2009)

    def exactly(mean: float, sd: float, n: int) -> np.ndarray:
        z = rng.normal(size=n)
        return mean + sd * (z - z.mean()) / z.std(ddof=1)

    control, treated = exactly(100.0, 4.5, 50), exactly(103.0, 5.5, 50)
    effect = compare(from_array(control), from_array(treated), DescribeOptions(), kinds=SAMPLES)
    effect = effect.standardized_mean_difference
    assert round(effect.uncorrected, 4) == 0.5970
    assert round((effect.standard_error_under_normality / effect.correction_factor) ** 2, 4) == 0.0418
    assert round(effect.value, 4) == 0.5924
    assert round(effect.standard_error_under_normality**2, 4) == 0.0411


def test_effect_size_uses_the_sample_sd_whatever_the_convention(two_samples):
    before, after = two_samples
    sample = compare(from_array(before), from_array(after), DescribeOptions(), kinds=SAMPLES)
    population = compare(
        from_array(before), from_array(after), DescribeOptions(convention="population"), kinds=SAMPLES
    )
    assert population.first.conventions.convention == "population"
    a, b = sample.standardized_mean_difference, population.standardized_mean_difference
    assert b.value == pytest.approx(a.value, rel=1e-13)
    assert b.pooled_standard_deviation == pytest.approx(a.pooled_standard_deviation, rel=1e-13)


def test_effect_size_sample_sizes_for_reliability_weights_and_bins():
    """n is Kish's effective size (sum w)^2 / sum w^2 for reliability weights, the total count for bins."""
    rng = np.random.default_rng(8)
    values = rng.normal(10.0, 2.0, 30)
    weights = rng.uniform(0.5, 2.0, 30)
    reliability = from_samples(values.tolist(), omit_missing=False, weights=weights.tolist(),
                               meaning=WeightMeaning.RELIABILITY)
    bins = from_bins([4.0, 6.0, 8.0, 10.0, 12.0, 14.0, 16.0], [3.0, 9.0, 20.0, 25.0, 10.0, 3.0])
    result = compare(reliability, bins, DescribeOptions(), kinds=("samples", "bins"))
    effect = result.standardized_mean_difference
    assert effect.first_n == pytest.approx(weights.sum() ** 2 / np.sum(weights**2), rel=1e-12)
    assert effect.second_n == 70
    assert effect.value is not None
    # Binned data against observations get the chi-square test on the bins' cells, but reliability
    # weights give no count of observations for its null distribution: no test, and the reason says so.
    assert result.distribution_test.test == "chi_square_homogeneity"
    assert result.distribution_test.p_value is None and "reliability weights" in result.distribution_test.reason


def test_effect_size_is_undefined_for_probability_tables_and_for_no_spread():
    population = table([1.0, 2.0, 3.0], [0.2, 0.5, 0.3], probabilities=True)
    result = compare(from_array(np.array([1.0, 2.0, 4.0, 5.0])), population, DescribeOptions(),
                     kinds=("samples", "table"))
    effect = result.standardized_mean_difference
    assert effect.value is None and effect.uncorrected is None
    assert effect.standard_error_under_normality is None
    assert "standardized_mean_difference" in named(result, "effect_size_undefined")
    # The population mean is exactly 0.2 + 1.0 + 0.9 = 2.1.
    assert result.differences["mean"].value == pytest.approx(2.1 - 3.0, rel=1e-15)
    assert result.distribution_test.p_value is None and "probability table" in result.distribution_test.reason
    # The sample convention of the first and the population of the second are named.
    assert "differences.variance" in named(result, "conventions_differ")

    constant = of_arrays(np.full(6, 3.0), np.full(5, 7.0))
    assert constant.standardized_mean_difference.value is None
    assert "zero spread" in warned(constant, "effect_size_undefined")[0].message
    assert constant.differences["mean"].value == 4.0


# ----------------------------------------------------------------------------------------------
# Welch's interval of the difference of means
# ----------------------------------------------------------------------------------------------


def test_welch_interval_of_the_mean_difference_equals_scipy(two_samples):
    before, after = two_samples
    result = of_arrays(before, after, interval("percentile", 500, 4, level=0.9))
    welch = result.differences["mean"].classical_interval
    reference = stats.ttest_ind(after, before, equal_var=False).confidence_interval(0.9)  # scipy 1.17.1
    assert welch.method == "welch_t" and welch.level == 0.9
    assert welch.low == pytest.approx(reference.low, rel=1e-12)
    assert welch.high == pytest.approx(reference.high, rel=1e-12)
    assert result.differences["variance"].classical_interval is None
