"""Replicates of the quantile-based shape, the mean-median gap, the medcouple and the L-moments
(tailgauge.core.resample), checked against outside references row by row, and their intervals'
coverage.

References, each named again beside its check:

* statsmodels 0.15.0, ``statsmodels.stats.stattools``: ``medcouple(use_fast=False)`` (the exact
  kernel definition with the sign kernel for ties) and ``robust_skewness`` / ``robust_kurtosis``
  (SK2 = Bowley's quartile skewness, KR2 = Moors' octile kurtosis, from ``np.percentile``, which is
  Hyndman & Fan type 7);
* lmoments3 1.0.8, ``lmoments3.lmom_ratios`` (unbiased l1, l2, t3, t4);
* numpy's mean, median and standard deviation (ddof = 1) for the mean-median gap;
* closed forms of the exponential distribution: quantiles -ln(1 - p), L-moments l2 = 1/2,
  t3 = 1/3, t4 = 1/6 (Hosking 1990, table 1), and its population medcouple, found here by
  numerical integration of the kernel's distribution (scipy.integrate.quad, scipy.optimize.brentq).

A resampled row is a count per support value: expanded with ``np.repeat`` it is an ordinary
sample, which the references describe.
"""

from __future__ import annotations

import math
import warnings

import lmoments3
import numpy as np
import pytest
from scipy import integrate, optimize, stats
from statsmodels.stats.stattools import medcouple, robust_kurtosis, robust_skewness
from tailgauge.core import (
    DescribeOptions,
    IntervalOptions,
    central_sums,
    describe,
    from_array,
    from_table,
    resample,
)
from tailgauge.core.describe.order_based import ROBUST_PROBABILITIES
from tailgauge.core.describe.robust_shape import NORMAL_OCTILE_KURTOSIS
from tailgauge.core.resample.draws import draw, plan_of
from tailgauge.core.resample.rows import Rows, Scratch
from tailgauge.core.resample.statistics import Statistics

SHAPE = resample.QuantileShape(ROBUST_PROBABILITIES, NORMAL_OCTILE_KURTOSIS)
NEW = (
    "quartile_skewness", "octile_kurtosis", "octile_excess_kurtosis", "medcouple", "mean_median_gap",
    "l_location", "l_scale", "l_skewness", "l_kurtosis",
)


def _resampled_rows(data, rows: int, seed: int):
    """``rows`` resamples of ``data`` as the engine draws them, their statistics, and the plan."""
    plan, _ = plan_of(data, central_sums(data.values, data.weights, 4))
    statistics = Statistics(plan, ("G1", "G2"), 7, "sample", quantile_shape=SHAPE)
    weights, counts = draw(plan, np.random.default_rng(seed), rows, Scratch())
    view = Rows(weights, plan.powers, True, counts, plan.draws, Scratch())
    names = statistics.wanted({name: 1.0 for name in resample.INTERVAL_DESCRIPTORS})
    assert set(NEW) <= set(names)
    return plan, weights, statistics.evaluate(view, np.array([0.5]), names)


def _references(x: np.ndarray) -> dict[str, float]:
    l1, l2, t3, t4 = lmoments3.lmom_ratios(x, nmom=4)  # lmoments3 1.0.8
    with warnings.catch_warnings(), np.errstate(all="ignore"):
        # statsmodels' KR3 and KR4 (not used) warn on some samples.
        warnings.simplefilter("ignore", RuntimeWarning)
        kr2 = float(robust_kurtosis(x, excess=False)[1])  # statsmodels 0.15.0
        return {
            "quartile_skewness": float(robust_skewness(x)[1]),
            "octile_kurtosis": kr2,
            "octile_excess_kurtosis": float(robust_kurtosis(x, excess=True)[1]),
            "medcouple": float(medcouple(x, use_fast=False)),
            "mean_median_gap": float((np.mean(x) - np.median(x)) / np.std(x, ddof=1)),
            "l_location": float(l1),
            "l_scale": float(l2),
            "l_skewness": float(t3),
            "l_kurtosis": float(t4),
        }


CASES = {
    # Invented scenario: minutes late of a fictional shuttle on 150 runs, recorded to the minute.
    "count table, 12 values": lambda rng: from_table(
        np.array([0.0, 1, 2, 3, 4, 5, 6, 8, 10, 13, 17, 25]),
        np.array([31.0, 24, 19, 15, 12, 10, 9, 8, 7, 6, 5, 4]),
        probabilities=False,
        normalise=False,
    ),
    "raw sample of 60 distinct values": lambda rng: from_array(rng.lognormal(0.0, 0.7, 60)),
    "raw sample with ties": lambda rng: from_array(np.round(rng.gamma(2.0, 3.0, 90))),
    # Most weight on the smallest value: many rows have no value below their median (no pairs,
    # only the ties' signs and zeros); found failing by the window search, fixed with it.
    "count table, median at the minimum": lambda rng: from_table(
        np.array([1.0, 2.0, 3.0, 7.0]), np.array([60.0, 4.0, 3.0, 2.0]), probabilities=False, normalise=False
    ),
}


@pytest.mark.parametrize("case", list(CASES))
def test_each_resampled_row_matches_the_outside_references_on_its_expanded_sample(case):
    data = CASES[case](np.random.default_rng(606))
    plan, weights, replicates = _resampled_rows(data, 40, seed=17)
    for row in range(weights.shape[0]):
        x = np.repeat(plan.values, weights[row].astype(np.int64))
        for name, expected in _references(x).items():
            got = float(replicates[name][row])
            if not math.isfinite(expected):
                assert not math.isfinite(got), (case, row, name, got)
                continue
            # lmoments3 and statsmodels sum differently: agreement to rounding of sums of n terms.
            assert got == pytest.approx(expected, rel=1e-9, abs=1e-12), (case, row, name, got, expected)


def test_medcouple_rows_with_ties_at_their_median_follow_the_sign_kernel():
    """Rows of a table of few values put many observations on their own median: the sign kernel
    of Brys et al. (2004, definition 2) decides, as in statsmodels 0.15.0 (use_fast=False)."""
    data = from_table(np.array([1.0, 2.0, 3.0, 4.0, 9.0]), np.array([5.0, 9.0, 12.0, 7.0, 3.0]),
                      probabilities=False, normalise=False)
    plan, weights, replicates = _resampled_rows(data, 60, seed=5)
    tied = 0
    for row in range(weights.shape[0]):
        x = np.repeat(plan.values, weights[row].astype(np.int64))
        tied += int(np.count_nonzero(x == np.median(x)) > 1)
        assert float(replicates["medcouple"][row]) == pytest.approx(float(medcouple(x, use_fast=False)), abs=1e-12)
    assert tied > 30  # the case is really exercised


def test_the_medcouple_is_left_out_with_its_reason_when_it_would_not_fit_the_budget():
    rng = np.random.default_rng(31)
    x = rng.normal(size=300)  # 300 distinct values: its tables alone pass the work share
    options = DescribeOptions(interval=IntervalOptions("percentile", 0.95, 999, 4))
    result = describe(from_array(x), options, kind="samples")
    assert result.descriptors["medcouple"].value is not None
    assert result.descriptors["medcouple"].interval is None
    notes = [n for n in result.warnings if n.code == "interval_not_offered" and "medcouple" in n.descriptors]
    assert len(notes) == 1 and "too costly for these data within the budget" in notes[0].message
    # The same data, fewer of them: resampled.
    small = describe(from_array(x[:60]), options, kind="samples")
    assert small.descriptors["medcouple"].interval is not None
    assert not any("medcouple" in n.descriptors for n in small.warnings if n.code == "interval_not_offered")


def test_bca_jackknife_covers_the_new_statistics():
    """BCa needs each statistic's leave-one-out values: every new descriptor gets a BCa interval
    (not a percentile fallback) and an acceleration from its own jackknife."""
    rng = np.random.default_rng(99)
    result = describe(from_array(np.round(rng.gamma(3.0, 2.0, 80), 1)),
                      DescribeOptions(interval=IntervalOptions("bca", 0.9, 1999, 12)), kind="samples")
    for name in NEW:
        interval = result.descriptors[name].interval
        assert interval is not None and interval.method == "bca", (name, interval)
        assert interval.low <= result.descriptors[name].value <= interval.high, name
    kept = result.resampling.replicates
    assert set(NEW) <= set(kept.jackknife)


# ----------------------------------------------------------------------------------------------
# Coverage of the 95% percentile intervals for the exponential distribution
# ----------------------------------------------------------------------------------------------


def _exponential_medcouple() -> float:
    """The population medcouple of the exponential distribution (any rate): the t at which half
    of the pairs l <= m <= u (m = ln 2) have kernel h(l, u) <= t. For u > m,
    h <= t  iff  l <= m + (u - m)(t - 1)/(t + 1), so
    P(h <= t) = int_m^inf 2 e^-u * 2 F(m + (u - m)(t - 1)/(t + 1)) du, F(x) = 1 - e^-x (x >= 0)."""
    m = math.log(2.0)

    def below(t: float) -> float:
        ratio = (t - 1.0) / (t + 1.0)
        integrand = lambda u: 4.0 * math.exp(-u) * -math.expm1(-max(0.0, m + (u - m) * ratio))
        return integrate.quad(integrand, m, math.inf, limit=200)[0]

    return optimize.brentq(lambda t: below(t) - 0.5, -0.99, 0.99, xtol=1e-13)


def _exponential_truths() -> dict[str, float]:
    q = lambda p: -math.log1p(-p)
    e = [q(i / 8) for i in range(8)]
    moors = ((e[7] - e[5]) + (e[3] - e[1])) / (e[6] - e[2])
    return {
        "quartile_skewness": (q(0.75) + q(0.25) - 2 * q(0.5)) / (q(0.75) - q(0.25)),
        "octile_kurtosis": moors,
        "mean_median_gap": 1.0 - math.log(2.0),  # (mean - median) / sd = (1 - ln 2) / 1
        "medcouple": _exponential_medcouple(),
        "l_location": 1.0,
        "l_scale": 0.5,
        "l_skewness": 1.0 / 3.0,
        "l_kurtosis": 1.0 / 6.0,
    }


COVERAGE_REPLICATIONS = 400
COVERAGE_N = 100
# A 400-replication pilot of this code with other seeds (coverage(7777, 400)) gave: quartile
# skewness 0.9925, octile kurtosis 0.995, mean-median gap 0.985, medcouple 0.9925, l1 0.94,
# l2 0.91, t3 0.92, t4 0.92.
# * The L-moments under-cover, as percentile intervals of skewed statistics do at small n
#   (coverage error of order n^-1/2; Hall, *The Bootstrap and Edgeworth Expansion*, 1992, ch. 3):
#   allowed shortfalls below 0.95 before the binomial 3 sd.
# * Statistics of sample quantiles over-cover at n = 100: the bootstrap's standard error of the
#   quartile skewness is 0.153 where its sampling sd is 0.131 (20,000 exponential samples), and a
#   plain numpy bootstrap of the same samples gives 0.152, so the engine is not the cause (the
#   bootstrap variance of sample quantiles is known to converge slowly, with relative error of
#   order n^-1/4: Hall & Martin 1988, recalled, not looked up). For them only the lower bound
#   applies; their agreement with scipy.stats.bootstrap is checked in test_resample.py.
SHORTFALL = {
    "quartile_skewness": 0.03,
    "octile_kurtosis": 0.03,
    "mean_median_gap": 0.03,
    "medcouple": 0.03,
    "l_location": 0.03,
    "l_scale": 0.06,
    "l_skewness": 0.05,
    "l_kurtosis": 0.05,
}
OVER_COVERING = {"quartile_skewness", "octile_kurtosis", "mean_median_gap", "medcouple"}


def coverage(seed_base: int, replications: int) -> dict[str, float]:
    truths = _exponential_truths()
    covered = dict.fromkeys(truths, 0)
    for replication in range(replications):
        rng = np.random.default_rng([seed_base, replication])
        data = from_array(rng.exponential(1.0, COVERAGE_N))
        point = describe(data, DescribeOptions(), kind="samples")
        outcome = resample.bootstrap(
            data,
            central_sums(data.values, data.weights, 4),
            {name: point.descriptors[name].value for name in truths},
            [],
            np.array([]),
            families=("G1", "G2"),
            quantile_type=7,
            factor_rule="sample",
            options=IntervalOptions("percentile", 0.95, 999, replication),
            max_work=1e9,
            deadline=None,
            quantile_shape=SHAPE,
        )
        for name, truth in truths.items():
            interval = outcome.results[name].interval
            covered[name] += interval.low <= truth <= interval.high
    return {name: count / replications for name, count in covered.items()}


def test_the_exponential_medcouple_integral_is_right():
    """The integral above gives 1/3 for the exponential (Brys, Hubert & Struyf 2004 list the
    medcouple of the exponential as 1/3: recalled, not looked up), and its sample medcouple of a
    large sample (statsmodels 0.15.0) agrees to sampling error."""
    value = _exponential_medcouple()
    assert value == pytest.approx(1.0 / 3.0, abs=1e-9)
    x = np.random.default_rng(8).exponential(1.0, 20_000)
    assert float(medcouple(x)) == pytest.approx(value, abs=0.02)


@pytest.mark.slow
def test_percentile_intervals_of_the_new_descriptors_cover_the_exponential_truths():
    """400 seeded replications of n = 100 exponential observations, 999 resamples each.

    Accepted band: [0.95 - shortfall - 3 sd, 0.95 + 3 sd], sd = sqrt(0.95 x 0.05 / 400) = 0.011
    the binomial standard deviation of the observed frequency; no upper bound for the statistics
    of sample quantiles (see OVER_COVERING)."""
    level = 0.95
    sd = math.sqrt(level * (1 - level) / COVERAGE_REPLICATIONS)
    rates = coverage(2026, COVERAGE_REPLICATIONS)
    outside = {
        name: rate for name, rate in rates.items()
        if not level - SHORTFALL[name] - 3 * sd <= rate <= (1.0 if name in OVER_COVERING else level + 3 * sd)
    }
    assert outside == {}, rates


def test_exponential_truths_match_scipy():
    """The closed forms used above against scipy.stats.expon (quantiles) and lmoments3's fit
    of the exponential distribution's L-moments (l2 = 1/2, t3 = 1/3, t4 = 1/6 for rate 1)."""
    truths = _exponential_truths()
    q = stats.expon.ppf
    assert truths["quartile_skewness"] == pytest.approx(
        (q(0.75) + q(0.25) - 2 * q(0.5)) / (q(0.75) - q(0.25)), rel=1e-12
    )
    from lmoments3 import distr

    l1, l2, t3, t4 = distr.exp.lmom_ratios(loc=0.0, scale=1.0, nmom=4)
    assert (l1, l2, t3, t4) == pytest.approx((1.0, 0.5, 1 / 3, 1 / 6), rel=1e-12)
