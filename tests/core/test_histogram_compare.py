"""Comparisons of binned data on different edges (tailgauge.core.compare.two_sample) and of histograms.

Reference: scipy.stats.chi2_contingency (scipy as pinned in pyproject.toml) on the counts coarsened
by hand here to the cells between the edges both inputs share; the quantile shifts against each
side's grouped quantiles described alone (the shift is their difference by definition).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from tailgauge.core import DescribeOptions, IntervalOptions, compare, describe, from_array, from_bins, from_table
from tailgauge.core import histograms

# Two scrapes of one service's latency in ms, before and after a change of bucket layout.
OLD_EDGES = [0.0, 10.0, 25.0, 50.0, 100.0, 250.0, 500.0, 1000.0]
OLD_COUNTS = [40.0, 120.0, 210.0, 160.0, 50.0, 14.0, 6.0]
NEW_EDGES = [0.0, 5.0, 10.0, 20.0, 50.0, 75.0, 100.0, 300.0, 500.0, 1000.0]
NEW_COUNTS = [10.0, 25.0, 70.0, 230.0, 90.0, 60.0, 50.0, 9.0, 4.0]


def test_bins_on_different_edges_are_tested_on_their_common_coarsening():
    result = compare(from_bins(OLD_EDGES, OLD_COUNTS), from_bins(NEW_EDGES, NEW_COUNTS), DescribeOptions(),
                     kinds=("bins", "bins"))
    # Edges both share: 0, 10, 50, 100, 500, 1000 -> cells (0,10], (10,50], (50,100], (100,500], (500,1000].
    coarse_old = [40.0, 120.0 + 210.0, 160.0, 50.0 + 14.0, 6.0]
    coarse_new = [10.0 + 25.0, 70.0 + 230.0, 90.0 + 60.0, 50.0 + 9.0, 4.0]
    reference = stats.chi2_contingency(np.array([coarse_old, coarse_new]), correction=False)
    test = result.distribution_test
    assert test.cell_edges == [0.0, 10.0, 50.0, 100.0, 500.0, 1000.0]
    assert test.statistic == pytest.approx(reference.statistic, rel=1e-12)
    assert test.p_value == pytest.approx(reference.pvalue, rel=1e-10)
    assert test.degrees_of_freedom == reference.dof == 4
    assert any(w.code == "bins_coarsened" for w in result.warnings)


def test_bins_on_the_same_edges_are_tested_bin_by_bin_without_a_coarsening_warning():
    result = compare(from_bins(OLD_EDGES, OLD_COUNTS), from_bins(OLD_EDGES, OLD_COUNTS[::-1]), DescribeOptions(),
                     kinds=("bins", "bins"))
    reference = stats.chi2_contingency(np.array([OLD_COUNTS, OLD_COUNTS[::-1]]), correction=False)
    assert result.distribution_test.statistic == pytest.approx(reference.statistic, rel=1e-12)
    assert not any(w.code == "bins_coarsened" for w in result.warnings)


def test_observations_are_counted_into_the_bins_cells_upper_edges_included():
    values = np.array([0.0, 3.0, 10.0, 10.5, 24.0, 25.0, 26.0, 60.0, 99.0, 120.0, 700.0, 1200.0, -4.0])
    result = compare(from_bins(OLD_EDGES, OLD_COUNTS), from_array(values), DescribeOptions(), kinds=("bins", "samples"))
    # Cells cut at the bins' edges, each including its upper edge; 0.0 is on the closed lowest edge, so
    # it counts in the first bin; -4 lies below every bin and 1200 above.
    # cells (-inf, 0], (0, 10], (10, 25], (25, 50], (50, 100], (100, 250], (250, 500], (500, 1000], (1000, inf)
    sample_cells = [
        1.0,  # -4
        3.0,  # 0 (closed lowest edge), 3, 10
        3.0,  # 10.5, 24, 25
        1.0,  # 26
        2.0,  # 60, 99
        1.0,  # 120
        0.0,
        1.0,  # 700
        1.0,  # 1200
    ]
    bins_cells = [0.0, *OLD_COUNTS, 0.0]
    table = np.array([bins_cells, sample_cells])
    table = table[:, table.sum(axis=0) > 0]
    reference = stats.chi2_contingency(table, correction=False)
    test = result.distribution_test
    assert test.statistic == pytest.approx(reference.statistic, rel=1e-12)
    assert test.p_value == pytest.approx(reference.pvalue, rel=1e-10)
    assert test.cell_edges == OLD_EDGES


def test_no_test_against_a_probability_table_with_its_reason():
    table = from_table(np.array([5.0, 30.0]), np.array([0.5, 0.5]), probabilities=True, normalise=False)
    test = compare(from_bins(OLD_EDGES, OLD_COUNTS), table, DescribeOptions(), kinds=("bins", "table")).distribution_test
    assert test.statistic is None and "probability table" in test.reason


def test_quantile_shifts_on_different_edges_are_differences_of_grouped_quantiles_with_intervals():
    options = DescribeOptions(probabilities=(0.5, 0.9, 0.99),
                              interval=IntervalOptions(method="percentile", level=0.9, resamples=400, seed=8))
    first = histograms.from_explicit(OLD_EDGES, [0.0, *OLD_COUNTS, 0.0], minimum=0.4, maximum=990.0)
    second = histograms.from_cumulative(NEW_EDGES[1:], list(np.cumsum(NEW_COUNTS)), lower_bound=0.0)
    result = compare(first, second, options, kinds=("histogram", "histogram"))
    alone = [describe(data, DescribeOptions(probabilities=options.probabilities), kind="histogram")
             for data in (first, second)]
    for i, shift in enumerate(result.quantile_shifts):
        expected = alone[1].quantiles[i].value - alone[0].quantiles[i].value
        assert shift.value == pytest.approx(expected, rel=1e-12)
        assert shift.interval is not None and shift.interval.low <= shift.interval.high
    assert result.distribution_test.cell_edges is not None


def test_an_exact_mean_beside_an_open_bin_is_contrasted_without_an_interval():
    # The first scrape's +Inf bucket holds data: its mean is exact from the sum, but its resamples
    # (bins at placeholder values) are not, so the difference of means gets no bootstrap interval.
    first = histograms.from_cumulative([10.0, 50.0, 100.0, None], [30, 80, 95, 100], lower_bound=0.0, total=4200.0)
    second = histograms.from_explicit([10.0, 50.0, 100.0], [0, 25, 60, 15], total=6200.0, minimum=12.0, maximum=180.0)
    options = DescribeOptions(interval=IntervalOptions(method="percentile", level=0.95, resamples=300, seed=2))
    result = compare(first, second, options, kinds=("histogram", "histogram"))
    assert result.differences["mean"].value == pytest.approx(6200.0 / 100 - 4200.0 / 100, rel=1e-12)
    assert result.differences["mean"].interval is None
    assert result.differences["median"].interval is not None
    assert any(w.code == "interval_not_offered" and "mean" in " ".join(w.descriptors) for w in result.warnings)


def test_bins_against_samples_shift_each_sides_own_quantiles_with_intervals():
    rng = np.random.default_rng(41)
    sample = from_array(np.round(rng.lognormal(np.log(60.0), 0.5, 300), 1))
    bins = from_bins(OLD_EDGES, OLD_COUNTS)
    options = DescribeOptions(probabilities=(0.25, 0.5, 0.9),
                              interval=IntervalOptions(method="bca", level=0.95, resamples=500, seed=9))
    result = compare(bins, sample, options, kinds=("bins", "samples"))
    plain = DescribeOptions(probabilities=options.probabilities)
    grouped = describe(bins, plain, kind="bins").quantiles  # interpolated within bins
    typed = describe(sample, plain, kind="samples").quantiles  # Hyndman & Fan type 7
    for shift, g, t in zip(result.quantile_shifts, grouped, typed):
        assert shift.value == pytest.approx(t.value - g.value, rel=1e-12)
        assert shift.interval is not None and shift.interval.low < shift.value < shift.interval.high
    assert result.distribution_test.test == "chi_square_homogeneity" and result.distribution_test.p_value is not None


@pytest.mark.parametrize("seed", range(8))
def test_random_cumulative_histograms_equal_their_bins(seed):
    # OpenMetrics: bucket le=u_i holds c_i - c_(i-1); random bounds and counts, zeros included.
    rng = np.random.default_rng(seed)
    k = int(rng.integers(2, 30))
    bounds = np.cumsum(rng.uniform(0.1, 5.0, k)).round(3)
    counts = rng.integers(0, 40, k).astype(float)
    counts[int(rng.integers(0, k))] += 1.0
    top_open = bool(rng.integers(0, 2))
    upper = [float(b) for b in bounds] + ([None] if top_open else [])
    counts_all = list(counts) + ([float(rng.integers(0, 3))] if top_open else [])
    options = DescribeOptions(probabilities=(0.1, 0.5, 0.9))
    a = describe(histograms.from_cumulative(upper, list(np.cumsum(counts_all)), lower_bound=0.0), options,
                 kind="histogram")
    b = describe(from_bins([0.0, *upper], counts_all), options, kind="bins")
    assert {n: d.value for n, d in a.descriptors.items()} == {n: d.value for n, d in b.descriptors.items()}
    assert a.quantiles == b.quantiles and a.modes == b.modes
