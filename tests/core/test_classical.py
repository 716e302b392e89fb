"""Closed-form intervals (tailgauge.core.classical), checked against textbooks and scipy 1.17.1.

* Order-statistic intervals for quantiles: W. J. Conover, *Practical Nonparametric Statistics*,
  3rd ed., Wiley, 1999, section 3.2 (the median of n = 10 at 95%: [x(2), x(9)], coverage
  1002/1024), and a brute-force search over every pair of ranks with ``scipy.stats.binom``.
* Student's t interval of the mean: ``scipy.stats.t.interval`` (scipy 1.17.1).
* Chi-square interval of the variance: ``((n-1) s^2 / chi2_{1-a/2}, (n-1) s^2 / chi2_{a/2})``
  (e.g. Casella & Berger, *Statistical Inference*, 2nd ed., 2002, example 9.2.10) with
  ``scipy.stats.chi2.ppf`` (scipy 1.17.1).
"""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest
from scipy import stats

from tailgauge.core import DescribeOptions, IntervalOptions, describe, from_array, from_table
from tailgauge.core import classical


def brute_force_ranks(n: int, p: float, level: float):
    """Equal-tailed order-statistic interval by trying every pair 1 <= l < u <= n.

    [x(l), x(u)] misses the p-quantile below when at least u observations fall under it
    (P(B >= u)) and above when fewer than l do (P(B <= l - 1)), B ~ Binomial(n, p). Among the
    pairs with both tails at most alpha/2 take the narrowest: the largest l and smallest u.
    """
    alpha = 1.0 - level
    binom = stats.binom(n, p)
    b = np.arange(n + 1)
    below = binom.cdf(b)  # below[l - 1] = P(B <= l - 1)
    above = binom.sf(b)  # above[u - 1] = P(B >= u)
    slack = 1e-12  # rounding in the binomial sums only
    l, u = np.meshgrid(np.arange(1, n + 1), np.arange(1, n + 1), indexing="ij")
    valid = (l < u) & (below[l - 1] <= alpha / 2.0 + slack) & (above[u - 1] <= alpha / 2.0 + slack)
    if not valid.any():
        return None
    lower = int(l[valid].max())
    upper = int(u[valid & (l == lower)].min())
    coverage = float(np.sum(binom.pmf(np.arange(lower, upper))))
    return lower, upper, coverage


def test_median_of_ten_is_between_the_second_and_ninth_order_statistics():
    """Conover (1999), section 3.2: for n = 10 and 95%, [x(2), x(9)] with coverage 1002/1024."""
    lower, upper, coverage = classical.order_statistic_ranks(10, 0.5, 0.95)
    assert (lower, upper) == (2, 9)
    assert coverage == pytest.approx(1002 / 1024, rel=1e-12)
    # Exactly, from the binomial sum: P(2 <= B <= 8) = 1 - 2 (1 + 10) / 2^10.
    exact = sum(Fraction(math.comb(10, b), 2**10) for b in range(2, 9))
    assert exact == Fraction(1002, 1024)


def test_median_of_ten_through_describe():
    x = np.array([7.1, 3.3, 9.8, 1.2, 5.5, 6.0, 2.4, 8.7, 4.9, 10.6])
    interval = IntervalOptions(method="percentile", level=0.95, resamples=200, seed=4)
    d = describe(from_array(x), DescribeOptions(interval=interval), kind="samples")
    ci = d.descriptors["median"].classical_interval
    ordered = np.sort(x)
    assert (ci.low, ci.high) == (ordered[1], ordered[8])
    assert ci.coverage == pytest.approx(1002 / 1024, rel=1e-12)
    assert ci.level == 0.95
    assert "x(2)" in ci.method and "x(9)" in ci.method


@pytest.mark.parametrize("level", [0.8, 0.9, 0.95, 0.99])
@pytest.mark.parametrize("p", [0.05, 0.1, 0.25, 0.5, 0.75, 0.9, 0.99])
def test_order_statistic_ranks_match_a_brute_force_search(p, level):
    """Every n from 1 to 80 against the search over all (l, u) pairs (scipy 1.17.1 binom)."""
    for n in range(1, 81):
        got = classical.order_statistic_ranks(n, p, level)
        want = brute_force_ranks(n, p, level)
        if want is None:
            assert got is None, (n, p, level, got)
            continue
        assert got is not None, (n, p, level, want)
        assert got[:2] == want[:2], (n, p, level, got, want)
        assert got[2] == pytest.approx(want[2], rel=1e-9)
        assert got[2] >= level - 1e-12


def test_exact_tail_equal_to_alpha_half_is_accepted():
    """n = 5, p = 1/2, level 15/16: P(B = 0) = 1/32 = alpha/2 exactly, so [x(1), x(5)] qualifies
    with coverage exactly 30/32 = the level ("at least the level", Conover section 3.2)."""
    lower, upper, coverage = classical.order_statistic_ranks(5, 0.5, 15 / 16)
    assert (lower, upper) == (1, 5)
    assert coverage == pytest.approx(30 / 32, rel=1e-12)


@pytest.mark.parametrize(("n", "level"), [(5, 0.95), (1, 0.5), (2, 0.9), (7, 0.99)])
def test_none_when_n_is_too_small_for_the_level(n, level):
    # Even [x(1), x(n)] covers only 1 - 2 / 2^n: 0.9375 for n = 5, 0.984 for n = 7.
    assert level > 1 - 2 / 2**n  # the premise: the level is out of reach
    assert classical.order_statistic_ranks(n, 0.5, level) is None


def test_smallest_n_for_the_median_at_95_percent_is_six():
    lower, upper, coverage = classical.order_statistic_ranks(6, 0.5, 0.95)
    assert (lower, upper) == (1, 6)
    assert coverage == pytest.approx(62 / 64, rel=1e-12)


def test_no_median_interval_through_describe_when_n_is_too_small():
    x = np.array([3.0, 1.0, 4.0, 1.5, 5.0])
    interval = IntervalOptions(method="percentile", level=0.95, resamples=200, seed=4)
    d = describe(from_array(x), DescribeOptions(interval=interval), kind="samples")
    assert d.descriptors["median"].classical_interval is None
    assert d.descriptors["mean"].classical_interval is not None


@pytest.mark.parametrize("level", [0.8, 0.95, 0.99])
def test_t_interval_of_the_mean_matches_scipy(level):
    """scipy 1.17.1: ``stats.t.interval(level, n - 1, loc=mean, scale=s / sqrt(n))``."""
    x = np.random.default_rng(31).normal(12.0, 3.0, 17)
    interval = IntervalOptions(method="percentile", level=level, resamples=200, seed=1)
    d = describe(from_array(x), DescribeOptions(interval=interval), kind="samples")
    ci = d.descriptors["mean"].classical_interval
    scale = np.std(x, ddof=1) / math.sqrt(x.size)
    low, high = stats.t.interval(level, x.size - 1, loc=np.mean(x), scale=scale)
    assert ci.method == "student_t"
    assert ci.level == level
    assert ci.low == pytest.approx(low, rel=1e-12)
    assert ci.high == pytest.approx(high, rel=1e-12)
    direct = classical.mean_interval(float(np.mean(x)), float(np.std(x, ddof=1)), float(x.size), level)
    assert direct.low == pytest.approx(low, rel=1e-13) and direct.high == pytest.approx(high, rel=1e-13)


def test_t_interval_of_a_count_table_uses_the_total_count():
    values = np.array([1.0, 2.0, 3.0, 4.0])
    counts = np.array([3.0, 7.0, 6.0, 2.0])
    repeated = np.repeat(values, counts.astype(int))
    interval = IntervalOptions(method="percentile", level=0.9, resamples=200, seed=1)
    d = describe(from_table(values, counts, probabilities=False, normalise=False),
                 DescribeOptions(interval=interval), kind="table")
    ci = d.descriptors["mean"].classical_interval
    low, high = stats.t.interval(0.9, repeated.size - 1, loc=repeated.mean(),
                                 scale=repeated.std(ddof=1) / math.sqrt(repeated.size))
    assert (ci.low, ci.high) == (pytest.approx(low, rel=1e-12), pytest.approx(high, rel=1e-12))


@pytest.mark.parametrize("level", [0.9, 0.95, 0.99])
def test_chi_square_interval_of_the_variance_matches_the_textbook_formula(level):
    """((n-1) s^2 / chi2.ppf(1 - a/2, n-1), (n-1) s^2 / chi2.ppf(a/2, n-1)); sd: square roots."""
    x = np.random.default_rng(47).normal(0.0, 2.5, 23)
    n = x.size
    s2 = float(np.var(x, ddof=1))
    alpha = 1.0 - level
    low = (n - 1) * s2 / stats.chi2.ppf(1.0 - alpha / 2.0, n - 1)
    high = (n - 1) * s2 / stats.chi2.ppf(alpha / 2.0, n - 1)
    interval = IntervalOptions(method="percentile", level=level, resamples=200, seed=1)
    d = describe(from_array(x), DescribeOptions(interval=interval), kind="samples")
    variance = d.descriptors["variance"].classical_interval
    assert variance.method == "chi_square"
    assert variance.low == pytest.approx(low, rel=1e-12)
    assert variance.high == pytest.approx(high, rel=1e-12)
    sd = d.descriptors["standard_deviation"].classical_interval
    assert sd.low == pytest.approx(math.sqrt(low), rel=1e-12)
    assert sd.high == pytest.approx(math.sqrt(high), rel=1e-12)
    # The interval is not symmetric about s^2 (the chi-square is skewed).
    assert s2 - low < high - s2


def test_classical_intervals_are_plain_floats():
    """Results leave the core as Python floats (the HTTP layer's strict encoder rejects numpy
    scalars; see tests/api/test_intervals.py)."""
    x = np.random.default_rng(3).normal(0.0, 1.0, 30)
    for ci in (
        classical.mean_interval(float(x.mean()), float(x.std(ddof=1)), 30.0, 0.95),
        classical.variance_interval(float(x.var(ddof=1)), 30.0, 0.95),
    ):
        assert type(ci.low) is float and type(ci.high) is float, ci


def test_quantile_interval_of_a_count_table_reads_the_expanded_sample():
    values = np.array([10.0, 20.0, 30.0, 40.0, 50.0])
    counts = np.array([4.0, 9.0, 12.0, 8.0, 3.0])
    repeated = np.repeat(values, counts.astype(int))
    interval = IntervalOptions(method="percentile", level=0.95, resamples=200, seed=1)
    d = describe(from_table(values, counts, probabilities=False, normalise=False),
                 DescribeOptions(interval=interval, probabilities=(0.25, 0.9)), kind="table")
    for quantile in d.quantiles:
        lower, upper, coverage = brute_force_ranks(repeated.size, quantile.probability, 0.95)
        ci = quantile.classical_interval
        assert (ci.low, ci.high) == (repeated[lower - 1], repeated[upper - 1])
        assert ci.coverage == pytest.approx(coverage, rel=1e-9)


@pytest.mark.parametrize("n", [10**4, 7_592_685, 10**8, 2**31, 10**12, 10**15])
@pytest.mark.parametrize("p", [0.01, 0.5, 0.9])
def test_order_statistic_ranks_for_large_counts_match_scipy_binom(n, p):
    """Counts a count table can carry (its n is the total count). Reference: scipy 1.17.1's
    binom.ppf and binom.cdf (boost's incomplete beta). l - 1 is the largest k with
    P(B <= k) <= alpha/2, u - 1 the smallest with P(B <= k) >= 1 - alpha/2; nothing of n entries
    is built (n = 1e15 once asked for an array of 8e15 ranks)."""
    level = 0.95
    binom = stats.binom(n, p)
    smallest = int(binom.ppf(0.025))
    lower = smallest + 1 if binom.cdf(smallest) <= 0.025 * (1 + 1e-12) else smallest
    upper = int(binom.ppf(0.975)) + 1
    got = classical.order_statistic_ranks(n, p, level)
    assert got is not None and got[:2] == (lower, upper)
    assert got[2] == pytest.approx(binom.cdf(upper - 1) - binom.cdf(lower - 1), abs=1e-9)
    assert got[2] >= level - 1e-9


def test_order_statistic_ranks_beyond_two_to_the_53_are_not_offered():
    # float64 no longer tells neighbouring ranks apart there.
    assert classical.order_statistic_ranks(2**53 + 2, 0.5, 0.95) is None
