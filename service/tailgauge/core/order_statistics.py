"""Order statistics of the weighted form: quantiles (Hyndman & Fan types 1-9), median, MAD, modes.

Every function reads the data sorted once (``WeightedData.sorted_values`` or its merged
``support``). For frequency weights the ``j``-th order statistic is the one of the equivalent
repeated sample, read from cumulative weights without expanding anything. The rules themselves
live in :mod:`tailgauge.core.order_rules`, written once for one row (here) and for the
bootstrap's many rows; this module applies them to the data as one row.

References
----------
R. J. Hyndman and Y. Fan, "Sample quantiles in statistical packages", The American
Statistician 50(4), 361-365, 1996.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from tailgauge.core import deviation_rules, order_rules
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

# 1 / Phi^{-1}(3/4): makes the MAD a consistent estimator of the normal standard deviation.
NORMAL_MAD_FACTOR = 1.482602218505602


def rows_of(data: WeightedData) -> order_rules.Rows:
    """The data as one row of the order-statistic rules (:mod:`tailgauge.core.order_rules`),
    over ``data.sorted_values`` (a raw sample) or the merged ``data.support``."""
    if data.unit_sorted:
        return order_rules.SortedRow(data.sorted_values.size)
    support = data.support
    return order_rules.CumulativeRow(support.weights, support.cumulative)


def order_statistic(data: WeightedData, ranks: np.ndarray) -> np.ndarray:
    """The ``ranks``-th smallest values (1-based), clamped to ``[1, n]`` as in H&F (1996)."""
    ranks = np.asarray(ranks, dtype=np.float64)
    return order_rules.order_statistic(rows_of(data), data.sorted_values, ranks[None, :])[0]


def quantiles(data: WeightedData, probabilities: np.ndarray, quantile_type: int) -> np.ndarray:
    """Sample quantiles of Hyndman & Fan (1996) type 1-9 at ``probabilities`` in [0, 1], for
    whole counts (:func:`cdf_quantiles` serves other weights)."""
    return order_rules.hf_quantiles(rows_of(data), data.sorted_values, probabilities, quantile_type)[0]


def cdf_quantiles(
    values: np.ndarray,
    weights: np.ndarray,
    probabilities: np.ndarray,
    *,
    average_at_steps: bool,
    cumulative: np.ndarray | None = None,
) -> np.ndarray:
    """Quantiles of a weighted empirical distribution given by sorted ``values`` (each holding
    weight), their ``weights`` and (when at hand) ``cumulative`` weights: H&F type 1, or type 2
    with ``average_at_steps`` (see :func:`tailgauge.core.order_rules.cdf_quantiles`)."""
    row = order_rules.CumulativeRow(weights, cumulative)
    return order_rules.cdf_quantiles(row, values, probabilities, average=average_at_steps)[0]


def median(data: WeightedData) -> float:
    """The median by the rule that suits the weights.

    Whole counts (and raw samples): the average of the two middle order statistics.
    Other frequency or reliability weights: the weighted-CDF rule with averaging at an exact
    half (H&F type 2 form). Probabilities: the smallest x with ``F(x) >= 1/2``.
    """
    rule = order_rules.median(
        rows_of(data),
        data.sorted_values,
        whole=data.integer_weights,
        average=data.meaning is not WeightMeaning.PROBABILITY,
    )
    return float(rule[0])


def median_absolute_deviation(data: WeightedData, centre: float) -> float:
    """Median of ``|x - centre|`` (raw, not scaled), with the same median rule as :func:`median`.

    For a raw sample the two middle deviations are selected from the sorted data by binary
    search (O(log n), nothing n-long is built). For weighted data the deviations of the sorted
    support are two sorted runs (below and above the centre), merged by binary search rather
    than re-sorted.
    """
    rule = deviation_rules.median_absolute_deviations(
        rows_of(data),
        data.sorted_values,
        np.array([centre], dtype=np.float64),
        whole=data.integer_weights,
        average=data.meaning is not WeightMeaning.PROBABILITY,
    )
    return float(rule[0])


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
