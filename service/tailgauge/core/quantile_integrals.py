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
batch of resamples takes prefix sums over the positions its rows' windows span (a part of its
rows at a time), and a window wider than half the support as the rows' power sum less its two
ends; the jackknife's rows take the data's prefix sums less the one observation each leaves out.

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
            with np.errstate(over="ignore", invalid="ignore"):
                edges = self.of(edges)
            if not np.all(np.isfinite(edges)):
                edges = edges.copy()
                if not np.isfinite(edges[0]):
                    edges[0] = edges[1]
                if not np.isfinite(edges[-1]):
                    edges[-1] = edges[-2]
        self.edges = edges
        self.open_lower, self.open_upper = open_ends
        # Which column of a resample view's power sums (``view.sums``) is sum_l w_l x_l over this
        # grid's values, when one is (the engine's scaled deviations are its first power).
        self.sums_column: int | None = None

    def of(self, raw: np.ndarray) -> np.ndarray:
        """``raw`` in the grid's units (callers set numpy's error state: a logarithm of a value
        no window reads may be of a non-positive one)."""
        return raw if self.transform is None else self.transform(raw)

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
        found = self._cumulative.searchsorted(target, side="left")
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

    def difference(self, grid: Grid, low: np.ndarray, high: np.ndarray) -> np.ndarray:
        """:func:`difference` for this one row, window by window in scalars (the same formula:
        the first position's part, the whole positions between, the last position's part)."""
        cumulative = self._cumulative
        firsts = self.first_reaching(low)[0].tolist()
        lasts = self.first_reaching(high)[0].tolist()
        out = np.empty((1, len(firsts)))
        for j, (a, b, i, last) in enumerate(zip(low[0].tolist(), high[0].tolist(), firsts, lasts)):
            start = float(cumulative[i - 1]) if i > 0 else 0.0
            if i == last:
                out[0, j] = self._part(grid, i, a - start, b - start)
                continue
            final = float(cumulative[last - 1]) if last > 0 else 0.0
            out[0, j] = (
                self._part(grid, i, a - start, float(cumulative[i]) - start)
                + self.segment_sum(grid, i + 1, last)
                + self._part(grid, last, 0.0, b - final)
            )
        return out

    def _part(self, grid: Grid, index: int, start: float, stop: float) -> float:
        """The integral of Q over (start, stop] inside position ``index`` (see :func:`_within`)."""
        if not stop > start:
            return 0.0
        if grid.edges is None:
            return (stop - start) * float(grid.of(grid.values[index]))
        weight = 1.0 if self._weights is None else float(self._weights[index])
        lower = float(grid.edges[index])
        slope = (float(grid.edges[index + 1]) - lower) / weight if weight > 0.0 else 0.0
        return (stop - start) * (lower + 0.5 * (start + stop) * slope)

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
    # Resample rows: per window, sums over the positions some row's window spans only (a tail
    # spans its share of the support); a window wider than half the support (a trimmed mean's) is
    # the row's total (one matrix-vector product) less the sums below and above it.
    weights = view.weights
    k = weights.shape[1]
    out = np.zeros(low.shape)
    total = None
    for j in range(low.shape[1]):
        first, last = int(low[:, j].min()), int(high[:, j].max())
        if last <= first + 1:
            continue
        if last - first <= k // 2:
            out[:, j] = _span_sums(weights, column, first, last, low[:, j] + 1, high[:, j])
            continue
        if total is None:
            known = grid.sums_column is not None and hasattr(view, "sums")
            total = view.sums[:, grid.sums_column] if known else weights @ column
        below = _span_sums(weights, column, 0, int(low[:, j].max()) + 1, np.zeros_like(low[:, j]), low[:, j] + 1)
        above = _span_sums(weights, column, int(high[:, j].min()), k, high[:, j], np.full_like(high[:, j], k))
        out[:, j] = np.where(high[:, j] > low[:, j] + 1, total - below - above, 0.0)
    return out


def _span_sums(weights: np.ndarray, column: np.ndarray, first: int, last: int, start: np.ndarray, stop: np.ndarray) -> np.ndarray:
    """sum_{start_r <= l < stop_r} w_rl column_l per row r, every start and stop within
    [first, last]: prefix sums over those positions only, a part of the rows at a time."""
    rows = weights.shape[0]
    out = np.zeros(rows)
    width = last - first
    if width <= 0:
        return out
    step = max(1, PART_BYTES // (8 * width))
    for begin in range(0, rows, step):
        part = slice(begin, begin + step)
        prefix = np.zeros((min(step, rows - begin), width + 1))
        np.cumsum(weights[part, first:last] * column[first:last], axis=1, out=prefix[:, 1:])
        # prefix[:, i] = sum over positions first .. first + i - 1
        upper = np.take_along_axis(prefix, (stop[part] - first).clip(0, width)[:, None], axis=1)[:, 0]
        lower = np.take_along_axis(prefix, (start[part] - first).clip(0, width)[:, None], axis=1)[:, 0]
        out[part] = np.where(stop[part] > start[part], upper - lower, 0.0)
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
    if isinstance(view, SupportRow):
        return view.difference(grid, low, high)
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


def means_from(view, grid: Grid, sums: np.ndarray, low: np.ndarray, high: np.ndarray) -> np.ndarray:
    """The mean of Q over each window from its integral ``sums`` (NaN where the window is empty or
    reaches an open bin holding weight)."""
    with np.errstate(invalid="ignore", divide="ignore"):
        means = sums / (high - low)
    return np.where(reaches_open_bin(view, grid, low, high) | ~(high > low), np.nan, means)


def tail_windows(view, levels: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The windows of the tail means (rows x 2 levels): the upper tails (alpha W, W], then the
    lower tails (0, (1 - alpha) W]."""
    total = np.asarray(view.total, dtype=np.float64).reshape(-1, 1)
    upper_low = total * levels[None, :]
    lower_high = total * (1.0 - levels[None, :])
    low = np.concatenate((upper_low, np.zeros_like(lower_high)), axis=1)
    high = np.concatenate((np.broadcast_to(total, upper_low.shape), lower_high), axis=1)
    return low, high


def tail_means(view, grid: Grid, levels: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Upper and lower tail means of each row at each level (rows x levels)."""
    low, high = tail_windows(view, levels)
    means = means_from(view, grid, difference(view, grid, low, high), low, high)
    return means[:, : levels.size], means[:, levels.size :]


def trimmed_count(total: np.ndarray, proportion: float, whole: bool) -> np.ndarray:
    """How much is cut from each end: floor(gamma n) observations for whole counts (the
    convention of scipy.stats.trim_mean and mstats.winsorize), gamma W for other weights."""
    cut = np.asarray(total, dtype=np.float64) * proportion
    return np.floor(cut) if whole else cut


def trim_window(view, proportion: float, whole: bool) -> tuple[np.ndarray, np.ndarray]:
    """The window kept by trimming, (g, W - g], of each row (rows x 1 each)."""
    total = np.asarray(view.total, dtype=np.float64).reshape(-1, 1)
    cut = trimmed_count(total, proportion, whole)
    return cut, total - cut


def trimmed_from(view, grid: Grid, middle: np.ndarray, low: np.ndarray, high: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Trimmed mean (integral over (g, W - g]) / (W - 2g) and winsorized mean
    (g Q(g+) + integral over (g, W - g] + g Q(W - g)) / W of each row (rows,), from the integral
    ``middle`` over the window (low, high] = (g, W - g] (rows x 1)."""
    cut, total = low, high + low
    bottom = quantile(view, grid, low, after=True)[:, 0]
    top = quantile(view, grid, high)[:, 0]
    kept_open = reaches_open_bin(view, grid, low, high)[:, 0]
    any_open = reaches_open_bin(view, grid, np.zeros_like(low), total)[:, 0]
    middle, cut, total = middle[:, 0], cut[:, 0], total[:, 0]
    with np.errstate(invalid="ignore", divide="ignore"):
        trimmed = middle / (total - 2.0 * cut)
        winsorized = (cut * bottom + middle + cut * top) / total
    return np.where(kept_open, np.nan, trimmed), np.where(any_open, np.nan, winsorized)


def trimmed_and_winsorized(view, grid: Grid, proportion: float, whole: bool) -> tuple[np.ndarray, np.ndarray]:
    """Trimmed and winsorized means of each row (rows,), see :func:`trimmed_from`."""
    low, high = trim_window(view, proportion, whole)
    return trimmed_from(view, grid, difference(view, grid, low, high), low, high)


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
