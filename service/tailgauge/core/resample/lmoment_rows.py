"""L-moments of many rows of weights at once, by the estimators ``describe`` uses for one row
(:mod:`tailgauge.core.lmoments`): unbiased PWMs for whole counts, plug-in PWMs for other
weights, and the even-spread-within-bins PWMs for bins.

Every PWM here is written by parts over the sorted support. With ``u_i`` the cumulative weight
of a row up to support position i divided by its total, a value ``x_i`` holds the plotting
positions ``(u_(i-1), u_i]``, and

    (r + 1) b_r = sum_i x_i (Q_r(u_i) - Q_r(u_(i-1))) = x_k - sum_(i<k) (x_(i+1) - x_i) Q_r(u_i)

with ``Q_r(u) = u^(r+1)`` for the plug-in PWMs (Hosking 1990, population form) and, for whole
counts, ``Q_r = prod_(m=0..r) (n u - m) / (n - m)``, the hockey-stick sum of the unbiased
weights ``C(j - 1, r) / C(n - 1, r)`` over a value's ranks (Hosking 1990, eq. 2.8; Landwehr,
Matalas & Wallis 1979). Both are polynomials in u, so each row needs only the four sums
``M_p = sum_i gap_i u_i^p`` (p = 1 .. 4): a few passes over the row and one matrix-vector
product per power. Every term of ``M_p`` is non-negative, so no digits cancel in them.

For bins the quantile function is linear within each bin (probabilities ``(a_i, b_i]``, width
``W_i``), and by parts ``(r + 1) beta_r = x_top - sum_i W_i h_(r+1)(a_i, b_i) / (r + 2)`` with
``h_q(a, b) = sum_(j=0..q) a^j b^(q-j)`` (an empty interior bin is a jump of the quantile
function, which the same term counts).

The jackknife's rows change one support position each: their ``M_p`` come from prefix and
suffix sums of the full data's terms in O(k) for all k rows together, never a k x k array.

Reference: J. R. M. Hosking, "L-moments: analysis and estimation of distributions using linear
combinations of order statistics", JRSS-B 52(1), 105-124, 1990 (eqs. 2.3, 2.8).
"""

from __future__ import annotations

import math

import numpy as np

from tailgauge.core.resample.rows import LeaveOneOut

# Elements of a tile of plotting positions (two float64 buffers of 512 KiB), at least
# TILE_ROWS rows of it: fewer, larger tiles cost less interpreter time per element.
TILE_ELEMENTS = 1 << 16
TILE_ROWS = 8
# The unbiased PWMs up to order 3 need four observations (C(n - 1, 3) > 0).
UNBIASED_MINIMUM = 4
# l_r from the PWMs b_0 .. b_3 (Hosking 1990, eq. 2.3): l1 = b0, l2 = 2 b1 - b0, l3 = 6 b2 - 6 b1 + b0,
# l4 = 20 b3 - 30 b2 + 12 b1 - b0.
COMBINATION = np.array(
    [
        [1.0, 0.0, 0.0, 0.0],
        [-1.0, 2.0, 0.0, 0.0],
        [1.0, -6.0, 6.0, 0.0],
        [-1.0, 12.0, -30.0, 20.0],
    ]
)


def gap_power_sums(view, gaps: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``M_p = sum_i gaps_i u_i^p`` for p = 1 .. 4 (rows x 4), and each row's total weight.

    ``gaps`` has one entry per support position (the last one 0). Leave-one-out rows are summed
    from the full data's prefix and suffix sums; other rows from their dense cumulative weights.
    """
    if isinstance(view, LeaveOneOut):
        return _leave_one_out_sums(view, gaps)
    total = np.asarray(view.total, dtype=np.float64)
    inverse = 1.0 / total
    rows, k = view.count, gaps.size
    sums = np.zeros((rows, 4))
    # Tiles of at most TILE_ELEMENTS: the passes over a tile stay in cache, and its two buffers
    # are allocated once (fresh pages for every part cost more than the arithmetic).
    width = min(k, TILE_ELEMENTS // TILE_ROWS)
    height = max(TILE_ROWS, TILE_ELEMENTS // width)
    positions = np.empty(min(rows, height) * width)
    powers = np.empty_like(positions)
    # Whole counts are summed as counts (their powers stay far inside float64's range) and
    # scaled by the row totals' powers at the end; other weights are scaled in each tile.
    whole = bool(getattr(view, "whole", False))
    for first in range(0, rows, height):
        band = slice(first, min(rows, first + height))
        scale = inverse[band, None]
        for start in range(0, k, width):
            columns = slice(start, min(k, start + width))
            shape = (band.stop - band.start, columns.stop - columns.start)
            u = positions[: shape[0] * shape[1]].reshape(shape)
            power = powers[: u.size].reshape(shape)
            view.cumulative_into(band, columns, u)
            if not whole:
                u *= scale
            tile_gaps = gaps[columns]
            sums[band, 0] += u @ tile_gaps
            np.multiply(u, u, out=power)
            sums[band, 1] += power @ tile_gaps
            power *= u
            sums[band, 2] += power @ tile_gaps
            power *= u
            sums[band, 3] += power @ tile_gaps
    if whole:
        sums *= inverse[:, None] ** np.arange(1, 5)
    return sums, total


def _leave_one_out_sums(view: LeaveOneOut, gaps: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``gap_power_sums`` of leave-one-out rows in O(k + rows).

    Row j removes weight w at position p: positions before p keep their cumulative weight S_i,
    positions from p on hold S_i - w, and the total is T - w. In units of T (s = S / T, o = w / T):
    ``M_q = (1 - o)^-q [sum_(i<p) g_i s_i^q + sum_(c=0..q) C(q, c) (-o)^(q-c) sum_(i>=p) g_i s_i^c]``.
    """
    cumulative = view.base_cumulative
    full = float(cumulative[-1])
    s = cumulative / full
    terms = np.empty((5, s.size))
    terms[0] = gaps
    for c in range(1, 5):
        terms[c] = terms[c - 1] * s
    # prefix[c, p] = sum_(i<p) terms[c, i]; suffix[c, p] = sum_(i>=p) terms[c, i], summed from
    # the right (not as a difference of prefix sums), so each is a sum of its own non-negative terms.
    prefix = np.zeros((5, s.size + 1))
    np.cumsum(terms, axis=1, out=prefix[:, 1:])
    suffix = np.flip(np.cumsum(np.flip(terms, axis=1), axis=1), axis=1)
    positions = view.positions
    omitted = view.removed / full
    remaining = 1.0 - omitted
    sums = np.empty((positions.size, 4))
    for q in range(1, 5):
        inside = np.zeros(positions.size)
        for c in range(q + 1):
            inside += math.comb(q, c) * (-omitted) ** (q - c) * suffix[c, positions]
        sums[:, q - 1] = (prefix[q, positions] + inside) / remaining**q
    return sums, view.total


def unbiased_coefficients(total: np.ndarray) -> np.ndarray:
    """Coefficients of ``Q_r(u) = prod_(m=0..r) (n u - m) / (n - m)`` in powers u^1 .. u^4
    (rows x 4 x 4: [row, r, p - 1]), for each row's total n."""
    n = np.asarray(total, dtype=np.float64)
    rows = n.size
    coefficients = np.zeros((rows, 4, 4))
    # Q_0 = u; Q_r = Q_(r-1) (n u - r) / (n - r), multiplied out power by power.
    polynomial = np.zeros((rows, 5))  # polynomial[:, p] is the coefficient of u^p
    polynomial[:, 1] = 1.0
    coefficients[:, 0, :] = polynomial[:, 1:]
    with np.errstate(divide="ignore", invalid="ignore"):
        for r in range(1, 4):
            scale = n / (n - r)
            shift = -r / (n - r)
            raised = np.zeros_like(polynomial)
            raised[:, 1:] = polynomial[:, :-1] * scale[:, None]
            polynomial = raised + polynomial * shift[:, None]
            coefficients[:, r, :] = polynomial[:, 1:]
    return coefficients


def sample_pwms(view, deviations: np.ndarray, unbiased: bool) -> np.ndarray:
    """PWMs b_0 .. b_3 of each row (rows x 4) of sorted support ``deviations`` (data less their
    mean, scaled), unbiased for whole counts or plug-in for other weights."""
    gaps = np.append(np.diff(deviations), 0.0)
    sums, total = gap_power_sums(view, gaps)
    top = float(deviations[-1])
    order = np.arange(1.0, 5.0)
    if not unbiased:
        return (top - sums) / order
    # Resamples share one total (and the jackknife's rows another): one set of coefficients each.
    totals, which = np.unique(total, return_inverse=True)
    pwms = np.empty_like(sums)
    for i, coefficients in enumerate(unbiased_coefficients(totals)):
        rows = which == i
        pwms[rows] = (top - sums[rows] @ coefficients.T) / order
    pwms[total < UNBIASED_MINIMUM] = np.nan
    return pwms


def binned_pwms(view, edges: np.ndarray, span: slice) -> np.ndarray:
    """Population PWMs of the distribution spread evenly within each bin, per row (rows x 4).

    ``span``: the bins from the first to the last holding data (every row's weight lies there);
    ``edges``: their finite edges (scaled deviations), one more than the bins.
    """
    total = np.asarray(view.total, dtype=np.float64)
    after = view.cumulative[:, span] / total[:, None]
    before = np.empty_like(after)
    before[:, 0] = 0.0
    before[:, 1:] = after[:, :-1]
    widths = np.diff(edges)
    top = float(edges[-1])
    pwms = np.empty((after.shape[0], 4))
    complete = np.ones_like(after)  # h_0
    power = np.ones_like(after)  # a^q
    for q in range(1, 5):
        power *= before
        complete *= after
        complete += power  # h_q = b h_(q-1) + a^q
        # (r + 1) beta_r = top - sum W h_(r+1)(a, b) / (r + 2), r = q - 1
        pwms[:, q - 1] = (top - (complete @ widths) / (q + 1)) / q
    return pwms


def lmoments_of(pwms: np.ndarray) -> np.ndarray:
    """l1 .. l4 from the PWMs (rows x 4 each)."""
    return pwms @ COMBINATION.T
