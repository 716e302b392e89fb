"""Bootstrap intervals for every descriptor at once, by resampling the support rather than the rows.

A resample is a vector of weights over the k support rows (distinct values with their counts,
or, for reliability or fractional weights, the entries themselves). A batch of resamples is a
b x k weight matrix; every moment descriptor of the whole batch comes from one matrix product
with the powers of the scaled deviations, and every order statistic from the cumulative
weights. So the cost grows with resamples x k, not with the total count.

The BCa acceleration comes from the jackknife over the support rows with their multiplicities
(leaving out one observation of row i changes only row i), so it costs O(k), never O(n^2).

References
----------
B. Efron and R. J. Tibshirani, *An Introduction to the Bootstrap*, Chapman & Hall, 1993:
percentile (eq. 13.5), basic (Davison & Hinkley 1997, eq. 5.6) and BCa (eq. 14.10-14.15)
intervals; the acceleration from the jackknife (eq. 14.15).
"""

from __future__ import annotations

import functools
import math
import threading
import time
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass

import numpy as np
from scipy import special, stats

from tailgauge.core import grouped, order_statistics, shape
from tailgauge.core.errors import LimitExceeded, Location, UncomputableInput
from tailgauge.core.moments import CentralSums, central_sums, scale_by_power_of_two
from tailgauge.core.weighted import WeightedData, WeightMeaning

# Working memory of one batch of resamples (per thread), whatever the request: b x k arrays of
# about 32 bytes per element (draws, counts, weights, prefix sums), or 19 for Poisson counts
# topped up (16-bit draws, byte counts).
_BATCH_BYTES = 64 << 20
_BATCH_ELEMENTS = _BATCH_BYTES // 32
_TOPPED_UP_BATCH_ELEMENTS = _BATCH_BYTES // 19
# Working memory of one part of ``_Statistics.evaluate`` (rows of a batch or of the jackknife
# evaluated together); see ``evaluation_row_bytes``.
EVALUATION_PART_BYTES = 16 << 20
# Fewer observations than this make any bootstrap interval doubtful (common practice).
SMALL_SAMPLE = 20
# Fewer distinct values than this make the bootstrap distribution of order statistics lumpy.
FEW_DISTINCT = 20
# Bag of little bootstraps (Kleiner, Talwalkar, Sarkar & Jordan, JRSS-B 76, 2014): subsets of
# size n**0.7, 20 of them (the paper's experiments find s = 10-20 and r = 50-100 enough).
SUBSET_EXPONENT = 0.7
SUBSETS = 20
# Resamples of at least this many draws are counted row by row (cheaper than one flat count).
_ROW_BY_ROW_DRAWS = 2048
# Raw samples of at least this many distinct values get Poisson counts topped up to n
# (_topped_up_counts), whose expected shortfall is this many standard deviations.
_POISSON_DRAWS = 2048
_POISSON_SHORTFALL = 4.0
_POISSON_LEVELS = 5
_POISSON_PIECE = 1 << 18


@dataclass(frozen=True)
class IntervalOptions:
    method: str = "bca"
    level: float = 0.95
    resamples: int = 9999
    seed: int = 0


@dataclass(frozen=True)
class Interval:
    low: float | None
    high: float | None
    level: float
    method: str


@dataclass(frozen=True)
class BootstrapResult:
    """Interval and bootstrap standard error of one statistic (``None`` where undefined)."""

    interval: Interval | None
    standard_error: float | None
    reason: str | None = None  # why the interval is missing, or why the method fell back
    acceleration: float | None = None  # BCa's jackknife acceleration, when computed


def evaluation_row_bytes(rows: int, probabilities: int, *, bins: bool) -> int:
    """Working memory of ``_Statistics.evaluate`` per evaluated row (measured with tracemalloc,
    rounded up; tests/core/test_cost.py checks it): about 128 bytes per order statistic looked up
    (the quartiles and the requested quantiles, and the median and MAD searches), plus, for
    binned data, the grouped MAD's arrays over every bin edge."""
    per_row = 128 * (probabilities + 12)
    if bins:
        per_row += 192 * (rows + 1)
    return per_row


class _Scratch:
    """Arrays one thread reuses from batch to batch.

    A batch's b x k arrays are megabytes; touching fresh pages for each of them costs more than
    the arithmetic done in them, so each thread keeps one buffer per use and takes views of it.
    """

    def __init__(self) -> None:
        self._buffers: dict[str, np.ndarray] = {}

    def array(self, use: str, shape: tuple[int, ...], dtype) -> np.ndarray:
        size = math.prod(shape)
        buffer = self._buffers.get(use)
        if buffer is None or buffer.dtype != dtype or buffer.size < size:
            buffer = self._buffers[use] = np.empty(size, dtype=dtype)
        return buffer[:size].reshape(shape)


class _Rows:
    """Weights of b resamples over the k support rows, seen through what statistics need.

    Whole counts keep their prefix sums as integers, running on across the rows (row r's
    cumulative counts plus everything drawn in rows before it): one increasing array, so a
    single binary search finds an order statistic of every row at once, exactly.
    """

    def __init__(
        self,
        weights: np.ndarray,
        powers: np.ndarray | None,
        whole: bool,
        counts: np.ndarray | None = None,
        row_total: int | None = None,
        scratch: _Scratch | None = None,
    ) -> None:
        """``counts``: the whole counts behind ``weights`` (any integer type), when at hand;
        ``row_total``: their sum in every row, when all rows share it (multinomial draws);
        ``scratch``: where to keep the prefix sums (they live as long as this view)."""
        self.weights = weights
        self.whole = whole
        if powers is not None:
            self.sums = weights @ powers
        rows, k = weights.shape
        self._running = None
        if whole:
            counts = weights.astype(np.int64) if counts is None else counts
            totals = counts.sum(axis=1, dtype=np.int64) if row_total is None else np.full(rows, row_total, np.int64)
            self.total = totals.astype(np.float64)
            grand = float(np.sum(self.total))
            if grand < 2.0**62:
                # 32-bit prefix sums where they fit: half the memory traffic of 64-bit ones.
                kind = np.int32 if grand < 2.0**31 else np.int64
                running = np.empty((rows, k), kind) if scratch is None else scratch.array("running", (rows, k), kind)
                np.cumsum(counts, axis=None, dtype=kind, out=running.reshape(-1))
                self._running = running
                self._start = np.concatenate(([0], np.cumsum(totals)[:-1])).astype(kind)
                self._integer = self._running
            else:
                self._integer = np.cumsum(counts, axis=1, dtype=np.int64)
                self._start = np.zeros(rows, dtype=np.int64)
        else:
            self._cumulative = np.cumsum(weights, axis=1)
            self.total = self._cumulative[:, -1]

    @property
    def cumulative(self) -> np.ndarray:
        """Dense b x k cumulative weights (binned data's MAD asks for them)."""
        if self.whole:
            return (self._integer.astype(np.int64) - self._start[:, None]).astype(np.float64)
        return self._cumulative

    def first_reaching(self, target: np.ndarray) -> np.ndarray:
        """Per row, the first support index whose cumulative weight reaches ``target`` (b x q)."""
        rows, k = self.weights.shape
        if self.whole:
            # Integer cumulative counts reach a target exactly when they reach its ceiling.
            wanted = np.ceil(np.clip(target, 0.0, self.total[:, None])).astype(self._integer.dtype)
            if self._running is not None:
                flat = np.searchsorted(self._running.ravel(), wanted + self._start[:, None], side="left")
                # A target of 0 is reached at index 0 (the search would land in the row before).
                return np.clip(flat - np.arange(rows)[:, None] * k, 0, k - 1)
            found = np.stack([np.searchsorted(self._integer[r], wanted[r], side="left") for r in range(rows)])
        else:
            found = np.stack([np.searchsorted(self._cumulative[r], target[r], side="left") for r in range(rows)])
        return np.minimum(found, k - 1)

    def cumulative_at(self, index: np.ndarray) -> np.ndarray:
        if self.whole:
            found = np.take_along_axis(self._integer, index, axis=1)
            return (found.astype(np.int64) - self._start[:, None]).astype(np.float64)
        return np.take_along_axis(self._cumulative, index, axis=1)

    def sum_squared_weights(self) -> np.ndarray:
        return np.sum(self.weights * self.weights, axis=1)

    def reordered(self, rows: np.ndarray, order: np.ndarray) -> _Rows:
        """The given rows with the support permuted into ``order`` (for sorted deviations)."""
        return _Rows(self.weights[np.ix_(rows, order)], None, self.whole)

    def rows(self, part: slice) -> _Rows:
        """A view of the rows in ``part`` (a slice), sharing this view's arrays.

        Everything a statistic reads is per row, so the statistics of a part are those rows'
        statistics of the whole, bit for bit (``_Statistics.evaluate`` works part by part to
        bound its working memory).
        """
        view = object.__new__(_Rows)
        view.weights, view.whole, view.total = self.weights[part], self.whole, self.total[part]
        if hasattr(self, "sums"):
            view.sums = self.sums[part]
        view._running = None if self._running is None else self._running[part]
        if self.whole:
            view._integer, view._start = self._integer[part], self._start[part]
        else:
            view._cumulative = self._cumulative[part]
        return view

    @property
    def count(self) -> int:
        return self.weights.shape[0]


class _LeaveOneOut:
    """Jackknife rows: the full data with one observation removed from one support position each.

    Row r removes weight ``removed[r]`` at support position ``positions[r]`` (default: row r
    removes from position r); nothing k x k is ever built.
    """

    def __init__(
        self,
        base: np.ndarray,
        removed: np.ndarray,
        powers: np.ndarray | None = None,
        positions: np.ndarray | None = None,
    ) -> None:
        self.base = base  # original weight per support position
        self.removed = removed  # weight of one observation, per row
        self.positions = np.arange(base.size) if positions is None else positions
        if powers is not None:
            self.sums = (base @ powers)[None, :] - removed[:, None] * powers[self.positions]
        self._cumulative = np.cumsum(base)
        self.total = self._cumulative[-1] - removed

    def first_reaching(self, target: np.ndarray) -> np.ndarray:
        position = self.positions[:, None]
        before = np.searchsorted(self._cumulative, target, side="left")
        after = np.maximum(np.searchsorted(self._cumulative, target + self.removed[:, None], side="left"), position)
        return np.minimum(np.where(before < position, before, after), self.base.size - 1)

    def cumulative_at(self, index: np.ndarray) -> np.ndarray:
        return self._cumulative[index] - np.where(index >= self.positions[:, None], self.removed[:, None], 0.0)

    def sum_squared_weights(self) -> np.ndarray:
        squares = float(np.sum(self.base * self.base))
        own = self.base[self.positions]
        remaining = own - self.removed
        return squares - own * own + remaining * remaining

    @property
    def cumulative(self) -> np.ndarray:
        """Dense rows x k cumulative weights; only binned data (k = bins) ask for it."""
        dense = np.broadcast_to(self._cumulative, (self.positions.size, self.base.size)).copy()
        dense -= np.where(np.arange(self.base.size)[None, :] >= self.positions[:, None], self.removed[:, None], 0.0)
        return dense

    def reordered(self, rows: np.ndarray, order: np.ndarray) -> _LeaveOneOut:
        """The given rows with the support permuted into ``order`` (for sorted deviations)."""
        inverse = np.empty_like(order)
        inverse[order] = np.arange(order.size)
        return _LeaveOneOut(self.base[order], self.removed[rows], positions=inverse[self.positions[rows]])

    def rows(self, part: slice) -> _LeaveOneOut:
        """The leave-one-out rows in ``part`` (a slice), sharing the support's arrays."""
        view = object.__new__(_LeaveOneOut)
        view.base, view._cumulative = self.base, self._cumulative
        view.removed, view.positions, view.total = self.removed[part], self.positions[part], self.total[part]
        if hasattr(self, "sums"):
            view.sums = self.sums[part]
        return view

    @property
    def count(self) -> int:
        return self.positions.size


def _deviation_order(values: np.ndarray, centre: float) -> tuple[np.ndarray, np.ndarray]:
    """Permutation of sorted ``values`` that sorts ``|values - centre|``, and those deviations.

    The deviations below and above the centre are two sorted runs, merged by binary search.
    """
    split = int(np.searchsorted(values, centre, side="left"))
    below_index = np.arange(split - 1, -1, -1)
    above_index = np.arange(split, values.size)
    with np.errstate(over="ignore"):
        below = centre - values[below_index]
        above = values[above_index] - centre
    merged = np.empty(values.size, dtype=np.intp)
    below_at = np.arange(below.size) + np.searchsorted(above, below, side="left")
    above_at = np.arange(above.size) + np.searchsorted(below, above, side="right")
    merged[below_at] = below_index
    merged[above_at] = above_index
    deviations = np.empty(values.size)
    deviations[below_at] = below
    deviations[above_at] = above
    return merged, deviations


class _DeviationSearch:
    """Per row of a view, weights within a distance of that row's centre, and the smallest
    distance ``|x - centre|`` over the support whose weight within reaches a target.

    Distances are the floating-point ``x - centre`` and ``centre - x`` themselves (monotone in
    x), as the point estimate computes them: a binary search on ``centre +- t`` is corrected
    wherever rounding put the boundary a value too far or too short.
    """

    def __init__(self, values: np.ndarray, view, centre: np.ndarray) -> None:
        self.values = values
        self.view = view
        self.centre = centre[:, None]
        with np.errstate(invalid="ignore"):
            self.split = np.searchsorted(values, centre, side="left")[:, None]  # first value >= centre

    def _weight_before(self, index: np.ndarray) -> np.ndarray:
        """Cumulative weight of the support before ``index`` (rows x q)."""
        k = self.values.size
        inside = np.clip(index - 1, 0, k - 1)
        return np.where(index > 0, self.view.cumulative_at(inside), 0.0)

    def _end_above(self, t: np.ndarray) -> np.ndarray:
        """First index above the centre whose distance exceeds ``t``."""
        v, c, k = self.values, self.centre, self.values.size
        with np.errstate(over="ignore", invalid="ignore"):
            end = np.maximum(np.searchsorted(v, c + t, side="right"), self.split)
            while True:
                at = v[np.minimum(end, k - 1)]
                grow = (end < k) & (at - c <= t)
                before = v[np.maximum(end - 1, 0)]
                shrink = ~grow & (end > self.split) & (before - c > t)
                if not (grow.any() or shrink.any()):
                    return end
                end = np.where(grow, np.searchsorted(v, at, side="right"), end)
                end = np.where(shrink, np.searchsorted(v, before, side="left"), end)

    def _start_below(self, t: np.ndarray) -> np.ndarray:
        """First index below the centre whose distance is at most ``t``."""
        v, c, k = self.values, self.centre, self.values.size
        with np.errstate(over="ignore", invalid="ignore"):
            start = np.minimum(np.searchsorted(v, c - t, side="left"), self.split)
            while True:
                before = v[np.maximum(start - 1, 0)]
                grow = (start > 0) & (c - before <= t)
                at = v[np.minimum(start, k - 1)]
                shrink = ~grow & (start < self.split) & (c - at > t)
                if not (grow.any() or shrink.any()):
                    return start
                start = np.where(grow, np.searchsorted(v, before, side="left"), start)
                start = np.where(shrink, np.searchsorted(v, at, side="right"), start)

    def within(self, t: np.ndarray) -> np.ndarray:
        """Weight of the support within ``t`` of each row's centre (rows x q)."""
        return self._weight_before(self._end_above(t)) - self._weight_before(self._start_below(t))

    def smallest_reaching(self, target: np.ndarray) -> np.ndarray:
        """Per row and target (rows x q), the smallest support distance whose weight within
        reaches the target; ``inf`` where none does."""
        v, c, k = self.values, self.centre, self.values.size
        shape = target.shape
        with np.errstate(over="ignore", invalid="ignore"):
            # Below the centre, distances fall as the index rises: find the first index (in
            # [0, split)) whose distance no longer reaches; the one before it is the answer.
            low = np.zeros(shape, dtype=np.int64)
            high = np.broadcast_to(self.split, shape).copy()
            while np.any(low < high):
                middle = (low + high) // 2
                index = np.minimum(middle, k - 1)
                # The values from ``index`` up to the centre lie within (those before it at
                # the same distance are counted when the search reaches the first of them).
                t = c - v[index]
                inside = self._weight_before(self._end_above(t)) - self._weight_before(middle)
                reached = inside >= target
                active = low < high
                low = np.where(active & reached, middle + 1, low)
                high = np.where(active & ~reached, middle, high)
            below = np.where(low > 0, c - v[np.maximum(low - 1, 0)], np.inf)
            # Above it, distances rise with the index: the first index that reaches.
            low = np.broadcast_to(self.split, shape).copy()
            high = np.full(shape, k, dtype=np.int64)
            while np.any(low < high):
                middle = (low + high) // 2
                index = np.minimum(middle, k - 1)
                t = v[index] - c
                inside = self._weight_before(middle + 1) - self._weight_before(self._start_below(t))
                reached = inside >= target
                active = low < high
                high = np.where(active & reached, middle, high)
                low = np.where(active & ~reached, middle + 1, low)
            above = np.where(low < k, v[np.minimum(low, k - 1)] - c, np.inf)
        return np.minimum(below, above)


@dataclass(frozen=True)
class _Plan:
    """Everything fixed across resamples: the support, its scaled powers and the rules."""

    values: np.ndarray  # support values, increasing
    base: np.ndarray  # original weight per support row
    unit: np.ndarray  # weight carried by one resampled draw of each row
    powers: np.ndarray  # k x (order + 1) powers of the scaled deviations
    sums: CentralSums
    draws: int  # observations per resample
    multinomial: bool  # counts drawn with rng.multinomial, else uniform draws of rows
    integer: bool  # whole counts: order-statistic quantile rules apply
    reliability: bool
    edges: np.ndarray | None  # bins
    row_of_draw: np.ndarray | None  # support row of each observation, when rows hold several
    unit_weights: bool
    # One draw per support row (a raw sample of distinct values): Poisson edges for _topped_up_counts.
    poisson_edges: np.ndarray | None = None


def _order_statistic(view, values: np.ndarray, ranks: np.ndarray) -> np.ndarray:
    total = view.total[:, None]
    clipped = np.clip(ranks, 1.0, total)
    return values[view.first_reaching(clipped)]


def _hf_quantiles(view, values: np.ndarray, p: np.ndarray, quantile_type: int) -> np.ndarray:
    """Batched Hyndman & Fan quantiles for whole counts (same rules as ``order_statistics.quantiles``)."""
    n = view.total[:, None]
    p = p[None, :]
    if quantile_type in (1, 2):
        h = order_statistics._snap_to_whole(n * p)
        j = np.floor(h)
        upper = _order_statistic(view, values, j + 1)
        lower = _order_statistic(view, values, j)
        if quantile_type == 1:
            return np.where(h - j > 0, upper, lower)
        return np.where(h - j > 0, upper, 0.5 * lower + 0.5 * upper)
    if quantile_type == 3:
        h = order_statistics._snap_to_whole(n * p - 0.5)
        j = np.floor(h)
        take_lower = (h - j == 0) & (np.mod(j, 2) == 0)
        return np.where(take_lower, _order_statistic(view, values, j), _order_statistic(view, values, j + 1))
    if quantile_type == 7:
        h = (n - 1.0) * p + 1.0
    else:
        h = n * p + order_statistics._CONTINUOUS_OFFSET[quantile_type](p)
    j = np.floor(h)
    # Both neighbouring order statistics from one search.
    q = p.shape[1]
    pair = _order_statistic(view, values, np.concatenate((j, j + 1.0), axis=1))
    return order_statistics._interpolate(pair[:, :q], pair[:, q:], h - j)


def _cdf_quantiles(view, values: np.ndarray, p: np.ndarray, average: bool) -> np.ndarray:
    total = view.total[:, None]
    target = p[None, :] * total
    slack = order_statistics._CDF_TOLERANCE * total
    index = view.first_reaching(target - slack)
    result = values[index]
    if average:
        reached = view.cumulative_at(index)
        # The next value this row holds (support values it did not draw have no weight).
        following = view.first_reaching(np.nextafter(reached, np.inf))
        at_step = (np.abs(reached - target) <= slack) & (view.cumulative_at(following) > reached)
        result = np.where(at_step, 0.5 * result + 0.5 * values[following], result)
    return result


def _grouped_quantiles(view, edges: np.ndarray, p: np.ndarray) -> np.ndarray:
    total = view.total[:, None]
    # The smallest positive target makes p = 0 land on the first bin holding data.
    target = np.maximum(p[None, :] * total, np.finfo(np.float64).tiny)
    index = view.first_reaching(target)
    cumulative = view.cumulative_at(index)
    counts = cumulative - np.where(index > 0, view.cumulative_at(np.maximum(index - 1, 0)), 0.0)
    fraction = np.clip((target - (cumulative - counts)) / counts, 0.0, 1.0)
    low, high = edges[index], edges[index + 1]
    with np.errstate(invalid="ignore"):
        inside = low + fraction * (high - low)
    return np.where(fraction == 0.0, low, np.where(fraction == 1.0, high, inside))


class _Statistics:
    """Every descriptor of a batch of weight rows, by the same rules as ``describe``."""

    def __init__(
        self,
        plan: _Plan,
        families: tuple[str, str],
        quantile_type: int | None,
        factor_rule: str,
        sheppard_width: float | None = None,
    ):
        self.plan = plan
        self.sheppard_width = sheppard_width  # in the scaled units of the plan's deviations
        self.skewness_family, self.kurtosis_family = families
        self.quantile_type = quantile_type
        self.factor_rule = factor_rule  # "sample", "population" or "reliability"

    def quantiles(self, view, p: np.ndarray) -> np.ndarray:
        plan = self.plan
        if plan.edges is not None:
            return _grouped_quantiles(view, plan.edges, p)
        if plan.integer:
            return _hf_quantiles(view, plan.values, p, self.quantile_type)
        return _cdf_quantiles(view, plan.values, p, average=self.quantile_type == 2)

    def median(self, view) -> np.ndarray:
        plan = self.plan
        if plan.edges is not None:
            return _grouped_quantiles(view, plan.edges, np.array([0.5]))[:, 0]
        return self._median_of(view, plan.values)

    def _median_of(self, view, values: np.ndarray) -> np.ndarray:
        """Median of each row over the sorted ``values``, by the rule of ``order_statistics.median``."""
        if self.plan.integer:
            n = view.total[:, None]
            ranks = np.concatenate((np.floor((n + 1.0) / 2.0), np.ceil((n + 1.0) / 2.0)), axis=1)
            pair = _order_statistic(view, values, ranks)
            return 0.5 * pair[:, 0] + 0.5 * pair[:, 1]
        return _cdf_quantiles(view, values, np.array([0.5]), average=True)[:, 0]

    def mad(self, view, median: np.ndarray) -> np.ndarray:
        """Median absolute deviation of each row, by the rule of ``order_statistics.median_absolute_deviation``.

        Each row's answer is the deviation of some support value from that row's median, so it
        is found by binary search over the support below the median and over the support above
        it (about 2 log2 k vectorised steps for all rows at once).
        """
        plan = self.plan
        if plan.edges is not None:
            return self._grouped_mad(view, median)
        centres = np.unique(median)
        if centres.size * 8 <= median.size:
            # Few distinct medians (few support values, or jackknife rows): rows sharing one
            # share the order of their deviations, so sort those once per median and read each
            # row's median of them from its cumulative weights in that order.
            # The reordered rows are copies (weights and their prefix sums, about 24 bytes per
            # row and support value), made a part at a time.
            result = np.full(median.size, np.nan)
            per_part = max(1, EVALUATION_PART_BYTES // (24 * plan.values.size))
            for centre in centres[~np.isnan(centres)]:
                rows = np.flatnonzero(median == centre)
                permutation, deviations = _deviation_order(plan.values, float(centre))
                for start in range(0, rows.size, per_part):
                    part = rows[start : start + per_part]
                    result[part] = self._median_of(view.reordered(part, permutation), deviations)
            return result
        search = _DeviationSearch(plan.values, view, median)
        total = view.total
        if plan.integer:
            ranks = np.stack((np.floor((total + 1.0) / 2.0), np.ceil((total + 1.0) / 2.0)), axis=1)
            pair = search.smallest_reaching(ranks)
            result = 0.5 * pair[:, 0] + 0.5 * pair[:, 1]
        else:
            slack = order_statistics._CDF_TOLERANCE * total
            first = search.smallest_reaching((0.5 * total - slack)[:, None])
            reached = search.within(first)[:, 0]
            at_step = np.abs(reached - 0.5 * total) <= slack
            # Averaging at an exact half needs the next deviation: the smallest reaching above it.
            later = np.where(at_step, reached + slack * 2.0, 0.5 * total - slack)
            second = search.smallest_reaching(later[:, None])[:, 0]
            result = np.where(at_step, 0.5 * first[:, 0] + 0.5 * second, first[:, 0])
        return np.where(np.isnan(median), np.nan, result)

    def _grouped_mad(self, view, median: np.ndarray) -> np.ndarray:
        edges = self.plan.edges
        cumulative = np.concatenate((np.zeros((view.total.size, 1)), view.cumulative), axis=1)
        finite = np.isfinite(edges)
        finite_edges = edges[finite]
        known = cumulative[:, finite]
        low_known = -np.inf if finite[0] else finite_edges[0]
        high_known = np.inf if finite[-1] else finite_edges[-1]
        distances = np.sort(np.abs(finite_edges[None, :] - median[:, None]), axis=1)
        distances = np.concatenate((np.zeros((median.size, 1)), distances), axis=1)
        rows = np.arange(median.size)[:, None]

        def interp(x: np.ndarray) -> np.ndarray:
            index = np.clip(np.searchsorted(finite_edges, x, side="right") - 1, 0, finite_edges.size - 2)
            x0, x1 = finite_edges[index], finite_edges[index + 1]
            y0, y1 = known[rows, index], known[rows, index + 1]
            inside = y0 + (np.clip(x, x0, x1) - x0) / (x1 - x0) * (y1 - y0)
            return np.where(x < finite_edges[0], 0.0, np.where(x > finite_edges[-1], known[:, -1:], inside))

        centre = median[:, None]
        spread = interp(centre + distances) - interp(centre - distances)
        half = 0.5 * view.total[:, None]
        reached = spread >= half
        k = np.argmax(reached, axis=1)
        ok = reached[np.arange(k.size), k]
        known_ok = (centre - distances >= low_known) & (centre + distances <= high_known)
        prefix_known = np.cumprod(known_ok, axis=1).astype(bool)[np.arange(k.size), k]
        k_prev = np.maximum(k - 1, 0)
        d0, d1 = distances[np.arange(k.size), k_prev], distances[np.arange(k.size), k]
        g0, g1 = spread[np.arange(k.size), k_prev], spread[np.arange(k.size), k]
        with np.errstate(invalid="ignore", divide="ignore"):
            value = np.where(k == 0, 0.0, d0 + (half[:, 0] - g0) / (g1 - g0) * (d1 - d0))
        return np.where(ok & prefix_known, value, np.nan)

    def part_rows(self, view, probabilities: int) -> int:
        """How many rows of ``view`` one part of ``evaluate`` takes: parts of at most
        ``EVALUATION_PART_BYTES`` of working memory (see ``evaluation_row_bytes``)."""
        row = evaluation_row_bytes(
            self.plan.values.size, probabilities, bins=self.plan.edges is not None
        )
        return max(1, EVALUATION_PART_BYTES // row)

    def evaluate(
        self, view, probabilities: np.ndarray, names: tuple[str, ...], deadline: float | None = None
    ) -> dict[str, np.ndarray]:
        """Every requested statistic for each row of ``view``; ``quantile:i`` for probabilities[i].

        Rows are taken a part at a time (``part_rows``), so the working memory of order
        statistics (rows x probabilities, and rows x bins for binned data) stays bounded
        whatever the batch; every statistic is per row, so parts change no value. The wall
        clock is checked before each part.
        """
        rows = view.count
        per_part = self.part_rows(view, probabilities.size)
        if rows <= per_part:
            _deadline_check(deadline)
            return self._evaluate(view, probabilities, names)
        # Each part's values are copied into arrays of all rows at once: no list of parts is
        # held beside their concatenation.
        result: dict[str, np.ndarray] = {}
        for start in range(0, rows, per_part):
            _deadline_check(deadline)
            part = self._evaluate(view.rows(slice(start, start + per_part)), probabilities, names)
            for name, values in part.items():
                if name not in result:
                    result[name] = np.empty(rows, dtype=values.dtype)
                result[name][start : start + values.size] = values
            del part
        return result

    def _evaluate(self, view, probabilities: np.ndarray, names: tuple[str, ...]) -> dict[str, np.ndarray]:
        plan = self.plan
        sums = view.sums
        weight = sums[:, 0]
        delta = sums[:, 1] / weight
        # Central moments of each row about its own mean, from sums about the full-sample mean.
        m = {}
        for k in (2, 3, 4):
            total = np.zeros_like(weight)
            for j in range(k + 1):
                total = total + math.comb(k, j) * sums[:, j] * (-delta) ** (k - j)
            m[k] = total / weight
        if self.sheppard_width is not None:
            m[2], m[4] = grouped.sheppard_corrected(m[2], m[4], self.sheppard_width)
        exponent = plan.sums.scale_exponent
        mean = plan.sums.mean + np.ldexp(delta, exponent)
        out: dict[str, np.ndarray] = {}
        with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
            # A jackknife row of a two-point sample has weight 1: its variance is undefined (inf/NaN).
            if self.factor_rule == "population":
                factor = np.ones_like(weight)
            elif self.factor_rule == "reliability":
                factor = 1.0 / (1.0 - view.sum_squared_weights() / (weight * weight))
            else:
                factor = weight / (weight - 1.0)
            variance_scaled = m[2] * factor
            out["mean"] = mean
            out["variance"] = np.ldexp(variance_scaled, 2 * exponent)
            sd = np.ldexp(np.sqrt(variance_scaled), exponent)
            out["standard_deviation"] = sd
            out["coefficient_of_variation"] = sd / mean
            g1 = m[3] / m[2] ** 1.5
            g2 = m[4] / (m[2] * m[2]) - 3.0
            # n of the bias corrections: each row's total weight (one fewer observation in a
            # jackknife row); reliability weights use the plug-in g1/g2, which need only n >= 3 entries.
            n = np.full_like(weight, float(plan.draws)) if plan.reliability else weight
            skew = np.where(n >= 3, shape.skewness(g1, n, self.skewness_family).value, np.nan)
            kurt = np.where(n >= 4, shape.excess_kurtosis(g2, n, self.kurtosis_family).value, np.nan)
            out["skewness"] = skew
            out["excess_kurtosis"] = kurt
            out["kurtosis"] = kurt + 3.0
        median = self.median(view)
        out["median"] = median
        if "median_absolute_deviation" in names or "median_absolute_deviation_normal" in names:
            mad = self.mad(view, median)
            out["median_absolute_deviation"] = mad
            out["median_absolute_deviation_normal"] = mad * order_statistics.NORMAL_MAD_FACTOR
        quartiles_and_requested = self.quantiles(view, np.concatenate(([0.25, 0.75], probabilities)))
        out["interquartile_range"] = quartiles_and_requested[:, 1] - quartiles_and_requested[:, 0]
        for i in range(probabilities.size):
            out[f"quantile:{i}"] = quartiles_and_requested[:, 2 + i]
        return out


def _plan(data: WeightedData, sums: CentralSums) -> tuple[_Plan, list[str]]:
    notes = []
    if data.binned:
        assert data.weights is not None and data.edges is not None
        values, base = data.values, data.weights
    else:
        support = data.support
        values, base = support.values, support.weights
    integer = data.integer_weights
    reliability = data.meaning is WeightMeaning.RELIABILITY
    if integer and not reliability:
        draws = int(round(float(np.sum(base))))
        unit = np.ones_like(base)
        multinomial = True
    else:
        if data.binned:
            raise UncomputableInput(
                detail="bootstrap intervals for bins need whole counts",
                locations=[Location("counts", "counts must be whole numbers to resample the bins")],
            )
        # Each entry is resampled with its weight: rows are the entries, not merged values.
        order_index = np.argsort(data.values, kind="stable")
        values = data.values[order_index]
        assert data.weights is not None
        unit = data.weights[order_index]
        base = unit.copy()
        draws = int(values.size)
        multinomial = False
        notes.append(
            "the weights are not whole counts, so entries are resampled uniformly and keep their weights"
        )
    deviations = sums.scaled_deviations(values)
    # A far outlier's fourth power may overflow: the replicates that use it are then
    # non-finite, and reported as undefined, rather than a floating-point warning here.
    with np.errstate(over="ignore"):
        powers = np.vander(deviations, 5, increasing=True)
    row_of_draw = None
    if not np.all(base == unit) and not (multinomial and draws > 8 * values.size):
        row_of_draw = np.repeat(np.arange(values.size, dtype=np.int64), np.round(base / unit).astype(np.int64))
    poisson_edges = None
    if multinomial and draws == values.size and draws >= _POISSON_DRAWS and np.all(base == 1.0):
        poisson_edges = _poisson_edges(1.0 - _POISSON_SHORTFALL / math.sqrt(draws))
    plan = _Plan(
        poisson_edges=poisson_edges,
        row_of_draw=row_of_draw,
        unit_weights=bool(np.all(unit == 1.0)),
        values=values,
        base=base,
        unit=unit,
        powers=powers,
        sums=sums,
        draws=draws,
        multinomial=multinomial,
        integer=integer and not reliability,
        reliability=reliability,
        edges=data.edges if data.binned else None,
    )
    return plan, notes


def _batches(plan: _Plan, seed: int, resamples: int) -> list[tuple[np.random.Generator, int]]:
    """(generator, size) of each batch of resamples.

    Batch sizes depend only on k and how counts are drawn, and each batch has its own generator
    spawned from ``seed``, so the same seed gives the same resamples bit for bit on any worker
    and thread count.
    """
    k = plan.values.size
    elements = _BATCH_ELEMENTS if plan.poisson_edges is None else _TOPPED_UP_BATCH_ELEMENTS
    batch = max(1, min(resamples, elements // max(k, 1)))
    # At least two batches for big requests, so two cores share the work (numpy releases the
    # GIL in its generators and loops); fixed by k and the resample count alone, never by threads.
    if resamples >= 2000:
        batch = min(batch, -(-resamples // 2))
    sizes = [min(batch, resamples - start) for start in range(0, resamples, batch)]
    children = np.random.SeedSequence(seed).spawn(len(sizes))
    return [(np.random.default_rng(child), size) for child, size in zip(children, sizes)]


@functools.lru_cache(maxsize=256)
def _poisson_edges(rate: float) -> np.ndarray:
    """``2**64 P(X < c)`` for c = 1, 2, ... of X ~ Poisson(rate), as unsigned 64-bit integers,
    up to the count whose upper tail is below 2**-65 (from scipy's survival function, so the
    tail keeps its relative precision). Cached (read-only): a comparison plans each
    input's resampling twice (budget, then bootstrap), and sample sizes recur."""
    edges = []
    count = 1
    while (tail := round(math.ldexp(float(stats.poisson.sf(count - 1, rate)), 64))) > 0:
        edges.append((1 << 64) - tail)
        count += 1
    table = np.array(edges, dtype=np.uint64)
    table.flags.writeable = False
    return table


def _topped_up_counts(plan: _Plan, rng: np.random.Generator, b: int, scratch: _Scratch) -> np.ndarray | None:
    """Multinomial(n; 1/n, ..., 1/n) counts of b resamples of n distinct values, without n draws each.

    Each value first gets an independent Poisson(rate) count with rate = 1 - 4/sqrt(n); given
    their total T the counts are multinomial(T), so adding n - T uniform draws makes them exactly
    multinomial(n) (a row whose T exceeds n, about 3 in 100,000, is drawn again directly). The
    Poisson counts come from 16 random bits per value compared with the top 16 bits of the edges;
    the few values that fall on an edge's top bits are resolved with 48 more bits, so the counts
    follow the Poisson probabilities to double precision. Every step is a numpy loop that
    releases the GIL, so batches on two threads use both cores. ``None`` when a count would not
    fit in a byte (the caller then draws directly).
    """
    k = plan.values.size
    edges = plan.poisson_edges
    assert edges is not None
    top = (edges >> np.uint64(48)).astype(np.uint16)
    counts = scratch.array("counts", (b, k), np.uint8)
    flat = counts.reshape(-1)
    # A cache-sized piece of the batch at a time: the comparisons below pass over it ten times.
    piece = max(k, (_POISSON_PIECE // k) * k)
    unsure = scratch.array("unsure", (piece,), np.bool_)
    compared = scratch.array("compared", (piece,), np.bool_)
    levels = min(_POISSON_LEVELS, top.size)
    for start in range(0, b * k, piece):
        size = min(piece, b * k - start)
        bits = rng.bit_generator.random_raw(-(-size // 4)).view(np.uint16)[:size]
        out, doubt, scratch_bits = flat[start : start + size], unsure[:size], compared[:size]
        # Counts below _POISSON_LEVELS by comparison; a value on an edge's top bits, or at or
        # above the last compared edge, is resolved in full (about 0.3% of values).
        np.greater(bits, top[0], out=out.view(np.bool_))
        np.greater_equal(bits, top[levels - 1], out=doubt)
        for level in range(1, levels):
            np.greater(bits, top[level], out=scratch_bits)
            np.add(out, scratch_bits.view(np.uint8), out=out)
        for level in range(levels - 1):
            np.equal(bits, top[level], out=scratch_bits)
            np.logical_or(doubt, scratch_bits, out=doubt)
        resolve = np.flatnonzero(doubt)
        if resolve.size:
            full = (bits[resolve].astype(np.uint64) << np.uint64(48)) | (
                rng.bit_generator.random_raw(resolve.size) >> np.uint64(16)
            )
            out[resolve] = np.searchsorted(edges, full, side="right")
    shortfall = k - counts.sum(axis=1, dtype=np.int64)
    over = np.flatnonzero(shortfall < 0)
    for row in over:
        direct = np.bincount(rng.integers(0, k, size=k), minlength=k)
        if direct.max() > 255:
            return None
        counts[row] = direct
    shortfall[over] = 0  # those rows are complete
    added_rows = np.repeat(np.arange(b, dtype=np.int64), shortfall)
    cells = added_rows * k + rng.integers(0, k, size=added_rows.size, dtype=np.int64)
    np.add.at(flat, cells, np.uint8(1))
    # A value given more than about 235 of its row's uniform draws would wrap its byte, losing a
    # multiple of 256 from the row's total: never seen (the caller then draws directly).
    if np.any(counts.sum(axis=1, dtype=np.int64) != k):
        return None
    return counts


def _draw(
    plan: _Plan, rng: np.random.Generator, b: int, scratch: _Scratch | None = None
) -> tuple[np.ndarray, np.ndarray | None]:
    """A b x k weight matrix of resamples, and its whole counts when the draws carry unit weight.

    Many draws per row: multinomial counts (cost per resample grows with k). Otherwise the
    draws themselves are made and counted (cost grows with the draws, cheaper when most rows
    get 0 or 1).
    """
    k = plan.values.size
    if plan.multinomial and plan.draws > 8 * k:
        probabilities = plan.base / float(np.sum(plan.base))
        counts = rng.multinomial(plan.draws, probabilities, size=b)
        return counts.astype(np.float64), counts
    if plan.poisson_edges is not None:
        scratch = _Scratch() if scratch is None else scratch
        counts = _topped_up_counts(plan, rng, b, scratch)
        if counts is not None:
            weights = scratch.array("weights", (b, k), np.float64)
            np.copyto(weights, counts)
            return weights, counts
    picks = rng.integers(0, plan.draws, size=(b, plan.draws), dtype=np.int64)
    if plan.row_of_draw is not None:
        picks = plan.row_of_draw[picks]
    if plan.draws >= _ROW_BY_ROW_DRAWS:
        # Long rows are counted one at a time: each row's k counters stay in cache.
        counts = np.empty((b, k), dtype=np.int64)
        for row in range(b):
            counts[row] = np.bincount(picks[row], minlength=k)
    else:
        picks += (np.arange(b, dtype=np.int64) * k)[:, None]
        counts = np.bincount(picks.ravel(), minlength=b * k).reshape(b, k)
    weights = counts.astype(np.float64)
    if plan.unit_weights:
        return weights, counts
    return weights * plan.unit[None, :], None


def _percentile(samples: np.ndarray, fractions: np.ndarray) -> np.ndarray:
    return np.quantile(samples, fractions, method="linear")


def interval_from_replicates(
    estimate: float,
    replicates: np.ndarray,
    jackknives: list[tuple[np.ndarray, np.ndarray]] | None,
    options: IntervalOptions,
) -> BootstrapResult:
    """Interval and standard error of one statistic from its bootstrap replicates.

    ``jackknives`` (BCa only) holds, for each independently resampled input, the statistic's
    leave-one-out values over that input's support rows and how many observations each row
    stands for; with one input this is the ordinary jackknife of eq. 14.15, with two it is the
    two-sample acceleration (see :func:`acceleration`). ``None`` makes BCa fall back to the
    percentile interval, with the reason.
    """
    if not np.all(np.isfinite(replicates)):
        return BootstrapResult(None, None, "some resamples leave this descriptor undefined")
    # Work in units of a power of two near the largest magnitude: exact, and neither the
    # squared deviations of the standard error nor the cubes of the acceleration can overflow.
    largest = float(np.max(np.abs(replicates)))
    largest = max(largest, abs(estimate))
    exponent = math.frexp(largest)[1] if largest > 0.0 else 0
    scaled = np.ldexp(replicates, -exponent)
    scaled_estimate = math.ldexp(estimate, -exponent)
    scaled_jackknives = None
    if jackknives is not None:
        scaled_jackknives = [(np.ldexp(values, -exponent), weights) for values, weights in jackknives]
    alpha = 1.0 - options.level
    se = None
    if replicates.size > 1:
        se = scale_by_power_of_two(float(np.std(scaled, ddof=1)), exponent)
        se = None if math.isnan(se) else se
    tails = np.array([alpha / 2.0, 1.0 - alpha / 2.0])
    method, reason, accel = options.method, None, None
    if method == "bca":
        fractions, reason, accel = _bca_fractions(scaled_estimate, scaled, scaled_jackknives, tails)
        if fractions is None:
            method = "percentile"
            fractions = tails
    else:
        fractions = tails
    low, high = _percentile(scaled, fractions)
    if method == "basic":
        low, high = 2.0 * scaled_estimate - high, 2.0 * scaled_estimate - low
    low, high = scale_by_power_of_two(float(low), exponent), scale_by_power_of_two(float(high), exponent)
    if se is not None and not math.isfinite(se):
        se = None
    if not (math.isfinite(low) and math.isfinite(high)):
        return BootstrapResult(None, se, "the interval's bounds lie beyond float64's range", accel)
    return BootstrapResult(Interval(low, high, options.level, method), se, reason, accel)


def acceleration(jackknives: list[tuple[np.ndarray, np.ndarray]]) -> float | None:
    """BCa's acceleration from the jackknife of each independently resampled input.

    For input i with n_i observations and leave-one-out values theta_(ij) (row j counted
    ``weights[j]`` times), U_ij = (n_i - 1)(mean_j theta_(ij) - theta_(ij)) and

        a = sum_i sum_j U_ij^3 / n_i^3 / (6 [sum_i sum_j U_ij^2 / n_i^2]^(3/2)).

    With one input the factors (n - 1) / n cancel and this is Efron & Tibshirani (1993),
    eq. 14.15; with several it is the multi-sample form scipy.stats.bootstrap (1.17.1) uses,
    whose source cites the same book (sections 14.3 and 15.4). ``None`` when every left-out
    observation gives the same value (no acceleration can be estimated).
    """
    parts = []
    with np.errstate(all="ignore"):
        for values, weights in jackknives:
            n = float(np.sum(weights))
            centre = np.sum(weights * values) / n
            parts.append((weights, (n - 1.0) / n * (centre - values)))
    # a is scale-free (cubes over the 3/2 power of squares), so the influences are divided by
    # their largest magnitude first: cubes of influences near 1e300 cannot overflow.
    largest = max(float(np.max(np.abs(influence))) if influence.size else 0.0 for _, influence in parts)
    if largest == 0.0 or not math.isfinite(largest):
        return None
    numerator = denominator = 0.0
    with np.errstate(all="ignore"):
        for weights, influence in parts:
            scaled = influence / largest
            numerator += float(np.sum(weights * scaled**3))
            denominator += float(np.sum(weights * scaled**2))
    spread = denominator**1.5
    if spread == 0.0 or not math.isfinite(spread) or not math.isfinite(numerator):
        return None
    return numerator / (6.0 * spread)


def _bca_fractions(estimate, replicates, jackknives, tails):
    """Adjusted tail fractions of BCa (Efron & Tibshirani 1993, eq. 14.10) and the acceleration,
    or None, why, None."""
    below = np.count_nonzero(replicates < estimate)
    equal = np.count_nonzero(replicates == estimate)
    if equal == replicates.size:
        return None, "every resample gives the estimate itself", None
    proportion = (below + 0.5 * equal) / replicates.size
    if not 0.0 < proportion < 1.0:
        return None, "the estimate lies outside the bootstrap distribution", None
    z0 = special.ndtri(proportion)
    if jackknives is None or not all(np.all(np.isfinite(values)) for values, _ in jackknives):
        return None, "the jackknife is undefined for some left-out observation", None
    accel = acceleration(jackknives)
    if accel is None:
        return None, "the jackknife shows no variation, so the acceleration is undefined", None
    # A level within rounding of 1 puts a tail at 0 or 1 (z infinite): the adjustment is then
    # undefined, which the check below reports, not a floating-point warning.
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        z = special.ndtri(tails)
        adjusted = special.ndtr(z0 + (z0 + z) / (1.0 - accel * (z0 + z)))
    if not np.all(np.isfinite(adjusted)):
        return None, "the BCa adjustment is undefined for these data", accel
    return adjusted, None, accel


@dataclass(frozen=True, eq=False)
class Replicates:
    """Every statistic of every resample of one input, kept so two inputs can be contrasted.

    ``values[name]`` is a rounds x resamples array: one round for the ordinary bootstrap, one
    round per subset for the bag of little bootstraps (``subsets``). Names are those of
    ``_Statistics.evaluate`` (``quantile:i`` for the i-th requested probability).
    ``jackknife[name]`` holds the leave-one-out value of each support row and
    ``jackknife_weights`` how many observations each row stands for (BCa only; else ``None``).
    """

    values: dict[str, np.ndarray]
    jackknife: dict[str, np.ndarray] | None
    jackknife_weights: np.ndarray | None
    subsets: bool


@dataclass(frozen=True)
class BootstrapOutcome:
    results: dict[str, BootstrapResult]
    quantiles: list[BootstrapResult]
    resamples: int
    scheme: str
    notes: list[str]
    accelerations: dict[str, float]
    replicates: Replicates | None = None


INTERVAL_DESCRIPTORS = (
    "mean",
    "median",
    "variance",
    "standard_deviation",
    "coefficient_of_variation",
    "skewness",
    "kurtosis",
    "excess_kurtosis",
    "interquartile_range",
    "median_absolute_deviation",
    "median_absolute_deviation_normal",
)


_POOLS: dict[int, ThreadPoolExecutor] = {}
_POOLS_LOCK = threading.Lock()


def _pool(threads: int) -> ThreadPoolExecutor:
    """The process's pool of ``threads`` resampling threads, started on first use and kept:
    starting threads for every request costs milliseconds, and one pool also bounds the
    resampling threads of requests computing at the same time."""
    with _POOLS_LOCK:
        pool = _POOLS.get(threads)
        if pool is None:
            pool = _POOLS[threads] = ThreadPoolExecutor(max_workers=threads, thread_name_prefix="resample")
        return pool


def _deadline_check(deadline: float | None) -> None:
    if deadline is not None and time.monotonic() > deadline:
        raise LimitExceeded(
            detail="the resampling did not finish within this server's time limit; lower options.interval.resamples",
            locations=[Location("options.interval.resamples", "lower it")],
        )


def _over_budget(work: float, max_work: float, allowed: int, description: str) -> LimitExceeded:
    return LimitExceeded(
        detail=(
            f"{description} = {work:.3g} exceeds this server's resampling budget of {max_work:.3g}; "
            f"lower options.interval.resamples to at most {allowed}"
        ),
        locations=[Location("options.interval.resamples", f"at most {allowed} for these data")],
    )


def _uses_subsets(plan: _Plan, subset_rows: int) -> bool:
    """Whether the bag of little bootstraps replaces the ordinary bootstrap for this plan."""
    return plan.values.size > subset_rows and plan.edges is None


def _cost(plan: _Plan, resamples: int, subset_rows: int) -> tuple[float, float, str]:
    """The work ``bootstrap`` spends (rows touched), the work per resample, and how it was counted."""
    if _uses_subsets(plan, subset_rows):
        m = int(math.ceil(plan.draws**SUBSET_EXPONENT))
        drawn = SUBSETS * int(math.ceil(resamples / SUBSETS))
        return float(drawn) * m, float(m), f"{drawn} resamples x {m} subset rows"
    k = plan.values.size
    return float(resamples) * float(k), float(k), f"{resamples} resamples x {k} support rows"


def allowed_resamples(max_work: float, per_resample: float, plan: _Plan, subset_rows: int) -> int:
    """The most resamples within ``max_work``: the bag of little bootstraps draws a whole
    number per subset (requests are rounded up to a multiple of ``SUBSETS``), so its advice is
    rounded down to one, and a resent request with that count stays within the budget."""
    allowed = int(max_work // per_resample)
    if _uses_subsets(plan, subset_rows):
        allowed -= allowed % SUBSETS
    return allowed


def resampling_work(data: WeightedData, resamples: int, subset_rows: int) -> tuple[float, float]:
    """(work, work per resample) that ``bootstrap`` would spend on ``data``: the measure its budget
    ``max_work`` is compared with, so a caller resampling several inputs can budget them together."""
    plan, _ = _plan(data, central_sums(data.values, data.weights, 4))
    work, per_resample, _ = _cost(plan, resamples, subset_rows)
    return work, per_resample


def _little_bootstraps(
    plan: _Plan,
    notes: list[str],
    estimates: dict[str, float | None],
    quantile_estimates: list[float | None],
    probabilities: np.ndarray,
    full: _Statistics,
    options: IntervalOptions,
    deadline: float | None,
) -> BootstrapOutcome:
    """Bag of little bootstraps: intervals averaged over resamples of size n drawn from small subsets.

    Each of ``SUBSETS`` subsets holds ``m = n**0.7`` observations drawn without replacement; each
    resample puts multinomial(n, 1/m) weights on its observations, so every statistic is computed
    at the full sample size at a cost of O(m) per resample (Kleiner et al. 2014, algorithm 1).
    """
    observations = plan.draws
    m = int(math.ceil(observations**SUBSET_EXPONENT))
    per_subset = int(math.ceil(options.resamples / SUBSETS))
    wanted = tuple(name for name in INTERVAL_DESCRIPTORS if estimates.get(name) is not None)
    names = wanted + tuple(f"quantile:{i}" for i, q in enumerate(quantile_estimates) if q is not None)
    method = "basic" if options.method == "basic" else "percentile"
    cumulative = np.cumsum(np.round(plan.base / plan.unit))
    lows: dict[str, list[float]] = {name: [] for name in names}
    highs: dict[str, list[float]] = {name: [] for name in names}
    errors: dict[str, list[float]] = {name: [] for name in names}
    undefined: set[str] = set()
    children = np.random.SeedSequence(options.seed).spawn(SUBSETS)
    rounds: list[dict[str, np.ndarray]] = []
    for child in children:
        _deadline_check(deadline)
        rng = np.random.default_rng(child)
        chosen = rng.choice(observations, size=m, replace=False)
        rows, counts = np.unique(np.searchsorted(cumulative, chosen, side="right"), return_counts=True)
        subset = _Plan(
            values=plan.values[rows],
            base=counts * plan.unit[rows],
            unit=plan.unit[rows],
            powers=plan.powers[rows],
            sums=plan.sums,
            draws=observations,
            multinomial=True,
            integer=plan.integer,
            reliability=plan.reliability,
            edges=None,
            row_of_draw=None,
            unit_weights=bool(np.all(plan.unit[rows] == 1.0)),
        )
        statistics = _Statistics(subset, (full.skewness_family, full.kurtosis_family), full.quantile_type, full.factor_rule)
        # The subset's resamples in batches of at most _BATCH_ELEMENTS counts (a subset of a
        # large sample would otherwise hold resamples x m counts at once); the generator's
        # draws are the same in batches as in one call, so only the batch's matrix product
        # may round differently when a subset needs more than one batch.
        batch = max(1, _BATCH_ELEMENTS // counts.size)
        parts = []
        for start in range(0, per_subset, batch):
            _deadline_check(deadline)
            with np.errstate(all="ignore"):  # non-finite replicates are reported as undefined below
                drawn = rng.multinomial(observations, counts / m, size=min(batch, per_subset - start))
                weights = drawn.astype(np.float64) * subset.unit[None, :]
                whole = drawn if subset.integer and subset.unit_weights else None
                view = _Rows(weights, subset.powers, subset.integer, whole)
                parts.append(statistics.evaluate(view, probabilities, wanted, deadline))
            del drawn, weights, whole, view
        replicates = parts[0] if len(parts) == 1 else {
            name: np.concatenate([part[name] for part in parts]) for name in parts[0]
        }
        del parts
        rounds.append(replicates)
        alpha = 1.0 - options.level
        for name in names:
            values = replicates[name]
            if not np.all(np.isfinite(values)):
                undefined.add(name)
                continue
            low, high = _percentile(values, np.array([alpha / 2.0, 1.0 - alpha / 2.0]))
            estimate = estimates[name] if name in estimates else quantile_estimates[int(name.split(":")[1])]
            if method == "basic":
                low, high = 2.0 * estimate - high, 2.0 * estimate - low
            lows[name].append(float(low))
            highs[name].append(float(high))
            errors[name].append(float(np.std(values, ddof=1)))

    def averaged(name: str) -> BootstrapResult:
        if name in undefined:
            return BootstrapResult(None, None, "some resamples leave this descriptor undefined")
        reason = "BCa is not defined for the bag of little bootstraps" if options.method == "bca" else None
        interval = Interval(float(np.mean(lows[name])), float(np.mean(highs[name])), options.level, method)
        return BootstrapResult(interval, float(np.mean(errors[name])), reason)

    results = {name: averaged(name) for name in wanted}
    quantiles = [
        averaged(f"quantile:{i}") if q is not None else BootstrapResult(None, None, "the quantile itself is undefined")
        for i, q in enumerate(quantile_estimates)
    ]
    scheme = (
        f"bag of little bootstraps (Kleiner et al. 2014): {SUBSETS} subsets of {m} = n^{SUBSET_EXPONENT} "
        f"observations, {per_subset} multinomial resamples of size {observations} each"
    )
    kept = Replicates({name: np.stack([r[name] for r in rounds]) for name in rounds[0]}, None, None, True)
    return BootstrapOutcome(results, quantiles, SUBSETS * per_subset, scheme, notes, {}, kept)


def bootstrap(
    data: WeightedData,
    sums: CentralSums,
    estimates: dict[str, float | None],
    quantile_estimates: list[float | None],
    probabilities: np.ndarray,
    *,
    families: tuple[str, str],
    quantile_type: int | None,
    factor_rule: str,
    options: IntervalOptions,
    max_work: float,
    deadline: float | None,
    threads: int = 2,
    subset_rows: int = 100_000,
    sheppard_width: float | None = None,
) -> BootstrapOutcome:
    """Bootstrap every defined scalar descriptor and requested quantile of ``data`` in one pass.

    With more than ``subset_rows`` support rows the bag of little bootstraps replaces the
    ordinary bootstrap (percentile or basic intervals; BCa falls back to percentile).

    ``estimates`` are the point estimates from ``describe``; a descriptor whose estimate is
    ``None`` gets no interval. Raises :class:`LimitExceeded` when resamples x support rows exceed
    ``max_work`` or the wall clock passes ``deadline`` (``time.monotonic()`` seconds).
    """
    plan, notes = _plan(data, sums)
    k = plan.values.size
    work, per_resample, counted = _cost(plan, options.resamples, subset_rows)
    if work > max_work:
        raise _over_budget(work, max_work, allowed_resamples(max_work, per_resample, plan, subset_rows), counted)
    if _uses_subsets(plan, subset_rows):
        return _little_bootstraps(
            plan, notes, estimates, quantile_estimates, probabilities,
            _Statistics(plan, families, quantile_type, factor_rule), options, deadline,
        )
    statistics = _Statistics(plan, families, quantile_type, factor_rule, sheppard_width)
    wanted = tuple(name for name in INTERVAL_DESCRIPTORS if estimates.get(name) is not None)

    own = threading.local()

    def run(batch: tuple[np.random.Generator, int]) -> dict[str, np.ndarray]:
        _deadline_check(deadline)
        if not hasattr(own, "scratch"):
            own.scratch = _Scratch()
        # Weights near float64's limit can overflow in a resample; such replicates are non-finite
        # and reported as undefined below, so the floating-point flags carry no news. (errstate
        # is per thread: it must be set here, in the worker.)
        with np.errstate(all="ignore"):
            weights, counts = _draw(plan, *batch, own.scratch)
            if plan.integer:
                view = _Rows(weights, plan.powers, True, counts, plan.draws, own.scratch)
            else:
                view = _Rows(weights, plan.powers, False)
            return statistics.evaluate(view, probabilities, wanted, deadline)

    # numpy releases the GIL in the heavy loops, so batches overlap on the cores; each batch has
    # its own generator, so the result does not depend on which thread ran it.
    batches = _batches(plan, options.seed, options.resamples)
    if threads <= 1 or len(batches) == 1:
        outputs = [run(batch) for batch in batches]
    else:
        futures = [_pool(threads).submit(run, batch) for batch in batches]
        try:
            outputs = [future.result() for future in futures]
        finally:
            for future in futures:  # after an error (a passed deadline), drop the batches not started
                future.cancel()
    replicates = {name: np.concatenate([out[name] for out in outputs]) for name in outputs[0]}
    # The threads' scratch buffers (a batch's draws each) go before the jackknife runs.
    del own, outputs

    jackknife = jackknife_weights = None
    if options.method == "bca":
        present = plan.base > 0
        removed = np.where(present, plan.unit, 0.0)
        # A row whose removal leaves a total that rounds to 0 (weights 1e17 and 0.5), or power
        # sums that overflow (weights near 1.8e308), has no finite leave-one-out value, which
        # makes BCa fall back with its reason.
        with np.errstate(all="ignore"):
            view = _LeaveOneOut(plan.base, removed, plan.powers)
            jackknife = statistics.evaluate(view, probabilities, wanted, deadline)
        # Each row stands for its observations: row i's leave-one-out value counts base/unit times.
        jackknife_weights = np.where(present, plan.base / plan.unit, 0.0)
    results: dict[str, BootstrapResult] = {}
    for name in wanted:
        estimate = estimates[name]
        assert estimate is not None
        results[name] = interval_from_replicates(
            estimate, replicates[name], None if jackknife is None else [(jackknife[name], jackknife_weights)], options
        )
    quantile_results = []
    for i, estimate in enumerate(quantile_estimates):
        if estimate is None:
            quantile_results.append(BootstrapResult(None, None, "the quantile itself is undefined"))
            continue
        name = f"quantile:{i}"
        quantile_results.append(
            interval_from_replicates(
                estimate, replicates[name], None if jackknife is None else [(jackknife[name], jackknife_weights)], options
            )
        )
    accelerations = {name: r.acceleration for name, r in results.items() if r.acceleration is not None}
    scheme = (
        f"multinomial counts over {k} distinct values" if plan.multinomial else f"uniform draws of {k} weighted entries"
    )
    kept = Replicates({name: values[None, :] for name, values in replicates.items()}, jackknife, jackknife_weights, False)
    return BootstrapOutcome(results, quantile_results, options.resamples, scheme, notes, accelerations, kept)
