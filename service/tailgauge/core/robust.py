"""The medcouple: a skewness a single outlier cannot swing, by a threshold search over the
kernel's sorted rows. (The half-sample mode is in :mod:`tailgauge.core.half_sample`; quartile
skewness and octile kurtosis are ratios of quantiles, assembled in ``describe`` from the same
quantile rule as every other quantile.)

References
----------
G. Brys, M. Hubert and A. Struyf, "A robust measure of skewness", Journal of Computational and
Graphical Statistics 13(4), 996-1017, 2004 (the medcouple and its kernel at ties).
D. B. Johnson and T. Mizoguchi, "Selecting the Kth element in X + Y and X1 + X2 + ... + Xm",
SIAM Journal on Computing 7(2), 147-153, 1978 (selection over sorted rows).
"""

from __future__ import annotations

import math

import numpy as np

from tailgauge.core.order_rules import middle_ranks, whole_counts

# Kernel pairs formed at once (all of them for few observations, or the candidates left between
# two thresholds): bounded memory.
_ENUMERATED = 1 << 20
# Up to this many pairs (values above the median times values below it) every pair is formed
# at once; above it the threshold search costs less than forming them (measured crossover).
_DIRECT_PAIRS = 1 << 13
# Rows of the kernel counted exactly when estimating how many kernel values lie at or below a
# threshold; with more rows the count is interpolated between these.
_GRID_ROWS = 1 << 16
# Below that many rows, one grid row in this many (and every row below this many grid rows).
_GRID_STEP = 16
_GRID_ROWS_LEAST = 64
# The estimate's allowance, in units of sqrt(rows x rows between grid rows).
_MARGIN_SCALE = 8.0
# Keys per binary-search call when counting at a threshold exactly (small sorted slices).
_CHUNK = 4096
# Candidates enumerated in one selection when the rows are few.
_FEW = 1 << 10
# At most this many candidates are selected among by value, a chunk at a time, when the search
# stops halving them (many equal kernel values); beyond it the search bisects on.
_STREAMED = 1 << 25


def medcouple(values: np.ndarray, weights: np.ndarray | None, median: float) -> float:
    """The medcouple of sorted ``values`` (support values with ``weights``, or raw with ``None``).

    ``MC = median of h(u, l) = ((u - m) + (l - m)) / (u - l)`` over pairs ``l <= m <= u``; for
    pairs where both equal the median ``m`` (T tied observations) the kernel is replaced by the
    signs of Brys et al. (2004, definition 2): T(T-1)/2 values +1, T values 0, T(T-1)/2 values -1.
    The median of an even number of kernel values is the average of the two middle ones.

    The kernel's rows (one value above the median against every value below it) are sorted, so
    the number of kernel values at or below a threshold ``t`` is one monotone count per row
    (``h(u, l) <= t`` iff ``l - m <= (u - m)(t - 1)/(t + 1)``), which is what Johnson &
    Mizoguchi's search (as Brys et al. use it) rests on. Where that search takes the weighted
    median of the rows' medians as its next threshold, here thresholds come from a cheap
    estimate of the count (exact counts on a grid of rows, interpolated between them), aimed a
    margin either side of the middle rank; each is then counted exactly (chunked binary
    searches) and the few candidates left between the two are enumerated and the middle one
    selected: O(n log n), usually two exact counts whatever n. Up to a few thousand pairs every
    pair is formed at once.

    The value returned is the order statistic of the kernel values as computed (the same value
    as sorting all of them). Where many kernel values are equal and the search stops halving
    its candidates, it selects by value over them a chunk at a time; raw observations with
    repeated values start again on the distinct values with their counts.
    """
    # The kernel is scale-free: scale by a power of two first so no difference overflows.
    largest = max(abs(float(values[0])), abs(float(values[-1])))  # sorted
    exponent = -math.frexp(largest)[1] if largest > 0.0 else 0
    z = _scaled(values, exponent)
    np.subtract(z, math.ldexp(median, exponent), out=z)
    below_end = int(z.searchsorted(0.0, side="left"))  # z ascends: lower | ties | upper
    above_start = int(z.searchsorted(0.0, side="right"))
    lower, upper = z[:below_end], z[above_start:]
    if weights is not None:
        weights = np.asarray(weights, dtype=np.float64)
    whole = weights is None or whole_counts(weights, float(np.sum(weights)))
    if weights is None:
        lower_w = upper_w = lower_cum = None
        ties = float(above_start - below_end)
        total_lower, total_upper = float(lower.size), float(upper.size)
    else:
        w = weights
        if not whole:
            # Only ratios of pair weights matter; rescale so products of weights cannot overflow.
            w = w / float(np.max(w))
        ties = float(np.sum(w[below_end:above_start]))
        lower_w, upper_w = w[:below_end], w[above_start:]
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
    kernel = _Kernel(upper, upper_w, lower, lower_w, lower_cum, minus_ones, tie_zeros)
    slack = 0.0 if whole else 1e-12 * total
    if weights is None and upper.size * lower.size > _DIRECT_PAIRS:
        try:
            return _middle(kernel, total, minus_ones, plus_ones, whole, slack)
        except _Repeated:
            # Many equal kernel values from repeated observations: the same kernel values with
            # whole counts, over the distinct values (far fewer pairs).
            starts = np.flatnonzero(np.concatenate(([True], values[1:] != values[:-1])))
            counts = np.diff(np.append(starts, values.size)).astype(np.float64)
            return medcouple(values[starts], counts, median)
    return _middle(kernel, total, minus_ones, plus_ones, whole, slack)


def _middle(kernel: _Kernel, total: float, minus_ones: float, plus_ones: float, whole: bool, slack: float) -> float:
    """The median of the kernel values, the tie signs at -1 and +1 included."""

    def kth(first_rank: float, last_rank: float) -> tuple[float, float]:
        """The first_rank-th and last_rank-th kernel values (first_rank <= last_rank)."""
        if last_rank <= minus_ones:
            return -1.0, -1.0
        if first_rank > total - plus_ones:
            return 1.0, 1.0
        if first_rank <= minus_ones or last_rank > total - plus_ones:
            # One of them is a tie sign: take each on its own.
            return kth(first_rank, first_rank)[0], kth(last_rank, last_rank)[0]
        return kernel.kth(first_rank, last_rank, slack)

    if whole:
        lower_rank, upper_rank = (int(rank) for rank in middle_ranks(total))
        first, last = kth(lower_rank, upper_rank)
        return first if upper_rank == lower_rank else 0.5 * first + 0.5 * last
    return kth(0.5 * total, 0.5 * total)[0]  # the smallest kernel value with at least half the pair weight at or below it


def _scaled(values: np.ndarray, exponent: int) -> np.ndarray:
    """A new array of ``values * 2**exponent``, as ``np.ldexp`` gives it (one multiplication
    where the power of two is a double and no product is subnormal; ``np.ldexp`` elsewhere)."""
    if exponent == 0:
        return np.array(values, dtype=np.float64)
    if exponent > 1023:  # subnormal data
        return np.ldexp(values, exponent)
    out = np.multiply(values, 2.0**exponent)
    if exponent < 0:
        # Products below 2**-1022 would round as subnormals: ldexp rounds them once, as it
        # always does; those values sit around zero in the sorted data.
        tiny = 2.0 ** (-1022 - exponent)
        start = int(np.searchsorted(values, -tiny, side="right"))
        stop = int(np.searchsorted(values, tiny, side="left"))
        if stop > start:
            out[start:stop] = np.ldexp(values[start:stop], exponent)
    return out


class _Repeated(Exception):
    """Raw observations with repeated values whose kernel search stalled on equal kernel values."""


class _Bound:
    """An exact threshold: ``t``, the per-row counts of columns with a kernel value at or below
    it (``None``: none or all), and ``at_most``, the weight of kernel values at or below ``t``."""

    __slots__ = ("at_most", "columns", "estimated", "t")

    def __init__(self, t: float, columns: np.ndarray | None, at_most: float) -> None:
        self.t, self.columns, self.at_most = t, columns, at_most
        self.estimated: float | None = None


class _Kernel:
    """The kernel's pairs of one value above the median (a row) and one below it (a column).

    Rows are held in descending order of ``u``, so the keys ``u (t - 1)/(t + 1)`` of a
    threshold ascend and each row's count of columns at or below it does too.
    """

    def __init__(self, upper, upper_w, lower, lower_w, lower_cum, minus_ones, tie_zeros) -> None:
        self.u = upper[::-1].copy()
        self.u_w = None if upper_w is None else upper_w[::-1].copy()
        self.l, self.l_w, self.l_cum = lower, lower_w, lower_cum
        self.minus_ones, self.tie_zeros = minus_ones, tie_zeros
        self.rows, self.cols = upper.size, lower.size
        self._grid = None

    def repeated(self) -> bool:
        """Whether some value repeats (raw observations only)."""
        return bool(np.any(self.u[1:] == self.u[:-1]) or np.any(self.l[1:] == self.l[:-1]))

    # -- counting --------------------------------------------------------------------------
    def _weight(self, columns: np.ndarray) -> float:
        """Weight of the pairs left of ``columns`` in each row."""
        if self.u_w is None:
            return float(int(np.sum(columns, dtype=np.int64)))
        return float(np.dot(self.u_w, self.l_cum[columns]))

    def _base(self, t: float) -> float:
        return self.minus_ones + (self.tie_zeros if t >= 0.0 else 0.0)

    def lowest(self) -> _Bound:
        return _Bound(-1.0, None, self.minus_ones)

    def highest(self) -> _Bound:
        full = float(self.rows * self.cols) if self.u_w is None else float(np.sum(self.u_w)) * float(self.l_cum[-1])
        return _Bound(1.0, None, self.minus_ones + self.tie_zeros + full)

    def exact(self, t: float) -> _Bound:
        """Count the kernel values at or below ``t`` exactly (``-1 < t < 1``)."""
        columns = _count_at_most(self.l, self.u, (t - 1.0) / (t + 1.0))
        return _Bound(t, columns, self._base(t) + self._weight(columns))

    def pairs_between(self, low: _Bound, high: _Bound) -> int:
        if low.columns is None and high.columns is None:
            return self.rows * self.cols
        if low.columns is None:
            return int(np.sum(high.columns, dtype=np.int64))
        if high.columns is None:
            return self.rows * self.cols - int(np.sum(low.columns, dtype=np.int64))
        return int(np.sum(high.columns, dtype=np.int64)) - int(np.sum(low.columns, dtype=np.int64))

    # -- estimating ------------------------------------------------------------------------
    def _estimator(self):
        """Grid rows and the weights that interpolate every row's count between them."""
        if self._grid is None:
            step = max(-(-self.rows // _GRID_ROWS), min(_GRID_STEP, self.rows // _GRID_ROWS_LEAST))
            if step <= 1:
                self._grid = (None, None)
            else:
                grid = np.arange(0, self.rows, step)
                if grid[-1] != self.rows - 1:
                    grid = np.append(grid, self.rows - 1)
                # Row i between grid rows g0 < g1 takes (1 - f) of g0's count and f of g1's,
                # f = (i - g0)/(g1 - g0) (the last row is a grid row): trapezoid weights.
                lengths = np.diff(grid)
                coefficients = np.zeros(grid.size)
                if self.u_w is None:
                    coefficients[:-1] += (lengths + 1) / 2.0
                    coefficients[1:] += (lengths - 1) / 2.0
                    coefficients[-1] += 1.0
                else:
                    block = np.repeat(np.arange(lengths.size), lengths)
                    fraction = (np.arange(self.rows - 1) - grid[block]) / lengths[block]
                    row_w = self.u_w[:-1]
                    coefficients[:-1] += np.bincount(block, row_w * (1.0 - fraction), minlength=lengths.size)
                    coefficients[1:] += np.bincount(block, row_w * fraction, minlength=lengths.size)
                    coefficients[-1] += float(self.u_w[-1])
                self._grid = (self.u[grid], coefficients)
        return self._grid

    def estimate(self, t: float) -> float:
        grid, coefficients = self._estimator()  # the grid rows' values
        if grid is None:
            return self.exact(t).at_most
        columns = np.searchsorted(self.l, grid * ((t - 1.0) / (t + 1.0)), side="right")
        counted = columns if self.l_cum is None else self.l_cum[columns]
        return self._base(t) + float(np.sum(coefficients * counted))  # no BLAS call for a short dot

    # -- searching -------------------------------------------------------------------------
    def kth(self, first: float, last: float, slack: float) -> tuple[float, float]:
        """The kernel values of ranks ``first`` and ``last`` (by weight, less ``slack``), the tie
        signs at -1 and +1 lying outside them."""
        first, last = first - slack, last - slack
        low, high = self.lowest(), self.highest()
        if self.rows * self.cols <= _DIRECT_PAIRS:
            return self._select(low, high, first, last)
        return self._search(first, last, low, high)

    def _search(self, first: float, last: float, low: _Bound, high: _Bound) -> tuple[float, float]:
        """Narrow ``low`` (below ``first``) and ``high`` (at or above ``last``) with exact counts
        until few candidates lie between, then select among them."""
        enough = min(_ENUMERATED, max(4 * self.rows, _FEW))
        margin = None  # the estimate's allowance in weight of kernel values
        slow = 0  # rounds in a row that did not halve the candidates
        while True:
            pairs = self.pairs_between(low, high)
            if pairs <= enough:
                return self._select(low, high, first, last)
            middle = 0.5 * low.t + 0.5 * high.t
            if slow >= 2 and self.u_w is None and self.repeated():
                raise _Repeated  # the caller counts the repeated values and starts again
            if slow >= 2 and (pairs <= _STREAMED or not low.t < middle < high.t):
                # No progress (many equal kernel values, or thresholds next to each other):
                # select by value over the candidates, a chunk at a time.
                return self._select_streamed(low, high, first, last)
            proposals, margin = self._propose(first, last, low, high, margin)
            if slow:
                # The estimate missed: widen its margin, and halve the bracket as well.
                margin *= 2.0
                proposals = sorted([t for t in proposals if t is not None] + [middle])
            for t in proposals:
                if t is None or not low.t < t < high.t:
                    continue
                bound = self.exact(t)
                if bound.at_most < first:
                    low = bound
                elif bound.at_most >= last:
                    high = bound
                else:  # the two ranks fall on either side of t: finish each alone
                    return self._search(first, first, low, bound)[0], self._search(last, last, bound, high)[0]
            slow = slow + 1 if self.pairs_between(low, high) > pairs // 2 else 0

    def _estimated(self, bound: _Bound) -> float:
        if bound.columns is None:
            return bound.at_most  # -1 or 1: exact
        if bound.estimated is None:
            bound.estimated = self.estimate(bound.t)
        return bound.estimated

    def _propose(self, first, last, low, high, margin):
        """Two thresholds from the grid estimate, corrected by the exact counts at ``low`` and
        ``high`` (linearly in t), aimed ``margin`` outside the two ranks."""
        e_low = low.at_most - self._estimated(low)
        e_high = high.at_most - self._estimated(high)
        span = high.t - low.t

        seen = {low.t: low.at_most, high.t: high.at_most}

        def corrected(t: float) -> float:
            share = (t - low.t) / span
            seen[t] = self.estimate(t) + e_low + share * (e_high - e_low)
            return seen[t]

        if margin is None:
            # The interpolation's error grows about as the square root of the rows times the
            # rows between grid rows (measured on continuous and heavy-tailed data).
            grid, _ = self._estimator()
            step = 1.0 if grid is None else self.rows / grid.size
            margin = _MARGIN_SCALE * math.sqrt(step * self.rows)
        proposals = []
        for target, end in ((first - margin, 0), (last + margin, 1)):
            if not low.at_most < target <= high.at_most:
                proposals.append(None)  # the margin reaches past an exact end: keep that end
                continue
            # Start from the closest pair of points already estimated around the target.
            a = max(t for t, g in seen.items() if g < target)
            b = min(t for t, g in seen.items() if g >= target and t > a)
            bracket = _root(corrected, target, a, seen[a], b, seen[b], margin / 4.0)
            t = bracket[2 * end]
            proposals.append(t if low.t < t < high.t else None)
        return proposals, margin

    # -- selecting -------------------------------------------------------------------------
    def _prepare(self, low: _Bound, high: _Bound):
        """The rows holding candidates, their first candidate column and count, and the running
        total of the counts."""
        if low.columns is None and high.columns is None:
            rows = np.arange(self.rows)
            first_column = np.zeros(self.rows, dtype=np.intp)
            counts = np.full(self.rows, self.cols, dtype=np.intp)
        elif low.columns is None:
            rows = np.flatnonzero(high.columns)
            first_column, counts = np.zeros(rows.size, dtype=np.intp), high.columns[rows].astype(np.intp)
        elif high.columns is None:
            rows = np.flatnonzero(low.columns != self.cols)
            first_column = low.columns[rows].astype(np.intp)
            counts = self.cols - first_column
        else:
            rows = np.flatnonzero(high.columns != low.columns)
            first_column = low.columns[rows].astype(np.intp)
            counts = high.columns[rows] - first_column
        return rows, first_column, counts, np.cumsum(counts)

    def _chunk(self, prepared, start: int, stop: int):
        """Kernel values (and pair weights) of candidates ``start .. stop - 1``, numbered row by row."""
        rows, first_column, counts, ends = prepared
        first = int(np.searchsorted(ends, start, side="right"))
        last = int(np.searchsorted(ends, stop - 1, side="right")) + 1
        row_start = ends[first:last] - counts[first:last]
        begin = np.maximum(row_start, start)
        taken = np.minimum(ends[first:last], stop) - begin
        column0 = first_column[first:last] + (begin - row_start)
        offsets = np.cumsum(taken) - taken
        row = np.repeat(rows[first:last], taken)
        columns = np.arange(stop - start) + np.repeat(column0 - offsets, taken)
        u, l = self.u[row], self.l[columns]
        kernel = (u + l) / (u - l)
        weight = None if self.u_w is None else self.u_w[row] * self.l_w[columns]
        return kernel, weight

    def _with_zeros(self, low: _Bound, high: _Bound) -> bool:
        return low.t < 0.0 <= high.t and self.tie_zeros > 0.0

    def _select(self, low: _Bound, high: _Bound, first: float, last: float) -> tuple[float, float]:
        """The ranks' values among every candidate between ``low`` and ``high``, enumerated."""
        if low.columns is None and high.columns is None:
            # Every pair (few observations): one outer operation.
            u = self.u[:, np.newaxis]
            kernel = ((u + self.l) / (u - self.l)).ravel()
            weight = None if self.u_w is None else (self.u_w[:, np.newaxis] * self.l_w).ravel()
        else:
            prepared = self._prepare(low, high)
            count = int(prepared[3][-1]) if prepared[3].size else 0
            kernel, weight = self._chunk(prepared, 0, count) if count else (np.empty(0), None if self.u_w is None else np.empty(0))
        zeros = self._with_zeros(low, high)
        first, last = first - low.at_most, last - low.at_most
        if weight is None:
            # One observation each: the ranks are whole; the tie block's zeros join as values.
            if zeros:
                kernel = np.concatenate((kernel, np.zeros(int(self.tie_zeros))))
            wanted = [math.ceil(rank) - 1 for rank in (first, last)]
            if wanted[-1] >= kernel.size:
                return tuple(float(np.partition(kernel, k)[k]) if k < kernel.size else high.t for k in wanted)
            chosen = np.partition(kernel, sorted(set(wanted)))
            return float(chosen[wanted[0]]), float(chosen[wanted[1]])
        if zeros:
            kernel, weight = np.append(kernel, 0.0), np.append(weight, self.tie_zeros)
        value = _weighted_select(kernel, weight, first, high.t)
        return value, (value if last == first else _weighted_select(kernel, weight, last, high.t))

    def _select_streamed(self, low: _Bound, high: _Bound, first: float, last: float) -> tuple[float, float]:
        value = self._streamed_rank(low, high, first)
        return value, (value if last == first else self._streamed_rank(low, high, last))

    def _pass(self, prepared, floor: float, ceiling: float, zeros: bool):
        """Yield the candidates' kernel values in (floor, ceiling] with their weights, a chunk at a time."""
        count = int(prepared[3][-1]) if prepared[3].size else 0
        for start in range(0, count, _ENUMERATED):
            kernel, weight = self._chunk(prepared, start, min(count, start + _ENUMERATED))
            inside = (kernel > floor) & (kernel <= ceiling)
            kernel = kernel[inside]
            yield kernel, (np.ones(kernel.size) if weight is None else weight[inside])
        if zeros and floor < 0.0 <= ceiling:
            yield np.zeros(1), np.full(1, self.tie_zeros)

    def _streamed_rank(self, low: _Bound, high: _Bound, rank: float) -> float:
        """The rank's value among more candidates than fit at once: select by value, passing
        over the candidates a chunk at a time (many kernel values equal to each other)."""
        prepared = self._prepare(low, high)
        zeros = self._with_zeros(low, high)
        rank = rank - low.at_most
        floor, ceiling, below = -math.inf, math.inf, 0.0
        while True:
            inside, kept, kept_w, samples, sample_w = 0.0, [], [], [], []
            keep = True
            for kernel, weight in self._pass(prepared, floor, ceiling, zeros):
                inside += float(np.sum(weight))
                stride = max(1, kernel.size >> 12)
                samples.append(kernel[::stride])
                sample_w.append(weight[::stride] * stride)
                if keep:
                    kept.append(kernel)
                    kept_w.append(weight)
                    keep = sum(part.size for part in kept) <= _ENUMERATED
            if keep:
                return _weighted_select(np.concatenate(kept), np.concatenate(kept_w), rank - below, high.t)
            sample, weights = np.concatenate(samples), np.concatenate(sample_w)
            pivot = _weighted_select(sample, weights, (rank - below) / inside * float(np.sum(weights)), ceiling)
            less = at_most = 0.0
            for kernel, weight in self._pass(prepared, floor, ceiling, zeros):
                less += float(np.sum(weight[kernel < pivot]))
                at_most += float(np.sum(weight[kernel <= pivot]))
            if below + less < rank <= below + at_most:
                return float(pivot)
            if rank <= below + less:
                ceiling = float(np.nextafter(pivot, -math.inf))
            else:
                floor, below = float(pivot), below + at_most


def _count_at_most(ordered: np.ndarray, rows: np.ndarray, factor: float) -> np.ndarray:
    """``np.searchsorted(ordered, rows * factor, side="right")`` for keys ``rows * factor``
    that ascend. Each chunk of keys falls between the counts of the chunks' last keys, so it
    searches only that slice (a cache-sized binary search), and its keys are formed there."""
    # 32-bit counts where they fit: half the memory written and read per exact count.
    counts = np.empty(rows.size, dtype=np.int32 if ordered.size < 2**31 else np.intp)
    probes = np.searchsorted(ordered, rows[_CHUNK - 1 :: _CHUNK] * factor, side="right")
    keys = np.empty(min(rows.size, _CHUNK))
    start = 0
    for index, first in enumerate(range(0, rows.size, _CHUNK)):
        stop = int(probes[index]) if index < probes.size else ordered.size
        chunk = rows[first : first + _CHUNK]
        np.multiply(chunk, factor, out=keys[: chunk.size])
        found = counts[first : first + _CHUNK]
        found[:] = np.searchsorted(ordered[start:stop], keys[: chunk.size], side="right")
        found += start
        start = stop
    return counts


def _root(g, target: float, a: float, ga: float, b: float, gb: float, tolerance: float):
    """Narrow ``[a, b]`` (``g(a) < target <= g(b)``, ``g`` non-decreasing) by false position
    with bisection whenever one end is kept twice (Illinois-like), until ``g(b) - g(a)`` is at
    most ``tolerance`` or the ends are adjacent doubles."""
    side, repeated = 0, 0
    for _ in range(64):
        if gb - ga <= tolerance:
            break
        t = a + (target - ga) / (gb - ga) * (b - a)
        if repeated >= 2 or not a < t < b:
            t = 0.5 * a + 0.5 * b
            if not a < t < b:
                break
        gt = g(t)
        now = -1 if gt < target else 1
        repeated = repeated + 1 if now == side and repeated < 2 else (1 if now != side else 0)
        side = now
        if gt < target:
            a, ga = t, gt
        else:
            b, gb = t, gt
    return a, ga, b, gb


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
