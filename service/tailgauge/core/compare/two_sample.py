"""Two-sample tests of equal distributions: Kolmogorov-Smirnov for counted observations,
Pearson's chi-square of homogeneity where either input is binned (bins or a histogram).

Binned data on different edges are compared on the common coarsening of both edge sets: the
cells between the finite edges both inputs share (with the two open cells beyond the outermost),
the coarsest partition in which every bin of each input lies in one cell. Binned data against
observations with whole counts: the observations are counted into the bins' own cells. Every
cell includes its upper edge, as histogram buckets do; an observation on the lowest edge of a
closed lowest bin counts in that bin.

Where no test applies (a probability table, reliability weights, fractional counts, no two
cells holding data) the test's statistic and p-value are ``None`` with its ``reason``.
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
    # The chi-square test's cells: the finite edges between them (None for other tests).
    cell_edges: list[float] | None = None


def distribution_test(first: WeightedData, second: WeightedData, notes: Warnings) -> DistributionTest:
    """Kolmogorov-Smirnov for observations with whole counts; chi-square when either input is binned."""
    if first.binned or second.binned:
        for data, side in ((first, "first"), (second, "second")):
            if not data.binned and (reason := _not_counted(data, side, "chi_square_homogeneity")):
                return reason
        return _chi_square(first, second, notes)
    for data, side in ((first, "first"), (second, "second")):
        if reason := _not_counted(data, side, "kolmogorov_smirnov"):
            return reason
    return _kolmogorov_smirnov(first, second, notes)


def _not_counted(data: WeightedData, side: str, test: str) -> DistributionTest | None:
    """No test, with the reason, when ``data`` are not observations with whole counts."""
    if data.meaning is WeightMeaning.PROBABILITY:
        return _no_test(
            test,
            f"the {side} input is a probability table, a population with no sample size, so no "
            "sampling test applies",
        )
    if data.meaning is WeightMeaning.RELIABILITY:
        return _no_test(
            test,
            f"the {side} input has reliability weights, which give no count of observations for "
            "the test's null distribution",
        )
    if not data.integer_weights:
        return _no_test(test, f"the {side} input's weights are not whole counts of observations")
    return None


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


def _cell_counts(data: WeightedData, cuts: np.ndarray, lowest_closed: float | None) -> np.ndarray:
    """``data``'s counts in the cells (-inf, cuts[0]], (cuts[0], cuts[1]], ..., (cuts[-1], inf).

    A bin lies in the cell of its upper edge (every cut is one of its edges); an observation in
    the cell of its value, except one on ``lowest_closed`` (the binned input's lowest edge, when
    its lowest bin is closed), which counts in the cell above with the bin that holds it.
    """
    if data.binned:
        assert data.edges is not None and data.weights is not None
        where, weights = np.searchsorted(cuts, data.edges[1:], side="left"), data.weights
    else:
        support = data.support
        where, weights = np.searchsorted(cuts, support.values, side="left"), support.weights
        if lowest_closed is not None:
            where = where + (support.values == lowest_closed)
    return np.bincount(where, weights=weights, minlength=cuts.size + 1)


def _chi_square(first: WeightedData, second: WeightedData, notes: Warnings) -> DistributionTest:
    """Pearson's chi-square test of homogeneity on the 2 x m table of counts in common cells.

    The cells are cut at the finite edges both binned inputs share (a binned input against
    observations: at its own finite edges); columns empty in both are dropped. With bins on the
    same edges the cells are the bins themselves.
    """
    binned = [data for data in (first, second) if data.binned]
    finite = [data.edges[np.isfinite(data.edges)] for data in binned]  # type: ignore[index]
    cuts = finite[0] if len(finite) == 1 else np.intersect1d(finite[0], finite[1])
    lowest_closed = None
    if len(binned) == 1 and np.isfinite(binned[0].edges[0]):  # type: ignore[index]
        lowest_closed = float(binned[0].edges[0])  # type: ignore[index]
    if not all(data.integer_weights for data in binned):
        return _no_test("chi_square_homogeneity", "the bin counts are not whole numbers of observations")
    table = np.vstack([_cell_counts(data, cuts, lowest_closed) for data in (first, second)])
    table = table[:, np.any(table > 0.0, axis=0)]
    if table.shape[1] < 2:
        return _no_test(
            "chi_square_homogeneity",
            "every count of both inputs lies in one cell of the edges they share: nothing to compare",
        )
    if len(binned) == 2 and not np.array_equal(finite[0], finite[1]):
        notes.add(
            WarningCode.BINS_COARSENED,
            f"the inputs' bins have different edges: the test counts both in the {table.shape[1]} cells "
            f"between the {cuts.size} edges they share, coarser than the bins sent, so it sees only "
            "differences between those cells",
            ["distribution_test"],
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
        CHI_SQUARE_REFERENCE, None, [float(c) for c in cuts],
    )
