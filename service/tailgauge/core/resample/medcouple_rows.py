"""The medcouple of many rows of weights at once, by the definition ``describe`` uses for one
(:func:`tailgauge.core.robust.medcouple`, Brys, Hubert & Struyf 2004, definition 2).

Rows are grouped by their median m (resamples share few medians). Given m, the kernel
``h(l, u) = ((u - m) + (l - m)) / (u - l)`` of every pair of support values l < m < u is fixed,
and it increases in both l and u, so its values, sorted once per median with 0 (the kernel of
pairs tied at the median), are the candidates for every row of the group. A row weighs the pair
(l, u) by ``w_l w_u``; the weight of kernels at or below the p-th candidate is

    (ties x lower) + (the -1 signs among ties) + [candidate >= 0] (the zeros among ties)
    + sum_u w_u (weight of the lower values l with h(l, u) <= candidate),

and the last sum is one gather per upper value from a table of bounds (how many lower values
each upper value pairs with at or below each candidate). Each row's medcouple is then found by
bisection over the candidates: about log2(k^2/4) steps of k/2 gathers each, O(k log k) per row.
The table has (k^2/4 + 1) x k/2 entries per median, so the engine resamples the medcouple only
when the support is small enough (``budget.medcouple_left_out``).
"""

from __future__ import annotations

import math
import threading

import numpy as np

from tailgauge.core.order_rules import middle_ranks
from tailgauge.core.resample.budget import MEDCOUPLE_BYTES_PER_ELEMENT

# Relative slack of the weighted-median rank for weights that are not whole counts (as
# robust.medcouple's selection).
RANK_SLACK = 1e-12
# Rows of a group bisected over every candidate to find where the others' answers lie.
PILOT = 16
# The most candidates summed one by one across a window (rows x window arrays).
WINDOW = 128


# Bytes of kernel tables a KernelCache keeps (a table per median is (k^2/4 + 1) x k/2 32-bit
# entries: 31 KB at k = 50, up to 8 MB near the budget's largest k).
CACHE_BYTES = 16 << 20


class KernelCache:
    """Each median's sorted kernels over one support, kept while they fit in ``limit`` bytes:
    a bootstrap's batches and its jackknife share most medians. Threads may share it."""

    def __init__(self, limit: int = CACHE_BYTES) -> None:
        self.limit = limit
        self._kept: dict[float, _Kernels] = {}
        self._bytes = 0
        self._lock = threading.Lock()

    def get(self, median: float) -> _Kernels | None:
        return self._kept.get(median)

    def keep(self, median: float, kernels: _Kernels) -> None:
        size = kernels.nbytes
        with self._lock:
            if median not in self._kept and self._bytes + size <= self.limit:
                self._kept[median] = kernels
                self._bytes += size


class _Kernels:
    """The kernel values of one median's pairs, sorted, with the bounds table."""

    def __init__(self, z: np.ndarray) -> None:
        # z increases along the sorted support: the lower values, the ties and the upper values
        # are three runs of positions, taken as slices (a copy of a slice is cheaper than a gather).
        self.upper = np.flatnonzero(z > 0.0)
        self.lower = np.flatnonzero(z < 0.0)
        self.ties = np.flatnonzero(z == 0.0)
        self.upper_run = slice(self.lower.size + self.ties.size, z.size)
        self.lower_run = slice(0, self.lower.size)
        self.ties_run = slice(self.lower.size, self.lower.size + self.ties.size)
        u, l = z[self.upper], z[self.lower]
        kernel = (u[:, None] + l[None, :]) / (u[:, None] - l[None, :])
        pairs = kernel.size
        values = np.append(kernel.ravel(), 0.0)  # the last one stands for the ties' zeros
        order = np.argsort(values, kind="stable")
        self.candidates = values[order]
        # bounds[p, j]: lower values pairing with upper value j at or below candidate p. Counted
        # along the sorted order, then read at the last candidate equal to candidate p.
        from_pair = order < pairs
        marks = np.zeros((values.size, self.upper.size), dtype=np.int32)
        marks[np.flatnonzero(from_pair), order[from_pair] // max(self.lower.size, 1)] = 1
        np.cumsum(marks, axis=0, out=marks)
        last_equal = np.searchsorted(self.candidates, self.candidates, side="right") - 1
        self.bounds = marks[last_equal]
        self.nonnegative = self.candidates >= 0.0
        # The pair behind each candidate (the ties' zero has none: is_zero).
        self.is_zero = ~from_pair
        self.pair_upper = np.where(from_pair, order // max(self.lower.size, 1), 0)
        self.pair_lower = np.where(from_pair, order % max(self.lower.size, 1), 0)
        self.nbytes = sum(
            a.nbytes for a in (self.candidates, self.bounds, self.nonnegative, self.is_zero, self.pair_upper, self.pair_lower)
        )

    def medcouples(self, weights: np.ndarray, whole: bool) -> np.ndarray:
        """The medcouple of each row of ``weights`` (rows x support), NaN where undefined."""
        if not whole:
            # Only ratios of pair weights matter: each row scaled by its largest weight.
            weights = weights / np.max(weights, axis=1, keepdims=True)
        # (Contiguous copies, laid out as gathers of those positions would be.)
        upper_w = np.ascontiguousarray(weights[:, self.upper_run])
        # Lower values by rows (lower values x rows), as the window's candidates below.
        lower_w = np.ascontiguousarray(weights[:, self.lower_run].T)
        lower_cumulative = np.zeros((self.lower.size + 1, weights.shape[0]))
        np.cumsum(lower_w, axis=0, out=lower_cumulative[1:])
        ties = np.ascontiguousarray(weights[:, self.ties_run]).sum(axis=1)
        total_lower, total_upper = lower_cumulative[-1], upper_w.sum(axis=1)
        total = (total_upper + ties) * (total_lower + ties)
        if whole:
            tie_signs, tie_zeros = ties * (ties - 1.0) / 2.0, ties
        else:
            tie_signs, tie_zeros = ties * ties / 2.0, np.zeros_like(ties)
        minus_ones = ties * total_lower + tie_signs
        plus_ones = total_upper * ties + tie_signs
        if whole:
            ranks = middle_ranks(total)
        else:
            ranks = np.repeat((0.5 * total - RANK_SLACK * total)[:, None], 2, axis=1)
        counted = _Counts(self, minus_ones, tie_zeros, upper_w, lower_cumulative)
        # Ranks among the tie signs are settled without a search (see _value).
        signed = (ranks <= minus_ones[:, None]) | (ranks > (total - plus_ones)[:, None])
        positions = self._positions(ranks, signed, counted, lower_w)
        found = self._value(positions, ranks, minus_ones[:, None], plus_ones[:, None], total[:, None])
        result = np.where(found[:, 0] == found[:, 1], found[:, 0], 0.5 * found[:, 0] + 0.5 * found[:, 1])
        return np.where(total > 0.0, result, np.nan)

    def _positions(self, ranks: np.ndarray, signed: np.ndarray, counted: _Counts, lower_w: np.ndarray) -> np.ndarray:
        """Per row and rank (rows x 2), the position of the smallest candidate whose weight at or
        below reaches the rank; ``lower_w`` holds the lower values' weights (lower values x rows).

        Resamples' medcouples crowd a few neighbouring candidates: a window of them is taken
        around the answers of the first ``PILOT`` rows (bisected over every candidate), and
        every row's weights are summed candidate by candidate across it (one count before the
        window, then each candidate's pair weight). Rows whose answer lies outside the window
        are bisected over every candidate. The answer is the same either way; only the work
        differs.
        """
        last = self.candidates.size - 1
        rows = ranks.shape[0]
        if rows <= 2 * PILOT:
            return _bisect_both(ranks, counted, np.arange(rows), last)
        # The lower middle rank's answers (the upper one's are the same or the next candidates),
        # and two more candidates each side: the few rows outside (about 2/17 beyond the range
        # of 16 others, when answers are exchangeable) are bisected.
        pilot = _bisect(ranks[:PILOT, 0], counted.rows(slice(0, PILOT)), 0, last)
        low, high = max(0, int(pilot.min()) - 2), min(last, int(pilot.max()) + 2)
        found = np.zeros(ranks.shape, dtype=np.intp)
        # Whole runs of equal candidates: the count before the window is then a count at or below.
        low = int(np.searchsorted(self.candidates, self.candidates[low], side="left"))
        high = int(np.searchsorted(self.candidates, self.candidates[high], side="right")) - 1
        if high - low + 1 > min(WINDOW, 2 * (self.upper.size + self.lower.size)):
            return _bisect_both(ranks, counted, np.arange(rows), last)
        before = counted.at_one(low - 1) if low > 0 else counted.minus_ones
        window = slice(low, high + 1)
        # Candidates by rows (window x rows): gathers of whole rows, then running sums down them.
        zero = self.is_zero[window]
        steps = np.empty((zero.size, rows))
        steps[zero] = counted.tie_zeros[None, :]
        if not np.all(zero):  # (with no values on one side of the median there are no pairs)
            upper_w = np.ascontiguousarray(counted.upper_w.T)
            pairs = ~zero
            steps[pairs] = upper_w[self.pair_upper[window][pairs]] * lower_w[self.pair_lower[window][pairs]]
        steps[0] += before
        reached = np.cumsum(steps, axis=0, out=steps)
        inside = signed.copy()
        for side in range(2):
            rank = ranks[:, side]
            enough = reached >= rank[None, :]
            found[:, side] = low + np.argmax(enough, axis=0)
            inside[:, side] |= enough[-1] & (before < rank)
        outside = np.flatnonzero(~np.all(inside, axis=1))
        if outside.size:
            found[outside] = _bisect_both(ranks[outside], counted, outside, last)
        return found

    def _value(self, position, rank, minus_ones, plus_ones, total) -> np.ndarray:
        """The kernel value at ``position``, or the -1 and +1 signs of the ties where the rank
        falls among them."""
        value = np.where(rank <= minus_ones, -1.0, self.candidates[position])
        return np.where(rank > total - plus_ones, 1.0, value)


def _bisect_both(ranks: np.ndarray, counted: _Counts, rows: np.ndarray, last: int) -> np.ndarray:
    """Both ranks of the given ``rows`` (ranks: len(rows) x 2) bisected over every candidate at
    once (rows x 2 positions)."""
    both = _bisect(ranks.T.ravel(), counted.rows(np.tile(rows, 2)), 0, last)
    return both.reshape(2, rows.size).T.copy()


def _bisect(rank: np.ndarray, counted: _Counts, low: int, high: int) -> np.ndarray:
    """Per row, the first position in [low, high] whose count reaches ``rank`` (the count at
    ``high`` reaches it, the count before ``low`` does not)."""
    lows = np.full(rank.size, low, dtype=np.intp)
    highs = np.full(rank.size, high, dtype=np.intp)
    for _ in range(math.ceil(math.log2(high - low + 1))):
        middle = (lows + highs) // 2
        enough = counted.at(middle) >= rank
        highs = np.where(enough, middle, highs)
        lows = np.where(enough, lows, middle + 1)
    return highs


class _Counts:
    """The weight of kernel values at or below a candidate, per row of one median's group."""

    def __init__(self, kernels: _Kernels, minus_ones, tie_zeros, upper_w, lower_cumulative) -> None:
        self.kernels = kernels
        self.minus_ones, self.tie_zeros = minus_ones, tie_zeros
        # Cumulative lower weights by rows ((lower values + 1) x rows): bound b of row r is at
        # b x rows + r in the flattened array.
        self.upper_w, self.lower_cumulative = upper_w, lower_cumulative
        self.kind = np.int32 if lower_cumulative.size < 2**31 else np.int64
        self.columns = np.arange(upper_w.shape[0], dtype=self.kind)[:, None]

    def at(self, position: np.ndarray) -> np.ndarray:
        """Per row, the weight of kernel values at or below candidate ``position[row]``."""
        index = np.multiply(self.kernels.bounds[position], self.lower_cumulative.shape[1], dtype=self.kind)
        index += self.columns
        below = np.take(self.lower_cumulative, index)
        reached = self.minus_ones + np.where(self.kernels.nonnegative[position], self.tie_zeros, 0.0)
        return reached + np.einsum("rj,rj->r", self.upper_w, below)

    def at_one(self, position: int) -> np.ndarray:
        """:meth:`at` with the same ``position`` for every row: its bounds pick whole rows of the
        cumulative lower weights (no gather per element), summed as :meth:`at` sums them."""
        below = np.ascontiguousarray(self.lower_cumulative[self.kernels.bounds[position]].T)
        reached = self.minus_ones + (self.tie_zeros if self.kernels.nonnegative[position] else 0.0)
        return reached + np.einsum("rj,rj->r", self.upper_w, below)

    def rows(self, rows: np.ndarray | slice) -> _Counts:
        return _Counts(
            self.kernels, self.minus_ones[rows], self.tie_zeros[rows], self.upper_w[rows],
            np.ascontiguousarray(self.lower_cumulative[:, rows]),
        )


def medcouples(
    view,
    values: np.ndarray,
    medians: np.ndarray,
    whole: bool,
    part_bytes: int,
    cache: KernelCache | None = None,
) -> np.ndarray:
    """The medcouple of each row of ``view`` over the sorted support ``values``, about each
    row's own ``medians`` (NaN where undefined), taking at most ``part_bytes`` of dense rows at
    a time. ``whole``: the data are whole counts (as robust.medcouple decides for the data),
    so the ties at the median are counted as observations. ``cache``: the medians' kernels
    kept across calls over the same ``values`` (the same kernels as built afresh)."""
    out = np.full(view.count, np.nan)
    # The kernel is scale-free: scale by a power of two first so no difference overflows.
    largest = float(np.max(np.abs(values)))
    exponent = -math.frexp(largest)[1] if largest > 0.0 else 0
    scaled = np.ldexp(values, exponent)
    distinct, which = np.unique(medians, return_inverse=True)
    per_part = max(1, part_bytes // (MEDCOUPLE_BYTES_PER_ELEMENT * values.size))
    for group in range(distinct.size):
        median = float(distinct[group])
        if not math.isfinite(median):
            continue
        members = np.flatnonzero(which == group)
        kernels = None if cache is None else cache.get(median)
        if kernels is None:
            kernels = _Kernels(scaled - math.ldexp(median, exponent))
            if cache is not None:
                cache.keep(median, kernels)
        for start in range(0, members.size, per_part):
            rows = members[start : start + per_part]
            out[rows] = kernels.medcouples(view.dense_weights(rows), whole)
    return out
