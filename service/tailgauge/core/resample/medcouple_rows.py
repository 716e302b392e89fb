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

import numpy as np

from tailgauge.core.order_rules import middle_ranks
from tailgauge.core.resample.budget import MEDCOUPLE_BYTES_PER_ELEMENT

# Relative slack of the weighted-median rank for weights that are not whole counts (as
# robust.medcouple's selection).
RANK_SLACK = 1e-12
# Rows of a group bisected over every candidate to find where the others' answers lie.
PILOT = 16


class _Kernels:
    """The kernel values of one median's pairs, sorted, with the bounds table."""

    def __init__(self, z: np.ndarray) -> None:
        self.upper = np.flatnonzero(z > 0.0)
        self.lower = np.flatnonzero(z < 0.0)
        self.ties = np.flatnonzero(z == 0.0)
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

    def medcouples(self, weights: np.ndarray, whole: bool) -> np.ndarray:
        """The medcouple of each row of ``weights`` (rows x support), NaN where undefined."""
        if not whole:
            # Only ratios of pair weights matter: each row scaled by its largest weight.
            weights = weights / np.max(weights, axis=1, keepdims=True)
        upper_w = weights[:, self.upper]
        lower_cumulative = np.zeros((weights.shape[0], self.lower.size + 1))
        np.cumsum(weights[:, self.lower], axis=1, out=lower_cumulative[:, 1:])
        ties = weights[:, self.ties].sum(axis=1)
        total_lower, total_upper = lower_cumulative[:, -1], upper_w.sum(axis=1)
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
        position = self._select(ranks[:, 0], counted)
        found = np.repeat(self._value(position, ranks[:, 0], minus_ones, plus_ones, total)[:, None], 2, axis=1)
        # The upper middle rank is mostly reached by the same candidate: select again only where not.
        again = np.flatnonzero((ranks[:, 1] != ranks[:, 0]) & (counted.at(position) < ranks[:, 1]))
        if again.size:
            rank = ranks[again, 1]
            position = self._select(rank, counted.rows(again))
            found[again, 1] = self._value(position, rank, minus_ones[again], plus_ones[again], total[again])
        result = np.where(found[:, 0] == found[:, 1], found[:, 0], 0.5 * found[:, 0] + 0.5 * found[:, 1])
        return np.where(total > 0.0, result, np.nan)

    def _select(self, rank: np.ndarray, counted: _Counts) -> np.ndarray:
        """The position of the smallest candidate whose weight at or below reaches ``rank``, in
        each row, by bisection over the candidates.

        Resamples' medcouples crowd a few neighbouring candidates: the first ``PILOT`` rows are
        bisected over every candidate, and the others start from a window around theirs (two
        counts check that a row's answer lies inside it; rows whose answer does not are bisected
        over every candidate). The answer is the same either way; only the steps differ.
        """
        last = self.candidates.size - 1
        if rank.size <= 2 * PILOT:
            return _bisect(rank, counted, 0, last)
        pilot = _bisect(rank[:PILOT], counted.rows(np.arange(PILOT)), 0, last)
        spread = int(pilot.max() - pilot.min())
        low, high = max(0, int(pilot.min()) - spread - 2), min(last, int(pilot.max()) + spread + 2)
        inside = counted.at(np.full(rank.size, high)) >= rank
        if low > 0:
            inside &= counted.at(np.full(rank.size, low - 1)) < rank
        if np.all(inside):
            return _bisect(rank, counted, low, high)
        found = np.empty(rank.size, dtype=np.intp)
        near, far = np.flatnonzero(inside), np.flatnonzero(~inside)
        found[near] = _bisect(rank[near], counted.rows(near), low, high)
        found[far] = _bisect(rank[far], counted.rows(far), 0, last)
        return found

    def _value(self, position, rank, minus_ones, plus_ones, total) -> np.ndarray:
        """The kernel value at ``position``, or the -1 and +1 signs of the ties where the rank
        falls among them."""
        value = np.where(rank <= minus_ones, -1.0, self.candidates[position])
        return np.where(rank > total - plus_ones, 1.0, value)


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
        self.upper_w, self.lower_cumulative = upper_w, lower_cumulative
        # Row r's cumulative lower weights start at r x (lower values + 1) in the flattened array.
        kind = np.int32 if lower_cumulative.size < 2**31 else np.int64
        self.offsets = (np.arange(upper_w.shape[0], dtype=kind) * lower_cumulative.shape[1])[:, None]

    def at(self, position: np.ndarray) -> np.ndarray:
        """Per row, the weight of kernel values at or below candidate ``position[row]``."""
        index = self.kernels.bounds[position]
        index += self.offsets
        below = np.take(self.lower_cumulative, index)
        reached = self.minus_ones + np.where(self.kernels.nonnegative[position], self.tie_zeros, 0.0)
        return reached + np.einsum("rj,rj->r", self.upper_w, below)

    def rows(self, rows: np.ndarray) -> _Counts:
        return _Counts(
            self.kernels, self.minus_ones[rows], self.tie_zeros[rows], self.upper_w[rows], self.lower_cumulative[rows]
        )


def medcouples(view, values: np.ndarray, medians: np.ndarray, whole: bool, part_bytes: int) -> np.ndarray:
    """The medcouple of each row of ``view`` over the sorted support ``values``, about each
    row's own ``medians`` (NaN where undefined), taking at most ``part_bytes`` of dense rows at
    a time. ``whole``: the data are whole counts (as robust.medcouple decides for the data),
    so the ties at the median are counted as observations."""
    out = np.full(view.count, np.nan)
    # The kernel is scale-free: scale by a power of two first so no difference overflows.
    largest = float(np.max(np.abs(values)))
    exponent = -math.frexp(largest)[1] if largest > 0.0 else 0
    scaled = np.ldexp(values, exponent)
    distinct, which = np.unique(medians, return_inverse=True)
    for group, median in enumerate(distinct):
        if not math.isfinite(median):
            continue
        members = np.flatnonzero(which == group)
        kernels = _Kernels(scaled - math.ldexp(float(median), exponent))
        per_part = max(1, part_bytes // (MEDCOUPLE_BYTES_PER_ELEMENT * values.size))
        for start in range(0, members.size, per_part):
            rows = members[start : start + per_part]
            out[rows] = kernels.medcouples(view.dense_weights(rows), whole)
    return out
