"""Exceedances, tail means, Hill's tail index (service/tailgauge/core/tail_measures.py,
quantile_integrals.py, describe/tails.py).

Outside references, named beside each check:
* scipy 1.17.1 (pinned): ``scipy.stats.binomtest(k, n).proportion_ci(method="exact")`` (the
  Clopper-Pearson interval), ``scipy.stats.beta.ppf`` for the same interval at a fractional
  (effective) n, as Korn & Graubard (1998) define it;
* the integral definition of the tail mean, (1/(1 - a)) integral of the step quantile function
  over the tail (Acerbi & Tasche 2002), computed with exact rationals (fractions.Fraction);
* closed forms (standard results, recalled, and re-derived in the comments): for the exponential
  distribution of rate lam, q(u) = -ln(1 - u)/lam and ES_a = (1 - ln(1 - a))/lam; for the Pareto
  distribution of scale xm and index b > 1, q(u) = xm (1 - u)^(-1/b) and
  ES_a = xm b/(b - 1) (1 - a)^(-1/b);
* Hill's formula k / sum_{i=1..k} ln(X_(n-i+1)/X_(n-k)) written out on numpy's sort, and
  simulated Pareto data of known index (numpy's generator, seeded).
"""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest
from scipy import stats
from tailgauge.core import (
    DescribeOptions,
    UncomputableInput,
    WeightMeaning,
    describe,
    from_array,
    from_bins,
    from_samples,
    from_table,
)
from tailgauge.core.moments import central_sums
from tailgauge.core.registry import WarningCode
from tailgauge.core.resample import IntervalOptions
from tailgauge.core.resample.draws import plan_of
from tailgauge.core.resample.rows import LeaveOneOut, Rows
from tailgauge.core.resample.tail_rows import TailColumns, TailSpec, evaluate
from tests.core.warning_lookup import codes_by_descriptor


# ---------------------------------------------------------------------------------------------
# Exceedances
# ---------------------------------------------------------------------------------------------

# A fictional service's request latencies (ms): most fast, a slow tail.
LATENCIES = np.round(np.random.default_rng(300).lognormal(4.6, 0.55, 240), 1)


@pytest.mark.parametrize("threshold", [50.0, 120.0, 300.0, 500.0, 1e6, -1.0])
@pytest.mark.parametrize("level", [0.9, 0.95, 0.99])
def test_exceedance_interval_is_scipys_exact_binomial_interval(threshold, level):
    """Source: scipy.stats.binomtest(k, n).proportion_ci(method="exact") (Clopper-Pearson)."""
    interval = IntervalOptions(method="percentile", level=level, resamples=200, seed=1)
    result = describe(from_array(LATENCIES), DescribeOptions(thresholds=(threshold,), interval=interval), kind="samples")
    (found,) = result.exceedances
    k = int(np.sum(LATENCIES > threshold))
    n = LATENCIES.size
    assert found.count_above == k and not found.interpolated
    assert found.proportion_above == k / n and found.proportion_at_or_below == (n - k) / n
    want = stats.binomtest(k, n).proportion_ci(confidence_level=level, method="exact")
    assert found.interval.method == "clopper_pearson" and found.interval.level == level
    # binomtest finds the bounds by root finding (agreement to about 1e-11 seen); the beta
    # quantiles of the same definition (scipy.stats.beta.ppf) agree to rounding.
    assert found.interval.low == pytest.approx(want.low, rel=1e-9, abs=1e-15)
    assert found.interval.high == pytest.approx(want.high, rel=1e-9, abs=1e-15)
    alpha = 1.0 - level
    low = 0.0 if k == 0 else stats.beta.ppf(alpha / 2, k, n - k + 1)
    high = 1.0 if k == n else stats.beta.ppf(1 - alpha / 2, k + 1, n - k)
    assert (found.interval.low, found.interval.high) == pytest.approx((low, high), rel=1e-13, abs=1e-15)


def test_exceedances_of_a_count_table_equal_the_repeated_sample():
    """A count table is the repeated sample; without options.interval the level is 0.95."""
    values, counts = np.unique(LATENCIES, return_counts=True)
    table = describe(from_table(values, counts.astype(float), probabilities=False, normalise=False),
                     DescribeOptions(thresholds=(100.0, 250.0)), kind="table")
    raw = describe(from_array(LATENCIES), DescribeOptions(thresholds=(100.0, 250.0)), kind="samples")
    assert table.exceedances == raw.exceedances
    assert table.exceedances[0].interval.level == 0.95


def test_reliability_weights_use_clopper_pearson_on_kishs_effective_n():
    """Source: the beta quantiles of scipy.stats.beta.ppf at x = p n_eff, n_eff = (sum w)^2/sum w^2
    (Korn & Graubard 1998's effective-n form of Clopper-Pearson)."""
    values = LATENCIES[:60]
    weights = np.random.default_rng(4).uniform(0.5, 2.0, values.size)
    data = from_samples(list(values), omit_missing=False, weights=list(weights),
                        meaning=WeightMeaning.RELIABILITY)
    (found,) = describe(data, DescribeOptions(thresholds=(150.0,)), kind="samples").exceedances
    share = float(weights[values > 150.0].sum() / weights.sum())
    n_eff = weights.sum() ** 2 / np.sum(weights**2)
    x = share * n_eff
    assert found.proportion_above == pytest.approx(share, rel=1e-12)
    assert found.count_above is None
    assert found.interval.method == "clopper_pearson_effective_n"
    assert found.interval.low == pytest.approx(stats.beta.ppf(0.025, x, n_eff - x + 1), rel=1e-10)
    assert found.interval.high == pytest.approx(stats.beta.ppf(0.975, x + 1, n_eff - x), rel=1e-10)


def test_a_threshold_inside_a_bin_is_interpolated_and_labelled():
    """Bins (0, 100], (100, 200], (200, 300], (300, 500]: 250 is halfway through the third bin,
    so 10 / 2 of its counts and the 10 above lie above it (even spread within the bin)."""
    data = from_bins([0.0, 100.0, 200.0, 300.0, 500.0], [50.0, 30.0, 10.0, 10.0])
    result = describe(data, DescribeOptions(thresholds=(250.0, 300.0)), kind="bins")
    inside, edge = result.exceedances
    assert inside.interpolated and inside.count_above is None and inside.proportion_above == 0.15
    assert inside.interval.method == "clopper_pearson_interpolated_count"
    # Source: scipy.stats.beta.ppf with the fractional count 15 of 100 (the interpolated count).
    assert inside.interval.low == pytest.approx(stats.beta.ppf(0.025, 15.0, 86.0), rel=1e-10)
    assert edge.count_above == 10 and not edge.interpolated
    want = stats.binomtest(10, 100).proportion_ci(method="exact")
    assert (edge.interval.low, edge.interval.high) == pytest.approx((want.low, want.high), rel=1e-12)
    assert WarningCode.EXCEEDANCE_INTERPOLATED in codes_by_descriptor(result)["exceedances[0]"]


def test_a_threshold_in_an_open_bin_holding_data_is_null_with_its_reason():
    data = from_bins([0.0, 100.0, 200.0, None], [50.0, 30.0, 20.0])
    result = describe(data, DescribeOptions(thresholds=(150.0, 250.0)), kind="bins")
    assert result.exceedances[0].proportion_above == pytest.approx(0.35)
    assert result.exceedances[1].proportion_above is None and result.exceedances[1].interval is None
    assert WarningCode.TAIL_IN_OPEN_BIN in codes_by_descriptor(result)["exceedances[1]"]


def test_a_probability_table_is_exact_and_has_no_interval():
    table = from_table(np.array([0.0, 1000.0, 5000.0, 40000.0]), np.array([0.55, 0.30, 0.12, 0.03]),
                       probabilities=True, normalise=False)
    result = describe(table, DescribeOptions(thresholds=(1000.0,)), kind="table")
    (found,) = result.exceedances
    assert found.proportion_above == 0.15 and found.interval is None and found.count_above is None
    assert WarningCode.INTERVAL_NOT_OFFERED in codes_by_descriptor(result)["exceedances"]


# ---------------------------------------------------------------------------------------------
# Tail means
# ---------------------------------------------------------------------------------------------


def _exact_tail_means(values, weights, level: Fraction) -> tuple[Fraction, Fraction]:
    """(1/(1-a)) integral of the step quantile function over the upper and lower tails, with exact
    rationals: each support value enters with the part of its weight inside the tail."""
    pairs = sorted(zip(values, weights))
    total = sum(w for _, w in pairs)
    share = (1 - level) * total
    upper = lower = Fraction(0)
    below = Fraction(0)
    for x, w in pairs:
        start, stop = below, below + w
        lower += x * max(Fraction(0), min(stop, share) - start)
        upper += x * max(Fraction(0), stop - max(start, total - share))
        below = stop
    return upper / share, lower / share


@pytest.mark.parametrize("seed", range(6))
def test_tail_means_equal_the_integral_definition_in_exact_rationals(seed):
    """Source: the definition (Acerbi & Tasche 2002) computed with fractions.Fraction; levels
    whose tail ends inside an observation's weight (fractional boundary weight) included."""
    rng = np.random.default_rng(seed)
    values = rng.integers(-50, 200, size=int(rng.integers(3, 25))).astype(float)
    counts = rng.integers(1, 5, size=values.size).astype(float)
    levels = (0.5, 0.9, 0.95, 0.973, 0.99)
    data = from_table(values, counts, probabilities=False, normalise=False)
    found = describe(data, DescribeOptions(tail_levels=levels), kind="table").tail_means
    for entry, level in zip(found, levels):
        upper, lower = _exact_tail_means(
            [Fraction(v) for v in values], [Fraction(c) for c in counts], Fraction(level)
        )
        assert entry.upper.value == pytest.approx(float(upper), rel=1e-12, abs=1e-12)
        assert entry.lower.value == pytest.approx(float(lower), rel=1e-12, abs=1e-12)


def test_fractional_weights_enter_the_boundary_with_their_fraction():
    """Weights 0.5, 1.25, 2.25 on 1, 2, 10 (total 4): the upper 10% (0.4 of weight) is all 10; the
    upper 60% (2.4) is 2.25 x 10 + 0.15 x 2, mean 9.5; checked against Fraction too."""
    data = from_samples([10.0, 1.0, 2.0], omit_missing=False, weights=[2.25, 0.5, 1.25])
    found = describe(data, DescribeOptions(tail_levels=(0.9, 0.4)), kind="samples").tail_means
    assert found[0].upper.value == 10.0
    assert found[1].upper.value == pytest.approx((2.25 * 10 + 0.15 * 2) / 2.4, rel=1e-14)
    upper, lower = _exact_tail_means(
        [Fraction(10), Fraction(1), Fraction(2)], [Fraction(9, 4), Fraction(1, 2), Fraction(5, 4)], Fraction(2, 5)
    )
    assert found[1].upper.value == pytest.approx(float(upper), rel=1e-14)
    assert found[1].lower.value == pytest.approx(float(lower), rel=1e-14)  # 0.5 x 1 + 1.25 x 2 + 0.65 x 10


def _cell_table(antiderivative, cells: int) -> tuple[np.ndarray, np.ndarray]:
    """A probability table of ``cells`` equal cells of u, each at the mean of q over its cell
    (from the antiderivative of q), so the table's step quantile function integrates to the
    distribution's over any union of whole cells."""
    edges = np.linspace(0.0, 1.0, cells + 1)
    integrals = np.diff(antiderivative(edges))
    return integrals * cells, np.full(cells, 1.0 / cells)


def _exponential_antiderivative(lam):
    # integral_0^u -ln(1 - t)/lam dt = ((1 - u) ln(1 - u) + u) / lam, with 0 ln 0 = 0 at u = 1.
    def f(u):
        rest = 1.0 - u
        with np.errstate(divide="ignore", invalid="ignore"):
            return (np.where(rest > 0, rest * np.log(np.where(rest > 0, rest, 1.0)), 0.0) + u) / lam
    return f


@pytest.mark.parametrize("level", [0.9, 0.95, 0.99])
def test_exponential_expected_shortfall_closed_form(level):
    """Source: ES_a = (1 - ln(1 - a))/lam for the exponential distribution (recalled; it is
    (1/(1-a)) integral_a^1 -ln(1-u)/lam du); lower tail: (b + (1 - b) ln(1 - b))/(b lam), b = 1 - a.
    A probability table of 10,000 equal cells at their cell means: exact up to rounding."""
    lam = 0.25
    values, p = _cell_table(_exponential_antiderivative(lam), 10_000)
    table = from_table(values, p, probabilities=True, normalise=True)
    (found,) = describe(table, DescribeOptions(tail_levels=(level,)), kind="table").tail_means
    assert found.upper.value == pytest.approx((1.0 - math.log(1.0 - level)) / lam, rel=1e-9)
    b = 1.0 - level
    assert found.lower.value == pytest.approx((b + (1.0 - b) * math.log(1.0 - b)) / (b * lam), rel=1e-9)


@pytest.mark.parametrize("index", [1.5, 2.5, 4.0])
@pytest.mark.parametrize("level", [0.99, 0.97375])
def test_pareto_expected_shortfall_closed_form(index, level):
    """Source: ES_a = xm b/(b - 1) (1 - a)^(-1/b) for the Pareto distribution (recalled; from
    q(u) = xm (1 - u)^(-1/b), whose integral from 0 to u is xm b/(b - 1) (1 - (1 - u)^(1 - 1/b))).
    A probability table of 100,000 equal cells at their cell means: exact up to rounding where
    the tail starts on a cell boundary (0.99), within 1e-4 where it starts inside a cell (0.97375:
    half a cell then holds the cell mean instead of the part of the integral)."""
    xm = 2.0

    def antiderivative(u):
        return xm * index / (index - 1.0) * (1.0 - (1.0 - u) ** (1.0 - 1.0 / index))

    values, p = _cell_table(antiderivative, 100_000)
    table = from_table(values, p, probabilities=True, normalise=True)
    (found,) = describe(table, DescribeOptions(tail_levels=(level,)), kind="table").tail_means
    want = xm * index / (index - 1.0) * (1.0 - level) ** (-1.0 / index)
    assert found.upper.value == pytest.approx(want, rel=1e-9 if level == 0.99 else 1e-4)
    # The lower tail: (integral_0^(1-a) q) / (1 - a).
    assert found.lower.value == pytest.approx(antiderivative(1.0 - level) / (1.0 - level), rel=1e-9 if level == 0.99 else 1e-4)


def test_bins_integrate_the_interpolated_quantile_function():
    """Bins (1, 100], ..., (500, 800] with counts 50, 30, 10, 8, 2: the upper 10% are the last two
    bins whole, mean (8 x 400 + 2 x 650)/10 = 450; the lower 10% are the first 10 of 50 spread
    evenly over (1, 100], i.e. (1, 20.8], mean 10.9."""
    data = from_bins([1.0, 100.0, 200.0, 300.0, 500.0, 800.0], [50.0, 30.0, 10.0, 8.0, 2.0])
    (found,) = describe(data, DescribeOptions(tail_levels=(0.9,)), kind="bins").tail_means
    assert found.upper.value == pytest.approx(450.0, rel=1e-14)
    assert found.lower.value == pytest.approx(10.9, rel=1e-14)


def test_a_tail_reaching_an_open_bin_is_null_with_its_reason():
    data = from_bins([0.0, 100.0, 200.0, None], [50.0, 30.0, 20.0])
    result = describe(data, DescribeOptions(tail_levels=(0.5,)), kind="bins")
    (found,) = result.tail_means
    assert found.upper.value is None and found.lower.value == pytest.approx(50.0)
    assert WarningCode.TAIL_IN_OPEN_BIN in codes_by_descriptor(result)["tail_means[0]"]


# ---------------------------------------------------------------------------------------------
# Hill's tail index
# ---------------------------------------------------------------------------------------------


def _hill(x: np.ndarray, k: int) -> float:
    """Hill (1975), written out: k / sum_{i=1..k} ln(X_(n-i+1) / X_(n-k))."""
    ordered = np.sort(x)
    n = ordered.size
    return k / float(np.sum(np.log(ordered[n - k:] / ordered[n - k - 1])))


@pytest.mark.parametrize("k", [None, 5, 40, 199])
def test_hill_estimate_follows_its_formula(k):
    x = np.random.default_rng(7).pareto(3.0, 200) + 1.0
    result = describe(from_array(x), DescribeOptions(tail_count=k), kind="samples")
    used = round(math.sqrt(200)) if k is None else k
    assert result.descriptors["upper_tail_index"].value == pytest.approx(_hill(x, used), rel=1e-12)
    assert f"k = {used} largest" in result.descriptors["upper_tail_index"].estimator


@pytest.mark.parametrize("index", [1.0, 2.5, 4.0])
def test_hill_recovers_a_known_pareto_index(index):
    """Simulated Pareto data (numpy's generator, seed 11) of known index: with n = 40,000 and
    k = round(sqrt(n)) = 200 the estimate lies within 4 asymptotic standard errors (index/sqrt(k))."""
    x = np.random.default_rng(11).pareto(index, 40_000) + 1.0
    value = describe(from_array(x), DescribeOptions(descriptors=None), kind="samples").descriptors["upper_tail_index"].value
    assert abs(value - index) < 4.0 * index / math.sqrt(200)


def test_hill_on_a_count_table_is_the_repeated_sample():
    x = np.round(np.random.default_rng(8).pareto(2.0, 500) + 1.0, 1)
    values, counts = np.unique(x, return_counts=True)
    table = describe(from_table(values, counts.astype(float), probabilities=False, normalise=False),
                     DescribeOptions(), kind="table")
    assert table.descriptors["upper_tail_index"].value == pytest.approx(_hill(x, round(math.sqrt(500))), rel=1e-12)


def test_hill_is_null_with_a_reason_where_it_does_not_apply():
    few = describe(from_array(np.arange(1.0, 40.0)), DescribeOptions(), kind="samples")
    negative = describe(from_array(np.linspace(-100.0, -1.0, 200)), DescribeOptions(), kind="samples")
    bins = describe(from_bins([1.0, 2.0, 3.0], [40.0, 40.0]), DescribeOptions(), kind="bins")
    for description in (few, negative, bins):
        assert description.descriptors["upper_tail_index"].value is None
        assert WarningCode.TAIL_INDEX_UNDEFINED in codes_by_descriptor(description)["upper_tail_index"]
    with pytest.raises(UncomputableInput) as refused:
        describe(from_array(np.arange(1.0, 61.0)), DescribeOptions(tail_count=60), kind="samples")
    assert refused.value.locations[0].path == "options.tail_count"


def test_the_kurtosis_is_flagged_when_the_tail_index_is_below_four():
    heavy = describe(from_array(np.random.default_rng(5).pareto(1.5, 400) + 1.0), DescribeOptions(), kind="samples")
    assert heavy.descriptors["upper_tail_index"].value < 4.0
    assert WarningCode.KURTOSIS_MAY_NOT_EXIST in codes_by_descriptor(heavy)["kurtosis"]
    light = describe(from_array(np.random.default_rng(5).uniform(1.0, 2.0, 400)), DescribeOptions(), kind="samples")
    assert light.descriptors["upper_tail_index"].value > 4.0
    assert WarningCode.KURTOSIS_MAY_NOT_EXIST not in {n.code for n in light.warnings}


def test_hill_gets_its_asymptotic_interval_and_a_bootstrap_interval():
    x = np.random.default_rng(9).pareto(2.0, 400) + 1.0
    interval = IntervalOptions(method="percentile", level=0.9, resamples=400, seed=2)
    found = describe(from_array(x), DescribeOptions(interval=interval), kind="samples").descriptors["upper_tail_index"]
    alpha, k = found.value, 20
    z = stats.norm.ppf(0.95)
    assert found.classical_interval.method == "asymptotic_normal"
    assert (found.classical_interval.low, found.classical_interval.high) == pytest.approx(
        (alpha - z * alpha / math.sqrt(k), alpha + z * alpha / math.sqrt(k)), rel=1e-12
    )
    assert found.interval is not None and found.interval.low < alpha < found.interval.high


# ---------------------------------------------------------------------------------------------
# The same arithmetic for one row and many (the engine's replicates)
# ---------------------------------------------------------------------------------------------


def test_replicates_equal_each_resample_described_alone():
    """Rows of whole counts (as the bootstrap draws them) and the jackknife's leave-one-out rows:
    each row's tail statistics equal describe's of that row as a count table."""
    values = np.round(np.random.default_rng(12).pareto(2.0, 120) + 1.0, 2)
    data = from_array(values)
    plan, _ = plan_of(data, central_sums(data.support.values, data.support.weights, 4))
    spec = TailSpec(np.array([0.9, 0.99]), 0.1, 11)
    columns = TailColumns(plan)
    names = ("trimmed_mean", "winsorized_mean", "geometric_mean", "harmonic_mean", "upper_tail_index",
             "tail_mean_upper:0", "tail_mean_lower:0", "tail_mean_upper:1", "tail_mean_lower:1")
    counts = np.random.default_rng(1).multinomial(plan.draws, plan.base / plan.base.sum(), size=5)
    rows = Rows(counts.astype(float), plan.powers, True, counts)
    leave_one_out = LeaveOneOut(plan.base, plan.unit, plan.powers)
    for view, weights in ((rows, counts.astype(float)), (leave_one_out.rows(slice(0, 6)), None)):
        out: dict = {}
        evaluate(plan, spec, columns, view, names, out)
        for r in range(view.count):
            row = weights[r] if weights is not None else plan.base - np.where(np.arange(plan.base.size) == r, 1.0, 0.0)
            held = row > 0
            alone = describe(from_table(plan.values[held], row[held], probabilities=False, normalise=False),
                             DescribeOptions(tail_levels=(0.9, 0.99), tail_count=11), kind="table")
            for name in names[:5]:
                assert out[name][r] == pytest.approx(alone.descriptors[name].value, rel=1e-10), name
            for i in range(2):
                assert out[f"tail_mean_upper:{i}"][r] == pytest.approx(alone.tail_means[i].upper.value, rel=1e-10)
                assert out[f"tail_mean_lower:{i}"][r] == pytest.approx(alone.tail_means[i].lower.value, rel=1e-10)


def test_tail_means_get_bootstrap_intervals_from_the_same_resamples():
    interval = IntervalOptions(method="bca", level=0.95, resamples=500, seed=4)
    result = describe(from_array(LATENCIES), DescribeOptions(tail_levels=(0.95,), interval=interval), kind="samples")
    (found,) = result.tail_means
    assert found.upper.interval.method == "bca" and found.upper.interval.low < found.upper.value < found.upper.interval.high
    assert found.lower.interval.low <= found.lower.value <= found.lower.interval.high
    assert result.resampling.replicates.values["tail_mean_upper:0"].shape == (1, 500)


def test_the_bag_of_little_bootstraps_gives_the_tail_intervals_but_hills():
    """Above options.subset_rows distinct values the little bootstraps resample the tail means and
    the location means; Hill's index is left out with its reason (subsets repeat their largest)."""
    x = np.random.default_rng(3).pareto(2.5, 3000) + 1.0
    interval = IntervalOptions(method="percentile", level=0.95, resamples=400, seed=2)
    result = describe(from_array(x), DescribeOptions(subset_rows=500, tail_levels=(0.95,), interval=interval),
                      kind="samples")
    assert result.resampling.scheme.startswith("bag of little bootstraps")
    (found,) = result.tail_means
    assert found.upper.interval.method == "percentile" and found.lower.interval is not None
    for name in ("trimmed_mean", "winsorized_mean", "geometric_mean", "harmonic_mean"):
        assert result.descriptors[name].interval is not None, name
    assert result.descriptors["upper_tail_index"].value is not None
    assert result.descriptors["upper_tail_index"].interval is None
    assert WarningCode.INTERVAL_NOT_OFFERED in codes_by_descriptor(result)["upper_tail_index"]


def test_the_plan_counts_the_tail_levels():
    """core/cost.py: each tail level keeps two more values per resample (and per jackknife row)."""
    from tailgauge.core import cost

    shape = cost.shape_of(from_array(LATENCIES), 100_000)
    plain = cost.estimate([shape], probabilities=9, resamples=9999, method="bca", threads=2)
    tails = cost.estimate([shape], probabilities=9, resamples=9999, method="bca", threads=2, tail_levels=20)
    assert tails.peak_bytes > plain.peak_bytes and tails.seconds > plain.seconds
    # Forty more float64 per resample are kept at least: 40 x 8 x 9,999 bytes.
    assert tails.peak_bytes - plain.peak_bytes >= 40 * 8 * 9999


def test_exceedance_intervals_float64_cannot_resolve_are_null_with_their_reason():
    """Counts near and beyond 1e16: the beta quantiles come back NaN (scipy.special.betaincinv at
    a = 1e16, b = 9e16), or away from the proportion they must bracket (every Clopper-Pearson
    interval contains x / n). Such an interval is null, named under not_representable, and the
    proportion itself stays; an ordinary table beside it keeps scipy's exact interval
    (scipy.stats.binomtest(k, n).proportion_ci(method="exact"), as above)."""
    values = np.array([1.0, 2.0, 3.0])
    for weights in ([1e17, 1e16, 5.0], [1.5e308, 1.1, 3e-5], [1e300, 0.5, 2.5e299]):
        result = describe(
            from_table(values, np.array(weights), probabilities=False, normalise=False),
            DescribeOptions(thresholds=(1.5,)),
            kind="table",
        )
        (found,) = result.exceedances
        assert found.interval is None
        assert found.proportion_above == pytest.approx((weights[1] + weights[2]) / sum(weights), rel=1e-12)
        notes = [note for note in result.warnings if "exceedances[0]" in note.descriptors]
        assert [note.code for note in notes] == [WarningCode.NOT_REPRESENTABLE]
    (ordinary,) = describe(
        from_table(values, np.array([3.0, 4.0, 5.0]), probabilities=False, normalise=False),
        DescribeOptions(thresholds=(1.5,)),
        kind="table",
    ).exceedances
    want = stats.binomtest(9, 12).proportion_ci(method="exact")
    assert (ordinary.interval.low, ordinary.interval.high) == pytest.approx((want.low, want.high), rel=1e-12)
