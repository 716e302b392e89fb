"""The median absolute deviation's rules, over the row interface of :mod:`tailgauge.core.order_rules`.

For a sample: the median rule (:func:`tailgauge.core.order_rules.median`) applied to
``|x - centre|``. For bins: the smallest ``d`` with ``F(centre + d) - F(centre - d) >= N / 2``
under even spread within bins. One row (the point estimate) and many rows (resamples, the
jackknife) go through the same functions.
"""

from __future__ import annotations

import math

import numpy as np

from tailgauge.core.order_rules import CDF_TOLERANCE, Rows, median, middle_ranks


def deviation_order(values: np.ndarray, centre: float) -> tuple[np.ndarray, np.ndarray]:
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


class DeviationSearch:
    """Per row of a view, weights within a distance of that row's centre, and the smallest
    distance ``|x - centre|`` over the support whose weight within reaches a target.

    Distances are the floating-point ``x - centre`` and ``centre - x`` themselves (monotone in
    x), as the point estimate computes them: a binary search on ``centre +- t`` is corrected
    wherever rounding put the boundary a value too far or too short.
    """

    def __init__(self, values: np.ndarray, view: Rows, centre: np.ndarray) -> None:
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


class SortedDeviations(DeviationSearch):
    """:class:`DeviationSearch` over one row of unit weights (a raw sample's sorted values):
    the j-th smallest deviation is selected from the two sorted runs (below and above the
    centre) by binary search in O(log n) Python steps, nothing n-long being built."""

    def smallest_reaching(self, target: np.ndarray) -> np.ndarray:
        ordered, centre, split = self.values, float(self.centre[0, 0]), int(self.split[0, 0])
        result = np.empty(target.shape)
        for column, wanted in enumerate(target[0]):
            if not wanted <= ordered.size:
                result[0, column] = math.inf
                continue
            result[0, column] = _kth_deviation(ordered, split, centre, max(int(math.ceil(wanted)) - 1, 0))
        return result


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


def median_absolute_deviations(
    rows: Rows, values: np.ndarray, centres: np.ndarray, *, whole: bool, average: bool, part_bytes: int = 16 << 20
) -> np.ndarray:
    """Median of ``|x - centre|`` of each row about its own centre (rows,), raw (not scaled), by
    the rule of :func:`median` (``whole``, ``average``) applied to the deviations.

    Rows that share a centre share the order of their deviations: when few centres serve many
    rows (few support values, jackknife rows), or the rows prefer it (one weighted row), the
    deviations are sorted once per centre and :func:`median` reads each row's median from its
    weights in that order (copies of about 24 bytes per row and support value, ``part_bytes``
    at a time). Otherwise each row's answer, the deviation of some support value from its
    centre, is found by binary search on both sides of the centre (about 2 log2 k vectorised
    steps for all rows at once). A NaN centre gives NaN.
    """
    distinct = centres if centres.size == 1 else np.unique(centres)  # one row: no sort at all
    if distinct.size * 8 <= centres.size or not rows.prefers_search:
        result = np.full(centres.size, np.nan)
        per_part = max(1, part_bytes // (24 * values.size))
        for centre in distinct[~np.isnan(distinct)]:
            chosen = np.flatnonzero(centres == centre)
            permutation, deviations = deviation_order(values, float(centre))
            for start in range(0, chosen.size, per_part):
                part = chosen[start : start + per_part]
                result[part] = median(rows.reordered(part, permutation), deviations, whole=whole, average=average)
        return result
    search = (SortedDeviations if rows.unit_sorted else DeviationSearch)(values, rows, centres)
    total = rows.total
    if whole:
        pair = search.smallest_reaching(middle_ranks(total))
        result = 0.5 * pair[:, 0] + 0.5 * pair[:, 1]
    else:
        slack = CDF_TOLERANCE * total
        first = search.smallest_reaching((0.5 * total - slack)[:, None])
        result = first[:, 0]
        if average:
            reached = search.within(first)[:, 0]
            at_step = np.abs(reached - 0.5 * total) <= slack
            # Averaging at an exact half needs the next deviation: the smallest reaching above it.
            later = np.where(at_step, reached + slack * 2.0, 0.5 * total - slack)
            second = search.smallest_reaching(later[:, None])[:, 0]
            result = np.where(at_step, 0.5 * first[:, 0] + 0.5 * second, first[:, 0])
    return np.where(np.isnan(centres), np.nan, result)


# The smallest positive normal float64 (below it a value keeps fewer than 53 bits).
SMALLEST_NORMAL = 2.0**-1022


def _narrow_bins_shift(rows: Rows, edges: np.ndarray) -> int:
    """The power of two that brings the narrowest finite bin width to [1/2, 1) when a count over
    it would overflow float64 (0 otherwise, and when a finite edge would overflow scaled)."""
    finite_edges = edges[np.isfinite(edges)]
    gaps = np.diff(finite_edges)
    gaps = gaps[gaps > 0.0]
    if gaps.size == 0:
        return 0
    narrowest = float(np.min(gaps))
    with np.errstate(over="ignore"):
        steep = not math.isfinite(float(np.max(rows.total)) / narrowest)
    if not steep:
        return 0
    shift = -math.frexp(narrowest)[1]
    widest = float(np.max(np.abs(finite_edges)))
    return shift if math.isfinite(math.ldexp(widest, shift)) else 0


def _piecewise_linear(x: np.ndarray, knots: np.ndarray, heights: np.ndarray) -> np.ndarray:
    """``np.interp(x[r], knots, heights[r])`` for every row r at once, with np.interp's
    arithmetic (``slope * (x - x0) + y0``, the end heights beyond the knots), bit for bit."""
    if knots.size == 1:
        return np.broadcast_to(heights[:, :1], x.shape).copy()
    index = np.clip(np.searchsorted(knots, x, side="right") - 1, 0, knots.size - 2)
    x0, x1 = knots[index], knots[index + 1]
    y0 = np.take_along_axis(heights, index, axis=1)
    y1 = np.take_along_axis(heights, index + 1, axis=1)
    slope = (y1 - y0) / (x1 - x0)
    inside = slope * (x - x0) + y0
    return np.where(x < knots[0], heights[:, :1], np.where(x >= knots[-1], heights[:, -1:], inside))


def grouped_median_absolute_deviations(
    rows: Rows, edges: np.ndarray, centres: np.ndarray, *, below_normal: bool = False
) -> np.ndarray:
    """Smallest ``d`` with ``F(centre + d) - F(centre - d) >= N / 2`` under even spread in bins,
    per row (rows,); the positions are the bins, ``edges`` their k + 1 edges.

    ``G(d) = F(centre + d) - F(centre - d)`` is piecewise linear between the distances from
    ``centre`` to the finite edges, so the root is found exactly by linear interpolation
    between the two breakpoints around it. NaN when it would lie inside an open bin.

    Bins so narrow that a count over a width overflows (subnormal widths) are measured in units
    of a power of two that makes the narrowest width about 1 (scaling by a power of two is
    exact), and the answer scaled back; NaN too when it then falls below float64's normal range,
    where it would keep few of its digits, or none (``moments.scale_by_power_of_two``'s rule),
    unless ``below_normal`` asks for such values as they are (to say why there is no value).
    """
    shift = _narrow_bins_shift(rows, edges)
    if shift:
        with np.errstate(under="ignore"):
            found = grouped_median_absolute_deviations(rows, np.ldexp(edges, shift), np.ldexp(centres, shift))
            scaled_back = np.ldexp(found, -shift)
        return scaled_back if below_normal else np.where(np.abs(scaled_back) < SMALLEST_NORMAL, np.nan, scaled_back)
    finite = np.isfinite(edges)
    finite_edges = edges[finite]
    cumulative = np.concatenate((np.zeros((rows.count, 1)), rows.cumulative), axis=1)[:, finite]
    low_known = -np.inf if finite[0] else finite_edges[0]
    high_known = np.inf if finite[-1] else finite_edges[-1]
    centre = centres[:, None]
    distances = np.sort(np.abs(finite_edges[None, :] - centre), axis=1)
    distances = np.concatenate((np.zeros((centres.size, 1)), distances), axis=1)
    spread = _piecewise_linear(centre + distances, finite_edges, cumulative) - _piecewise_linear(
        centre - distances, finite_edges, cumulative
    )
    half = 0.5 * rows.total
    reached = spread >= half[:, None]
    k = np.argmax(reached, axis=1)
    every = np.arange(k.size)
    ok = reached[every, k]
    known = (centre - distances >= low_known) & (centre + distances <= high_known)
    known_so_far = np.cumprod(known, axis=1).astype(bool)[every, k]
    before = np.maximum(k - 1, 0)
    d0, d1 = distances[every, before], distances[every, k]
    g0, g1 = spread[every, before], spread[every, k]
    with np.errstate(invalid="ignore", divide="ignore"):
        value = np.where(k == 0, 0.0, d0 + (half - g0) / (g1 - g0) * (d1 - d0))
    return np.where(ok & known_so_far, value, np.nan)
