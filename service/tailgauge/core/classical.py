"""Intervals with a closed form, reported beside the bootstrap ones.

* mean: Student's t interval ``mean +- t_{n-1} s / sqrt(n)`` (exact for normal data, otherwise
  approximate by the central limit theorem);
* variance and standard deviation: the chi-square interval ``(n-1) s^2 / chi2_{n-1}`` —
  valid only for normal data, and labelled so;
* median and quantiles: distribution-free intervals between two order statistics
  ``[x_(l), x_(u)]`` whose coverage ``P(l <= B <= u - 1)``, ``B ~ Binomial(n, p)``, is at least
  the level (Conover, *Practical Nonparametric Statistics*, 3rd ed., section 3.2); the achieved
  coverage is reported.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import special, stats

from tailgauge.core import order_statistics
from tailgauge.core.weighted import WeightedData


@dataclass(frozen=True)
class ClassicalInterval:
    low: float
    high: float
    level: float
    method: str
    coverage: float | None
    assumption: str


def mean_interval(mean: float, sd: float, n: float, level: float) -> ClassicalInterval:
    half = float(stats.t.ppf(0.5 + level / 2.0, n - 1.0)) * sd / math.sqrt(n)
    return ClassicalInterval(
        mean - half, mean + half, level, "student_t", None, "normal data, or n large enough for the mean to be normal"
    )


def variance_interval(variance: float, n: float, level: float) -> ClassicalInterval:
    alpha = 1.0 - level
    dof = n - 1.0
    return ClassicalInterval(
        dof * variance / float(stats.chi2.ppf(1.0 - alpha / 2.0, dof)),
        dof * variance / float(stats.chi2.ppf(alpha / 2.0, dof)),
        level,
        "chi_square",
        None,
        "normal data (not robust to other shapes)",
    )


def binomial_cdf(k, n: int, p: float):
    """P(B <= k) for B ~ Binomial(n, p), k an integer or an array of them: the regularised
    incomplete beta I_(1-p)(n - k, k + 1), 0 below 0 and 1 from n on.

    Not ``scipy.special.bdtr``: it drifts from the binomial sum as n grows (0.61 for P(B <= n/2)
    at n = 1e8 and p = 1/2, where the sum is 0.50004) and is NaN beyond 2**31.
    """
    k = np.asarray(k, dtype=np.float64)
    inside = np.clip(k, 0.0, max(n - 1.0, 0.0))
    with np.errstate(invalid="ignore"):
        value = special.betainc(n - inside, inside + 1.0, 1.0 - p)
    return np.where(k < 0, 0.0, np.where(k >= n, 1.0, value))


def _smallest_reaching(n: int, p: float, target: float) -> int:
    """Smallest k in 0..n with P(B <= k) >= target, B ~ Binomial(n, p) (n + 1 if none).

    A continuous inverse gives a first guess; the exact CDF around it decides, in a window around
    the guess, else by bisection over 0..n (the CDF increases in k): O(log n) evaluations, never
    an array of n entries (a count table's n may be 1e15).
    """
    guess = special.bdtrik(target, n, p)
    centre = int(math.floor(guess)) if math.isfinite(guess) else int(stats.binom.ppf(target, n, p))
    for width in (3, 50):
        ks = np.arange(max(centre - width, 0), min(centre + width, n) + 1)
        reached = np.flatnonzero(binomial_cdf(ks, n, p) >= target)
        if reached.size and (reached[0] > 0 or ks[0] == 0):
            return int(ks[reached[0]])
    if not binomial_cdf(n, n, p) >= target:
        return n + 1
    below, reaching = -1, n  # P(B <= below) < target <= P(B <= reaching)
    while reaching - below > 1:
        middle = (below + reaching) // 2
        if binomial_cdf(middle, n, p) >= target:
            reaching = middle
        else:
            below = middle
    return reaching


def order_statistic_ranks(n: int, p: float, level: float) -> tuple[int, int, float] | None:
    """Ranks ``(l, u)`` and achieved coverage of the distribution-free quantile interval.

    ``l`` is the largest rank with ``P(B <= l - 1) <= alpha/2`` and ``u`` the smallest with
    ``P(B <= u - 1) >= 1 - alpha/2``; ``None`` when n is too small for the level, or beyond
    2**53, where float64 no longer tells neighbouring ranks apart.
    """
    if n > 2**53:
        return None
    alpha = 1.0 - level
    smallest = _smallest_reaching(n, p, alpha / 2.0)  # the binomial alpha/2 quantile
    # l - 1 is the largest k with P(B <= k) <= alpha/2: that quantile itself when its CDF equals
    # alpha/2 exactly (within rounding), otherwise the one below it.
    below = smallest if binomial_cdf(smallest, n, p) <= alpha / 2.0 * (1.0 + 1e-12) else smallest - 1
    lower = below + 1
    upper = _smallest_reaching(n, p, 1.0 - alpha / 2.0) + 1
    if lower < 1 or upper > n:
        return None
    coverage = float(binomial_cdf(upper - 1, n, p) - binomial_cdf(lower - 1, n, p))
    return lower, upper, coverage


def quantile_interval(data: WeightedData, p: float, level: float) -> ClassicalInterval | None:
    n = int(round(data.total_weight))
    ranks = order_statistic_ranks(n, p, level)
    if ranks is None:
        return None
    lower, upper, coverage = ranks
    low, high = order_statistics.order_statistic(data, np.array([lower, upper], dtype=np.float64))
    return ClassicalInterval(
        float(low),
        float(high),
        level,
        f"order_statistics x({lower}), x({upper})",
        coverage,
        "independent observations from a continuous distribution (ties make it conservative)",
    )
