"""Order statistics of the weighted form: quantiles (Hyndman & Fan types 1-9), median, MAD, modes.

Every function reads the data sorted once (``WeightedData.sorted_values`` or its merged
``support``), except the ``*_unsorted`` ones, which take only the order statistics a raw
sample's quantiles, median and MAD need (:class:`Selection`: ``np.partition`` for a few of
them, a sorted copy for many) and apply the same rules to them, so both give the same numbers. For frequency weights the ``j``-th order statistic is the one of the equivalent
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


# When a copy is sorted instead of selected from (numpy's vectorised sort is fast: 1e7 values
# in about 95 ms here, against about 40 ms to select one position and 130 ms for the 18 of nine
# quantiles): below this size, where the selection's Python steps dominate, ...
SORT_BELOW = 1 << 14
# ... and for more than this many positions strictly inside the sample (the ends cost one pass
# each). Measured at 1e6 and 1e7 values, random and tied: selection wins for the median and
# the quartiles, sorting from about six positions on.
SELECT_AT_MOST = 4


class Selection:
    """Chosen order statistics of an unsorted sample, indexed like the sorted sample.

    ``selection[index]`` is ``np.sort(values)[index]`` for positions (0-based) among
    ``positions``, so the rules of :mod:`tailgauge.core.order_rules`, which read the sorted
    values only at the positions of the ranks they need, read a selection the same way. A few
    positions of a long sample are selected (linear time); otherwise a copy is sorted, kept in
    ``sorted`` (``None`` after a selection) for rules that need more than these positions.
    """

    def __init__(self, values: np.ndarray, positions: np.ndarray) -> None:
        self.size = n = values.size
        self.positions = np.unique(np.asarray(positions, dtype=np.intp))
        interior = int(np.count_nonzero((self.positions > 0) & (self.positions < n - 1)))
        self.sorted: np.ndarray | None = None
        if n < SORT_BELOW or interior > SELECT_AT_MOST:
            self.sorted = np.sort(values, kind="quicksort")
            self.found = self.sorted[self.positions]
        else:
            self.found = _select(values, self.positions)

    @classmethod
    def of_ranks(cls, values: np.ndarray, ranks: np.ndarray) -> Selection:
        """The order statistics of ``ranks`` (1-based, clamped to ``[1, n]`` as in H&F 1996)."""
        row = order_rules.SortedRow(values.size)
        return cls(values, order_rules.order_statistic_index(row, np.asarray(ranks, dtype=np.float64)[None, :]))

    def __getitem__(self, index: np.ndarray) -> np.ndarray:
        where = np.searchsorted(self.positions, index)
        if not np.array_equal(self.positions[np.minimum(where, self.positions.size - 1)], index):
            raise IndexError("a position that was not selected")
        return self.found[where]


def _select(values: np.ndarray, positions: np.ndarray) -> np.ndarray:
    """``np.sort(values)[positions]`` (``positions`` increasing, unique) without sorting.

    One ``np.partition`` per position with a single ``kth`` (numpy's fast path: one call with
    many positions costs more than a sort), taken at the middle position of each segment so the
    segments halve; a position at a segment's end is the segment's minimum or maximum. Each
    partition copies its segment, so ``values`` is never reordered.
    """
    found = np.empty(positions.size)
    segments = [(values, 0, 0, positions.size)]  # array, its first position, positions [a, b)
    while segments:
        segment, offset, a, b = segments.pop()
        if a == b:
            continue
        if positions[a] == offset:
            found[a] = np.min(segment)
            segments.append((segment, offset, a + 1, b))
        elif positions[b - 1] == offset + segment.size - 1:
            found[b - 1] = np.max(segment)
            segments.append((segment, offset, a, b - 1))
        else:
            middle = (a + b) // 2
            k = int(positions[middle]) - offset
            parted = np.partition(segment, k)
            found[middle] = parted[k]
            segments.append((parted[:k], offset, a, middle))
            segments.append((parted[k + 1 :], offset + k + 1, middle + 1, b))
    return found


def quantiles_unsorted(values: np.ndarray, probabilities: np.ndarray, quantile_type: int) -> np.ndarray:
    """:func:`quantiles` of a raw sample (unit weights) given unsorted: the same numbers, from the
    two neighbouring order statistics of each probability (:class:`Selection`: selected for one
    or two probabilities, else from a sorted copy; either way under half the time of
    ``np.quantile`` at 1e7 values here). ``values`` (finite float64) is not reordered."""
    probabilities = np.asarray(probabilities, dtype=np.float64)
    row = order_rules.SortedRow(values.size)
    selection = Selection.of_ranks(values, order_rules.hf_ranks(row.total, probabilities, quantile_type)[0])
    return order_rules.hf_quantiles(row, selection, probabilities, quantile_type)[0]


def _median_of(values: np.ndarray, selection: Selection) -> float:
    row = order_rules.SortedRow(values.size)
    return float(order_rules.median(row, selection, whole=True, average=True)[0])


def median_unsorted(values: np.ndarray) -> float:
    """:func:`median` of a raw sample given unsorted: the average of the two middle order
    statistics, selected rather than sorted."""
    return _median_of(values, Selection.of_ranks(values, order_rules.middle_ranks(float(values.size))))


def mad_unsorted(values: np.ndarray, centre: float) -> float:
    """:func:`median_absolute_deviation` of a raw sample given unsorted: the median of
    ``|x - centre|`` (raw, not scaled), the deviations computed once (one n-long array) and their
    two middle ones selected. NaN for a NaN centre, as the sorted path gives."""
    if np.isnan(centre):
        return float("nan")
    with np.errstate(over="ignore"):
        deviations = np.subtract(values, centre)
    np.abs(deviations, out=deviations)
    return median_unsorted(deviations)


@dataclass(frozen=True)
class UnsortedSummary:
    """What :func:`summary_unsorted` was asked for; ``None`` for what it was not."""

    quantiles: np.ndarray | None
    median: float | None
    median_absolute_deviation: float | None
    minimum: float | None
    maximum: float | None


def summary_unsorted(
    values: np.ndarray,
    probabilities: np.ndarray | None,
    quantile_type: int,
    *,
    median: bool = False,
    mad: bool = False,
    extremes: bool = False,
) -> UnsortedSummary:
    """Quantiles (``probabilities`` ``None``: none), median, MAD about the median and extremes of
    a raw sample given unsorted, from one :class:`Selection` of every order statistic they need
    (the extremes are the first and last positions); the MAD then selects the deviations'
    middle two, or reads them from the sorted copy when the selection sorted one.

    Each number equals its sorted path's (:func:`quantiles`, :func:`median`,
    :func:`median_absolute_deviation`, ``sorted_values[0]`` and ``[-1]``).
    """
    row = order_rules.SortedRow(values.size)
    p = None if probabilities is None else np.asarray(probabilities, dtype=np.float64)
    ranks = [np.zeros(0)]
    if p is not None:
        ranks.append(order_rules.hf_ranks(row.total, p, quantile_type)[0])
    if median or mad:
        ranks.append(order_rules.middle_ranks(float(values.size)))
    if extremes:
        ranks.append(np.array([1.0, float(values.size)]))
    selection = Selection.of_ranks(values, np.concatenate(ranks))
    quantiles = None if p is None else order_rules.hf_quantiles(row, selection, p, quantile_type)[0]
    centre = _median_of(values, selection) if median or mad else None
    deviation = None
    if mad and centre is not None:
        if selection.sorted is None:
            deviation = mad_unsorted(values, centre)
        else:  # the sorted path's own rule, O(log n) on the sorted copy
            deviation = float(
                deviation_rules.median_absolute_deviations(
                    row, selection.sorted, np.array([centre]), whole=True, average=True
                )[0]
            )
    minimum = float(selection[np.array([0])][0]) if extremes else None
    maximum = float(selection[np.array([values.size - 1])][0]) if extremes else None
    return UnsortedSummary(quantiles, centre if median else None, deviation, minimum, maximum)


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
