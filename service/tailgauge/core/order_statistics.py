"""Order statistics of the weighted form: quantiles (Hyndman & Fan types 1-9), median, MAD, modes.

Every function reads the data sorted once (``WeightedData.sorted_values`` or its merged
``support``). For frequency weights the ``j``-th order statistic is the one of the equivalent
repeated sample, read from cumulative weights without expanding anything.

References
----------
R. J. Hyndman and Y. Fan, "Sample quantiles in statistical packages", The American
Statistician 50(4), 361-365, 1996.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from tailgauge.core.weighted import WeightedData, WeightMeaning

QUANTILE_TYPE_NAMES = {
    1: "inverse of the empirical distribution function",
    2: "inverse of the empirical distribution function, averaged at discontinuities",
    3: "nearest even order statistic",
    4: "linear interpolation of the empirical distribution function",
    5: "piecewise linear, knots at (k - 0.5)/n",
    6: "piecewise linear, knots at k/(n + 1)",
    7: "piecewise linear, knots at (k - 1)/(n - 1)",
    8: "piecewise linear, approximately median-unbiased",
    9: "piecewise linear, approximately unbiased for normal data",
}

# m(p) of Hyndman & Fan (1996), p. 363, for the continuous types: h = n p + m(p).
_CONTINUOUS_OFFSET = {
    4: lambda p: np.zeros_like(p),
    5: lambda p: np.full_like(p, 0.5),
    6: lambda p: p,
    8: lambda p: (p + 1.0) / 3.0,
    9: lambda p: p / 4.0 + 3.0 / 8.0,
}

# 1 / Phi^{-1}(3/4): makes the MAD a consistent estimator of the normal standard deviation.
NORMAL_MAD_FACTOR = 1.482602218505602


def order_statistic(data: WeightedData, ranks: np.ndarray) -> np.ndarray:
    """The ``ranks``-th smallest values (1-based), clamped to ``[1, n]`` as in H&F (1996)."""
    ranks = np.asarray(ranks, dtype=np.float64)
    if data.unit_sorted:
        ordered = data.sorted_values
        index = np.clip(ranks, 1, ordered.size).astype(np.intp) - 1
        return ordered[index]
    support = data.support
    clipped = np.clip(ranks, 1.0, support.total)
    index = np.searchsorted(support.cumulative, clipped, side="left")
    return support.values[np.minimum(index, support.values.size - 1)]


def _snap_to_whole(h: np.ndarray) -> np.ndarray:
    """Round ``h`` to the nearest whole number when it is within rounding error of it.

    A caller can only send the double nearest to k/n (0.07 for 7/100), and n p then lands an ulp
    either side of k; the discontinuous types 1-3 jump exactly there, so without this the 7th
    percentile of 100 values would sometimes be the 8th order statistic.
    """
    nearest = np.round(h)
    return np.where(np.abs(h - nearest) <= 4.0 * np.finfo(np.float64).eps * np.maximum(np.abs(h), 1.0), nearest, h)


def _interpolate(low: np.ndarray, high: np.ndarray, fraction: np.ndarray) -> np.ndarray:
    # Written so that equal neighbours give exactly that value and no difference overflows.
    return np.where(low == high, low, low * (1.0 - fraction) + high * fraction)


def quantiles(data: WeightedData, probabilities: np.ndarray, quantile_type: int) -> np.ndarray:
    """Sample quantiles of Hyndman & Fan (1996) type 1-9 at ``probabilities`` in [0, 1]."""
    p = np.asarray(probabilities, dtype=np.float64)
    n = data.total_weight
    if quantile_type in (1, 2):
        h = _snap_to_whole(n * p)
        j = np.floor(h)
        g = h - j
        upper = order_statistic(data, j + 1)
        if quantile_type == 1:
            return np.where(g > 0, upper, order_statistic(data, j))
        lower = order_statistic(data, j)
        return np.where(g > 0, upper, 0.5 * lower + 0.5 * upper)
    if quantile_type == 3:
        h = _snap_to_whole(n * p - 0.5)
        j = np.floor(h)
        g = h - j
        take_lower = (g == 0) & (np.mod(j, 2) == 0)
        return np.where(take_lower, order_statistic(data, j), order_statistic(data, j + 1))
    if quantile_type == 7:
        h = (n - 1.0) * p + 1.0
    else:
        h = n * p + _CONTINUOUS_OFFSET[quantile_type](p)
    j = np.floor(h)
    g = h - j
    return _interpolate(order_statistic(data, j), order_statistic(data, j + 1), g)


# Relative rounding allowance when a cumulative weight is compared with p * total.
_CDF_TOLERANCE = 1e-12


def cdf_quantiles(
    values: np.ndarray, cumulative: np.ndarray, probabilities: np.ndarray, *, average_at_steps: bool
) -> np.ndarray:
    """Quantiles of a weighted empirical distribution, free of the units of the weights.

    With ``F`` the cumulative weight divided by the total, the quantile is the smallest value
    with ``F(x) >= p`` (H&F type 1, the inverse of the distribution function); with
    ``average_at_steps`` a ``p`` that equals ``F`` at a value exactly gives the average of that
    value and the next (H&F type 2). For whole counts both equal H&F types 1 and 2 of the
    repeated sample. Cumulative sums carry rounding, so "exactly" allows a relative 1e-12.
    """
    p = np.asarray(probabilities, dtype=np.float64)
    total = cumulative[-1]
    target = p * total
    slack = _CDF_TOLERANCE * total
    index = np.minimum(np.searchsorted(cumulative, target - slack, side="left"), values.size - 1)
    result = values[index]
    if average_at_steps:
        at_step = (np.abs(cumulative[index] - target) <= slack) & (index + 1 < values.size)
        following = values[np.minimum(index + 1, values.size - 1)]
        result = np.where(at_step, 0.5 * result + 0.5 * following, result)
    return result


def median(data: WeightedData) -> float:
    """The median by the rule that suits the weights.

    Whole counts (and raw samples): the average of the two middle order statistics.
    Other frequency or reliability weights: the weighted-CDF rule with averaging at an exact
    half (H&F type 2 form). Probabilities: the smallest x with ``F(x) >= 1/2``.
    """
    if data.integer_weights:
        n = data.total_weight
        ranks = np.array([np.floor((n + 1.0) / 2.0), np.ceil((n + 1.0) / 2.0)])
        low, high = order_statistic(data, ranks)
        return float(0.5 * low + 0.5 * high)
    support = data.support
    return float(
        cdf_quantiles(
            support.values,
            support.cumulative,
            np.array([0.5]),
            average_at_steps=data.meaning is not WeightMeaning.PROBABILITY,
        )[0]
    )


def _kth_deviation(ordered: np.ndarray, split: int, centre: float, k: int) -> float:
    """The k-th smallest (from 0) of ``|x - centre|`` over sorted ``ordered``, in O(log n).

    The deviations below the centre (``centre - x``, x before ``split``, read backwards) and
    above it (``x - centre``) are two increasing runs; binary search finds how many of the k + 1
    smallest come from the first run. Python floats round like numpy's and turn overflow into
    inf, so each deviation is the one ``np.abs(x - centre)`` would give.
    """
    below, above = split, ordered.size - split

    def low(i: int) -> float:  # i-th deviation below the centre
        return centre - float(ordered[split - 1 - i])

    def high(j: int) -> float:  # j-th deviation above it
        return float(ordered[split + j]) - centre

    first, last = max(0, k + 1 - above), min(k + 1, below)
    while first < last:  # the smallest i whose own deviation need not be among them
        i = (first + last) // 2
        if low(i) < high(k - i):
            first = i + 1
        else:
            last = i
    taken = k + 1 - first
    return max(low(first - 1) if first > 0 else -math.inf, high(taken - 1) if taken > 0 else -math.inf)


def median_absolute_deviation(data: WeightedData, centre: float) -> float:
    """Median of ``|x - centre|`` (raw, not scaled), with the same median rule as :func:`median`.

    For a raw sample the two middle deviations are selected from the sorted data by binary
    search (O(log n), nothing n-long is built). For weighted data the deviations of the sorted
    support are two sorted runs (below and above the centre), merged by binary search rather
    than re-sorted.
    """
    if data.unit_sorted:
        ordered = data.sorted_values
        n = ordered.size
        split = int(np.searchsorted(ordered, centre, side="left"))
        lower = _kth_deviation(ordered, split, centre, (n - 1) // 2)
        upper = _kth_deviation(ordered, split, centre, n // 2)
        return float(0.5 * lower + 0.5 * upper)
    support = data.support
    split = int(np.searchsorted(support.values, centre, side="left"))
    with np.errstate(over="ignore"):
        below = (centre - support.values[:split])[::-1]
        above = support.values[split:] - centre
    below_weights = support.weights[:split][::-1]
    above_weights = support.weights[split:]
    merged = np.empty(below.size + above.size)
    merged_weights = np.empty_like(merged)
    below_at = np.arange(below.size) + np.searchsorted(above, below, side="left")
    above_at = np.arange(above.size) + np.searchsorted(below, above, side="right")
    merged[below_at], merged_weights[below_at] = below, below_weights
    merged[above_at], merged_weights[above_at] = above, above_weights
    cumulative = np.cumsum(merged_weights)
    if data.integer_weights:
        n = cumulative[-1]
        ranks = np.array([np.floor((n + 1.0) / 2.0), np.ceil((n + 1.0) / 2.0)])
        index = np.minimum(np.searchsorted(cumulative, ranks, side="left"), merged.size - 1)
        low, high = merged[index]
        return float(0.5 * low + 0.5 * high)
    return float(
        cdf_quantiles(
            merged,
            cumulative,
            np.array([0.5]),
            average_at_steps=data.meaning is not WeightMeaning.PROBABILITY,
        )[0]
    )


@dataclass(frozen=True)
class ModeSet:
    """Every value that attains the largest weight (count), in increasing order."""

    values: np.ndarray
    weight: float
    distinct_values: int
    tied: int


def modes(data: WeightedData) -> ModeSet:
    """All modes of the data: the support values whose weight equals the largest weight."""
    support = data.support
    top = float(np.max(support.weights))
    winners = support.values[support.weights == top]
    return ModeSet(
        values=winners, weight=top, distinct_values=int(support.values.size), tied=int(winners.size)
    )
