"""Quantiles, median and MAD of an unsorted raw sample by selection (``order_statistics.*_unsorted``).

The selection path must give the sorted path's numbers bit for bit (the same rules read the same
order statistics), for every Hyndman & Fan type, on random, tied, heavy-tailed and constant data,
every small size, and the probabilities 0 and 1. Below ``SORT_BELOW`` values, or for more than
``SELECT_AT_MOST`` positions, the path sorts a copy instead of selecting, so each comparison also
runs with both limits lifted to exercise the selection itself. numpy 2.4's ``np.quantile`` methods are the outside reference.

Weighted data's merged support, sorted with numpy's unstable argsort where ties allow, must be
what the stable argsort gave, bit for bit (last section).
"""

from __future__ import annotations

from fractions import Fraction

import numpy as np
import pytest
from tailgauge.core import order_statistics, weighted
from tailgauge.core.weighted import WeightedData, WeightMeaning, from_array

TYPES = range(1, 10)
# numpy's names for Hyndman & Fan's types (numpy.quantile documentation, numpy 2.4).
NUMPY_METHODS = {
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


@pytest.fixture(params=["as shipped", "always select"])
def path(request, monkeypatch) -> str:
    if request.param == "always select":
        monkeypatch.setattr(order_statistics, "SORT_BELOW", 0)
        monkeypatch.setattr(order_statistics, "SELECT_AT_MOST", 1 << 30)
    return request.param


def datasets(n: int, seed: int) -> dict[str, np.ndarray]:
    rng = np.random.default_rng(seed)
    return {
        "normal": rng.normal(3.0, 2.0, n),
        "tied": rng.integers(-2, 3, n).astype(np.float64),
        "cauchy": rng.standard_cauchy(n),
        "constant": np.full(n, 7.25),
        "decreasing": np.sort(rng.exponential(size=n))[::-1].copy(),
    }


def probabilities_for(n: int) -> np.ndarray:
    """0, 1, every k/n, k/(n + 1) and (k - 1/2)/n (where the discontinuous types jump), and a few
    arbitrary ones."""
    k = np.arange(0, n + 1)
    return np.concatenate(([0.0, 1.0, 0.01, 0.25, 0.5, 0.75, 0.99, 1e-300], k / n, k / (n + 1), np.clip((k - 0.5) / n, 0, 1)))


def same_bits(a, b) -> bool:
    return np.asarray(a, dtype=np.float64).tobytes() == np.asarray(b, dtype=np.float64).tobytes()


@pytest.mark.parametrize("n", range(1, 21))
def test_small_sizes_match_the_sorted_path_exactly(n, path):
    p = probabilities_for(n)
    for name, x in datasets(n, seed=n).items():
        kept = x.copy()
        sorted_data = from_array(x)
        for quantile_type in TYPES:
            expected = order_statistics.quantiles(sorted_data, p, quantile_type)
            got = order_statistics.quantiles_unsorted(x, p, quantile_type)
            assert same_bits(got, expected), (name, n, quantile_type)
        median = order_statistics.median(sorted_data)
        assert same_bits(order_statistics.median_unsorted(x), median), (name, n)
        assert same_bits(
            order_statistics.mad_unsorted(x, median), order_statistics.median_absolute_deviation(sorted_data, median)
        ), (name, n)
        assert same_bits(x, kept), "the caller's array was reordered"


@pytest.mark.parametrize("n", [16_383, 16_384, 20_000, 100_001])
def test_large_samples_match_the_sorted_path_exactly(n, path):
    # From 2**14 values on, the path selects (np.partition); both sides of the switch are here.
    p = np.concatenate(([0.0, 1.0], np.array([0.01, 0.05, 0.1, 0.25, 0.5, 0.75, 0.9, 0.95, 0.99]), np.arange(1, 8) / 8))
    for name, x in datasets(n, seed=n).items():
        sorted_data = from_array(x)
        for quantile_type in TYPES:
            expected = order_statistics.quantiles(sorted_data, p, quantile_type)
            assert same_bits(order_statistics.quantiles_unsorted(x, p, quantile_type), expected), (name, quantile_type)
        median = order_statistics.median(sorted_data)
        assert same_bits(order_statistics.median_unsorted(x), median), name
        assert same_bits(
            order_statistics.mad_unsorted(x, median), order_statistics.median_absolute_deviation(sorted_data, median)
        ), name


def test_heavy_tails_with_huge_and_tiny_magnitudes(path):
    """Values near the float64 limits: the deviations overflow to inf exactly as the sorted path's."""
    rng = np.random.default_rng(1996)
    x = np.concatenate((rng.standard_cauchy(40) * 1e300, [1.7e308, -1.7e308, 5e-324, -5e-324, 1e-310]))
    rng.shuffle(x)
    sorted_data = from_array(x)
    p = probabilities_for(x.size)
    for quantile_type in TYPES:
        assert same_bits(
            order_statistics.quantiles_unsorted(x, p, quantile_type), order_statistics.quantiles(sorted_data, p, quantile_type)
        ), quantile_type
    for centre in (order_statistics.median(sorted_data), 1.7e308, -1e308, 0.0):
        assert same_bits(
            order_statistics.mad_unsorted(x, centre), order_statistics.median_absolute_deviation(sorted_data, centre)
        ), centre


def test_against_numpy_quantile_methods():
    """numpy implements the nine types independently. Away from probabilities where n p is a
    whole number (there our types 1-3 first round n p to the whole number it is meant to be, see
    ``order_rules.snap_to_whole``) the discontinuous types agree exactly; the continuous ones to a
    few ulps (numpy interpolates as ``a + (b - a) t`` or ``b - (b - a)(1 - t)``, we as
    ``a (1 - t) + b t``)."""
    rng = np.random.default_rng(365)
    compared = {t: 0 for t in TYPES}
    for n in list(range(1, 41)) + [1000, 20_001]:
        for x in (rng.normal(0.0, 10.0, n), rng.integers(0, 6, n).astype(np.float64), rng.standard_t(1.5, n)):
            p = rng.uniform(size=30)
            whole = np.array([(Fraction(float(q)) * n).denominator == 1 for q in p]) | (
                np.abs(n * p - np.round(n * p)) < 1e-6
            )
            p = np.concatenate((p[~whole], [0.0, 1.0]))
            scale = float(np.max(np.abs(x)))
            for quantile_type, method in NUMPY_METHODS.items():
                got = order_statistics.quantiles_unsorted(x, p, quantile_type)
                reference = np.quantile(x, p, method=method)
                if quantile_type <= 3:
                    np.testing.assert_array_equal(got, reference, err_msg=f"type {quantile_type}, n = {n}")
                else:
                    np.testing.assert_allclose(got, reference, rtol=0, atol=8 * np.finfo(float).eps * scale,
                                               err_msg=f"type {quantile_type}, n = {n}")
                compared[quantile_type] += p.size
    assert min(compared.values()) > 1000


def test_median_and_mad_against_numpy():
    rng = np.random.default_rng(42)
    for n in (1, 2, 3, 10, 11, 16_384, 50_001):
        x = rng.lognormal(size=n)
        median = order_statistics.median_unsorted(x)
        assert median == pytest.approx(float(np.median(x)), rel=2e-16, abs=0)
        assert order_statistics.mad_unsorted(x, median) == pytest.approx(
            float(np.median(np.abs(x - median))), rel=2e-16, abs=0
        )


def test_summary_is_the_separate_answers_from_one_selection(path):
    rng = np.random.default_rng(7)
    p = np.array([0.0, 0.1, 0.25, 0.5, 0.75, 0.9, 1.0])
    for n in (1, 2, 5, 64, 20_000):
        for x in (rng.normal(size=n), rng.integers(0, 3, n).astype(np.float64)):
            sorted_data = from_array(x)
            for quantile_type in (1, 2, 7, 9):
                summary = order_statistics.summary_unsorted(x, p, quantile_type, median=True, mad=True, extremes=True)
                assert same_bits(summary.quantiles, order_statistics.quantiles(sorted_data, p, quantile_type))
                assert same_bits(summary.median, order_statistics.median(sorted_data))
                assert same_bits(
                    summary.median_absolute_deviation,
                    order_statistics.median_absolute_deviation(sorted_data, summary.median),
                )
                assert summary.minimum == sorted_data.sorted_values[0] == np.min(x)
                assert summary.maximum == sorted_data.sorted_values[-1] == np.max(x)


def test_few_positions_of_a_long_sample_are_selected_many_are_sorted():
    x = np.random.default_rng(5).normal(size=order_statistics.SORT_BELOW)
    n = x.size
    median_and_quartiles = order_statistics.Selection(x, np.array([0, n // 4, n // 2, n // 2 + 1, 3 * n // 4, n - 1]))
    assert median_and_quartiles.sorted is None
    nine = order_statistics.Selection(x, np.arange(1, 1 + order_statistics.SELECT_AT_MOST + 1))
    assert nine.sorted is not None and np.array_equal(nine.sorted, np.sort(x))
    assert order_statistics.Selection(x[:-1], np.array([5])).sorted is not None  # short: sorted


def test_summary_leaves_out_what_was_not_asked_for():
    x = np.random.default_rng(3).normal(size=100)
    only_mad = order_statistics.summary_unsorted(x, None, 7, mad=True)
    assert only_mad.quantiles is None and only_mad.median is None and only_mad.minimum is None
    assert only_mad.median_absolute_deviation == order_statistics.mad_unsorted(x, order_statistics.median_unsorted(x))
    extremes = order_statistics.summary_unsorted(x, None, 7, extremes=True)
    assert (extremes.minimum, extremes.maximum) == (float(np.min(x)), float(np.max(x)))
    assert extremes.median is None and extremes.median_absolute_deviation is None
    quantiles = order_statistics.summary_unsorted(x, np.array([0.5]), 7)
    assert quantiles.quantiles.tolist() == [order_statistics.median_unsorted(x)]
    assert quantiles.median is None and quantiles.maximum is None


def test_a_selection_reads_only_what_it_selected(path):
    x = np.random.default_rng(11).normal(size=30_000)
    selection = order_statistics.Selection(x, np.array([5, 29_999, 0, 5]))
    ordered = np.sort(x)
    assert selection[np.array([[0, 5, 29_999]])].tolist() == [ordered[[0, 5, 29_999]].tolist()]
    with pytest.raises(IndexError):
        selection[np.array([6])]


def test_the_selection_matches_sorting_at_every_position_of_a_segment(monkeypatch):
    """Adjacent, first and last positions exercise each branch of the selection (the middle
    partition, a segment's minimum and its maximum)."""
    monkeypatch.setattr(order_statistics, "SELECT_AT_MOST", 1 << 30)
    rng = np.random.default_rng(8)
    x = rng.integers(0, 1000, 40_000).astype(np.float64)
    ordered = np.sort(x)
    for positions in (
        np.arange(40_000 - 30, 40_000),
        np.arange(0, 30),
        np.array([0, 1, 2, 19_999, 20_000, 20_001, 39_997, 39_998, 39_999]),
        np.unique(rng.integers(0, 40_000, 200)),
    ):
        selection = order_statistics.Selection(x, positions)
        assert selection.sorted is None, "selected, not sorted"
        assert np.array_equal(selection.found, ordered[np.unique(positions)])


def test_mad_of_a_nan_centre_is_nan_as_sorted():
    x = np.arange(5.0)
    assert np.isnan(order_statistics.mad_unsorted(x, float("nan")))
    assert np.isnan(order_statistics.median_absolute_deviation(from_array(x), float("nan")))


# --- the merged support of weighted data without a stable argsort ----------------------------


def stable_support(values: np.ndarray, weights: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The support as a stable argsort gives it: equal values merged in input order."""
    order = np.argsort(values, kind="stable")
    ordered = values[order]
    starts = np.flatnonzero(np.concatenate(([True], ordered[1:] != ordered[:-1])))
    return ordered[starts], np.add.reduceat(weights[order], starts)


@pytest.mark.parametrize("n", [1, 7, weighted.STABLE_SORT_UP_TO, weighted.STABLE_SORT_UP_TO + 1, 20_000])
@pytest.mark.parametrize("meaning", [WeightMeaning.FREQUENCY, WeightMeaning.RELIABILITY, WeightMeaning.PROBABILITY])
def test_weighted_support_is_the_stable_sorts_bit_for_bit(n, meaning):
    """Fractional weights of tied values summed in another order would round differently
    (0.1 + 0.2 + 0.3 != 0.3 + 0.2 + 0.1), and +0 and -0 tie: every case must match."""
    rng = np.random.default_rng(n)
    for label, values in {
        "continuous": rng.normal(size=n),
        "tied": rng.integers(0, 30, n).astype(np.float64),
        "signed zeros": rng.choice([-0.0, 0.0, 1.5, -2.0], n),
    }.items():
        for weights in (rng.integers(1, 6, n).astype(np.float64), rng.uniform(0.0, 1.0, n) + 1e-3, np.full(n, 0.1)):
            if meaning is WeightMeaning.PROBABILITY:
                weights = weights / weights.sum()
            data = WeightedData(values=values, weights=weights, meaning=meaning, ordered=False)
            expected_values, expected_weights = stable_support(values, weights)
            support = data.support
            assert same_bits(support.values, expected_values), (label, meaning)
            assert same_bits(support.weights, expected_weights), (label, meaning)
            assert same_bits(support.cumulative, np.cumsum(expected_weights)), (label, meaning)


def test_the_order_of_fractional_weights_matters_so_the_test_above_can_fail():
    # Three tied values with weights whose float sum depends on the order of addition.
    weights = np.array([0.1, 0.2, 0.3])
    assert (0.1 + 0.2) + 0.3 != (0.3 + 0.2) + 0.1
    values = np.zeros(3)
    assert np.add.reduceat(weights, [0])[0] != np.add.reduceat(weights[::-1], [0])[0]
    assert stable_support(values, weights)[1][0] == np.add.reduceat(weights, [0])[0]
