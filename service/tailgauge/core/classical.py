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


def _smallest_reaching(n: int, p: float, target: float) -> int:
    """Smallest k in 0..n with P(B <= k) >= target, B ~ Binomial(n, p) (n + 1 if none).

    A continuous inverse gives a first guess; the exact CDF around it decides.
    """
    guess = special.bdtrik(target, n, p)
    centre = int(math.floor(guess)) if math.isfinite(guess) else int(stats.binom.ppf(target, n, p))
    for width in (3, 50, n + 1):
        ks = np.arange(max(centre - width, 0), min(centre + width, n) + 1)
        reached = np.flatnonzero(special.bdtr(ks, n, p) >= target)
        if reached.size and (reached[0] > 0 or ks[0] == 0):
            return int(ks[reached[0]])
    return n + 1


def order_statistic_ranks(n: int, p: float, level: float) -> tuple[int, int, float] | None:
    """Ranks ``(l, u)`` and achieved coverage of the distribution-free quantile interval.

    ``l`` is the largest rank with ``P(B <= l - 1) <= alpha/2`` and ``u`` the smallest with
    ``P(B <= u - 1) >= 1 - alpha/2``; ``None`` when n is too small for the level.
    """
    alpha = 1.0 - level
    smallest = _smallest_reaching(n, p, alpha / 2.0)  # the binomial alpha/2 quantile
    # l - 1 is the largest k with P(B <= k) <= alpha/2: that quantile itself when its CDF equals
    # alpha/2 exactly (within rounding), otherwise the one below it.
    below = smallest if special.bdtr(smallest, n, p) <= alpha / 2.0 * (1.0 + 1e-12) else smallest - 1
    lower = below + 1
    upper = _smallest_reaching(n, p, 1.0 - alpha / 2.0) + 1
    if lower < 1 or upper > n:
        return None
    coverage = float(special.bdtr(upper - 1, n, p) - special.bdtr(lower - 1, n, p))
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
