"""Comparison of two inputs and standard scores (tailgauge.core.compare), against outside references.

References used below, each named again beside its check:

* L. V. Hedges and I. Olkin, *Statistical Methods for Meta-Analysis*, Academic Press, 1985, ch. 5:
  the exact small-sample factor J(m) = Gamma(m/2) / (sqrt(m/2) Gamma((m-1)/2)) (evaluated here
  with scipy.special.gamma, and in closed form for m = 2, 3, 4);
* M. Borenstein, L. V. Hedges, J. P. T. Higgins, H. R. Rothstein, *Introduction to Meta-Analysis*,
  Wiley, 2009, ch. 4: worked example with means 103 and 100, sds 5.5 and 4.5, n = 50 each, giving
  d = 0.5970, V_d = 0.0418, g = 0.5924, V_g = 0.0411 (values recalled from memory, not looked up;
  the closed forms are also evaluated in the test);
* B. Efron and R. J. Tibshirani, *An Introduction to the Bootstrap*, Chapman & Hall, 1993, ch. 2,
  Table 2.1: the mouse survival data (treatment 16 23 38 94 99 141 197; control 10 27 31 40 46 50
  52 104 146), mean difference 30.63 and the formula standard error sqrt(s1^2/n1 + s2^2/n2) = 28.93;
* scipy 1.17.1: ``stats.ks_2samp``, ``stats.chi2_contingency``, ``stats.bootstrap`` (two independent
  samples, percentile and BCa), ``stats.ttest_ind(equal_var=False).confidence_interval``,
  ``stats.median_abs_deviation(scale="normal")``.

Every random generator is seeded; nothing here depends on timing.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from scipy import special, stats

from tailgauge.core import (
    DescribeOptions,
    IntervalOptions,
    LimitExceeded,
    UncomputableInput,
    WeightMeaning,
    admit,
    compare,
    describe,
    from_array,
    from_bins,
    from_samples,
    from_table,
    standardize,
)
from tailgauge.core import resample
from tailgauge.core.compare import KS_EXACT_LIMIT, SCALE_DESCRIPTORS, hedges_correction, side_seeds
from tailgauge.core.describe import SCALAR_DESCRIPTORS

# Efron & Tibshirani (1993), Table 2.1: days of survival after surgery.
MOUSE_TREATMENT = np.array([94, 197, 16, 38, 99, 141, 23], dtype=np.float64)
MOUSE_CONTROL = np.array([52, 104, 146, 10, 50, 31, 40, 27, 46], dtype=np.float64)

SAMPLES = ("samples", "samples")


def interval(method="percentile", resamples=2000, seed=11, level=0.95) -> DescribeOptions:
    return DescribeOptions(interval=IntervalOptions(method, level, resamples, seed))


def of_arrays(first, second, options=None):
    """compare() of two raw samples given as arrays."""
    return compare(from_array(np.asarray(first)), from_array(np.asarray(second)), options or DescribeOptions(),
                   kinds=SAMPLES)


def table(values, weights, *, probabilities=False):
    return from_table(np.asarray(values, dtype=np.float64), np.asarray(weights, dtype=np.float64),
                      probabilities=probabilities, normalise=False)


def codes(comparison, side="comparison") -> set[str]:
    return {note.code for note in comparison.warnings if note.side == side}


def warned(comparison, code: str) -> list:
    return [note for note in comparison.warnings if note.side == "comparison" and note.code == code]


def named(comparison, code: str) -> set[str]:
    return {name for note in warned(comparison, code) for name in note.descriptors}


@pytest.fixture(scope="module")
def two_samples():
    """A filling line's bag weights before and after a (fictional) nozzle change, in grams."""
    rng = np.random.default_rng(20260301)
    before = np.round(rng.normal(250.0, 3.0, 80) + rng.exponential(1.0, 80), 3)
    after = np.round(rng.normal(251.0, 2.2, 65), 3)
    return before, after


# ----------------------------------------------------------------------------------------------
# Differences and ratios are exactly second minus first / second over first
# ----------------------------------------------------------------------------------------------


def test_differences_equal_second_minus_first_of_the_two_descriptions_exactly(two_samples):
    before, after = two_samples
    counts = np.unique(np.round(after), return_counts=True)
    second = from_table(counts[0], counts[1].astype(np.float64), probabilities=False, normalise=False)
    result = compare(from_array(before), second, DescribeOptions(), kinds=("samples", "table"))
    assert set(result.differences) == set(SCALAR_DESCRIPTORS)
    checked = 0
    for name in SCALAR_DESCRIPTORS:
        a, b = result.first.descriptors[name].value, result.second.descriptors[name].value
        got = result.differences[name].value
        if a is None or b is None:
            assert got is None, name
            assert f"differences.{name}" in named(result, "difference_undefined"), name
        else:
            assert got == b - a, name  # exact: the same float operation
            checked += 1
    assert checked >= 20
    # The table has no observation order: its lag-1 autocorrelation (and so the difference) is undefined.
    assert result.differences["lag1_autocorrelation"].value is None
    assert set(result.ratios) == set(SCALE_DESCRIPTORS)
    for name in SCALE_DESCRIPTORS:
        a, b = result.first.descriptors[name].value, result.second.descriptors[name].value
        assert result.ratios[name].value == b / a, name
    for i, shift in enumerate(result.quantile_shifts):
        assert shift.probability == result.first.quantiles[i].probability
        assert shift.value == result.second.quantiles[i].value - result.first.quantiles[i].value


def test_warnings_of_each_input_are_kept_with_their_side(two_samples):
    before, _ = two_samples
    result = of_arrays(before, [1.0, 2.0, 2.0])
    for side, description in (("first", result.first), ("second", result.second)):
        mine = [(n.code, n.message, n.descriptors) for n in result.warnings if n.side == side]
        assert mine == [(n.code, n.message, n.descriptors) for n in description.warnings]
    assert "too_few_observations" in codes(result, "second")  # G2 needs n >= 4 (Joanes & Gill 1998)
    assert "too_few_observations" not in codes(result, "first")
    assert "differences.excess_kurtosis" in named(result, "difference_undefined")
    # ...and the comparison's own warnings carry the comparison side.
    assert all(n.side in ("first", "second", "comparison") for n in result.warnings)


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
    # Neither a probability table nor reliability weights give a Kolmogorov-Smirnov test.
    assert result.distribution_test.p_value is None and "bins" in result.distribution_test.reason


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
# Two-sample tests against scipy.stats
# ----------------------------------------------------------------------------------------------


def test_kolmogorov_smirnov_on_samples_equals_scipy(two_samples):
    before, after = two_samples
    rng = np.random.default_rng(3)
    x, y = before + rng.uniform(0, 1e-4, before.size), after + rng.uniform(0, 1e-4, after.size)  # no ties
    result = compare(from_array(x), from_array(y), DescribeOptions(), kinds=SAMPLES)
    test = result.distribution_test
    reference = stats.ks_2samp(x, y)  # scipy 1.17.1, method="auto": exact for these sizes
    assert test.test == "kolmogorov_smirnov" and test.method == "exact" and test.reason is None
    assert test.statistic == reference.statistic
    assert test.p_value == pytest.approx(reference.pvalue, rel=1e-12)
    assert "distribution_test_ties" not in codes(result)


def test_kolmogorov_smirnov_on_count_tables_equals_scipy_on_the_repeated_observations():
    """Small totals: scipy 1.17.1 ks_2samp on the expanded data (exact); ties are warned."""
    values_a, counts_a = np.array([1.0, 2.0, 3.0, 4.0, 6.0]), np.array([4.0, 9.0, 12.0, 6.0, 2.0])
    values_b, counts_b = np.array([2.0, 3.0, 4.0, 5.0, 6.0, 7.0]), np.array([2.0, 5.0, 11.0, 9.0, 4.0, 1.0])
    first = from_table(values_a, counts_a, probabilities=False, normalise=False)
    second = from_table(values_b, counts_b, probabilities=False, normalise=False)
    result = compare(first, second, DescribeOptions(), kinds=("table", "table"))
    reference = stats.ks_2samp(
        np.repeat(values_a, counts_a.astype(int)), np.repeat(values_b, counts_b.astype(int))
    )
    test = result.distribution_test
    assert test.statistic == pytest.approx(reference.statistic, rel=1e-15)
    assert test.p_value == pytest.approx(reference.pvalue, rel=1e-12)
    assert warned(result, "distribution_test_ties")[0].descriptors == ["distribution_test"]


def test_kolmogorov_smirnov_beyond_the_exact_limit_equals_scipy_asymptotic():
    """Totals above 10000: D from the cumulative counts, p from Smirnov's distribution, as scipy
    1.17.1 ks_2samp(method="asymp") computes them on the expanded data."""
    rng = np.random.default_rng(12)
    values = np.arange(40, dtype=np.float64)
    counts_a = rng.integers(200, 600, 40).astype(np.float64)
    counts_b = rng.integers(150, 650, 40).astype(np.float64)
    assert counts_a.sum() > KS_EXACT_LIMIT and counts_b.sum() > KS_EXACT_LIMIT
    first = from_table(values, counts_a, probabilities=False, normalise=False)
    second = from_table(values + 0.5 * (values % 3 == 0), counts_b, probabilities=False, normalise=False)
    result = compare(first, second, DescribeOptions(), kinds=("table", "table"))
    expanded_a = np.repeat(first.support.values, first.support.weights.astype(int))
    expanded_b = np.repeat(second.support.values, second.support.weights.astype(int))
    reference = stats.ks_2samp(expanded_a, expanded_b, method="asymp")
    test = result.distribution_test
    assert test.method == "asymptotic"
    assert test.statistic == pytest.approx(reference.statistic, rel=1e-14)
    assert test.p_value == pytest.approx(reference.pvalue, rel=1e-10, abs=1e-300)
    assert 0.0 < test.statistic < 1.0


def test_chi_square_homogeneity_of_bins_equals_scipy_chi2_contingency():
    """Same finite edges; the second input has an open upper bin the first lacks (a zero column)."""
    first = from_bins([0.0, 1.0, 2.0, 3.0, 4.0], [12.0, 30.0, 25.0, 9.0])
    second = from_bins([0.0, 1.0, 2.0, 3.0, 4.0, None], [8.0, 22.0, 31.0, 14.0, 3.0])
    result = compare(first, second, DescribeOptions(), kinds=("bins", "bins"))
    table = np.array([[12.0, 30.0, 25.0, 9.0, 0.0], [8.0, 22.0, 31.0, 14.0, 3.0]])
    reference = stats.chi2_contingency(table, correction=False)  # scipy 1.17.1
    test = result.distribution_test
    assert test.test == "chi_square_homogeneity"
    assert test.statistic == pytest.approx(reference.statistic, rel=1e-13)
    assert test.p_value == pytest.approx(reference.pvalue, rel=1e-12)
    assert test.degrees_of_freedom == reference.dof == 4
    # Expected counts in the open bin are 1.3 and 1.7 (< 5): Cochran's rule is warned.
    assert "chi_square_small_expected" in codes(result)


def test_two_sample_test_is_null_with_a_reason_where_it_does_not_apply():
    bins = from_bins([0.0, 1.0, 2.0, 3.0], [5.0, 9.0, 4.0])
    other_edges = from_bins([0.0, 1.5, 3.0], [10.0, 8.0])
    fractional = from_table(np.array([1.0, 2.0]), np.array([1.5, 2.5]), probabilities=False, normalise=False)
    reliability = from_samples([1.0, 2.0, 3.0], omit_missing=False, weights=[1.0, 2.0, 1.0],
                               meaning=WeightMeaning.RELIABILITY)
    samples = from_array(np.array([0.5, 1.5, 2.5, 1.0]))
    cases = {
        "different edges": (bins, other_edges, ("bins", "bins"), "different edges"),
        "bins against samples": (bins, samples, ("bins", "samples"), "same edges"),
        "fractional counts": (samples, fractional, ("samples", "table"), "whole counts"),
        "reliability weights": (reliability, samples, SAMPLES, "reliability"),
    }
    for label, (a, b, kinds, why) in cases.items():
        test = compare(a, b, DescribeOptions(), kinds=kinds).distribution_test
        assert test.statistic is None and test.p_value is None, label
        assert why in test.reason, (label, test.reason)
        assert test.reference, label


# ----------------------------------------------------------------------------------------------
# The mouse data of Efron & Tibshirani (1993), chapter 2
# ----------------------------------------------------------------------------------------------


def test_mouse_data_mean_difference_and_its_standard_errors():
    """E&T (1993) Table 2.1: treatment minus control = 30.63, formula standard error 28.93.

    The bootstrap standard error converges, as B grows, to the plug-in value
    sqrt(sum (x - xbar)^2 / n1^2 + sum (y - ybar)^2 / n2^2) = 26.9 (divisor n, not n - 1; the ideal
    bootstrap standard error of a mean, E&T 1993 ch. 5/6 -- recalled), not to the 28.93 of the
    formula with sample variances: both are checked, each against its own target. Monte Carlo error
    of a bootstrap sd from B = 20000 replicates: sd * sqrt((kurtosis - 1) / (4 B)); with the
    bootstrap distribution's kurtosis below 5 that is under 0.2, and the tolerance is 5 of them.
    """
    resamples = 20_000
    result = of_arrays(MOUSE_CONTROL, MOUSE_TREATMENT, interval("percentile", resamples, 1993))
    mean = result.differences["mean"]
    assert round(mean.value, 2) == 30.63
    assert round(mean.classical_standard_error, 2) == 28.93  # E&T (1993), ch. 2
    ideal = math.sqrt(
        np.var(MOUSE_CONTROL) / MOUSE_CONTROL.size + np.var(MOUSE_TREATMENT) / MOUSE_TREATMENT.size
    )
    assert round(ideal, 1) == 26.9
    tolerance = 5.0 * ideal * math.sqrt((5.0 - 1.0) / (4.0 * resamples))
    assert abs(mean.standard_error - ideal) <= tolerance, (mean.standard_error, ideal, tolerance)
    assert abs(mean.standard_error - 28.93) > tolerance  # the check tells the two targets apart


def test_welch_interval_of_the_mean_difference_equals_scipy(two_samples):
    before, after = two_samples
    result = of_arrays(before, after, interval("percentile", 500, 4, level=0.9))
    welch = result.differences["mean"].classical_interval
    reference = stats.ttest_ind(after, before, equal_var=False).confidence_interval(0.9)  # scipy 1.17.1
    assert welch.method == "welch_t" and welch.level == 0.9
    assert welch.low == pytest.approx(reference.low, rel=1e-12)
    assert welch.high == pytest.approx(reference.high, rel=1e-12)
    assert result.differences["variance"].classical_interval is None


# ----------------------------------------------------------------------------------------------
# Intervals from independent resampling of the two inputs
# ----------------------------------------------------------------------------------------------

REFERENCE_SEEDS = (101, 202, 303, 404, 505)
REFERENCE_RESAMPLES = 9999


@pytest.mark.parametrize("method", ["percentile", "bca"])
def test_mean_difference_interval_agrees_with_scipy_bootstrap_within_monte_carlo_error(two_samples, method):
    """Reference: scipy 1.17.1 ``stats.bootstrap((before, after), mean(after) - mean(before),
    paired=False)``, which resamples each sample on its own, and for BCa uses the multi-sample
    acceleration from both jackknives. Means of the endpoints over 5 seeds each; tolerance 5 Monte
    Carlo standard errors, as in tests/core/test_resample.py (spread over seeds, floored by the
    asymptotic sd of a sample quantile of B draws)."""
    before, after = two_samples
    ours, theirs = [], []
    for seed in REFERENCE_SEEDS:
        result = of_arrays(before, after, interval(method, REFERENCE_RESAMPLES, seed))
        got = result.differences["mean"]
        assert got.interval.method == method
        ours.append((got.interval.low, got.interval.high))
        se = got.standard_error
        reference = stats.bootstrap(
            (before, after),
            lambda x, y, axis=-1: np.mean(y, axis=axis) - np.mean(x, axis=axis),
            n_resamples=REFERENCE_RESAMPLES,
            paired=False,
            vectorized=True,
            method={"percentile": "percentile", "bca": "BCa"}[method],
            rng=np.random.default_rng(seed),
        )
        theirs.append((reference.confidence_interval.low, reference.confidence_interval.high))
    ours, theirs = np.array(ours), np.array(theirs)
    pooled = np.sqrt((np.var(ours, axis=0, ddof=1) + np.var(theirs, axis=0, ddof=1)) / 2.0)
    asymptotic = math.sqrt(0.025 * 0.975 / REFERENCE_RESAMPLES) * se / stats.norm.pdf(stats.norm.ppf(0.025))
    tolerance = 5.0 * np.maximum(pooled, asymptotic) * math.sqrt(2.0 / len(REFERENCE_SEEDS))
    width = float(np.mean(theirs[:, 1] - theirs[:, 0]))
    assert np.all(tolerance < 0.1 * width)
    gap = np.abs(ours.mean(axis=0) - theirs.mean(axis=0))
    assert np.all(gap <= tolerance), (ours.mean(axis=0), theirs.mean(axis=0), tolerance)


def _naive_two_sample_bca(estimate, replicates, jack_first, jack_second, level):
    """BCa (E&T 1993, eq. 14.10) with the multi-sample acceleration written as in scipy 1.17.1's
    stats.bootstrap: U_ij = (n_i - 1)(mean theta_(i.) - theta_(ij)),
    a = sum_i sum_j U^3 / n_i^3 / (6 (sum_i sum_j U^2 / n_i^2)^1.5)."""
    numerator = denominator = 0.0
    for jack in (jack_first, jack_second):
        n = jack.size
        u = (n - 1) * (jack.mean() - jack)
        numerator += np.sum(u**3) / n**3
        denominator += np.sum(u**2) / n**2
    a = numerator / (6.0 * denominator**1.5)
    below = np.sum(replicates < estimate) + 0.5 * np.sum(replicates == estimate)
    z0 = stats.norm.ppf(below / replicates.size)
    z = stats.norm.ppf([(1 - level) / 2, (1 + level) / 2])
    fractions = stats.norm.cdf(z0 + (z0 + z) / (1 - a * (z0 + z)))
    return np.quantile(replicates, fractions)


def test_bca_interval_of_a_difference_uses_the_two_sample_acceleration(two_samples):
    """Recomputed from the two inputs' own replicates (kept by describe) and a naive np.delete
    jackknife of each sample: the same interval to rounding."""
    before, after = two_samples
    result = compare(from_array(before), from_array(after), interval("bca", 3000, 77), kinds=SAMPLES)
    rep_first = result.first.resampling.replicates.values
    rep_second = result.second.resampling.replicates.values
    for name, statistic in (("mean", np.mean), ("standard_deviation", lambda v: np.std(v, ddof=1))):
        estimate = result.differences[name].value
        replicates = rep_second[name][0] - rep_first[name][0]
        b_hat, a_hat = statistic(after), statistic(before)
        jack_first = np.array([b_hat - statistic(np.delete(before, i)) for i in range(before.size)])
        jack_second = np.array([statistic(np.delete(after, i)) - a_hat for i in range(after.size)])
        low, high = _naive_two_sample_bca(estimate, replicates, jack_first, jack_second, 0.95)
        got = result.differences[name].interval
        assert got.method == "bca"
        assert got.low == pytest.approx(low, rel=1e-9), name
        assert got.high == pytest.approx(high, rel=1e-9), name
    # A ratio uses the same machinery (second / first in every jackknife row).
    ratio = result.ratios["standard_deviation"]
    assert ratio.interval.method == "bca" and ratio.interval.low < ratio.value < ratio.interval.high


def test_acceleration_of_one_sample_is_the_one_sample_formula():
    """With one input the multi-sample form reduces to E&T (1993) eq. 14.15."""
    rng = np.random.default_rng(6)
    jack = rng.gamma(2.0, 1.0, 25)
    weights = np.ones(25)
    gap = jack.mean() - jack
    assert resample.acceleration([(jack, weights)]) == pytest.approx(
        np.sum(gap**3) / (6.0 * np.sum(gap**2) ** 1.5), rel=1e-12
    )
    # Rows standing for several observations count that many times.
    counts = rng.integers(1, 4, 25).astype(np.float64)
    repeated = np.repeat(jack, counts.astype(int))
    gap = repeated.mean() - repeated
    assert resample.acceleration([(jack, counts)]) == pytest.approx(
        np.sum(gap**3) / (6.0 * np.sum(gap**2) ** 1.5), rel=1e-12
    )
    assert resample.acceleration([(np.full(5, 2.0), np.ones(5))]) is None


def test_replicates_of_a_difference_are_the_resamples_of_each_input_drawn_independently(two_samples):
    """Each input is described with its own seed spawned from the comparison's seed; its intervals
    equal describe() on that input alone with that seed, bit for bit, and the difference's
    percentile interval is read from stat(second*_k) - stat(first*_k)."""
    before, after = two_samples
    options = interval("percentile", 1500, 99)
    result = compare(from_array(before), from_array(after), options, kinds=SAMPLES)
    seeds = side_seeds(99)
    assert seeds[0] != seeds[1] and all(0 <= s < 2**53 for s in seeds)
    for data, description, seed in ((before, result.first, seeds[0]), (after, result.second, seeds[1])):
        own = dataclasses.replace(options, interval=IntervalOptions("percentile", 0.95, 1500, seed))
        alone = describe(from_array(data), own, kind="samples")
        assert description.resampling.seed == seed
        for name in resample.INTERVAL_DESCRIPTORS:
            assert description.descriptors[name].interval == alone.descriptors[name].interval, name
    medians = [d.resampling.replicates.values["median"][0] for d in (result.first, result.second)]
    replicates = medians[1] - medians[0]
    low, high = np.quantile(replicates, [0.025, 0.975])
    assert result.differences["median"].interval.low == pytest.approx(low, rel=1e-13)
    assert result.differences["median"].interval.high == pytest.approx(high, rel=1e-13)
    # The two inputs' resamples are not the same stream: their replicate means are uncorrelated.
    a = result.first.resampling.replicates.values["mean"][0]
    b = result.second.resampling.replicates.values["mean"][0]
    assert abs(np.corrcoef(a, b)[0, 1]) < 4.0 / math.sqrt(a.size)
    assert result.resampling.seed == 99 and result.resampling.resamples == 1500


def test_same_seed_same_comparison_and_another_seed_another(two_samples):
    before, after = two_samples

    def bits(seed):
        r = compare(from_array(before), from_array(after), interval("bca", 800, seed), kinds=SAMPLES)
        out = [(n, d.interval.low.hex(), d.interval.high.hex()) for n, d in r.differences.items()
               if d.interval]
        out += [(s.probability, s.interval.low.hex()) for s in r.quantile_shifts if s.interval]
        return out + [r.standardized_mean_difference.interval.low.hex()]

    reference = bits(5)
    assert len(reference) > 15
    assert bits(5) == reference
    assert bits(6) != reference


def test_basic_interval_of_a_difference_is_twice_the_estimate_minus_the_reversed_percentile(two_samples):
    """Davison & Hinkley (1997), section 5.2, from the same resamples."""
    before, after = two_samples
    p = compare(from_array(before), from_array(after), interval("percentile", 1000, 3), kinds=SAMPLES)
    b = compare(from_array(before), from_array(after), interval("basic", 1000, 3), kinds=SAMPLES)
    compared = 0
    for name, got in b.differences.items():
        if got.interval is None:
            continue
        ref = p.differences[name]
        assert got.interval.method == "basic"
        assert got.interval.low == pytest.approx(2 * got.value - ref.interval.high, rel=1e-12, abs=1e-12)
        assert got.interval.high == pytest.approx(2 * got.value - ref.interval.low, rel=1e-12, abs=1e-12)
        compared += 1
    assert compared == len(resample.INTERVAL_DESCRIPTORS)


def test_intervals_of_shifts_and_standardized_quantiles_and_what_gets_none(two_samples):
    before, after = two_samples
    options = dataclasses.replace(interval("percentile", 1000, 8), probabilities=(0.0, 0.1, 0.5, 0.9, 1.0))
    result = compare(from_array(before), from_array(after), options, kinds=SAMPLES)
    rep_a = result.first.resampling.replicates.values
    rep_b = result.second.resampling.replicates.values
    for i, shift in enumerate(result.quantile_shifts):
        if shift.probability in (0.0, 1.0):
            assert shift.interval is None  # the extremes again: not offered
            assert f"quantile_shifts[{i}]" in named(result, "interval_not_offered")
            continue
        low, high = np.quantile(rep_b[f"quantile:{i}"][0] - rep_a[f"quantile:{i}"][0], [0.025, 0.975])
        assert (shift.interval.low, shift.interval.high) == pytest.approx((low, high), rel=1e-12)
    middle = result.standardized_quantiles[3]  # p = 0.9
    z = lambda r: (r["quantile:3"][0] - r["mean"][0]) / r["standard_deviation"][0]  # noqa: E731
    low, high = np.quantile(z(rep_b) - z(rep_a), [0.025, 0.975])
    assert (middle.z.interval.low, middle.z.interval.high) == pytest.approx((low, high), rel=1e-9)
    # Extremes, serial order and descriptors the engine does not resample: null intervals, said why.
    not_offered = named(result, "interval_not_offered")
    for name in ("minimum", "maximum", "range", "lag1_autocorrelation", "medcouple", "l_scale"):
        assert result.differences[name].interval is None
        assert f"differences.{name}" in not_offered
    effect = result.standardized_mean_difference
    assert effect.interval.low < effect.value < effect.interval.high


def test_bag_of_little_bootstraps_on_one_side_pairs_rounds_and_falls_back_from_bca():
    """An input with more distinct values than subset_rows is resampled by the bag of little
    bootstraps (Kleiner et al. 2014); its difference interval is then close to the ordinary one."""
    rng = np.random.default_rng(44)
    large, small = rng.normal(10.0, 2.0, 3000), rng.normal(10.5, 2.0, 200)
    ordinary = compare(from_array(large), from_array(small), interval("bca", 2000, 1), kinds=SAMPLES)
    little = compare(
        from_array(large), from_array(small), dataclasses.replace(interval("bca", 2000, 1), subset_rows=1000),
        kinds=SAMPLES,
    )
    assert little.first.resampling.replicates.subsets and not little.second.resampling.replicates.subsets
    got, want = little.differences["mean"], ordinary.differences["mean"]
    assert got.interval.method == "percentile"
    assert "differences.mean" in named(little, "bca_fallback")
    width = want.interval.high - want.interval.low
    assert abs(got.interval.low - want.interval.low) < 0.1 * width
    assert abs(got.interval.high - want.interval.high) < 0.1 * width
    assert got.standard_error == pytest.approx(want.standard_error, rel=0.1)


def test_the_budget_covers_both_inputs():
    rng = np.random.default_rng(2)
    a, b = from_array(rng.normal(size=300)), from_array(rng.normal(size=200))
    options = dataclasses.replace(interval("percentile", 1000, 1), max_resample_work=400_000.0)
    describe(a, options, kind="samples")  # each input alone fits (300 000 and 200 000 rows)
    describe(b, options, kind="samples")
    with pytest.raises(LimitExceeded) as raised:
        compare(a, b, options, kinds=SAMPLES)
    assert raised.value.locations[0].path == "options.interval.resamples"  # the edge adds "$."
    assert "at most 800" in raised.value.locations[0].message  # 400 000 / (300 + 200)
    # The whole advice, word for word: it is the 422 problem's detail.
    assert raised.value.detail == (
        "resampling both inputs touches 5e+05 rows (3e+05 + 2e+05), beyond this server's resampling "
        "budget of 4e+05; lower options.interval.resamples to at most 800"
    )
    assert raised.value.locations[0].message == "at most 800 for these inputs"
    # Neither the memory and time plan (cost.admit) nor each input's own bootstrap refuses this
    # request: the joint budget is checked only by compare. The advice, resent, is admitted.
    admit([a, b], options)
    resent = dataclasses.replace(options, interval=IntervalOptions("percentile", 0.95, 800, 1))
    assert compare(a, b, resent, kinds=SAMPLES).resampling.resamples == 800
    with pytest.raises(LimitExceeded):
        compare(a, b, dataclasses.replace(options, interval=IntervalOptions("percentile", 0.95, 801, 1)),
                kinds=SAMPLES)


def test_an_input_that_cannot_be_resampled_is_named_in_the_error():
    population = table([1.0, 2.0], [0.5, 0.5], probabilities=True)
    with pytest.raises(UncomputableInput) as raised:
        compare(from_array(np.array([1.0, 2.0, 3.0])), population, interval(), kinds=("samples", "table"))
    assert raised.value.detail.startswith("second input:")
    assert raised.value.locations[0].path == "options.interval"  # the edge adds "$."


# ----------------------------------------------------------------------------------------------
# Degenerate inputs: null plus a reason
# ----------------------------------------------------------------------------------------------


def test_ratios_and_standardized_quantiles_of_constant_data_are_null_with_a_reason():
    constant = from_array(np.full(10, 5.0))
    varied = from_array(np.array([1.0, 2.0, 4.0, 4.0, 5.0, 7.0, 9.0, 9.5, 10.0, 12.0]))
    result = compare(constant, varied, DescribeOptions(), kinds=SAMPLES)
    for name in ("variance", "standard_deviation", "interquartile_range", "median_absolute_deviation"):
        assert result.ratios[name].value is None
        assert f"ratios.{name}" in named(result, "ratio_undefined")
    # The reverse ratio (first varied, second constant) is a legitimate zero.
    reverse = compare(varied, constant, DescribeOptions(), kinds=SAMPLES)
    assert reverse.ratios["standard_deviation"].value == 0.0
    for i, quantile in enumerate(result.standardized_quantiles):
        assert quantile.z.first is None and quantile.z.second is not None and quantile.z.difference is None
        assert f"standardized_quantiles[{i}].z.first" in named(result, "difference_undefined")
    # The differences of constant data are still defined where the descriptor is.
    assert result.differences["mean"].value == varied.values.mean() - 5.0
    assert result.differences["skewness"].value is None
    assert "differences.skewness" in named(result, "difference_undefined")


def test_nothing_in_a_comparison_is_nan(two_samples):
    before, _ = two_samples
    result = of_arrays(before, np.full(12, 250.0), interval("bca", 300, 2))

    def walk(value, path):
        if isinstance(value, float):
            assert math.isfinite(value), path
        elif isinstance(value, dict):
            for k, v in value.items():
                walk(v, f"{path}.{k}")
        elif isinstance(value, list | tuple):
            for i, v in enumerate(value):
                walk(v, f"{path}[{i}]")
        elif dataclasses.is_dataclass(value) and not isinstance(value, resample.Replicates):
            for f in dataclasses.fields(value):
                walk(getattr(value, f.name), f"{path}.{f.name}")

    walk(result, "comparison")
    assert result.standardized_mean_difference.value is not None  # one input with spread is enough


# ----------------------------------------------------------------------------------------------
# Standard scores
# ----------------------------------------------------------------------------------------------


def test_scores_equal_the_hand_formulas(two_samples):
    """z = (x - mean) / s (sample sd, numpy ddof=1); robust z = (x - median) / MAD_normal with
    scipy 1.17.1 stats.median_abs_deviation(scale="normal")."""
    before, _ = two_samples
    description = describe(from_array(before), DescribeOptions(), kind="samples")
    points = [240.0, 250.0, 251.5, 262.25]
    scores = standardize(description, points)
    mean, sd = before.mean(), before.std(ddof=1)
    median, mad = np.median(before), stats.median_abs_deviation(before, scale="normal")
    assert scores.warnings == []
    assert scores.mean == pytest.approx(mean, rel=1e-14)
    assert scores.standard_deviation == pytest.approx(sd, rel=1e-13)
    for x, score in zip(points, scores.points):
        assert score.value == x
        assert score.z == pytest.approx((x - mean) / sd, rel=1e-12, abs=1e-12)
        assert score.robust_z == pytest.approx((x - median) / mad, rel=1e-12, abs=1e-12)


def test_scores_against_a_probability_table_use_its_population_sd():
    binomial = table([0.0, 1.0, 2.0], [0.25, 0.5, 0.25], probabilities=True)
    scores = standardize(describe(binomial, DescribeOptions(), kind="table"), [2.0])
    # Binomial(2, 1/2): mean 1, variance n p (1 - p) = 0.5 (Johnson, Kemp & Kotz 2005, ch. 3).
    assert scores.points[0].z == pytest.approx(1.0 / math.sqrt(0.5), rel=1e-14)


def test_scores_of_degenerate_references_are_null_with_a_reason():
    constant = describe(from_array(np.full(8, 3.0)), DescribeOptions(), kind="samples")
    scores = standardize(constant, [1.0, 3.0])
    assert all(s.z is None and s.robust_z is None for s in scores.points)
    assert {tuple(n.descriptors) for n in scores.warnings if n.code == "score_undefined"} == {
        ("scores.z",), ("scores.robust_z",)
    }
    # More than half the values equal: MAD is zero while the sd is not.
    tied = describe(from_array(np.array([2.0, 2, 2, 2, 2, 5, 9])), DescribeOptions(), kind="samples")
    scores = standardize(tied, [4.0])
    assert scores.points[0].z is not None and scores.points[0].robust_z is None
    assert [n.descriptors for n in scores.warnings] == [["scores.robust_z"]]
    assert "zero" in scores.warnings[0].message
    # One observation: no sd at all.
    single = describe(from_array(np.array([4.0])), DescribeOptions(), kind="samples")
    assert standardize(single, [4.0]).points[0].z is None
