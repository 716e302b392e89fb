"""L-moments from probability-weighted moments, for samples, count tables, distributions and bins.

With ``b_r`` the r-th probability-weighted moment, ``l1 = b0``, ``l2 = 2 b1 - b0``,
``l3 = 6 b2 - 6 b1 + b0``, ``l4 = 20 b3 - 30 b2 + 12 b1 - b0``, ``t3 = l3 / l2`` (L-skewness) and
``t4 = l4 / l2`` (L-kurtosis) (Hosking 1990, eqs. 2.3 and 2.4).

* Samples and count tables: the unbiased estimators
  ``b_r = n^-1 sum_j C(j - 1, r) / C(n - 1, r) x_(j)`` (Hosking 1990, eq. 2.8 in binomial form;
  Landwehr, Matalas & Wallis 1979). A value with count c occupying ranks S - c + 1 .. S
  contributes ``x (F(S) - F(S - c)) / (r + 1)`` with ``F(S) = prod_{m=0..r} (S - m)/(n - m)``,
  the hockey-stick identity summing the binomial weights of its ranks: no expansion.
* Probability tables: population PWMs ``beta_r = sum_i x_i (F_i^(r+1) - F_(i-1)^(r+1)) / (r + 1)``.
* Bins (approximation): the population L-moments of the distribution spread evenly within each
  bin (piecewise-linear quantile function), without small-sample correction.

Reference: J. R. M. Hosking, "L-moments: analysis and estimation of distributions using linear
combinations of order statistics", JRSS-B 52(1), 105-124, 1990.
"""

from __future__ import annotations

import math

import numpy as np

_COMBINATION = np.array(
    [
        [1.0, 0.0, 0.0, 0.0],
        [-1.0, 2.0, 0.0, 0.0],
        [1.0, -6.0, 6.0, 0.0],
        [-1.0, 12.0, -30.0, 20.0],
    ]
)


def _from_pwm(b: np.ndarray, centre: float) -> tuple[float, float, float, float]:
    """L-moments from PWMs of data shifted by ``centre``.

    l2, l3, l4 do not change when the data are shifted (their weights sum to zero), so taking
    the PWMs of ``x - centre`` removes the large common part that would otherwise cancel.
    """
    l1, l2, l3, l4 = _COMBINATION @ b
    return float(l1) + centre, float(l2), float(l3), float(l4)


def _centre(values: np.ndarray) -> float:
    return float(values[values.size // 2])


# Ranks per block of the raw-sample PWMs, and blocks per pass over the data.
_BLOCK = 4096
_BLOCKS_PER_PASS = 64
# (t / _BLOCK)^q for t = 0 .. _BLOCK - 1 and q = 0 .. 3: exact (powers of two divide exactly).
_UNIT_POWERS = np.vander(np.arange(_BLOCK, dtype=np.float64) / _BLOCK, 4, increasing=True)


def _raw_pwm(values: np.ndarray, exponent: int) -> tuple[np.ndarray, float]:
    """PWMs b0-b3 of sorted raw observations (times 2**exponent, less a centre), and the centre.

    b_r = n^-1 sum_j C(j - 1, r) / C(n - 1, r) y_(j). Within a block of ranks j = j0 + B u
    (u = t/B), the weight C(j - 1, r) is a cubic at most in u, so one matrix product of the
    blocks with the powers of u gives every block's moments sum_t u^q y, and a 4 x 4
    combination per block gives the PWMs: the data are read once, in cache-sized passes that
    also scale and centre them, and no n-long weight array is built.
    """
    largest = max(abs(float(values[0])), abs(float(values[-1])))
    if 2.0**-500 < largest < 2.0**500:
        # Scaling by a power of two commutes exactly with every step here while nothing comes
        # near float64's limits: compute on the data as they are and scale the four PWMs.
        b, centre = _blocked_pwm(values, 0)
        return np.ldexp(b, exponent), math.ldexp(centre, exponent)
    return _blocked_pwm(values, exponent)


def _blocked_pwm(values: np.ndarray, exponent: int) -> tuple[np.ndarray, float]:
    """The work of :func:`_raw_pwm`, scaling each pass by ``2**exponent`` when it is not 0."""
    n = values.size
    # np.ldexp scales exactly even where 2**exponent itself is not a float64 (subnormal data).
    centre = float(np.ldexp(values[n // 2], exponent))
    if n < _BLOCK:
        return _one_block_pwm(values, exponent, centre), centre
    blocks = -(-n // _BLOCK)
    moments = np.zeros((blocks, 4))
    work = np.empty(min(n, _BLOCK * _BLOCKS_PER_PASS))
    for first in range(0, blocks, _BLOCKS_PER_PASS):
        start = first * _BLOCK
        stop = min(n, start + _BLOCK * _BLOCKS_PER_PASS)
        chunk = work[: stop - start]
        if exponent:
            np.ldexp(values[start:stop], exponent, out=chunk)
            np.subtract(chunk, centre, out=chunk)
        else:
            np.subtract(values[start:stop], centre, out=chunk)
        whole = (stop - start) // _BLOCK
        if whole:
            moments[first : first + whole] = chunk[: whole * _BLOCK].reshape(whole, _BLOCK) @ _UNIT_POWERS
        if whole * _BLOCK < chunk.size:
            rest = chunk[whole * _BLOCK :]
            moments[first + whole] = rest @ _UNIT_POWERS[: rest.size]
    # C(j - 1, r) r! = prod_{m < r} (a_m + B u) with a_m = j0 - 1 - m (j0 the block's first
    # rank), expanded in powers of u: coefficients of u^q are B^q e_{r-q}(a_0 .. a_{r-1}).
    a0 = np.arange(blocks, dtype=np.float64) * _BLOCK  # j0 - 1
    a1, a2 = a0 - 1.0, a0 - 2.0
    big = float(_BLOCK)
    ones = np.ones(blocks)
    coefficients = [
        [ones],
        [a0, big * ones],
        [a0 * a1, big * (a0 + a1), big**2 * ones],
        [a0 * a1 * a2, big * (a0 * a1 + a0 * a2 + a1 * a2), big**2 * (a0 + a1 + a2), big**3 * ones],
    ]
    b = np.empty(4)
    for r in range(4):
        weighted = sum(c * moments[:, q] for q, c in enumerate(coefficients[r]))
        falling = math.prod(n - 1 - m for m in range(r))  # (n - 1)! / (n - 1 - r)!
        b[r] = float(np.sum(weighted)) / (n * falling)
    return b, centre


def _one_block_pwm(values: np.ndarray, exponent: int, centre: float) -> np.ndarray:
    """:func:`_blocked_pwm` for fewer than one block of ranks: the same products and sums in the
    same order, on Python floats (block start j0 - 1 = 0, so a0 = 0, a1 = -1, a2 = -2)."""
    n = values.size
    chunk = np.ldexp(values, exponent) if exponent else values
    m0, m1, m2, m3 = (float(m) for m in (chunk - centre) @ _UNIT_POWERS[:n])
    a0, a1, a2, big = 0.0, -1.0, -2.0, float(_BLOCK)
    weighted = (
        0 + 1.0 * m0,
        0 + a0 * m0 + big * 1.0 * m1,
        0 + a0 * a1 * m0 + big * (a0 + a1) * m1 + big**2 * 1.0 * m2,
        0 + a0 * a1 * a2 * m0 + big * (a0 * a1 + a0 * a2 + a1 * a2) * m1 + big**2 * (a0 + a1 + a2) * m2 + big**3 * 1.0 * m3,
    )
    b = np.empty(4)
    for r in range(4):
        b[r] = weighted[r] / (n * math.prod(n - 1 - m for m in range(r)))
    return b


def sample_lmoments(
    values: np.ndarray, counts: np.ndarray | None, exponent: int = 0
) -> tuple[float, float, float, float]:
    """Unbiased l1-l4 of a sample: sorted distinct ``values`` with whole ``counts`` (n >= 4), or
    sorted raw observations with ``counts=None``; of the values times ``2**exponent`` (exact)."""
    if counts is None:
        b, centre = _raw_pwm(values, exponent)
        return _from_pwm(b, centre)
    values = np.ldexp(values, exponent)
    centre = _centre(values)
    values = values - centre
    n = float(np.sum(counts))
    cumulative = np.cumsum(counts)
    before = cumulative - counts
    b = np.empty(4)
    for r in range(4):
        # sum over a block's ranks of C(j - 1, r) / C(n - 1, r) / n = (F(S) - F(S - c)) / (r + 1)
        # with F(S) = prod_m (S - m)/(n - m); the difference of the two products is expanded
        # term by term (prod a - prod b = sum_k prod_{m<k} b_m (a_k - b_k) prod_{m>k} a_m), every
        # term non-negative, so no digits cancel even for counts of one.
        difference = np.zeros_like(cumulative, dtype=np.float64)
        for k in range(r + 1):
            term = counts / (n - k)
            for m in range(k):
                term = term * (before - m) / (n - m)
            for m in range(k + 1, r + 1):
                term = term * (cumulative - m) / (n - m)
            difference += term
        b[r] = float(np.sum(values * difference)) / (r + 1)
    return _from_pwm(b, centre)


def population_lmoments(values: np.ndarray, probabilities: np.ndarray) -> tuple[float, float, float, float]:
    """Population l1-l4 of a discrete distribution (sorted ``values``, ``probabilities`` summing to 1)."""
    centre = _centre(values)
    values = values - centre
    cumulative = np.cumsum(probabilities) / np.sum(probabilities)
    before = np.concatenate(([0.0], cumulative[:-1]))
    b = np.array([float(np.sum(values * (cumulative ** (r + 1) - before ** (r + 1)))) / (r + 1) for r in range(4)])
    return _from_pwm(b, centre)


def binned_lmoments(edges: np.ndarray, counts: np.ndarray) -> tuple[float, float, float, float]:
    """Population l1-l4 of the distribution spread evenly within closed bins (an approximation).

    Within a bin of probability [a, b] and edges [L, U] the quantile function is
    ``x(u) = L + (u - a)(U - L)/(b - a)``, so ``integral x(u) u^r du`` has a closed form.
    """
    centre = _centre(edges)
    edges = edges - centre
    cumulative = np.cumsum(counts) / np.sum(counts)
    a = np.concatenate(([0.0], cumulative[:-1]))
    b_ = cumulative
    lower, width = edges[:-1], np.diff(edges)
    occupied = b_ > a
    a, b_, lower, width = a[occupied], b_[occupied], lower[occupied], width[occupied]
    slope = width / (b_ - a)
    b = np.empty(4)
    for r in range(4):
        first = (b_ ** (r + 1) - a ** (r + 1)) / (r + 1)
        second = (b_ ** (r + 2) - a ** (r + 2)) / (r + 2)
        b[r] = float(np.sum(lower * first + slope * (second - a * first)))
    return _from_pwm(b, centre)
