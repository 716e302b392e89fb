"""Intervals of contrasts from independent resampling of the two inputs
(tailgauge.core.compare.paired), against outside references.

References used below, each named again beside its check:

* B. Efron and R. J. Tibshirani, *An Introduction to the Bootstrap*, Chapman & Hall, 1993, ch. 2,
  Table 2.1: the mouse survival data (tests/core/comparison_cases.py), mean difference 30.63 and
  the formula standard error sqrt(s1^2/n1 + s2^2/n2) = 28.93; eq. 14.10 and 14.15 (BCa and its
  acceleration);
* A. C. Davison and D. V. Hinkley, *Bootstrap Methods and their Application*, 1997, section 5.2
  (the basic interval);
* A. Kleiner, A. Talwalkar, P. Sarkar and M. I. Jordan, JRSS B 76, 2014 (bag of little bootstraps);
* scipy 1.17.1: ``stats.bootstrap`` (two independent samples, percentile and BCa).

Every random generator is seeded; nothing here depends on timing.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from scipy import stats

from tailgauge.core import compare, from_array
from tailgauge.core import resample
from tailgauge.core.compare.paired import paired_rounds
from tailgauge.core.resample import Replicates
from tests.core.comparison_cases import (  # noqa: F401 (two_samples is a fixture)
    MOUSE_CONTROL,
    MOUSE_TREATMENT,
    SAMPLES,
    interval,
    named,
    of_arrays,
    two_samples,
)


def test_mouse_data_mean_difference_and_its_standard_errors():
    """E&T (1993) Table 2.1: treatment minus control = 30.63, formula standard error 28.93.

    The bootstrap standard error converges, as B grows, to the plug-in value
    sqrt(sum (x - xbar)^2 / n1^2 + sum (y - ybar)^2 / n2^2) = 26.9 (divisor n, not n - 1; the ideal
    bootstrap standard error of a mean, E&T 1993 ch. 5/6 -- recalled), not to the 28.93 of the
    formula with sample variances: both are checked, each against its own target. Monte Carlo error
    of a bootstrap sd from B = 20000 replicates: sd * sqrt((kurtosis - 1) / (4 B)); with the
    bootstrap distribution's kurtosis below 5 that is under 0.2, and the tolerance is 5 of them.
    """
    resamples = 20_000
    result = of_arrays(MOUSE_CONTROL, MOUSE_TREATMENT, interval("percentile", resamples, 1993))
    mean = result.differences["mean"]
    assert round(mean.value, 2) == 30.63
    assert round(mean.classical_standard_error, 2) == 28.93  # E&T (1993), ch. 2
    ideal = math.sqrt(
        np.var(MOUSE_CONTROL) / MOUSE_CONTROL.size + np.var(MOUSE_TREATMENT) / MOUSE_TREATMENT.size
    )
    assert round(ideal, 1) == 26.9
    tolerance = 5.0 * ideal * math.sqrt((5.0 - 1.0) / (4.0 * resamples))
    assert abs(mean.standard_error - ideal) <= tolerance, (mean.standard_error, ideal, tolerance)
    assert abs(mean.standard_error - 28.93) > tolerance  # the check tells the two targets apart


REFERENCE_SEEDS = (101, 202, 303, 404, 505)


REFERENCE_RESAMPLES = 9999


@pytest.mark.parametrize("method", ["percentile", "bca"])
def test_mean_difference_interval_agrees_with_scipy_bootstrap_within_monte_carlo_error(two_samples, method):
    """Reference: scipy 1.17.1 ``stats.bootstrap((before, after), mean(after) - mean(before),
    paired=False)``, which resamples each sample on its own, and for BCa uses the multi-sample
    acceleration from both jackknives. Means of the endpoints over 5 seeds each; tolerance 5 Monte
    Carlo standard errors, as in tests/core/test_resample.py (spread over seeds, floored by the
    asymptotic sd of a sample quantile of B draws)."""
    before, after = two_samples
    ours, theirs = [], []
    for seed in REFERENCE_SEEDS:
        result = of_arrays(before, after, interval(method, REFERENCE_RESAMPLES, seed))
        got = result.differences["mean"]
        assert got.interval.method == method
        ours.append((got.interval.low, got.interval.high))
        se = got.standard_error
        reference = stats.bootstrap(
            (before, after),
            lambda x, y, axis=-1: np.mean(y, axis=axis) - np.mean(x, axis=axis),
            n_resamples=REFERENCE_RESAMPLES,
            paired=False,
            vectorized=True,
            method={"percentile": "percentile", "bca": "BCa"}[method],
            rng=np.random.default_rng(seed),
        )
        theirs.append((reference.confidence_interval.low, reference.confidence_interval.high))
    ours, theirs = np.array(ours), np.array(theirs)
    pooled = np.sqrt((np.var(ours, axis=0, ddof=1) + np.var(theirs, axis=0, ddof=1)) / 2.0)
    asymptotic = math.sqrt(0.025 * 0.975 / REFERENCE_RESAMPLES) * se / stats.norm.pdf(stats.norm.ppf(0.025))
    tolerance = 5.0 * np.maximum(pooled, asymptotic) * math.sqrt(2.0 / len(REFERENCE_SEEDS))
    width = float(np.mean(theirs[:, 1] - theirs[:, 0]))
    assert np.all(tolerance < 0.1 * width)
    gap = np.abs(ours.mean(axis=0) - theirs.mean(axis=0))
    assert np.all(gap <= tolerance), (ours.mean(axis=0), theirs.mean(axis=0), tolerance)


def _naive_two_sample_bca(estimate, replicates, jack_first, jack_second, level):
    """BCa (E&T 1993, eq. 14.10) with the multi-sample acceleration written as in scipy 1.17.1's
    stats.bootstrap: U_ij = (n_i - 1)(mean theta_(i.) - theta_(ij)),
    a = sum_i sum_j U^3 / n_i^3 / (6 (sum_i sum_j U^2 / n_i^2)^1.5)."""
    numerator = denominator = 0.0
    for jack in (jack_first, jack_second):
        n = jack.size
        u = (n - 1) * (jack.mean() - jack)
        numerator += np.sum(u**3) / n**3
        denominator += np.sum(u**2) / n**2
    a = numerator / (6.0 * denominator**1.5)
    below = np.sum(replicates < estimate) + 0.5 * np.sum(replicates == estimate)
    z0 = stats.norm.ppf(below / replicates.size)
    z = stats.norm.ppf([(1 - level) / 2, (1 + level) / 2])
    fractions = stats.norm.cdf(z0 + (z0 + z) / (1 - a * (z0 + z)))
    return np.quantile(replicates, fractions)


def test_bca_interval_of_a_difference_uses_the_two_sample_acceleration(two_samples):
    """Recomputed from the two inputs' own replicates (kept by describe) and a naive np.delete
    jackknife of each sample: the same interval to rounding."""
    before, after = two_samples
    result = compare(from_array(before), from_array(after), interval("bca", 3000, 77), kinds=SAMPLES)
    rep_first = result.first.resampling.replicates.values
    rep_second = result.second.resampling.replicates.values
    for name, statistic in (("mean", np.mean), ("standard_deviation", lambda v: np.std(v, ddof=1))):
        estimate = result.differences[name].value
        replicates = rep_second[name][0] - rep_first[name][0]
        b_hat, a_hat = statistic(after), statistic(before)
        jack_first = np.array([b_hat - statistic(np.delete(before, i)) for i in range(before.size)])
        jack_second = np.array([statistic(np.delete(after, i)) - a_hat for i in range(after.size)])
        low, high = _naive_two_sample_bca(estimate, replicates, jack_first, jack_second, 0.95)
        got = result.differences[name].interval
        assert got.method == "bca"
        assert got.low == pytest.approx(low, rel=1e-9), name
        assert got.high == pytest.approx(high, rel=1e-9), name
    # A ratio uses the same machinery (second / first in every jackknife row).
    ratio = result.ratios["standard_deviation"]
    assert ratio.interval.method == "bca" and ratio.interval.low < ratio.value < ratio.interval.high


def test_acceleration_of_one_sample_is_the_one_sample_formula():
    """With one input the multi-sample form reduces to E&T (1993) eq. 14.15."""
    rng = np.random.default_rng(6)
    jack = rng.gamma(2.0, 1.0, 25)
    weights = np.ones(25)
    gap = jack.mean() - jack
    assert resample.acceleration([(jack, weights)]) == pytest.approx(
        np.sum(gap**3) / (6.0 * np.sum(gap**2) ** 1.5), rel=1e-12
    )
    # Rows standing for several observations count that many times.
    counts = rng.integers(1, 4, 25).astype(np.float64)
    repeated = np.repeat(jack, counts.astype(int))
    gap = repeated.mean() - repeated
    assert resample.acceleration([(jack, counts)]) == pytest.approx(
        np.sum(gap**3) / (6.0 * np.sum(gap**2) ** 1.5), rel=1e-12
    )
    assert resample.acceleration([(np.full(5, 2.0), np.ones(5))]) is None


def test_basic_interval_of_a_difference_is_twice_the_estimate_minus_the_reversed_percentile(two_samples):
    """Davison & Hinkley (1997), section 5.2, from the same resamples."""
    before, after = two_samples
    p = compare(from_array(before), from_array(after), interval("percentile", 1000, 3), kinds=SAMPLES)
    b = compare(from_array(before), from_array(after), interval("basic", 1000, 3), kinds=SAMPLES)
    compared = 0
    for name, got in b.differences.items():
        if got.interval is None:
            continue
        ref = p.differences[name]
        assert got.interval.method == "basic"
        assert got.interval.low == pytest.approx(2 * got.value - ref.interval.high, rel=1e-12, abs=1e-12)
        assert got.interval.high == pytest.approx(2 * got.value - ref.interval.low, rel=1e-12, abs=1e-12)
        compared += 1
    assert compared == len(resample.INTERVAL_DESCRIPTORS)


# ----------------------------------------------------------------------------------------------
# The bag of little bootstraps on one side
# ----------------------------------------------------------------------------------------------


def test_bag_of_little_bootstraps_on_one_side_pairs_rounds_and_falls_back_from_bca():
    """An input with more distinct values than subset_rows is resampled by the bag of little
    bootstraps (Kleiner et al. 2014); its difference interval is then close to the ordinary one."""
    rng = np.random.default_rng(44)
    large, small = rng.normal(10.0, 2.0, 3000), rng.normal(10.5, 2.0, 200)
    ordinary = compare(from_array(large), from_array(small), interval("bca", 2000, 1), kinds=SAMPLES)
    little = compare(
        from_array(large), from_array(small), dataclasses.replace(interval("bca", 2000, 1), subset_rows=1000),
        kinds=SAMPLES,
    )
    assert little.first.resampling.replicates.subsets and not little.second.resampling.replicates.subsets
    got, want = little.differences["mean"], ordinary.differences["mean"]
    assert got.interval.method == "percentile"
    assert "differences.mean" in named(little, "bca_fallback")
    width = want.interval.high - want.interval.low
    assert abs(got.interval.low - want.interval.low) < 0.1 * width
    assert abs(got.interval.high - want.interval.high) < 0.1 * width
    assert got.standard_error == pytest.approx(want.standard_error, rel=0.1)


def test_rounds_pair_a_little_bootstrap_with_the_other_inputs_replicates_cut_to_the_shorter():
    """One input in 3 subsets of 4 replicates, the other with 10 ordinary replicates: the 10 are
    split into 3 rounds (4, 3, 3, as numpy.array_split does) and each pair cut to the shorter."""
    little = Replicates({"mean": np.arange(12.0).reshape(3, 4)}, None, None, True)
    ordinary = Replicates({"mean": 100.0 + np.arange(10.0)[None, :]}, None, None, False)
    rounds = paired_rounds(little, ordinary)
    assert len(rounds) == 3
    want = [
        (np.arange(0.0, 4.0), 100.0 + np.arange(0.0, 4.0)),
        (np.arange(4.0, 7.0), 100.0 + np.arange(4.0, 7.0)),
        (np.arange(8.0, 11.0), 100.0 + np.arange(7.0, 10.0)),
    ]
    for (a, b), (want_a, want_b) in zip(rounds, want):
        np.testing.assert_array_equal(a["mean"], want_a)
        np.testing.assert_array_equal(b["mean"], want_b)
    # Ordinary bootstraps on both sides: one round, every replicate, index by index.
    other = Replicates({"mean": -np.arange(10.0)[None, :]}, None, None, False)
    (a, b), = paired_rounds(ordinary, other)
    np.testing.assert_array_equal(a["mean"], 100.0 + np.arange(10.0))
    np.testing.assert_array_equal(b["mean"], -np.arange(10.0))
