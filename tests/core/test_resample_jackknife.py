"""The bootstrap engine's jackknife (tailgauge.core.resample): the BCa acceleration, the O(k)
leave-one-out rows statistic by statistic, and the resampled statistics on the original weights,
each against an outside or a naive reference.

References used below, each named again beside its check:

* B. Efron and R. J. Tibshirani, *An Introduction to the Bootstrap*, Chapman & Hall, 1993:
  chapter 14: Table 14.1 (the spatial test data, column A), the plug-in variance 171.5 and the
  BCa acceleration 0.0612 from the jackknife (eq. 14.15);
* a naive leave-one-out jackknife written here with ``np.delete``, and ``describe()`` itself
  recomputed on each leave-one-out sample (and on the original weights).

Every random generator is seeded; nothing here depends on timing.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from tailgauge.core import (
    DescribeOptions,
    WeightMeaning,
    describe,
    from_array,
    from_bins,
    from_samples,
    from_table,
)
from tailgauge.core import resample
from tailgauge.core.resample.draws import plan_of
from tailgauge.core.resample.rows import LeaveOneOut, Rows
from tailgauge.core.resample.statistics import Statistics
from tests.core.resample_cases import run

# Efron & Tibshirani (1993), Table 14.1: spatial test scores, column A (26 children).
SPATIAL_A = np.array(
    [48, 36, 20, 29, 42, 42, 20, 42, 22, 41, 45, 14, 6, 0, 33, 28, 34, 4, 32, 24, 47, 41, 24, 26, 30, 41],
    dtype=np.float64,
)


# ----------------------------------------------------------------------------------------------
# Helpers
# ----------------------------------------------------------------------------------------------


def statistics_for(args, kwargs):
    """The engine's plan and statistics, built from the very arguments ``describe`` used."""
    data, sums = args[0], args[1]
    plan, _ = plan_of(data, sums)
    extra = {}
    if kwargs.get("sheppard_width") is not None:
        extra["sheppard_width"] = kwargs["sheppard_width"]
    statistics = Statistics(
        plan, kwargs["families"], kwargs["quantile_type"], kwargs["factor_rule"],
        quantile_shape=kwargs.get("quantile_shape"), **extra
    )
    return plan, statistics


def wanted_names(args, kwargs) -> tuple[str, ...]:
    return statistics_for(args, kwargs)[1].wanted(args[2])


def point_values(description) -> dict[str, float | None]:
    """Every descriptor the engine resamples, keyed as the engine keys them."""
    out = {name: description.descriptors[name].value for name in resample.INTERVAL_DESCRIPTORS}
    for i, q in enumerate(description.quantiles):
        out[f"quantile:{i}"] = q.value
    return out


# ----------------------------------------------------------------------------------------------
# Efron & Tibshirani (1993), chapter 14: the spatial test data of Table 14.1
# ----------------------------------------------------------------------------------------------


def naive_jackknife_acceleration(x: np.ndarray, statistic) -> float:
    """a = sum (mean - theta_(i))^3 / (6 [sum (mean - theta_(i))^2]^1.5) (E&T 1993, eq. 14.15)."""
    leave_one_out = np.array([statistic(np.delete(x, i)) for i in range(x.size)])
    gap = leave_one_out.mean() - leave_one_out
    return float(np.sum(gap**3) / (6.0 * np.sum(gap**2) ** 1.5))


def test_spatial_data_plug_in_variance_and_bca_acceleration():
    """Efron & Tibshirani (1993), chapter 14: for Table 14.1's A scores the plug-in variance is
    171.5 and the jackknife acceleration of BCa is a = 0.0612 (deterministic: no resampling)."""
    data = from_array(SPATIAL_A)
    description, _, kwargs, outcome = run(data, convention="population", resamples=1000, seed=3)
    assert kwargs["factor_rule"] == "population"
    variance = description.descriptors["variance"].value
    assert variance == pytest.approx(171.534, abs=5e-4)  # the book prints 171.5
    assert variance == pytest.approx(float(np.var(SPATIAL_A)), rel=1e-13)
    acceleration = outcome.accelerations["variance"]
    assert round(acceleration, 4) == 0.0612  # E&T (1993), chapter 14, eq. 14.15
    # The same number from a naive O(n^2) jackknife over the 26 observations.
    naive = naive_jackknife_acceleration(SPATIAL_A, np.var)
    assert acceleration == pytest.approx(naive, rel=1e-10)


def test_spatial_data_accelerations_of_other_statistics_match_the_naive_jackknife():
    """The same O(k) jackknife for the mean and the median against np.delete, one by one."""
    data = from_array(SPATIAL_A)
    _, _, _, outcome = run(data, convention="population", resamples=1000, seed=3)
    mean = outcome.accelerations["mean"]
    assert mean == pytest.approx(naive_jackknife_acceleration(SPATIAL_A, np.mean), rel=1e-10)
    sd = outcome.accelerations["standard_deviation"]
    assert sd == pytest.approx(naive_jackknife_acceleration(SPATIAL_A, np.std), rel=1e-10)


# ----------------------------------------------------------------------------------------------
# The O(k) jackknife equals the naive one, statistic by statistic
# ----------------------------------------------------------------------------------------------


def _close(got: float, want: float | None, label: str) -> None:
    assert want is not None, label
    assert math.isfinite(got), (label, got)
    assert got == pytest.approx(want, rel=1e-10, abs=1e-12), (label, got, want)


def _leave_one_out(args, kwargs):
    """The engine's jackknife rows (as ``bootstrap`` builds them), for the descriptors it resamples."""
    plan, statistics = statistics_for(args, kwargs)
    removed = np.where(plan.base > 0, plan.unit, 0.0)
    view = LeaveOneOut(plan.base, removed, plan.powers)
    everything = statistics.evaluate(view, args[4], wanted_names(args, kwargs))
    names = wanted_names(args, kwargs) + tuple(f"quantile:{i}" for i in range(len(args[4])))
    return plan, {name: everything[name] for name in names}


def _compare_rows(plan, rows, reduced_descriptions):
    names = list(rows)
    assert len(reduced_descriptions) == plan.values.size
    for i, reduced in enumerate(reduced_descriptions):
        want = point_values(reduced)
        for name in names:
            _close(float(rows[name][i]), want[name], f"row {i} (value {plan.values[i]}): {name}")


def test_jackknife_rows_equal_describe_without_one_observation_on_a_tied_sample():
    rng = np.random.default_rng(4242)
    x = np.round(rng.gamma(2.0, 3.0, 61))  # 61 observations, many ties
    data = from_array(x)
    _, args, kwargs, _ = run(data, resamples=200)
    plan, rows = _leave_one_out(args, kwargs)
    assert plan.values.size < x.size  # ties really are merged into support rows
    names = set(rows)
    assert {"mean", "variance", "standard_deviation", "skewness", "kurtosis", "excess_kurtosis", "median",
            "interquartile_range", "median_absolute_deviation", "quartile_skewness", "octile_kurtosis",
            "octile_excess_kurtosis", "medcouple", "mean_median_gap", "l_location", "l_scale", "l_skewness",
            "l_kurtosis"} <= names
    assert sum(name.startswith("quantile:") for name in names) == len(args[4])
    reduced = []
    for value in plan.values:
        drop = int(np.flatnonzero(x == value)[0])
        reduced.append(describe(from_array(np.delete(x, drop)), DescribeOptions(), kind="samples"))
    _compare_rows(plan, rows, reduced)


def test_jackknife_rows_equal_describe_without_one_observation_on_a_count_table():
    values = np.array([0.0, 1.0, 2.0, 3.0, 4.0, 5.0, 7.0, 10.0])
    counts = np.array([6.0, 11.0, 9.0, 5.0, 3.0, 1.0, 2.0, 1.0])
    data = from_table(values, counts, probabilities=False, normalise=False)
    _, args, kwargs, _ = run(data, kind="table", resamples=200)
    plan, rows = _leave_one_out(args, kwargs)
    reduced = []
    for i in range(values.size):
        fewer = counts.copy()
        fewer[i] -= 1.0
        reduced.append(
            describe(
                from_table(values, fewer, probabilities=False, normalise=False), DescribeOptions(), kind="table"
            )
        )
    _compare_rows(plan, rows, reduced)


def test_jackknife_rows_equal_describe_without_one_entry_for_reliability_weights():
    rng = np.random.default_rng(8080)
    x = rng.normal(3.0, 1.5, 30)
    w = rng.uniform(0.5, 2.0, 30)
    data = from_samples(list(x), omit_missing=False, weights=list(w), meaning=WeightMeaning.RELIABILITY)
    _, args, kwargs, _ = run(data, resamples=200)
    plan, rows = _leave_one_out(args, kwargs)
    order = np.argsort(x, kind="stable")
    reduced = []
    for i in order:  # the engine's rows are the entries sorted by value
        reduced.append(
            describe(
                from_samples(
                    list(np.delete(x, i)), omit_missing=False, weights=list(np.delete(w, i)),
                    meaning=WeightMeaning.RELIABILITY,
                ),
                DescribeOptions(),
                kind="samples",
            )
        )
    _compare_rows(plan, rows, reduced)


def test_jackknife_rows_equal_describe_without_one_count_for_bins():
    edges = [0.0, 2.0, 4.0, 6.0, 8.0, 10.0, 12.0]
    counts = [5.0, 14.0, 22.0, 11.0, 6.0, 2.0]
    data = from_bins(edges, counts)
    _, args, kwargs, _ = run(data, kind="bins", resamples=200)
    plan, rows = _leave_one_out(args, kwargs)
    reduced = []
    for i in range(len(counts)):
        fewer = list(counts)
        fewer[i] -= 1.0
        reduced.append(describe(from_bins(edges, fewer), DescribeOptions(), kind="bins"))
    _compare_rows(plan, rows, reduced)


# ----------------------------------------------------------------------------------------------
# One row of the original weights reproduces describe()'s point estimates
# ----------------------------------------------------------------------------------------------


def _consistency_cases():
    rng = np.random.default_rng(5150)
    x = rng.lognormal(1.0, 0.6, 80)
    tied = np.round(rng.normal(20.0, 4.0, 90))
    w = rng.uniform(0.2, 3.0, 45)
    y = rng.normal(-2.0, 3.0, 45)
    return {
        "samples": (from_array(x), "samples", {}),
        "tied samples": (from_array(tied), "samples", {}),
        "count table": (
            from_table(np.array([1.0, 2.0, 3.0, 5.0, 8.0, 13.0]), np.array([9.0, 15.0, 7.0, 4.0, 2.0, 1.0]),
                       probabilities=False, normalise=False),
            "table",
            {},
        ),
        "count table, type 6 quantiles": (
            from_table(np.array([1.0, 2.0, 3.0, 5.0, 8.0, 13.0]), np.array([9.0, 15.0, 7.0, 4.0, 2.0, 1.0]),
                       probabilities=False, normalise=False),
            "table",
            {"quantile_type": 6},
        ),
        "frequency weights, fractional": (
            from_samples(list(y), omit_missing=False, weights=list(w), meaning=WeightMeaning.FREQUENCY),
            "samples",
            {},
        ),
        "reliability weights": (
            from_samples(list(y), omit_missing=False, weights=list(w), meaning=WeightMeaning.RELIABILITY),
            "samples",
            {},
        ),
        "bins": (
            from_bins([0.0, 5.0, 10.0, 15.0, 20.0, 30.0, 50.0], [4.0, 18.0, 30.0, 21.0, 9.0, 3.0]), "bins", {}
        ),
        "bins, Sheppard-corrected": (
            from_bins([0.0, 5.0, 10.0, 15.0, 20.0, 25.0, 30.0], [4.0, 18.0, 30.0, 21.0, 9.0, 3.0]),
            "bins",
            {"sheppard_correction": True},
        ),
    }


CONSISTENCY = _consistency_cases()


@pytest.mark.parametrize("case", list(CONSISTENCY))
def test_statistics_of_the_original_weights_reproduce_describe(case):
    data, kind, options = CONSISTENCY[case]
    # Percentile: no jackknife, so this checks the resampled statistics alone.
    description, args, kwargs, _ = run(data, kind=kind, method="percentile", resamples=200, **options)
    plan, statistics = statistics_for(args, kwargs)
    names = wanted_names(args, kwargs)
    original = Rows(plan.base[None, :].copy(), plan.powers, plan.integer)
    row = statistics.evaluate(original, args[4], names)
    want = point_values(description)
    compared = names + tuple(f"quantile:{i}" for i in range(len(description.quantiles)))
    mismatched = {}
    for name in compared:
        values = row[name]
        assert values.shape == (1,)
        if not float(values[0]) == pytest.approx(want[name], rel=1e-12, abs=1e-300):
            mismatched[name] = (float(values[0]), want[name])
    assert mismatched == {}, case
