"""Integrals of the quantile function over windows of probability mass, written once over the
row interface of :mod:`tailgauge.core.order_rules` (one row: the data; many rows: resamples or
the jackknife's leave-one-out rows).

For a row of weights w_i over sorted support values x_i (cumulative C_i, total W), the step
(inverse-CDF) quantile function is Q(t) = x_i for C_{i-1} < t <= C_i, t in (0, W], and for a
window (a, b] with a reached at position i and b at position j (the first positions whose
cumulative weight reaches them),

    integral_a^b Q = (C_i - a) x_i + sum_{i < l < j} w_l x_l + (b - C_{j-1}) x_j   (i < j),
                   = (b - a) x_i                                                    (i = j),

so a boundary observation enters with the fraction of its weight inside the window (Acerbi &
Tasche 2002). For bins Q is linear within each bin (the grouped quantile function): a part u of
bin l's weight w_l from its start integrates to u (lo_l + u h_l / (2 w_l)). The tail means, the
trimmed and winsorized means and Hill's estimator are such windows. The sums over whole
positions are read per kind of row: one row (:class:`SupportRow`, the data) sums only the
positions inside each window, so a tail costs its share of the data and never a whole pass; a
batch of resamples takes prefix sums (a part of its rows at a time); the jackknife's rows take the
data's prefix sums less the one observation each leaves out.

References
----------
C. Acerbi and D. Tasche, "On the coherence of expected shortfall", Journal of Banking & Finance
26(7), 1487-1503, 2002 (the fractional boundary weight of the tail mean).
"""

from __future__ import annotations

from collections.abc import Callable
from functools import cached_property

import numpy as np

# Rows of dense prefix sums taken at a time: at most this many bytes of rows x support.
PART_BYTES = 4 << 20


class Grid:
    """The support a row's weights lie on: ``values`` seen through ``transform`` (applied to the
    parts read, never to more: e.g. deviations scaled by a power of two, or logarithms) and, for
    bins, the ``edges`` in the same units (an open end holds its finite neighbour as a
    placeholder; windows reaching an open bin that holds weight are undefined)."""

    def __init__(
        self,
        values: np.ndarray,
        edges: np.ndarray | None = None,
        open_ends: tuple[bool, bool] = (False, False),
        transform: Callable[[np.ndarray], np.ndarray] | None = None,
    ):
        self.values = values
        self.transform = transform
        if edges is not None:
            edges = self.of(edges)
            if not np.all(np.isfinite(edges)):
                edges = edges.copy()
                if not np.isfinite(edges[0]):
                    edges[0] = edges[1]
                if not np.isfinite(edges[-1]):
                    edges[-1] = edges[-2]
        self.edges = edges
        self.open_lower, self.open_upper = open_ends

    def of(self, raw: np.ndarray) -> np.ndarray:
        if self.transform is None:
            return raw
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            return self.transform(raw)

    def at(self, index: np.ndarray) -> np.ndarray:
        return self.of(self.values[index])

    @cached_property
    def column(self) -> np.ndarray:
        """Every position's value (what many rows read at once)."""
        return self.of(self.values)


class SupportRow:
    """The data as one row of the row interface: sorted support values' weights and cumulative
    weights (``weights`` None: one observation each), read without building anything of their
    size; sums over positions are taken over the positions asked for only."""

    count = 1

    def __init__(self, weights: np.ndarray | None, cumulative: np.ndarray) -> None:
        self._weights = weights
        self._cumulative = cumulative
        self.total = np.array([float(cumulative[-1])])

    def first_reaching(self, target: np.ndarray) -> np.ndarray:
        found = np.searchsorted(self._cumulative, target, side="left")
        return np.minimum(found, self._cumulative.size - 1)

    def cumulative_at(self, index: np.ndarray) -> np.ndarray:
        return self._cumulative[index].astype(np.float64)

    def weight_at(self, index: np.ndarray) -> np.ndarray:
        return np.ones(index.shape) if self._weights is None else self._weights[index]

    def segment_sum(self, grid: Grid, start: int, stop: int) -> float:
        """sum_{start <= l < stop} w_l x_l (x: the grid's values)."""
        if stop <= start:
            return 0.0
        part = grid.of(grid.values[start:stop])
        if self._weights is None:
            return float(np.sum(part))
        return float(np.dot(self._weights[start:stop], part))

    def total_sum(self, column: np.ndarray) -> float:
        return float(np.sum(column)) if self._weights is None else float(np.dot(self._weights, column))


def _between(view, grid: Grid, low: np.ndarray, high: np.ndarray) -> np.ndarray:
    """sum_{low < l < high} w_l x_l per row and pair of positions (rows x m; 0 where high <= low + 1)."""
    if isinstance(view, SupportRow):
        return np.array([[view.segment_sum(grid, int(a) + 1, int(b)) for a, b in zip(low[0], high[0])]])
    column = grid.column
    if hasattr(view, "positions"):  # leave-one-out rows: the data's prefix less one observation
        prefix = np.concatenate(([0.0], np.cumsum(view.base * column)))
        removed = (view.removed * column[view.positions])[:, None]
        positions = view.positions[:, None]

        def before(index: np.ndarray) -> np.ndarray:  # sum over l < index
            return prefix[index] - np.where(positions < index, removed, 0.0)

        return np.where(high > low + 1, before(high) - before(low + 1), 0.0)
    weights = view.weights
    rows, k = weights.shape
    out = np.empty(low.shape)
    step = max(1, PART_BYTES // (8 * max(k, 1)))
    for start in range(0, rows, step):
        part = slice(start, start + step)
        prefix = np.cumsum(weights[part] * column, axis=1)
        # sum over (low, high) = P(high - 1) - P(low), zero where the window holds no whole position.
        upper = np.take_along_axis(prefix, np.maximum(high[part] - 1, 0), axis=1)
        lower = np.take_along_axis(prefix, low[part], axis=1)
        out[part] = np.where(high[part] > low[part] + 1, upper - lower, 0.0)
    return out


def dense_sum(view, column: np.ndarray) -> np.ndarray:
    """sum_j w_j column_j of each row (one matrix-vector product)."""
    if isinstance(view, SupportRow):
        return np.array([view.total_sum(column)])
    if hasattr(view, "positions"):
        return float(view.base @ column) - view.removed * column[view.positions]
    return view.weights @ column


def _cumulative_before(view, index: np.ndarray) -> np.ndarray:
    """C(index - 1): the weight below position ``index`` of each row."""
    return np.where(index > 0, view.cumulative_at(np.maximum(index - 1, 0)), 0.0)


def _within(view, grid: Grid, index: np.ndarray, start: np.ndarray, stop: np.ndarray) -> np.ndarray:
    """The integral of Q over (start, stop] inside position ``index`` (both within its weight,
    measured from the position's start): (stop - start) x, or for bins the interpolated part."""
    if grid.edges is None:
        return (stop - start) * grid.at(index)
    weight = view.weight_at(index)
    lower = grid.edges[index]
    width = grid.edges[index + 1] - lower
    with np.errstate(invalid="ignore", divide="ignore"):
        slope = np.where(weight > 0.0, width / weight, 0.0)
    # integral_start^stop (lower + u slope) du
    return np.where(stop > start, (stop - start) * (lower + 0.5 * (start + stop) * slope), 0.0)


def difference(view, grid: Grid, low: np.ndarray, high: np.ndarray) -> np.ndarray:
    """integral_low^high Q per row and window (rows x m; low <= high, both in [0, W])."""
    first = view.first_reaching(low)
    last = view.first_reaching(high)
    first_start = _cumulative_before(view, first)
    last_start = _cumulative_before(view, last)
    same = first == last
    head = _within(view, grid, first, low - first_start, np.where(same, high, view.cumulative_at(first)) - first_start)
    tail = np.where(same, 0.0, _within(view, grid, last, np.zeros_like(high), high - last_start))
    return head + tail + _between(view, grid, first, last)


def quantile(view, grid: Grid, targets: np.ndarray, *, after: bool = False) -> np.ndarray:
    """Q(t) of each row: the step quantile (``after``: its right limit Q(t+), the first value whose
    cumulative weight passes t); for bins the interpolated grouped quantile."""
    if grid.edges is None:
        found = targets if not after else np.nextafter(targets, np.inf)
        return grid.at(view.first_reaching(found))
    index = view.first_reaching(targets)
    weight = view.weight_at(index)
    lower = grid.edges[index]
    width = grid.edges[index + 1] - lower
    with np.errstate(invalid="ignore", divide="ignore"):
        share = np.where(weight > 0.0, (targets - _cumulative_before(view, index)) / weight, 0.0)
    return lower + share * width


def reaches_open_bin(view, grid: Grid, low: np.ndarray, high: np.ndarray) -> np.ndarray:
    """Whether the window (low, high] of each row overlaps an open-ended bin holding weight."""
    touched = np.zeros(np.broadcast_shapes(low.shape, high.shape), dtype=bool)
    if grid.edges is None:
        return touched
    k = grid.edges.size - 1
    if grid.open_lower:
        first = view.cumulative_at(np.zeros(low.shape, dtype=np.intp))
        touched |= (first > 0.0) & (low < first)
    if grid.open_upper:
        total = np.asarray(view.total, dtype=np.float64).reshape(-1, 1)
        last = view.weight_at(np.full(high.shape, k - 1, dtype=np.intp))
        touched |= (last > 0.0) & (high > total - last)
    return touched


def window_means(view, grid: Grid, low: np.ndarray, high: np.ndarray) -> np.ndarray:
    """The mean of Q over each window (NaN where it is empty or reaches an open bin holding weight)."""
    with np.errstate(invalid="ignore", divide="ignore"):
        means = difference(view, grid, low, high) / (high - low)
    return np.where(reaches_open_bin(view, grid, low, high) | ~(high > low), np.nan, means)


def tail_means(view, grid: Grid, levels: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Upper and lower tail means of each row at each level (rows x levels): the windows
    (alpha W, W] and (0, (1 - alpha) W]."""
    total = np.asarray(view.total, dtype=np.float64).reshape(-1, 1)
    upper_low = total * levels[None, :]
    lower_high = total * (1.0 - levels[None, :])
    low = np.concatenate((upper_low, np.zeros_like(lower_high)), axis=1)
    high = np.concatenate((np.broadcast_to(total, upper_low.shape), lower_high), axis=1)
    means = window_means(view, grid, low, high)
    return means[:, : levels.size], means[:, levels.size :]


def trimmed_count(total: np.ndarray, proportion: float, whole: bool) -> np.ndarray:
    """How much is cut from each end: floor(gamma n) observations for whole counts (the
    convention of scipy.stats.trim_mean and mstats.winsorize), gamma W for other weights."""
    cut = np.asarray(total, dtype=np.float64) * proportion
    return np.floor(cut) if whole else cut


def trimmed_and_winsorized(view, grid: Grid, proportion: float, whole: bool) -> tuple[np.ndarray, np.ndarray]:
    """Trimmed mean (integral over (g, W - g]) / (W - 2g) and winsorized mean
    (g Q(g+) + integral over (g, W - g] + g Q(W - g)) / W of each row (rows,)."""
    total = np.asarray(view.total, dtype=np.float64).reshape(-1, 1)
    cut = trimmed_count(total, proportion, whole)
    low, high = cut, total - cut
    middle = difference(view, grid, low, high)[:, 0]
    bottom = quantile(view, grid, low, after=True)[:, 0]
    top = quantile(view, grid, high)[:, 0]
    kept_open = reaches_open_bin(view, grid, low, high)[:, 0]
    any_open = reaches_open_bin(view, grid, np.zeros_like(low), total)[:, 0]
    cut, total = cut[:, 0], total[:, 0]
    with np.errstate(invalid="ignore", divide="ignore"):
        trimmed = middle / (total - 2.0 * cut)
        winsorized = (cut * bottom + middle + cut * top) / total
    return np.where(kept_open, np.nan, trimmed), np.where(any_open, np.nan, winsorized)


def hill(view, values: np.ndarray, logs: Grid, k: int) -> np.ndarray:
    """Hill's estimate k / sum_{i=1..k} ln(X_(n-i+1) / X_(n-k)) of each row (whole counts);
    NaN where X_(n-k) <= 0 or the k largest all equal X_(n-k). ``logs``: the natural logarithm
    of the positive values (only values above a positive X_(n-k) are read)."""
    total = np.asarray(view.total, dtype=np.float64).reshape(-1, 1)
    start = total - k
    threshold = values[view.first_reaching(start)][:, 0]
    with np.errstate(invalid="ignore", divide="ignore"):
        spread = difference(view, logs, start, total)[:, 0] - k * np.log(np.where(threshold > 0.0, threshold, np.nan))
        return np.where((threshold > 0.0) & (spread > 0.0), k / spread, np.nan)
