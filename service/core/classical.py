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
from scipy import stats

from service.core import order
from service.core.weighted import WeightedData


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


def order_statistic_ranks(n: int, p: float, level: float) -> tuple[int, int, float] | None:
    """Ranks ``(l, u)`` and achieved coverage of the distribution-free quantile interval.

    ``l`` is the largest rank with ``P(B <= l - 1) <= alpha/2`` and ``u`` the smallest with
    ``P(B <= u - 1) >= 1 - alpha/2``; ``None`` when n is too small for the level.
    """
    alpha = 1.0 - level
    distribution = stats.binom(n, p)
    below = int(distribution.ppf(alpha / 2.0))  # smallest k with CDF(k) >= alpha / 2
    if distribution.cdf(below) > alpha / 2.0 * (1.0 + 1e-12):
        below -= 1
    lower = below + 1
    upper = int(distribution.ppf(1.0 - alpha / 2.0)) + 1
    if lower < 1 or upper > n:
        return None
    coverage = float(distribution.cdf(upper - 1) - distribution.cdf(lower - 1))
    return lower, upper, coverage


def quantile_interval(data: WeightedData, p: float, level: float) -> ClassicalInterval | None:
    n = int(round(data.total_weight))
    ranks = order_statistic_ranks(n, p, level)
    if ranks is None:
        return None
    lower, upper, coverage = ranks
    low, high = order.order_statistic(data, np.array([lower, upper], dtype=np.float64))
    return ClassicalInterval(
        float(low),
        float(high),
        level,
        f"order_statistics x({lower}), x({upper})",
        coverage,
        "independent observations from a continuous distribution (ties make it conservative)",
    )
