"""plot_data: the histogram, outcomes and distribution function every figure is drawn from.

Outside references: numpy.histogram (counts in [a, b) bins, the last closed) and numpy's own
Freedman-Diaconis bin rule (numpy.histogram_bin_edges(..., bins="fd"), numpy 2.4.6); the
distribution function is checked against a naive count written here.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from tailgauge.core import from_bins, from_samples, from_table
from tailgauge.figures import plot_data
from tailgauge.figures.plot_data import FEW_DISTINCT, MAX_DRAWN_BINS, MAX_HISTOGRAM_BINS, MAX_POINTS


def _naive_cdf(values: np.ndarray, weights: np.ndarray, x: float) -> float:
    return float(weights[values <= x].sum() / weights.sum())


def test_histogram_counts_equal_numpys_on_the_same_edges():
    values = np.random.default_rng(3).lognormal(0.0, 0.8, size=5000)
    found = plot_data(from_samples(values.tolist(), omit_missing=False), "samples")
    edges = np.asarray(found.histogram.edges)
    expected, _ = np.histogram(values, bins=edges)
    assert found.histogram.counts == expected.astype(float).tolist()
    assert found.outcomes is None and found.weights == "count"


def test_the_bin_count_follows_freedman_diaconis_like_numpy():
    values = np.random.default_rng(4).normal(250.0, 1.1, size=20000)
    found = plot_data(from_samples(values.tolist(), omit_missing=False), "samples")
    numpys = np.histogram_bin_edges(values, bins="fd").size - 1
    # Our IQR is read from the distribution function (type 1), numpy's by type 7: at n = 20,000
    # they differ by far less than a bin.
    assert found.histogram.rule == "freedman_diaconis"
    assert abs((len(found.histogram.edges) - 1) - numpys) <= 1


def test_weighted_histogram_equals_numpys_weighted():
    rng = np.random.default_rng(5)
    values, weights = rng.gamma(2.0, 3.0, size=400), rng.integers(1, 9, size=400).astype(float)
    found = plot_data(from_samples(values.tolist(), omit_missing=False, weights=weights.tolist()), "samples")
    expected, _ = np.histogram(values, bins=np.asarray(found.histogram.edges), weights=weights)
    np.testing.assert_allclose(found.histogram.counts, expected, rtol=1e-12)


def test_bins_are_capped_and_a_zero_iqr_falls_back_to_sturges():
    spread = np.concatenate((np.full(900, 1.0), np.linspace(-1e6, 1e6, 100)))
    found = plot_data(from_samples(spread.tolist(), omit_missing=False), "samples")
    assert found.histogram.rule == "sturges"
    assert len(found.histogram.edges) - 1 == math.ceil(math.log2(1000)) + 1
    wide = np.concatenate((np.random.default_rng(6).normal(size=10000), [1e9]))
    capped = plot_data(from_samples(wide.tolist(), omit_missing=False), "samples")
    assert len(capped.histogram.edges) - 1 == MAX_HISTOGRAM_BINS


def test_few_distinct_values_are_drawn_one_bar_each_with_one_bin_per_outcome():
    values = [3.0, 1.0, 2.0, 2.0, 5.0, 1.0, 2.0]
    found = plot_data(from_samples(values, omit_missing=False), "samples")
    assert found.outcomes.values == [1.0, 2.0, 3.0, 5.0] and found.outcomes.weights == [2.0, 3.0, 1.0, 1.0]
    assert found.histogram.rule == "one_bin_per_outcome"
    assert found.histogram.edges == [0.5, 1.5, 2.5, 4.0, 6.0]
    many = plot_data(from_samples(list(range(FEW_DISTINCT + 1)), omit_missing=False), "samples")
    assert many.outcomes is None


def test_probability_tables_keep_their_outcomes():
    data = from_table(np.array([0.0, 1000.0, 5000.0, 40000.0]), np.array([0.55, 0.30, 0.12, 0.03]),
                      probabilities=True, normalise=False)
    found = plot_data(data, "table")
    assert found.weights == "probability"
    assert found.outcomes.weights == [0.55, 0.30, 0.12, 0.03]
    assert found.distribution_function.probabilities == pytest.approx([0.55, 0.85, 0.97, 1.0], abs=1e-15)


def test_small_data_give_every_step_of_the_distribution_function():
    values = np.random.default_rng(7).integers(0, 300, size=1000).astype(float)
    found = plot_data(from_samples(values.tolist(), omit_missing=False), "samples").distribution_function
    assert found.exact and not found.grouped
    assert found.values == sorted(set(values.tolist()))
    for x, p in zip(found.values, found.probabilities):
        assert p == pytest.approx(_naive_cdf(values, np.ones_like(values), x), abs=1e-12)


def test_large_data_are_thinned_to_at_most_512_points_on_the_function():
    values = np.random.default_rng(8).normal(size=100_000)
    found = plot_data(from_samples(values.tolist(), omit_missing=False), "samples").distribution_function
    assert not found.exact and len(found.values) <= MAX_POINTS
    assert found.values[0] == values.min() and found.values[-1] == values.max() and found.probabilities[-1] == 1.0
    ordered = np.sort(values)
    for x, p in list(zip(found.values, found.probabilities))[::37]:
        assert p == np.searchsorted(ordered, x, side="right") / ordered.size
    # Between two kept points the function rises by less than 1/511, except at a kept point's own step.
    gaps = np.diff(found.probabilities)
    assert gaps.max() < 1.0 / 511 + 1.0 / values.size + 1e-12


def test_bins_as_sent_with_open_ends_and_density_for_unequal_widths():
    data = from_bins([0, 15, 30, 45, 60, 90, None], [12, 58, 41, 17, 9, 3])
    found = plot_data(data, "bins")
    assert found.histogram.edges == [0.0, 15.0, 30.0, 45.0, 60.0, 90.0, None]
    assert found.histogram.counts == [12.0, 58.0, 41.0, 17.0, 9.0, 3.0]
    assert found.histogram.rule == "bins_as_sent" and found.histogram.density
    function = found.distribution_function
    assert function.grouped and function.values == [0.0, 15.0, 30.0, 45.0, 60.0, 90.0]
    assert function.probabilities == pytest.approx(np.cumsum([0, 12, 58, 41, 17, 9]) / 140.0, abs=1e-15)
    equal = plot_data(from_bins([0, 1, 2, 3], [1, 2, 3]), "bins")
    assert not equal.histogram.density


def test_many_bins_are_regrouped_keeping_totals_and_open_bins():
    counts = np.random.default_rng(9).integers(0, 50, size=5000).astype(float)
    edges = [None, *np.arange(5000 - 1, dtype=float).tolist(), None]
    found = plot_data(from_bins(edges, counts.tolist()), "bins").histogram
    assert found.rule == "bins_regrouped" and len(found.counts) <= MAX_DRAWN_BINS
    assert found.edges[0] is None and found.edges[-1] is None
    assert found.counts[0] == counts[0] and found.counts[-1] == counts[-1]
    assert sum(found.counts) == counts.sum()
    assert set(found.edges[1:-1]) <= set(edges[1:-1])
