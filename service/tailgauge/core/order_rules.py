"""The order-statistic rules, each written once over a row interface.

A *row* is a weight per sorted support position: the data themselves (one row) or a batch of
resamples or leave-one-out samples (many rows). Every rule here reads rows only through
:class:`Rows`, so the point estimate (one row, :mod:`tailgauge.core.order_statistics` and
:mod:`tailgauge.core.grouped`) and the bootstrap's replicates (many rows,
:mod:`tailgauge.core.resample`) follow the same arithmetic, step for step.

Arrays are rows x q: ``total`` has one entry per row, a target or rank one column per quantity.
The median absolute deviation's rules are in :mod:`tailgauge.core.deviation_rules`.

References
----------
R. J. Hyndman and Y. Fan, "Sample quantiles in statistical packages", The American
Statistician 50(4), 361-365, 1996.
"""

from __future__ import annotations

from typing import Protocol

import numpy as np

# m(p) of Hyndman & Fan (1996), p. 363, for the continuous types: h = n p + m(p).
CONTINUOUS_OFFSET = {
    4: lambda p: np.zeros_like(p),
    5: lambda p: np.full_like(p, 0.5),
    6: lambda p: p,
    8: lambda p: (p + 1.0) / 3.0,
    9: lambda p: p / 4.0 + 3.0 / 8.0,
}

# Relative rounding allowance when a cumulative weight is compared with p * total.
CDF_TOLERANCE = 1e-12

# Whole counts are exact in float64 only below this total.
WHOLE_COUNT_LIMIT = 2.0**53


def whole_counts(weights: np.ndarray | None, total: float) -> bool:
    """Whether ``weights`` (``None``: one observation each) are whole counts of observations
    whose sums float64 holds exactly, so order statistics of the repeated sample exist."""
    if weights is None:
        return True
    return bool(np.all(weights == np.floor(weights))) and total < WHOLE_COUNT_LIMIT


def middle_ranks(total: np.ndarray) -> np.ndarray:
    """The two middle ranks ``floor((n + 1) / 2)`` and ``ceil((n + 1) / 2)`` (1-based), stacked
    on a new last axis: equal for odd ``n``, the two around the middle for even ``n``."""
    middle = (np.asarray(total, dtype=np.float64) + 1.0) / 2.0
    ranks = np.empty(middle.shape + (2,))
    np.floor(middle, out=ranks[..., 0])
    np.ceil(middle, out=ranks[..., 1])
    return ranks


def snap_to_whole(h: np.ndarray) -> np.ndarray:
    """Round ``h`` to the nearest whole number when it is within rounding error of it.

    A caller can only send the double nearest to k/n (0.07 for 7/100), and n p then lands an ulp
    either side of k; the discontinuous types 1-3 jump exactly there, so without this the 7th
    percentile of 100 values would sometimes be the 8th order statistic.
    """
    nearest = np.round(h)
    return np.where(np.abs(h - nearest) <= 4.0 * np.finfo(np.float64).eps * np.maximum(np.abs(h), 1.0), nearest, h)


def interpolate(low: np.ndarray, high: np.ndarray, fraction: np.ndarray) -> np.ndarray:
    """``low + fraction (high - low)``, written so that equal neighbours give exactly that value
    and no difference overflows."""
    return np.where(low == high, low, low * (1.0 - fraction) + high * fraction)


class Rows(Protocol):
    """Weights of one or more rows over the same sorted support, as the rules read them.

    Implemented for one row by :class:`SortedRow` and :class:`CumulativeRow`, and for batches
    by ``tailgauge.core.resample.rows`` (resamples and the jackknife's leave-one-out rows).
    """

    total: np.ndarray  # total weight of each row (rows,)

    @property
    def count(self) -> int:
        """Number of rows."""

    def first_reaching(self, target: np.ndarray) -> np.ndarray:
        """Per row, the first support position whose cumulative weight reaches ``target`` (rows x q),
        the last position where none does."""

    def cumulative_at(self, index: np.ndarray) -> np.ndarray:
        """Cumulative weight up to and including position ``index`` (rows x q)."""

    def weight_at(self, index: np.ndarray) -> np.ndarray:
        """Weight at position ``index`` (rows x q)."""

    def following(self, index: np.ndarray, reached: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """The next position after ``index`` that holds weight in its row, and whether there is
        one; ``reached`` is ``cumulative_at(index)``."""

    @property
    def cumulative(self) -> np.ndarray:
        """Dense rows x k cumulative weights (the grouped MAD reads them)."""

    def reordered(self, rows: np.ndarray, order: np.ndarray) -> Rows:
        """The given rows with the support permuted into ``order`` (for sorted deviations)."""

    # True when a binary search over the rows is cheaper than sorting their deviations (long
    # rows, or many rows with different centres), and True for one row of unit weights whose
    # deviations are selected rather than searched; see ``tailgauge.core.deviation_rules``.
    prefers_search: bool
    unit_sorted: bool


def next_holding(rows: Rows, reached: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """:meth:`Rows.following` for rows that may hold zero weight at some positions: the first
    position whose cumulative weight exceeds ``reached``, and whether it does."""
    following = rows.first_reaching(np.nextafter(reached, np.inf))
    return following, rows.cumulative_at(following) > reached


class SortedRow:
    """One row of unit weights over sorted values (a raw sample): position i holds observation
    i + 1, so order statistics are read by index, without any search."""

    prefers_search = True
    unit_sorted = True
    count = 1

    def __init__(self, size: int) -> None:
        self.size = size
        self.total = np.array([float(size)])

    def first_reaching(self, target: np.ndarray) -> np.ndarray:
        return np.clip(np.ceil(target), 1, self.size).astype(np.intp) - 1

    def cumulative_at(self, index: np.ndarray) -> np.ndarray:
        return index + 1.0

    def weight_at(self, index: np.ndarray) -> np.ndarray:
        return np.ones(np.shape(index))

    def following(self, index: np.ndarray, reached: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        return np.minimum(index + 1, self.size - 1), index + 1 < self.size

    @property
    def cumulative(self) -> np.ndarray:
        return np.arange(1.0, self.size + 1.0)[None, :]

    def reordered(self, rows: np.ndarray, order: np.ndarray) -> CumulativeRow:
        return CumulativeRow(np.ones(order.size))


class CumulativeRow:
    """One row given by its cumulative weights (and, where a rule needs them, the weights).

    ``total`` defaults to the last cumulative weight. Every rule that looks at the next
    position (type 2's averaging at a step) takes the next position as holding weight, as the
    support of a :class:`~tailgauge.core.weighted.WeightedData` does (zero weights are dropped).
    """

    prefers_search = False
    unit_sorted = False
    count = 1

    def __init__(self, weights: np.ndarray, cumulative: np.ndarray | None = None, total: float | None = None) -> None:
        self.weights = weights
        self._cumulative = np.cumsum(weights) if cumulative is None else cumulative
        self.total = np.array([self._cumulative[-1] if total is None else total], dtype=np.float64)
        self._after: np.ndarray | None = None

    def _weight_after(self) -> np.ndarray:
        """The weight held after each position, summed from the top (negated, so it increases)."""
        if self._after is None:
            after = np.zeros(self.weights.size)
            np.cumsum(self.weights[:0:-1], out=after[-2::-1])
            self._after = -after
        return self._after

    def first_reaching(self, target: np.ndarray) -> np.ndarray:
        """Below half the total from the cumulative weights; above it from the weight left after
        each position, summed from the top: a float cumulative sum stops growing once the weights
        left are below its rounding (0.5 + 0.5 + 1e-17 sums to 1), so it would reach a target near
        the total before the last positions holding weight."""
        last = self._cumulative.size - 1
        target = np.asarray(target, dtype=np.float64)
        upper = target > 0.5 * self.total[0]
        found = np.searchsorted(self._cumulative, target, side="left")
        if np.any(upper):
            # C(i) >= t  <=>  weight after i <= T - t (exact in float64 for t >= T/2, Sterbenz).
            left = self.total[0] - target[upper]
            found[upper] = np.searchsorted(self._weight_after(), -left, side="left")
        return np.minimum(found, last)

    def cumulative_at(self, index: np.ndarray) -> np.ndarray:
        return self._cumulative[index]

    def weight_at(self, index: np.ndarray) -> np.ndarray:
        assert self.weights is not None
        return self.weights[index]

    def following(self, index: np.ndarray, reached: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        size = self._cumulative.size
        return np.minimum(index + 1, size - 1), index + 1 < size

    @property
    def cumulative(self) -> np.ndarray:
        return self._cumulative[None, :]

    def reordered(self, rows: np.ndarray, order: np.ndarray) -> CumulativeRow:
        assert self.weights is not None
        return CumulativeRow(self.weights[order])


def order_statistic_index(rows: Rows, ranks: np.ndarray) -> np.ndarray:
    """Support positions of the ``ranks``-th smallest values (1-based, rows x q), the ranks
    clamped to ``[1, n]`` as in H&F (1996)."""
    return rows.first_reaching(np.clip(ranks, 1.0, rows.total[:, None]))


def order_statistic(rows: Rows, values: np.ndarray, ranks: np.ndarray) -> np.ndarray:
    """The ``ranks``-th smallest values (1-based, rows x q), clamped to ``[1, n]`` as in H&F (1996)."""
    return values[order_statistic_index(rows, ranks)]


def hf_position(total: np.ndarray, probabilities: np.ndarray, quantile_type: int) -> tuple[np.ndarray, np.ndarray]:
    """``h`` of Hyndman & Fan (1996) type 1-9 and ``j = floor(h)`` (rows x q) for totals (rows x 1):
    the quantile is read from the ``j``-th and ``(j + 1)``-th order statistics alone."""
    n = total
    p = probabilities
    if quantile_type in (1, 2):
        h = snap_to_whole(n * p)
    elif quantile_type == 3:
        h = snap_to_whole(n * p - 0.5)
    elif quantile_type == 7:
        h = (n - 1.0) * p + 1.0
    else:
        h = n * p + CONTINUOUS_OFFSET[quantile_type](p)
    return h, np.floor(h)


def hf_ranks(total: np.ndarray, probabilities: np.ndarray, quantile_type: int) -> np.ndarray:
    """The ranks :func:`hf_quantiles` reads (rows x 2q): ``j`` for each probability, then ``j + 1``
    for each (before clamping to ``[1, n]``)."""
    p = np.asarray(probabilities, dtype=np.float64)[None, :]
    _, j = hf_position(np.asarray(total, dtype=np.float64)[:, None], p, quantile_type)
    return np.concatenate((j, j + 1.0), axis=1)


def hf_quantiles(rows: Rows, values: np.ndarray, probabilities: np.ndarray, quantile_type: int) -> np.ndarray:
    """Sample quantiles of Hyndman & Fan (1996) type 1-9 of rows of whole counts (rows x q).

    ``values`` is read only at the positions of the ranks :func:`hf_ranks` gives, so an array
    partitioned at those positions serves as well as a sorted one."""
    p = np.asarray(probabilities, dtype=np.float64)[None, :]
    h, j = hf_position(rows.total[:, None], p, quantile_type)
    # Both neighbouring order statistics from one search.
    q = p.shape[1]
    pair = order_statistic(rows, values, np.concatenate((j, j + 1.0), axis=1))
    lower, upper = pair[:, :q], pair[:, q:]
    if quantile_type == 1:
        return np.where(h - j > 0, upper, lower)
    if quantile_type == 2:
        return np.where(h - j > 0, upper, 0.5 * lower + 0.5 * upper)
    if quantile_type == 3:
        take_lower = (h - j == 0) & (np.mod(j, 2) == 0)
        return np.where(take_lower, lower, upper)
    return interpolate(lower, upper, h - j)


def cdf_quantiles(rows: Rows, values: np.ndarray, probabilities: np.ndarray, *, average: bool) -> np.ndarray:
    """Quantiles of a weighted empirical distribution, free of the units of the weights (rows x q).

    With ``F`` the cumulative weight divided by the total, the quantile is the smallest value
    with ``F(x) >= p`` (H&F type 1, the inverse of the distribution function); with
    ``average`` a ``p`` that equals ``F`` at a value exactly gives the average of that value
    and the next one holding weight (H&F type 2). For whole counts both equal H&F types 1 and 2
    of the repeated sample. Cumulative sums carry rounding, so "exactly" allows a relative 1e-12
    of the nearer tail, never more: Q(p) does not stop below an outcome while the weight above it
    exceeds (1 - p) T, and Q(1) is the largest outcome holding weight.
    """
    total = rows.total[:, None]
    target = np.asarray(probabilities, dtype=np.float64)[None, :] * total
    # The allowance is relative to the nearer tail, p T or (1 - p) T: one relative to the total
    # would pass over outcomes holding less than 1e-12 of it (a Poisson table's far tail), and
    # Q(1) must be the largest outcome holding weight.
    slack = CDF_TOLERANCE * np.minimum(target, total - target)
    index = rows.first_reaching(target - slack)
    result = values[index]
    if average:
        reached = rows.cumulative_at(index)
        following, held = rows.following(index, reached)
        at_step = (np.abs(reached - target) <= slack) & held
        result = np.where(at_step, 0.5 * result + 0.5 * values[following], result)
    return result


def median(rows: Rows, values: np.ndarray, *, whole: bool, average: bool) -> np.ndarray:
    """The median of each row (rows,) by the rule that suits the weights.

    Whole counts: the average of the two middle order statistics. Other weights: the
    weighted-CDF rule at 1/2, with (``average``) or without averaging at an exact half.
    """
    if whole:
        pair = order_statistic(rows, values, middle_ranks(rows.total))
        return 0.5 * pair[:, 0] + 0.5 * pair[:, 1]
    return cdf_quantiles(rows, values, np.array([0.5]), average=average)[:, 0]


def grouped_quantiles(rows: Rows, edges: np.ndarray, probabilities: np.ndarray) -> np.ndarray:
    """Interpolated grouped quantiles ``L + (p N - C_before) / f * width`` in the bin holding
    ``p N`` (rows x q); the positions are the bins, ``edges`` their k + 1 edges.

    ``p = 0`` falls in the first bin holding data. At a bin's own edge the answer is that edge,
    even when the other edge is open (infinite).
    """
    total = rows.total[:, None]
    target = np.asarray(probabilities, dtype=np.float64)[None, :] * total
    # The smallest positive target finds the first bin holding data for p = 0.
    index = rows.first_reaching(np.maximum(target, np.finfo(np.float64).tiny))
    counts = rows.weight_at(index)
    before = rows.cumulative_at(index) - counts
    fraction = np.clip((target - before) / counts, 0.0, 1.0)
    low, high = edges[index], edges[index + 1]
    with np.errstate(invalid="ignore"):
        inside = low + fraction * (high - low)
    return np.where(fraction == 0.0, low, np.where(fraction == 1.0, high, inside))
