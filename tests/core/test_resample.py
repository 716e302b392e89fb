"""The bootstrap engine (tailgauge.core.resample), checked against outside references and itself.

References used below, each named again beside its check:

* scipy 1.17.1, ``scipy.stats.bootstrap`` (percentile, basic and BCa intervals of one statistic);
* B. Efron and R. J. Tibshirani, *An Introduction to the Bootstrap*, Chapman & Hall, 1993:
  chapter 14: Table 14.1 (the spatial test data, column A), the plug-in variance 171.5 and the
  BCa acceleration 0.0612 from the jackknife (eq. 14.15);
* a naive leave-one-out jackknife written here with ``np.delete``, and ``describe()`` itself
  recomputed on each leave-one-out sample.

Every random generator is seeded; nothing here depends on timing.
"""

from __future__ import annotations

import contextlib
import json
import math
import subprocess
import sys
import warnings
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

from tailgauge.core import (
    DescribeOptions,
    IntervalOptions,
    WeightMeaning,
    central_sums,
    describe,
    from_array,
    from_bins,
    from_samples,
    from_table,
)
from tailgauge.core import resample
from tailgauge.core.resample.draws import POISSON_DRAWS, TOPPED_UP_BATCH_ELEMENTS, BATCH_ELEMENTS, plan_of
from tailgauge.core.resample.rows import LeaveOneOut, Rows
from tailgauge.core.resample.statistics import Statistics

REPO = Path(__file__).resolve().parents[2]

# Efron & Tibshirani (1993), Table 14.1: spatial test scores, column A (26 children).
SPATIAL_A = np.array(
    [48, 36, 20, 29, 42, 42, 20, 42, 22, 41, 45, 14, 6, 0, 33, 28, 34, 4, 32, 24, 47, 41, 24, 26, 30, 41],
    dtype=np.float64,
)


# ----------------------------------------------------------------------------------------------
# Helpers
# ----------------------------------------------------------------------------------------------


@contextlib.contextmanager
def captured_bootstrap():
    """Record the arguments ``describe`` passes to ``resample.bootstrap`` and what it returned.

    ``describe`` looks the engine up on the module at call time, so a wrapper installed here sees
    exactly the plan sums, families, quantile type and factor rule that ``describe`` chose.
    """
    calls: list[tuple[tuple, dict, resample.BootstrapOutcome]] = []
    original = resample.bootstrap

    def spy(*args, **kwargs):
        outcome = original(*args, **kwargs)
        calls.append((args, kwargs, outcome))
        return outcome

    resample.bootstrap = spy
    try:
        yield calls
    finally:
        resample.bootstrap = original


def run(data, *, kind="samples", method="bca", level=0.95, resamples=999, seed=1, **options):
    """``describe`` with an interval request; returns (description, args, kwargs, outcome)."""
    interval = IntervalOptions(method=method, level=level, resamples=resamples, seed=seed)
    with captured_bootstrap() as calls:
        description = describe(data, DescribeOptions(interval=interval, **options), kind=kind)
    assert len(calls) == 1
    args, kwargs, outcome = calls[0]
    return description, args, kwargs, outcome


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


# ----------------------------------------------------------------------------------------------
# Reproducibility: same seed, bit for bit, whatever the threads or the process
# ----------------------------------------------------------------------------------------------

FINGERPRINT_SCRIPT = """
import numpy as np
from tailgauge.core import DescribeOptions, IntervalOptions, describe, from_array

def fingerprint(method):
    x = np.random.default_rng(31337).gamma(3.0, 2.0, 600)
    d = describe(
        from_array(x),
        DescribeOptions(interval=IntervalOptions(method, 0.9, 4000, 271828)),
        kind="samples",
    )
    out = []
    for name, item in sorted(d.descriptors.items()):
        iv = item.interval
        out.append([name, None if iv is None else [iv.low.hex(), iv.high.hex(), iv.method],
                    None if item.standard_error is None else item.standard_error.hex()])
    for q in d.quantiles:
        out.append([q.probability, q.interval.low.hex(), q.interval.high.hex(), q.standard_error.hex()])
    return out
"""


def _fingerprint_here(method: str):
    namespace: dict = {}
    exec(FINGERPRINT_SCRIPT, namespace)  # the very text the subprocess runs
    return namespace["fingerprint"](method)


def _outcome_bits(outcome: resample.BootstrapOutcome):
    bits = []
    for name, result in sorted(outcome.results.items()):
        iv = result.interval
        bits.append((name, iv.low.hex(), iv.high.hex(), iv.method, result.standard_error.hex()))
    for result in outcome.quantiles:
        bits.append((result.interval.low.hex(), result.interval.high.hex(), result.standard_error.hex()))
    return bits


@pytest.mark.parametrize(("method", "n", "resamples"), [("bca", 600, 4000), ("percentile", 600, 4000), ("bca", 3000, 2400)])
def test_same_seed_same_intervals_bit_for_bit_across_runs_and_threads(method, n, resamples):
    # n = 3000 draws its counts as Poisson counts topped up to n; 600, directly.
    x = np.random.default_rng(31337).gamma(3.0, 2.0, n)
    _, args, kwargs, first = run(from_array(x), method=method, resamples=resamples, seed=271828, level=0.9)
    # The weights exceed one batch, so threads really split the work.
    topped_up = n >= POISSON_DRAWS
    assert resamples * n > (TOPPED_UP_BATCH_ELEMENTS if topped_up else BATCH_ELEMENTS)
    outcomes = []
    for threads in (1, 2, 3):
        outcomes.append(resample.bootstrap(*args, **{**kwargs, "threads": threads}))
    reference = _outcome_bits(first)
    assert len(reference) == len(first.results) + len(first.quantiles) > 10
    for outcome in outcomes:
        assert _outcome_bits(outcome) == reference
    # A different seed gives different intervals (the seed is really used).
    other = resample.bootstrap(*args, **{**kwargs, "options": IntervalOptions(method, 0.9, 4000, 271829)})
    assert _outcome_bits(other) != reference


def test_same_seed_same_intervals_bit_for_bit_in_a_separate_process():
    here = _fingerprint_here("bca")
    assert here == _fingerprint_here("bca")
    script = FINGERPRINT_SCRIPT + "\nimport json\nprint(json.dumps(fingerprint('bca')))\n"
    completed = subprocess.run(
        [sys.executable, "-c", script], cwd=REPO, capture_output=True, text=True, check=True, timeout=300
    )
    there = json.loads(completed.stdout)
    assert there == json.loads(json.dumps(here))


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


# Powers of two scale every float exactly, so the same seed must give the same resamples and
# intervals scaled by 2**k (power 0 for the scale-free descriptors, 2 for the variance).
SCALE_POWER = {
    "variance": 2,
    **dict.fromkeys(
        ("skewness", "kurtosis", "excess_kurtosis", "coefficient_of_variation", "quartile_skewness", "octile_kurtosis",
         "octile_excess_kurtosis", "mean_median_gap", "medcouple", "l_skewness", "l_kurtosis", "upper_tail_index"),
        0,
    ),
}


@pytest.mark.parametrize("k", [10, -10, 400, -400, 1000, -1000])
def test_intervals_are_equivariant_under_power_of_two_scaling(k):
    """The core computes moments in exactly scaled units so that any finite input works
    (service/tailgauge/core/moments.py); intervals, standard errors and the BCa choice must follow.
    Data of magnitude 2**400 (about 1e120) are ordinary float64 numbers."""
    x = np.random.default_rng(1).normal(1.0, 0.1, 30)
    options = {"method": "bca", "resamples": 500, "seed": 3}
    base, *_ = run(from_array(x), **options)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # the results are what is checked here
        scaled, *_ = run(from_array(np.ldexp(x, k)), **options)
    mismatched = {}
    for name in resample.INTERVAL_DESCRIPTORS:
        power = SCALE_POWER.get(name, 1)
        if base.descriptors[name].value is None:  # Hill's index needs 50 observations, not 30
            assert name == "upper_tail_index", name
            continue
        if scaled.descriptors[name].value is None:  # 2**(2k) not representable: no variance
            assert name == "variance" and abs(k) == 1000, name
            continue
        want, got = base.descriptors[name], scaled.descriptors[name]
        expected = (
            math.ldexp(want.interval.low, k * power),
            math.ldexp(want.interval.high, k * power),
            want.interval.method,
            math.ldexp(want.standard_error, k * power),
        )
        actual = None if got.interval is None else (got.interval.low, got.interval.high, got.interval.method,
                                                    got.standard_error)
        if actual is None or actual[2] != expected[2] or actual[3] is None or not (
            np.allclose(actual[:2], expected[:2], rtol=1e-12, atol=0.0)
            and math.isclose(actual[3], expected[3], rel_tol=1e-12)
        ):
            mismatched[name] = {"expected": expected, "got": actual}
    assert mismatched == {}, k


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
