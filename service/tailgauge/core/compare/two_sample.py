"""Two-sample tests of equal distributions: Kolmogorov-Smirnov for counted observations,
Pearson's chi-square of homogeneity for bins on the same edges.

Where no test applies (a probability table, reliability weights, fractional counts, bins against
observations, bins on other edges) the test's statistic and p-value are ``None`` with its
``reason``.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np
from scipy import stats

from tailgauge.core.compare.warnings import Warnings
from tailgauge.core.compare.vocabulary import CHI_SQUARE_REFERENCE, KS_REFERENCE
from tailgauge.core.weighted import WeightedData, WeightMeaning
from tailgauge.core.registry import WarningCode

# scipy's ks_2samp uses the exact null distribution up to this many observations per sample
# (its method="auto"); beyond it, Smirnov's asymptotic distribution, as scipy does.
KS_EXACT_LIMIT = 10_000
# Cochran's rule of thumb for the chi-square approximation: expected counts of at least 5.
SMALL_EXPECTED_COUNT = 5.0


@dataclass(frozen=True)
class DistributionTest:
    """A two-sample test of equal distributions: its statistic and p-value, or why there is none."""

    test: str
    statistic: float | None
    p_value: float | None
    method: str | None
    degrees_of_freedom: int | None
    reference: str
    reason: str | None


def distribution_test(first: WeightedData, second: WeightedData, notes: Warnings) -> DistributionTest:
    """Kolmogorov-Smirnov for observations with whole counts; chi-square for bins on the same edges."""
    if first.binned or second.binned:
        if not (first.binned and second.binned):
            return _no_test(
                "chi_square_homogeneity",
                "bins can only be tested against bins on the same edges (values within bins are unknown)",
            )
        return _chi_square(first, second, notes)
    for data, side in ((first, "first"), (second, "second")):
        if data.meaning is WeightMeaning.PROBABILITY:
            return _no_test(
                "kolmogorov_smirnov",
                f"the {side} input is a probability table, a population with no sample size, so no "
                "sampling test applies",
            )
        if data.meaning is WeightMeaning.RELIABILITY:
            return _no_test(
                "kolmogorov_smirnov",
                f"the {side} input has reliability weights, which give no count of observations for "
                "the test's null distribution",
            )
        if not data.integer_weights:
            return _no_test(
                "kolmogorov_smirnov", f"the {side} input's weights are not whole counts of observations"
            )
    return _kolmogorov_smirnov(first, second, notes)


def _no_test(test: str, reason: str) -> DistributionTest:
    reference = KS_REFERENCE if test == "kolmogorov_smirnov" else CHI_SQUARE_REFERENCE
    return DistributionTest(test, None, None, None, None, reference, reason)


def _kolmogorov_smirnov(first: WeightedData, second: WeightedData, notes: Warnings) -> DistributionTest:
    """Two-sided two-sample KS test; counts stand for repeated observations.

    Up to ``KS_EXACT_LIMIT`` observations per input: scipy.stats.ks_2samp on the repeated
    observations with its exact null distribution. Beyond: D = max |F1 - F2| over the union of
    the supports, exactly from the cumulative counts, and Smirnov's asymptotic p-value
    ``kstwo.sf(D, round(n m / (n + m)))`` -- what ks_2samp(method="asymp") computes.
    """
    a, b = first.support, second.support
    n, m = int(round(a.total)), int(round(b.total))
    if max(n, m) <= KS_EXACT_LIMIT:
        with warnings.catch_warnings(record=True) as caught:
            # scipy switches to the asymptotic distribution, with a RuntimeWarning, where the exact
            # computation fails in floating point; the method reported says which was used.
            warnings.simplefilter("always", RuntimeWarning)
            result = stats.ks_2samp(
                np.repeat(a.values, a.weights.astype(np.int64)),
                np.repeat(b.values, b.weights.astype(np.int64)),
                method="exact",
            )
        switched = any(issubclass(w.category, RuntimeWarning) for w in caught)
        statistic, p_value = float(result.statistic), float(result.pvalue)
        method = "asymptotic" if switched else "exact"
    else:
        union = np.union1d(a.values, b.values)

        def cdf(support, total):
            index = np.searchsorted(support.values, union, side="right") - 1
            return np.where(index >= 0, support.cumulative[np.maximum(index, 0)], 0.0) / total

        statistic = float(np.max(np.abs(cdf(a, n) - cdf(b, m))))
        larger, smaller = max(n, m), min(n, m)
        effective = np.round(larger * smaller / (larger + smaller))
        p_value = float(np.clip(stats.kstwo.sf(statistic, effective), 0.0, 1.0))
        method = "asymptotic"
    distinct = np.union1d(a.values, b.values).size
    if distinct < n + m:
        notes.add(
            WarningCode.DISTRIBUTION_TEST_TIES,
            f"the pooled observations hold ties ({distinct} distinct values among {n + m}); the "
            "Kolmogorov-Smirnov p-value assumes continuous data and is conservative (too large) for tied "
            "or discrete data",
            ["distribution_test"],
        )
    return DistributionTest("kolmogorov_smirnov", statistic, p_value, method, None, KS_REFERENCE, None)


def _bin_columns(data: WeightedData) -> np.ndarray:
    """Counts below the finite edges (open bin), in each closed bin, and above (open bin)."""
    assert data.edges is not None and data.weights is not None
    edges, weights = data.edges, data.weights
    open_low, open_high = bool(np.isinf(edges[0])), bool(np.isinf(edges[-1]))
    closed = weights[int(open_low): weights.size - int(open_high)]
    return np.concatenate(([weights[0] if open_low else 0.0], closed, [weights[-1] if open_high else 0.0]))


def _chi_square(first: WeightedData, second: WeightedData, notes: Warnings) -> DistributionTest:
    """Pearson's chi-square test of homogeneity on the 2 x k table of bin counts.

    The bins must share their finite edges; an open-ended bin present in one input only counts
    zero in the other (it holds nothing beyond that edge). Columns empty in both are dropped.
    """
    assert first.edges is not None and second.edges is not None
    if not np.array_equal(first.edges[np.isfinite(first.edges)], second.edges[np.isfinite(second.edges)]):
        return _no_test("chi_square_homogeneity", "the two inputs' bins have different edges")
    if not (first.integer_weights and second.integer_weights):
        return _no_test("chi_square_homogeneity", "the bin counts are not whole numbers of observations")
    table = np.vstack((_bin_columns(first), _bin_columns(second)))
    table = table[:, np.any(table > 0.0, axis=0)]
    if table.shape[1] < 2:
        return _no_test(
            "chi_square_homogeneity", "every count of both inputs lies in one bin: nothing to compare"
        )
    result = stats.chi2_contingency(table, correction=False)
    if float(np.min(result.expected_freq)) < SMALL_EXPECTED_COUNT:
        notes.add(
            WarningCode.CHI_SQUARE_SMALL_EXPECTED,
            f"some expected counts are below {SMALL_EXPECTED_COUNT:g} (smallest "
            f"{float(np.min(result.expected_freq)):.3g}): the chi-square approximation may be poor "
            "(Cochran 1954); merging sparse bins helps",
            ["distribution_test"],
        )
    return DistributionTest(
        "chi_square_homogeneity", float(result.statistic), float(result.pvalue), "pearson", int(result.dof),
        CHI_SQUARE_REFERENCE, None,
    )
