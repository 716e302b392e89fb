"""Two-sample tests of equal distributions (tailgauge.core.compare.two_sample) against scipy 1.17.1:
``stats.ks_2samp`` (exact and asymptotic) and ``stats.chi2_contingency`` (no continuity correction).

Every random generator is seeded; nothing here depends on timing.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from tailgauge.core import (
    DescribeOptions,
    WeightMeaning,
    compare,
    from_array,
    from_bins,
    from_samples,
    from_table,
)
from tailgauge.core.compare import KS_EXACT_LIMIT
from tests.core.comparison_cases import (  # noqa: F401 (two_samples is a fixture)
    SAMPLES,
    codes,
    two_samples,
    warned,
)


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
        # The edges shared are 0 and 3 only: one cell holds everything (other edges: test_histogram_compare.py).
        "different edges": (bins, other_edges, ("bins", "bins"), "one cell"),
        "fractional counts": (samples, fractional, ("samples", "table"), "whole counts"),
        "reliability weights": (reliability, samples, SAMPLES, "reliability"),
    }
    for label, (a, b, kinds, why) in cases.items():
        test = compare(a, b, DescribeOptions(), kinds=kinds).distribution_test
        assert test.statistic is None and test.p_value is None, label
        assert why in test.reason, (label, test.reason)
        assert test.reference, label
