"""The bootstrap engine's intervals (tailgauge.core.resample), checked against outside references:
agreement with another engine, the basic interval's construction, BCa's fallback and the
descriptors that get no interval (with the warnings that say why), and the coverage of
percentile intervals.

References used below, each named again beside its check:

* scipy 1.17.1, ``scipy.stats.bootstrap`` (percentile, basic and BCa intervals of one statistic),
  with ``scipy.stats.lmoment`` (the unbiased sample L-moments, Hosking 1990) as the statistic for
  the L-moments;
* A. C. Davison and D. V. Hinkley, *Bootstrap Methods and their Application*, 1997, section 5.2:
  the basic interval;
* B. Efron and R. J. Tibshirani, *An Introduction to the Bootstrap*, Chapman & Hall, 1993,
  chapter 14: the sign of the BCa bias correction and acceleration of the standard deviation;
* P. Hall, *The Bootstrap and Edgeworth Expansion*, 1992, chapter 3: the order of the coverage
  error of percentile intervals, behind the coverage allowances.

The jackknife is checked in test_resample_jackknife.py, same-seed reproducibility and exact
scaling in test_resample_determinism.py. Every random generator is seeded; nothing here depends
on timing.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
from scipy import stats

from tailgauge.core import (
    DescribeOptions,
    IntervalOptions,
    central_sums,
    describe,
    from_array,
    from_table,
)
from tailgauge.core import resample
from tests.core.resample_cases import run


# ----------------------------------------------------------------------------------------------
# Helpers
# ----------------------------------------------------------------------------------------------


def codes(description) -> set[str]:
    return {note.code for note in description.warnings}


def warned(description, code: str) -> list:
    return [note for note in description.warnings if note.code == code]


# ----------------------------------------------------------------------------------------------
# Agreement with scipy.stats.bootstrap (scipy 1.17.1)
# ----------------------------------------------------------------------------------------------

REFERENCE_SEEDS = (101, 202, 303, 404, 505)
REFERENCE_RESAMPLES = 9999
SCIPY_METHOD = {"percentile": "percentile", "bca": "BCa"}
STATISTICS = {
    "mean": lambda a, axis=-1: np.mean(a, axis=axis),
    "standard_deviation": lambda a, axis=-1: np.std(a, ddof=1, axis=axis),
    "median": lambda a, axis=-1: np.median(a, axis=axis),
    # Bowley's quartile skewness by H&F type 7 (np.percentile's default, the service's default).
    "quartile_skewness": lambda a, axis=-1: (
        (np.percentile(a, 75, axis=axis) + np.percentile(a, 25, axis=axis) - 2 * np.percentile(a, 50, axis=axis))
        / (np.percentile(a, 75, axis=axis) - np.percentile(a, 25, axis=axis))
    ),
    "mean_median_gap": lambda a, axis=-1: (np.mean(a, axis=axis) - np.median(a, axis=axis)) / np.std(a, ddof=1, axis=axis),
    # scipy 1.17.1 scipy.stats.lmoment: the unbiased sample L-moments (Hosking 1990).
    "l_scale": lambda a, axis=-1: stats.lmoment(a, order=2, axis=axis, standardize=False),
    "l_skewness": lambda a, axis=-1: stats.lmoment(a, order=3, axis=axis),
}


@pytest.fixture(scope="module", params=["normal", "exponential"])
def reference_data(request):
    rng = np.random.default_rng(19930101)
    if request.param == "normal":
        return request.param, rng.normal(50.0, 8.0, 200)
    return request.param, rng.exponential(3.0, 200)


@pytest.fixture(scope="module")
def endpoints(reference_data):
    """Endpoints of both engines over the same independent seeds, for each statistic and method.

    Returns {(statistic, method): (ours R x 2, scipy R x 2, bootstrap SE)}.
    """
    _, x = reference_data
    ours: dict[tuple[str, str], list] = {}
    theirs: dict[tuple[str, str], list] = {}
    errors: dict[str, float] = {}
    for method in ("percentile", "bca"):
        for seed in REFERENCE_SEEDS:
            d = describe(
                from_array(x),
                DescribeOptions(interval=IntervalOptions(method, 0.95, REFERENCE_RESAMPLES, seed)),
                kind="samples",
            )
            for name, statistic in STATISTICS.items():
                interval = d.descriptors[name].interval
                assert interval.method == method, (name, interval)
                ours.setdefault((name, method), []).append((interval.low, interval.high))
                errors[name] = d.descriptors[name].standard_error
                reference = stats.bootstrap(
                    (x,),
                    statistic,
                    n_resamples=REFERENCE_RESAMPLES,
                    confidence_level=0.95,
                    method=SCIPY_METHOD[method],
                    vectorized=True,
                    rng=np.random.default_rng(seed),
                )
                theirs.setdefault((name, method), []).append(
                    (reference.confidence_interval.low, reference.confidence_interval.high)
                )
    return {key: (np.array(ours[key]), np.array(theirs[key]), errors[key[0]]) for key in ours}


@pytest.mark.parametrize("method", ["percentile", "bca"])
@pytest.mark.parametrize("name", list(STATISTICS))
def test_intervals_agree_with_scipy_bootstrap_within_monte_carlo_error(
    endpoints, reference_data, name, method
):
    """Reference: scipy 1.17.1 ``scipy.stats.bootstrap`` on the same data, same level, B = 9999.

    Both engines are unbiased estimators of the same ideal bootstrap endpoints, so the means of
    their endpoints over R = 5 independent seeds each differ only by Monte Carlo error. Its
    standard error is estimated from the spread over seeds (pooled over both engines, 8 degrees
    of freedom), floored by the asymptotic standard deviation of a sample quantile of B draws,
    sqrt(p (1 - p) / B) / f(q_p) with f the normal density of the bootstrap distribution
    (phi(z_p) / SE), because five seeds may all land on one atom of the lumpy bootstrap
    distribution of the median. The tolerance is 5 such standard errors (t_8 two-sided
    p ~ 0.001), and it is checked to be a small fraction of the interval width, so the test
    would catch a wrong tail fraction or a BCa adjustment of the wrong size or sign.
    """
    ours, theirs, bootstrap_se = endpoints[(name, method)]
    runs = len(REFERENCE_SEEDS)
    pooled_sd = np.sqrt((np.var(ours, axis=0, ddof=1) + np.var(theirs, axis=0, ddof=1)) / 2.0)
    tail = 0.025
    asymptotic_sd = math.sqrt(tail * (1 - tail) / REFERENCE_RESAMPLES) * bootstrap_se / stats.norm.pdf(
        stats.norm.ppf(tail)
    )
    difference_se = np.maximum(pooled_sd, asymptotic_sd) * math.sqrt(2.0 / runs)
    tolerance = 5.0 * difference_se
    width = float(np.mean(theirs[:, 1] - theirs[:, 0]))
    assert np.all(tolerance < 0.1 * width), (tolerance, width)
    gap = np.abs(ours.mean(axis=0) - theirs.mean(axis=0))
    assert np.all(gap <= tolerance), {
        "data": reference_data[0],
        "ours": ours.mean(axis=0),
        "scipy": theirs.mean(axis=0),
        "tolerance": tolerance,
    }


def test_bca_moves_the_sd_interval_away_from_the_percentile_one(endpoints):
    """Guards the comparison above: BCa must really adjust, not silently equal percentile.

    The bootstrap distribution of the sd is right-skewed and its BCa bias correction and
    acceleration are both positive here (Efron & Tibshirani 1993, ch. 14), which moves both
    endpoints up by about 0.27 bootstrap SE for these data (many times the Monte Carlo
    tolerance of the comparison, which is below 0.1 SE). Required: more than 0.1 SE.
    """
    percentile = endpoints[("standard_deviation", "percentile")][0].mean(axis=0)
    bca = endpoints[("standard_deviation", "bca")][0].mean(axis=0)
    se = endpoints[("standard_deviation", "bca")][2]
    assert np.all(bca - percentile > 0.1 * se), (percentile, bca, se)


def test_basic_interval_is_twice_the_estimate_minus_the_reversed_percentile_interval():
    """Basic interval (Davison & Hinkley, *Bootstrap Methods and their Application*, 1997, section
    5.2): [2 t - q_hi, 2 t - q_lo] from the same resamples."""
    rng = np.random.default_rng(77)
    data = from_array(rng.gamma(2.0, 5.0, 120))
    percentile, *_ = run(data, method="percentile", resamples=2000, seed=9)
    basic, *_ = run(data, method="basic", resamples=2000, seed=9)
    compared = 0
    for name in resample.INTERVAL_DESCRIPTORS:
        p, b = percentile.descriptors[name], basic.descriptors[name]
        if p.interval is None:
            continue
        assert b.interval.method == "basic"
        assert b.interval.low == 2.0 * p.value - p.interval.high
        assert b.interval.high == 2.0 * p.value - p.interval.low
        assert b.standard_error == p.standard_error
        compared += 1
    for p, b in zip(percentile.quantiles, basic.quantiles):
        assert b.interval.low == 2.0 * p.value - p.interval.high
        assert b.interval.high == 2.0 * p.value - p.interval.low
        compared += 1
    assert compared == len(resample.INTERVAL_DESCRIPTORS) + len(percentile.quantiles)


# ----------------------------------------------------------------------------------------------
# Fallbacks and warnings
# ----------------------------------------------------------------------------------------------


def test_bca_falls_back_to_percentile_when_every_resample_equals_the_estimate():
    # 39 equal values and one other: every resample's median, IQR and MAD equal the estimate
    # (a resample would need 20 copies of the odd value to move the median).
    data = from_array(np.array([5.0] * 39 + [6.0]))
    description, *_ = run(data, method="bca", resamples=999, seed=12)
    median = description.descriptors["median"]
    assert median.value == 5.0
    assert median.interval.method == "percentile"
    assert (median.interval.low, median.interval.high) == (5.0, 5.0)
    fallbacks = warned(description, "bca_fallback")
    assert fallbacks, description.warnings
    named = {name for note in fallbacks for name in note.descriptors}
    assert {"median", "interquartile_range", "median_absolute_deviation"} <= named
    # The mean does move between resamples, so it keeps BCa.
    assert description.descriptors["mean"].interval.method == "bca"
    assert "mean" not in named


def test_bca_is_kept_when_it_is_defined():
    rng = np.random.default_rng(606)
    description, *_ = run(from_array(rng.normal(0.0, 1.0, 60)), method="bca", resamples=999, seed=2)
    assert "bca_fallback" not in codes(description)
    assert description.descriptors["mean"].interval.method == "bca"
    assert description.descriptors["variance"].interval.method == "bca"


def test_small_sample_is_warned_and_a_larger_one_is_not():
    rng = np.random.default_rng(707)
    small, *_ = run(from_array(rng.normal(0.0, 1.0, 12)), resamples=500)
    assert "bootstrap_small_sample" in codes(small)
    assert small.descriptors["mean"].interval is not None
    large, *_ = run(from_array(rng.normal(0.0, 1.0, 40)), resamples=500)
    assert "bootstrap_small_sample" not in codes(large)
    assert "bootstrap_discrete" not in codes(large)


def test_few_distinct_values_are_warned():
    data = from_table(np.array([1.0, 2.0, 3.0, 4.0, 5.0]), np.array([20.0, 35.0, 25.0, 15.0, 5.0]),
                      probabilities=False, normalise=False)
    description, *_ = run(data, kind="table", resamples=500)
    notes = warned(description, "bootstrap_discrete")
    assert len(notes) == 1
    assert "median" in notes[0].descriptors
    assert "bootstrap_small_sample" not in codes(description)  # n = 100


def test_extremes_lag1_and_the_half_sample_mode_get_no_interval_and_say_why():
    rng = np.random.default_rng(808)
    description, *_ = run(from_array(rng.normal(10.0, 1.0, 50)), resamples=500)
    skipped = {"minimum", "maximum", "range", "lag1_autocorrelation", "half_sample_mode"}
    for name in skipped:
        d = description.descriptors[name]
        assert d.value is not None
        assert d.interval is None and d.standard_error is None, name
    notes = warned(description, "interval_not_offered")
    assert {name for note in notes for name in note.descriptors} == skipped
    for name in resample.INTERVAL_DESCRIPTORS:
        assert description.descriptors[name].interval is not None, name

def test_two_observations_with_bca_raise_no_numpy_warning():
    """Each jackknife row of n = 2 holds one observation (sample variance 0/0): the engine must
    handle that as an undefined jackknife, without a numpy RuntimeWarning escaping."""
    with warnings.catch_warnings():
        warnings.simplefilter("error", RuntimeWarning)
        description, *_ = run(from_array(np.array([3.0, 4.0])), method="bca", resamples=500, seed=3)
    mean = description.descriptors["mean"].interval
    assert (mean.low, mean.high) == (3.0, 4.0)


# ----------------------------------------------------------------------------------------------
# Coverage of the 95% percentile intervals
# ----------------------------------------------------------------------------------------------

COVERAGE_REPLICATIONS = 1000
COVERAGE_RESAMPLES = 999
TABLE_VALUES = np.arange(7.0)
# Skewed; its median is 1 (F(0) = 0.30 < 1/2 < F(1) = 0.55).
TABLE_PROBABILITIES = np.array([0.30, 0.25, 0.17, 0.12, 0.08, 0.05, 0.03])


def _normal_mean_allowance(n: int, level: float) -> float:
    """The percentile interval of the mean is close to mean +- z s_n / sqrt(n) with the plug-in
    s_n = s sqrt((n - 1) / n); for normal data its coverage is P(|t_{n-1}| < z sqrt((n - 1) / n))."""
    z = stats.norm.ppf(0.5 + level / 2.0)
    coverage = 2.0 * stats.t.cdf(z * math.sqrt((n - 1) / n), n - 1) - 1.0
    return level - coverage


# scenario -> (draw the data, true mean, true median, allowance of the mean, of the median)
# Allowances for the known small-sample undercoverage of percentile intervals:
# * normal mean, n = 30: the t argument above (about 0.013);
# * skewed data: coverage error of order 1/n growing with the skewness (Hall, *The Bootstrap and
#   Edgeworth Expansion*, 1992, chapter 3); exponential (skewness 2) at n = 40 and the table
#   at n = 50 are allowed 0.03; a 5000-replication pilot run of this very code gave 0.924
#   (exponential mean) and 0.944 (table mean);
# * medians: the bootstrap distribution of the median takes only a few distinct values (order
#   statistics near the middle), so its percentiles are coarse; allowed 0.02; the pilot gave
#   0.938 (normal, n = 30) and 0.944 (exponential, n = 40).
SCENARIOS = {
    "normal n=30": (
        lambda rng: from_array(rng.normal(10.0, 2.0, 30)), 10.0, 10.0, _normal_mean_allowance(30, 0.95), 0.02
    ),
    "exponential n=40": (
        lambda rng: from_array(rng.exponential(1.0, 40)), 1.0, math.log(2.0), 0.03, 0.02
    ),
    "skewed count table n=50": (
        lambda rng: from_table(
            TABLE_VALUES,
            np.bincount(rng.choice(7, size=50, p=TABLE_PROBABILITIES), minlength=7).astype(np.float64),
            probabilities=False,
            normalise=False,
        ),
        float(TABLE_VALUES @ TABLE_PROBABILITIES),
        1.0,
        0.03,
        None,  # see the median check below
    ),
}


@pytest.mark.slow
@pytest.mark.parametrize("scenario", list(SCENARIOS))
def test_percentile_intervals_cover_the_true_mean_and_median(scenario):
    """Coverage over 1000 seeded replications of 999 resamples (the core, called directly).

    Accepted band: [0.95 - allowance - 3 sd, 0.95 + 3 sd] with sd = sqrt(0.95 * 0.05 / 1000)
    = 0.0069 the binomial standard deviation of the observed frequency. A 90% interval
    (coverage near 0.88-0.90) or a 99% one would fall outside it.

    The median of the discrete table is the exception: a discrete distribution whose median is
    a single atom (F(0) = 0.30 < 1/2 < F(1) = 0.55) has a sample median equal to it with
    probability tending to 1, so its interval's coverage tends to 1, not to the level; only the
    lower bound applies there.
    """
    draw, true_mean, true_median, mean_allowance, median_allowance = SCENARIOS[scenario]
    level = 0.95
    sd = math.sqrt(level * (1 - level) / COVERAGE_REPLICATIONS)
    covered = {"mean": 0, "median": 0}
    for replication in range(COVERAGE_REPLICATIONS):
        rng = np.random.default_rng([2025, replication, len(scenario)])
        data = draw(rng)
        point = describe(data, DescribeOptions(), kind="samples")
        sums = central_sums(data.values, data.weights, 4)
        outcome = resample.bootstrap(
            data,
            sums,
            {"mean": point.descriptors["mean"].value, "median": point.descriptors["median"].value},
            [],
            np.array([]),
            families=("G1", "G2"),
            quantile_type=7,
            factor_rule="sample",
            options=IntervalOptions("percentile", level, COVERAGE_RESAMPLES, replication),
            max_work=1e9,
            deadline=None,
        )
        for name, truth in (("mean", true_mean), ("median", true_median)):
            interval = outcome.results[name].interval
            covered[name] += interval.low <= truth <= interval.high
    mean_rate = covered["mean"] / COVERAGE_REPLICATIONS
    assert level - mean_allowance - 3 * sd <= mean_rate <= level + 3 * sd, (scenario, mean_rate)
    median_rate = covered["median"] / COVERAGE_REPLICATIONS
    if median_allowance is None:
        assert median_rate >= level - 3 * sd, (scenario, median_rate)
    else:
        assert level - median_allowance - 3 * sd <= median_rate <= level + 3 * sd, (scenario, median_rate)
