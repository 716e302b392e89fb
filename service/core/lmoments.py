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


def sample_lmoments(values: np.ndarray, counts: np.ndarray | None) -> tuple[float, float, float, float]:
    """Unbiased l1-l4 of a sample: sorted distinct ``values`` with whole ``counts`` (n >= 4), or
    sorted raw observations with ``counts=None``."""
    centre = _centre(values)
    values = values - centre
    if counts is None:
        # Raw order statistics: w_r(j) = C(j - 1, r) / C(n - 1, r), built one factor at a time.
        n = values.size
        rank = np.arange(n, dtype=np.float64)  # j - 1
        weight = np.full(n, 1.0 / n)
        b = np.empty(4)
        for r in range(4):
            if r:
                weight *= (rank - (r - 1)) / (n - r)
            b[r] = float(np.sum(weight * values))
        return _from_pwm(b, centre)
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
