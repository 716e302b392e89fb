"""Block resampling of ordered samples (tailgauge.core.resample.blocks and the engine with
``blocks``), checked against outside references and closed forms.

References, each named again beside its check:

* the ``arch`` package (8.0.0, PyPI), ``arch.bootstrap.StationaryBootstrap`` and
  ``MovingBlockBootstrap``: the bootstrap distribution of the mean for the same block length,
  compared by scipy's two-sample Kolmogorov-Smirnov test (scipy 1.17.1) at a loose level;
* the circular block bootstrap's exact moments (Politis & Romano 1992): with n = b L, the
  resampled mean has mean x-bar and variance (1/b) (1/n) sum_i (B_i - x-bar)^2 over the n
  circular block means B_i;
* the stationary bootstrap's exact variance of the mean, derived in its test (two positions h
  apart lie in one block with probability q^h, q = 1 - 1/L, and are then c_h-covariant, c_h the
  circular autocovariance; otherwise independent): n Var*(x-bar*) = c0 + 2 sum (1 - h/n) q^h c_h,
  which by c_h = c_{n-h} equals the form c0 + sum b_h c_h, b_h = (1 - h/n) q^h + (h/n) q^(n-h),
  of Politis & Romano (1994), lemma 1 (recalled, not looked up; a recalled factor 2 before that
  sum was wrong, and the simulation below showed it);
* the binomial distribution (coverage of a seeded Monte Carlo run).

Every generator is seeded; nothing here depends on timing.
"""

from __future__ import annotations

import dataclasses
import tracemalloc
import warnings

import numpy as np
import pytest
from scipy import stats

from tailgauge.core import (
    DescribeOptions,
    IntervalOptions,
    LimitExceeded,
    admit,
    central_sums,
    describe,
    from_array,
    serial,
)
from tailgauge.core.resample import blocks as block_draws
from tailgauge.core.resample.blocks import Blocks, block_counts
from tailgauge.core.resample.intervals import percentile
from tailgauge.core.selection import choose

from tests.core.test_serial import ar1


def _blocks(x: np.ndarray, scheme: str, length: float) -> tuple[Blocks, np.ndarray]:
    support, rows = np.unique(x, return_inverse=True)
    return Blocks(scheme, length, rows.astype(np.int64), int(support.size)), support


@pytest.mark.parametrize(("scheme", "length"), [("stationary", 6.5), ("circular", 7), ("moving", 7), ("stationary", 1.0)])
def test_counts_are_the_counts_of_the_drawn_indices(scheme, length):
    x = np.random.default_rng(1).integers(0, 40, 97).astype(np.float64)  # ties: rows hold several observations
    blocks, _ = _blocks(x, scheme, length)
    counts = block_counts(blocks, np.random.default_rng(9), 30)
    again = block_draws.indices(blocks, np.random.default_rng(9), 30)
    naive = np.array([np.bincount(blocks.row_of_observation[row], minlength=blocks.rows) for row in again])
    np.testing.assert_array_equal(counts, naive)
    assert np.all(counts.sum(axis=1) == x.size)


def test_fixed_blocks_are_runs_of_neighbours():
    n, length = 50, 8
    x = np.arange(n, dtype=np.float64)
    for scheme in ("circular", "moving"):
        drawn = block_draws.indices(_blocks(x, scheme, length)[0], np.random.default_rng(3), 400)
        assert drawn.shape == (400, n)
        pieces = drawn[:, : (n // length) * length].reshape(400, -1, length)
        steps = np.diff(pieces, axis=2) % n
        assert np.all(steps == 1)  # consecutive (wrapping only in the circular scheme)
        if scheme == "moving":
            assert np.all(np.diff(pieces, axis=2) == 1) and drawn.max() <= n - 1
            assert pieces[:, :, 0].max() <= n - length  # no block runs past the end
        else:
            assert pieces[:, :, 0].max() > n - length  # starts anywhere: some blocks wrap


def test_stationary_blocks_start_with_probability_one_over_length():
    n, length, rows = 400, 5.0, 300
    drawn = block_draws.indices(_blocks(np.arange(n, dtype=np.float64), "stationary", length)[0], np.random.default_rng(5), rows)
    follows = (drawn[:, 1:] - drawn[:, :-1]) % n == 1
    # A new block starts where the index does not follow its predecessor (or starts there by
    # chance at the next index, probability 1/n per start: negligible beside the tolerance).
    starts = np.count_nonzero(~follows)
    trials = rows * (n - 1)
    expected = trials / length
    assert abs(starts - expected) < 4.0 * np.sqrt(trials * (1 / length) * (1 - 1 / length)) + trials / (length * n) * 2
    # Block starts are uniform over the series: chi-square over 10 classes of positions (scipy).
    first = drawn[:, 0]
    observed = np.bincount(first * 10 // n, minlength=10)
    assert stats.chisquare(observed).pvalue > 1e-3


def test_circular_bootstrap_moments_of_the_mean():
    # Politis & Romano (1992): with n = b L, E*(xbar*) = xbar and
    # Var*(xbar*) = (1/b) (1/n) sum_i (B_i - xbar)^2 over the n circular block means.
    x = ar1(0.5, 240, np.random.default_rng(8))
    length, n = 12, 240
    blocks, support = _blocks(x, "circular", length)
    means = block_counts(blocks, np.random.default_rng(6), 20000) @ support / n
    wrapped = np.concatenate([x, x[: length - 1]])
    block_means = np.convolve(wrapped, np.ones(length) / length, mode="valid")[:n]
    variance = np.mean((block_means - x.mean()) ** 2) / (n // length)
    # Monte Carlo tolerances: 4 standard errors of a mean and (about normal) of a variance.
    assert abs(means.mean() - x.mean()) < 4.0 * np.sqrt(variance / means.size)
    assert means.var(ddof=1) == pytest.approx(variance, rel=4.0 * np.sqrt(2.0 / means.size) + 0.01)


def test_stationary_bootstrap_variance_of_the_mean():
    # Derived (see the module's docstring): n Var*(xbar*) = c0 + 2 sum_h (1 - h/n) q^h c_h, equal to
    # Politis & Romano's (1994) c0 + sum_h b_h c_h with b_h = (1 - h/n) q^h + (h/n) q^(n-h).
    n, length = 300, 8.0
    x = ar1(0.6, n, np.random.default_rng(12))
    d = x - x.mean()
    c = np.array([np.dot(d, np.roll(d, -k)) / n for k in range(n)])
    h = np.arange(1, n)
    q = 1.0 - 1.0 / length
    exact = (c[0] + 2.0 * np.sum((1 - h / n) * q**h * c[1:])) / n
    politis_romano = (c[0] + np.sum(((1 - h / n) * q**h + (h / n) * q ** (n - h)) * c[1:])) / n
    assert exact == pytest.approx(politis_romano, rel=1e-12)
    blocks, support = _blocks(x, "stationary", length)
    means = block_counts(blocks, np.random.default_rng(13), 20000) @ support / n
    assert abs(means.mean() - x.mean()) < 4.0 * np.sqrt(exact / means.size)
    assert means.var(ddof=1) == pytest.approx(exact, rel=4.0 * np.sqrt(2.0 / means.size) + 0.01)


def _engine_means(x: np.ndarray, scheme: str, length: float, resamples: int, seed: int) -> np.ndarray:
    options = DescribeOptions(
        interval=IntervalOptions(method="percentile", resamples=resamples, seed=seed),
        order="as_sent", block_scheme=scheme, block_length=length, descriptors=choose(["mean"]),
    )
    description = describe(from_array(x), options, kind="samples")
    assert description.resampling.block_scheme == scheme and description.resampling.block_length == length
    return description.resampling.replicates.values["mean"][0]


@pytest.mark.parametrize(("scheme", "length", "arch_class"), [("stationary", 9.5, "StationaryBootstrap"), ("moving", 9, "MovingBlockBootstrap")])
def test_bootstrap_distribution_of_the_mean_matches_arch(scheme, length, arch_class):
    # arch 8.0.0 (PyPI): the same scheme and block length; the two bootstrap distributions of the
    # mean (4,000 resamples each, seeded) must not differ by a two-sample KS test at the 0.1 %
    # level (scipy 1.17.1), and their standard deviations agree within Monte Carlo error.
    arch_bootstrap = pytest.importorskip("arch.bootstrap")
    x = ar1(0.6, 600, np.random.default_rng(21)) + 10.0
    ours = _engine_means(x, scheme, length, 4000, seed=5)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        theirs = getattr(arch_bootstrap, arch_class)(length, x, seed=np.random.default_rng(6)).apply(np.mean, 4000).ravel()
    assert stats.ks_2samp(ours, theirs).pvalue > 1e-3
    assert ours.std(ddof=1) == pytest.approx(theirs.std(ddof=1), rel=0.1)
    # While the independent bootstrap's spread is about half of it (tau = 4 for phi = 0.6).
    independent = describe(
        from_array(x), DescribeOptions(interval=IntervalOptions(method="percentile", resamples=4000, seed=5),
                                       descriptors=choose(["mean"])), kind="samples",
    ).resampling.replicates.values["mean"][0]
    assert independent.std(ddof=1) < 0.7 * theirs.std(ddof=1)


def test_same_seed_same_intervals_on_any_thread_count():
    x = ar1(0.4, 3000, np.random.default_rng(31))
    answers = []
    for threads in (1, 2):
        options = DescribeOptions(
            interval=IntervalOptions(resamples=2500, seed=77), order="as_sent", resample_threads=threads
        )
        d = describe(from_array(x), options, kind="samples")
        answers.append([(name, v.interval) for name, v in d.descriptors.items()])
    assert answers[0] == answers[1]


def test_coverage_of_the_mean_on_ar1_small_run():
    # A seeded Monte Carlo run (AR(1), phi = 0.6, n = 300, 160 series, 399 resamples each, the
    # engine's own block draws, block length and percentile rule). The independent bootstrap's
    # intervals are about half as wide as they should be (tau = 4): their coverage falls far
    # below 95 %, outside the binomial tolerance (one-sided 1 %). The stationary bootstrap's
    # comes far closer; at this n it still falls a few points short, as block bootstraps do
    # (their variance is biased down by O(1/L): Lahiri 2003, ch. 5), so what is asserted for it
    # is that it lies within the binomial tolerance of 0.90 and beyond the independent one's.
    # Seen: 144 of 160 (0.90; the 95 % floor is 145) against 100 of 160 (0.63).
    # tests/benchmarks/ordered_coverage.py runs the larger study through describe() (400 series
    # at n = 200, 1,000, 5,000: 0.88, 0.92, 0.91 against 0.65, 0.67, 0.68; README, "Other figures").
    rng = np.random.default_rng(20261205)
    n, series, resamples = 300, 160, 399
    tails = np.array([0.025, 0.975])
    covered = {"stationary": 0, "independent": 0}
    for index in range(series):
        x = ar1(0.6, n, rng)
        length = serial.optimal_block_lengths(serial.autocovariances(x, central_sums(x, None, 4))).stationary
        blocks, support = _blocks(x, "stationary", length)
        means = block_counts(blocks, np.random.default_rng(index), resamples) @ support / n
        low, high = percentile(means, tails)
        covered["stationary"] += low <= 0.0 <= high
        independent = rng.multinomial(n, np.full(n, 1.0 / n), size=resamples) @ x / n
        low, high = percentile(independent, tails)
        covered["independent"] += low <= 0.0 <= high
    floor_95 = stats.binom.ppf(0.01, series, 0.95)
    floor_90 = stats.binom.ppf(0.01, series, 0.90)
    assert covered["independent"] < floor_95 - 20  # far short
    assert covered["stationary"] >= floor_90
    assert covered["stationary"] - covered["independent"] >= 0.15 * series


# ----------------------------------------------------------------------------------------------
# The cost model and the budget for a series (tests/core/test_cost.py's rules, for order as_sent)
# ----------------------------------------------------------------------------------------------


def _series_options(q: int, resamples: int, **extra) -> DescribeOptions:
    return DescribeOptions(
        interval=IntervalOptions(method="bca", resamples=resamples, seed=7), order="as_sent",
        probabilities=tuple(np.linspace(0.01, 0.99, q)), **extra,
    )


@pytest.mark.parametrize(("n", "distinct", "resamples"), [(6000, None, 600), (50_000, 60, 300), (150_000, None, 100)])
def test_model_bounds_the_measured_peak_of_a_series(n, distinct, resamples):
    rng = np.random.default_rng(41)
    x = ar1(0.5, n, rng)
    if distinct is not None:  # ties: many observations per support row
        x = np.round((x - x.min()) / (x.max() - x.min()) * (distinct - 1))
    data = from_array(x)
    options = _series_options(30, resamples, max_resample_work=1e13)
    estimate = admit([data], options)
    assert any(stage.name == "autocovariances" for stage in estimate.stages)
    assert not any(stage.name == "jackknife" for stage in estimate.stages)  # BCa falls back
    tracemalloc.start()
    try:
        describe(data, dataclasses.replace(options, admitted=True), kind="samples")
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert peak <= estimate.peak_bytes


def test_the_budget_counts_the_drawn_observations_and_its_advice_is_admitted():
    x = ar1(0.5, 2000, np.random.default_rng(42))
    data = from_array(x)
    k = data.support.values.size
    # 1,000 resamples x (k + n) = 4e6 > 3e6, while 1,000 x k = 2e6 alone would fit.
    options = _series_options(5, 1000, max_resample_work=3e6)
    with pytest.raises(LimitExceeded) as refused:
        describe(data, options, kind="samples")
    assert refused.value.locations[0].path == "options.interval.resamples"
    allowed = int(3e6 // (k + 2000))
    assert f"at most {allowed}" in refused.value.locations[0].message
    resent = dataclasses.replace(options, interval=dataclasses.replace(options.interval, resamples=allowed))
    assert describe(data, resent, kind="samples").resampling.resamples == allowed
