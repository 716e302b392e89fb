"""Shape measures a single outlier cannot swing: medcouple and the half-sample mode.

Quartile skewness and octile kurtosis are ratios of quantiles and are assembled in
``describe`` from the same quantile rule as every other quantile.

References
----------
G. Brys, M. Hubert and A. Struyf, "A robust measure of skewness", Journal of Computational and
Graphical Statistics 13(4), 996-1017, 2004 (the medcouple and its kernel at ties).
D. R. Bickel and R. Frühwirth, "On a fast, robust estimator of the mode", Computational
Statistics & Data Analysis 50(12), 3500-3530, 2006 (the half-sample mode).
J. J. A. Moors, "A quantile alternative for kurtosis", The Statistician 37, 25-32, 1988.
A. L. Bowley, *Elements of Statistics*, 1901 (quartile skewness).
"""

from __future__ import annotations

import math

import numpy as np

from tailgauge.core.order_rules import middle_ranks, whole_counts

def medcouple(values: np.ndarray, weights: np.ndarray | None, median: float) -> float:
    """The medcouple of sorted ``values`` (support values with ``weights``, or raw with ``None``).

    ``MC = median of h(u, l) = ((u - m) + (l - m)) / (u - l)`` over pairs ``l <= m <= u``; for
    pairs where both equal the median ``m`` (T tied observations) the kernel is replaced by the
    signs of Brys et al. (2004, definition 2): T(T-1)/2 values +1, T values 0, T(T-1)/2 values -1.
    The median of an even number of kernel values is the average of the two middle ones.

    O(n log n) per step: the number of kernel values at or below a threshold ``t`` is counted
    with one vectorised binary search (``h(u, l) <= t`` iff ``l - m <= (u - m)(t - 1)/(t + 1)``);
    the threshold is bisected until few candidates remain, which are then enumerated exactly.
    """
    # The kernel is scale-free: scale by a power of two first so no difference overflows.
    largest = float(np.max(np.abs(values)))
    exponent = -math.frexp(largest)[1] if largest > 0.0 else 0
    z = np.ldexp(values, exponent) - math.ldexp(median, exponent)
    w = np.ones_like(z) if weights is None else weights
    whole = weights is None or whole_counts(w, float(np.sum(w)))
    if not whole:
        # Only ratios of pair weights matter; rescale so products of weights cannot overflow.
        w = w / float(np.max(w))
    ties = float(np.sum(w[z == 0.0]))
    upper, upper_w = z[z > 0.0], w[z > 0.0]  # ascending
    lower, lower_w = z[z < 0.0], w[z < 0.0]  # ascending (most negative first)
    lower_cum = np.concatenate(([0.0], np.cumsum(lower_w)))
    total_lower, total_upper = float(lower_cum[-1]), float(np.sum(upper_w))
    total = (total_upper + ties) * (total_lower + ties)
    if total == 0.0:
        return math.nan
    # Whole counts: T(T-1)/2 signs each way and T zeros; other weights (a distribution): the
    # tie block's weight T^2 splits evenly between -1 and +1, its diagonal having no mass.
    tie_signs = ties * (ties - 1.0) / 2.0 if whole else ties * ties / 2.0
    tie_zeros = ties if whole else 0.0
    minus_ones = ties * total_lower + tie_signs  # ties x lower, and the -1 signs among ties
    plus_ones = total_upper * ties + tie_signs
    # Few enough candidates to enumerate (bounded memory: at most ~1e6 pairs at once).
    limit = max(min(upper.size, 1 << 20), 64)

    def bounds(t: float) -> np.ndarray:
        """Per upper value, how many lower values give a kernel <= t (every kernel is in (-1, 1))."""
        if t <= -1.0:
            return np.zeros(upper.size, dtype=np.intp)
        if t >= 1.0:
            return np.full(upper.size, lower.size, dtype=np.intp)
        return np.searchsorted(lower, upper * ((t - 1.0) / (t + 1.0)), side="right")

    def at_most(t: float, found: np.ndarray) -> float:
        count = minus_ones + (tie_zeros if t >= 0.0 else 0.0)
        return count + float(np.dot(upper_w, lower_cum[found]))

    def select(low: float, high: float, start: np.ndarray, stop: np.ndarray, rank: float) -> float:
        """The rank-th (by weight) kernel value in (low, high], enumerated exactly."""
        counts = stop - start
        rows = np.repeat(np.arange(upper.size), counts)
        offsets = np.arange(int(counts.sum())) - np.repeat(np.cumsum(counts) - counts, counts)
        columns = offsets + np.repeat(start, counts)
        u, l = upper[rows], lower[columns]
        kernel = (u + l) / (u - l)
        pair_weight = upper_w[rows] * lower_w[columns]
        if low < 0.0 <= high and tie_zeros > 0.0:
            kernel = np.append(kernel, 0.0)
            pair_weight = np.append(pair_weight, tie_zeros)
        slack = 0.0 if whole else 1e-12 * total
        return _weighted_select(kernel, pair_weight, rank - slack, high)

    def kth(first_rank: float, last_rank: float) -> tuple[float, float]:
        """The first_rank-th and last_rank-th kernel values (first_rank <= last_rank), from one
        shared bisection while both lie in the same bracket."""
        if last_rank <= minus_ones:
            return -1.0, -1.0
        if first_rank > total - plus_ones:
            return 1.0, 1.0
        if first_rank <= minus_ones or last_rank > total - plus_ones:
            # One of them is a tie sign: take each on its own.
            return kth(first_rank, first_rank)[0], kth(last_rank, last_rank)[0]
        # Invariant: at_most(low) < first_rank and last_rank <= at_most(high); each step costs
        # one binary search per upper value.
        low, high = -1.0, 1.0
        low_bounds, high_bounds = bounds(low), bounds(high)
        while int(np.sum(high_bounds - low_bounds)) > limit:
            middle = 0.5 * (low + high)
            if middle in (low, high):
                # Adjacent doubles: every remaining candidate equals the upper end.
                return high, high
            middle_bounds = bounds(middle)
            reached = at_most(middle, middle_bounds)
            if reached >= last_rank:
                high, high_bounds = middle, middle_bounds
            elif reached < first_rank:
                low, low_bounds = middle, middle_bounds
            else:  # the two ranks fall on either side of the middle: finish each alone
                return (
                    _one_rank(first_rank, low, middle, low_bounds, middle_bounds),
                    _one_rank(last_rank, middle, high, middle_bounds, high_bounds),
                )
        below = at_most(low, low_bounds)
        first = select(low, high, low_bounds, high_bounds, first_rank - below)
        last = first if last_rank == first_rank else select(low, high, low_bounds, high_bounds, last_rank - below)
        return first, last

    def _one_rank(rank: float, low: float, high: float, low_bounds: np.ndarray, high_bounds: np.ndarray) -> float:
        while int(np.sum(high_bounds - low_bounds)) > limit:
            middle = 0.5 * (low + high)
            if middle in (low, high):
                return high
            middle_bounds = bounds(middle)
            if at_most(middle, middle_bounds) >= rank:
                high, high_bounds = middle, middle_bounds
            else:
                low, low_bounds = middle, middle_bounds
        return select(low, high, low_bounds, high_bounds, rank - at_most(low, low_bounds))

    if whole:
        lower_rank, upper_rank = (int(rank) for rank in middle_ranks(total))
        first, last = kth(lower_rank, upper_rank)
        return first if upper_rank == lower_rank else 0.5 * first + 0.5 * last
    return kth(0.5 * total, 0.5 * total)[0]  # the smallest kernel value with at least half the pair weight at or below it


def _weighted_select(values: np.ndarray, weights: np.ndarray, rank: float, default: float) -> float:
    """The smallest value whose cumulative weight (in increasing value order) reaches ``rank``.

    Quickselect by weight with ``np.partition`` pivots: linear expected time and no sort, so the
    data's single sort stays the only one.
    """
    while values.size:
        pivot = np.partition(values, values.size // 2)[values.size // 2]
        below, equal = values < pivot, values == pivot
        weight_below = float(np.sum(weights[below]))
        if rank <= weight_below:
            values, weights = values[below], weights[below]
            continue
        if rank <= weight_below + float(np.sum(weights[equal])):
            return float(pivot)
        rank -= weight_below + float(np.sum(weights[equal]))
        above = values > pivot
        values, weights = values[above], weights[above]
    return default


_WINDOW_CHUNK = 1 << 16


def _shortest_window(x: np.ndarray, size: int) -> int:
    """First start of the ``size`` consecutive sorted values spanning the shortest interval.

    The widths are taken a cache-sized chunk at a time into one small buffer: a width array as
    long as the data would cost more in fresh memory than the subtraction itself.
    """
    starts = x.size - size + 1
    buffer = np.empty(min(starts, _WINDOW_CHUNK))
    best, best_width = 0, np.inf
    for first in range(0, starts, _WINDOW_CHUNK):
        last = min(starts, first + _WINDOW_CHUNK)
        widths = buffer[: last - first]
        with np.errstate(over="ignore", invalid="ignore"):  # a width beyond float64 is inf
            np.subtract(x[first + size - 1 : last + size - 1], x[first:last], out=widths)
        at = int(np.argmin(widths))
        if widths[at] < best_width:  # strict: the first shortest window wins ties
            best, best_width = first + at, float(widths[at])
    return best


def half_sample_mode(values: np.ndarray, counts: np.ndarray | None = None) -> float:
    """Bickel & Frühwirth's half-sample mode of sorted observations (or distinct values with whole counts).

    Repeatedly keep the ``ceil(n/2)`` consecutive observations spanning the shortest interval
    (the first such window on ties) until at most three remain; then two give their mean,
    three give the mean of the closer pair (the middle value when both gaps are equal).

    With counts, the windows are found on the cumulative counts without expanding: the shortest
    window starting inside a run of equal values starts at the run's first observation, so only
    run starts are candidates, and the kept window may cut the runs at its two ends.
    """
    x = values
    if counts is None:
        while x.size > 3:
            half = (x.size + 1) // 2
            start = _shortest_window(x, half)
            x = x[start : start + half]
        counts = np.ones(x.size, dtype=np.int64)
    c = np.asarray(counts, dtype=np.int64)
    n = int(c.sum())
    while n > 3:
        half = (n + 1) // 2
        cumulative = np.cumsum(c)
        starts = cumulative - c  # observations before each run
        candidates = np.flatnonzero(starts + half <= n)
        ends = np.searchsorted(cumulative, starts[candidates] + half, side="left")  # run of the last one kept
        with np.errstate(over="ignore"):
            # A width beyond float64 is inf and never the shortest.
            widths = x[ends] - x[candidates]
        best = int(np.argmin(widths))
        first, last = int(candidates[best]), int(ends[best])
        kept = c[first : last + 1].copy()
        kept[-1] = starts[first] + half - (cumulative[last] - c[last])
        x, c, n = x[first : last + 1], kept, half
    remaining = np.repeat(x, c)
    if remaining.size == 1:
        return float(remaining[0])
    if remaining.size == 2:
        return float(0.5 * remaining[0] + 0.5 * remaining[1])
    with np.errstate(over="ignore"):
        left, right = remaining[1] - remaining[0], remaining[2] - remaining[1]
    if left < right:
        return float(0.5 * remaining[0] + 0.5 * remaining[1])
    if left > right:
        return float(0.5 * remaining[1] + 0.5 * remaining[2])
    return float(remaining[1])
