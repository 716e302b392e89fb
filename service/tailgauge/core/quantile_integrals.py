"""Integrals of the quantile function over windows of probability mass, written once over the
row interface of :mod:`tailgauge.core.order_rules` (one row: the data; many rows: resamples or
the jackknife's leave-one-out rows).

For a row of weights w_i over sorted support values x_i (cumulative C_i, total W), the step
(inverse-CDF) quantile function Q(t) = x_i for C_{i-1} < t <= C_i, t in (0, W], and

    G(t) = integral_0^t Q(u) du = P(i) - (C_i - t) x_i,   i the first position with C_i >= t,

P(i) = sum_{j <= i} w_j x_j. So a boundary observation enters a window with the fraction of its
weight that lies inside it (Acerbi & Tasche 2002). For bins Q is linear within each bin (the
grouped quantile function) and G is piecewise quadratic: P(i - 1) + u (lo_i + u h_i / (2 w_i)),
u = t - C_{i-1}. The tail means, trimmed and winsorized means and Hill's estimator are all
differences of G at a few points, so the point estimate and every replicate follow the same
arithmetic; each costs one prefix sum over the support per row.

References
----------
C. Acerbi and D. Tasche, "On the coherence of expected shortfall", Journal of Banking & Finance
26(7), 1487-1503, 2002 (the fractional boundary weight of the tail mean).
"""

from __future__ import annotations

import numpy as np

# Rows of dense prefix sums taken at a time: at most this many bytes of rows x support.
PART_BYTES = 4 << 20


def _prefix_before(view, column: np.ndarray, index: np.ndarray) -> np.ndarray:
    """P(index - 1) = sum_{j < index} w_j column_j for each row of ``view`` (rows x m)."""
    before = index - 1
    if hasattr(view, "positions"):  # leave-one-out rows: the data's prefix less one observation
        base = np.cumsum(view.base * column)
        removed = (view.removed * column[view.positions])[:, None]
        found = base[np.maximum(before, 0)] - np.where(before >= view.positions[:, None], removed, 0.0)
        return np.where(before >= 0, found, 0.0)
    weights = view.weights
    rows, k = weights.shape
    out = np.empty(index.shape)
    step = max(1, PART_BYTES // (8 * max(k, 1)))
    clipped = np.maximum(before, 0)
    for start in range(0, rows, step):
        part = slice(start, start + step)
        prefix = np.cumsum(weights[part] * column, axis=1)
        out[part] = np.take_along_axis(prefix, clipped[part], axis=1)
    return np.where(before >= 0, out, 0.0)


def _cumulative_before(view, index: np.ndarray) -> np.ndarray:
    """C(index - 1): the weight below position ``index`` of each row."""
    return np.where(index > 0, view.cumulative_at(np.maximum(index - 1, 0)), 0.0)


def dense_sum(view, column: np.ndarray) -> np.ndarray:
    """sum_j w_j column_j of each row (one matrix-vector product)."""
    if hasattr(view, "positions"):
        return float(view.base @ column) - view.removed * column[view.positions]
    return view.weights @ column


class Grid:
    """The support a row's weights lie on: ``column`` (values, or scaled deviations, one per
    position) and, for bins, their ``edges`` in the same units (an open end holds a finite
    placeholder; windows reaching an open bin that holds weight are undefined)."""

    def __init__(self, column: np.ndarray, edges: np.ndarray | None = None, open_ends: tuple[bool, bool] = (False, False)):
        self.column = column
        if edges is not None and not np.all(np.isfinite(edges)):
            # An open end's placeholder is its finite edge (the bin is read as empty width).
            edges = edges.copy()
            if not np.isfinite(edges[0]):
                edges[0] = edges[1]
            if not np.isfinite(edges[-1]):
                edges[-1] = edges[-2]
        self.edges = edges
        self.open_lower, self.open_upper = open_ends


def _pieces(view, grid: Grid, targets: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Per row and target: the position i reaching it, P(i - 1), and the part of G(t) inside
    position i ((t - C(i-1)) x_i; for bins the integral of the interpolated quantile over it)."""
    index = view.first_reaching(targets)
    inside = targets - _cumulative_before(view, index)
    prefix = _prefix_before(view, grid.column, index)
    if grid.edges is None:
        return index, prefix, inside * grid.column[index]
    weight = view.weight_at(index)
    lower = grid.edges[index]
    width = grid.edges[index + 1] - lower
    with np.errstate(invalid="ignore", divide="ignore"):
        share = np.where(weight > 0.0, inside / weight, 0.0)
    return index, prefix, np.where(inside > 0.0, inside * (lower + 0.5 * share * width), 0.0)


def integral(view, grid: Grid, targets: np.ndarray) -> np.ndarray:
    """G(t) of each row at ``targets`` (rows x m, each in [0, W])."""
    _, prefix, part = _pieces(view, grid, targets)
    return prefix + part


def difference(view, grid: Grid, low: np.ndarray, high: np.ndarray) -> np.ndarray:
    """G(high) - G(low) per row and window; (high - low) x_i exactly when both ends fall on the
    same support value i (no cancellation of the prefix sums)."""
    m = low.shape[1]
    index, prefix, part = _pieces(view, grid, np.concatenate((low, high), axis=1))
    general = (prefix[:, m:] - prefix[:, :m]) + (part[:, m:] - part[:, :m])
    if grid.edges is not None:
        return general
    same = index[:, :m] == index[:, m:]
    return np.where(same, (high - low) * grid.column[index[:, :m]], general)


def quantile(view, grid: Grid, targets: np.ndarray, *, after: bool = False) -> np.ndarray:
    """Q(t) of each row: the step quantile (``after``: its right limit Q(t+), the first value whose
    cumulative weight passes t); for bins the interpolated grouped quantile."""
    if grid.edges is None:
        found = targets if not after else np.nextafter(targets, np.inf)
        return grid.column[view.first_reaching(found)]
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
    k = grid.column.size
    if grid.open_lower:
        first = view.cumulative_at(np.zeros(low.shape, dtype=np.intp))
        touched |= (first > 0.0) & (low < first)
    if grid.open_upper:
        total = np.asarray(view.total, dtype=np.float64).reshape(-1, 1)
        last = view.weight_at(np.full(high.shape, k - 1, dtype=np.intp))
        touched |= (last > 0.0) & (high > total - last)
    return touched


def window_means(view, grid: Grid, low: np.ndarray, high: np.ndarray) -> np.ndarray:
    """(G(high) - G(low)) / (high - low) per row and window: the mean of Q over the window
    (NaN where it is empty or reaches an open bin holding weight)."""
    with np.errstate(invalid="ignore", divide="ignore"):
        means = difference(view, grid, low, high) / (high - low)
    return np.where(reaches_open_bin(view, grid, low, high) | ~(high > low), np.nan, means)


def tail_windows(total: np.ndarray, levels: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """The windows of the upper (alpha W, W] and lower (0, (1 - alpha) W] tails of each row."""
    total = total.reshape(-1, 1)
    upper_low = total * levels[None, :]
    upper_high = np.broadcast_to(total, upper_low.shape).copy()
    lower_low = np.zeros_like(upper_low)
    lower_high = total * (1.0 - levels[None, :])
    return upper_low, upper_high, lower_low, lower_high


def tail_means(view, grid: Grid, levels: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Upper and lower tail means of each row at each level (rows x levels)."""
    total = np.asarray(view.total, dtype=np.float64)
    upper_low, upper_high, lower_low, lower_high = tail_windows(total, levels)
    means = window_means(
        view, grid, np.concatenate((upper_low, lower_low), axis=1), np.concatenate((upper_high, lower_high), axis=1)
    )
    return means[:, : levels.size], means[:, levels.size :]


def trimmed_count(total: np.ndarray, proportion: float, whole: bool) -> np.ndarray:
    """How much is cut from each end: floor(gamma n) observations for whole counts (the
    convention of scipy.stats.trim_mean and mstats.winsorize), gamma W for other weights."""
    cut = np.asarray(total, dtype=np.float64) * proportion
    return np.floor(cut) if whole else cut


def trimmed_and_winsorized(view, grid: Grid, proportion: float, whole: bool) -> tuple[np.ndarray, np.ndarray]:
    """Trimmed mean (G(W - g) - G(g)) / (W - 2g) and winsorized mean
    (g Q(g+) + G(W - g) - G(g) + g Q(W - g)) / W of each row (rows,)."""
    total = np.asarray(view.total, dtype=np.float64).reshape(-1, 1)
    cut = trimmed_count(total, proportion, whole)
    low, high = cut, total - cut
    middle = difference(view, grid, low, high)[:, 0]
    bottom = quantile(view, grid, low, after=True)[:, 0]
    top = quantile(view, grid, high)[:, 0]
    cut, total = cut[:, 0], total[:, 0]
    open_bins = reaches_open_bin(view, grid, np.zeros_like(low), total[:, None])[:, 0]
    with np.errstate(invalid="ignore", divide="ignore"):
        trimmed = middle / (total - 2.0 * cut)
        winsorized = (cut * bottom + middle + cut * top) / total
    trimmed = np.where(reaches_open_bin(view, grid, low, high)[:, 0], np.nan, trimmed)
    return trimmed, np.where(open_bins, np.nan, winsorized)


def hill(view, values: np.ndarray, logs: np.ndarray, k: int) -> np.ndarray:
    """Hill's estimate k / sum_{i=1..k} ln(X_(n-i+1) / X_(n-k)) of each row (whole counts);
    NaN where X_(n-k) <= 0 or the k largest all equal X_(n-k). ``logs``: ln of the positive
    values (any finite placeholder elsewhere: only values above a positive X_(n-k) are read)."""
    total = np.asarray(view.total, dtype=np.float64).reshape(-1, 1)
    start = total - k
    threshold = values[view.first_reaching(start)][:, 0]
    with np.errstate(invalid="ignore", divide="ignore"):
        spread = difference(view, Grid(logs), start, total)[:, 0] - k * np.log(np.where(threshold > 0.0, threshold, np.nan))
        return np.where((threshold > 0.0) & (spread > 0.0), k / spread, np.nan)
