"""Outcome tables (counts and probabilities) and weighted samples, checked against their definitions.

* Counts are frequency weights: a table must give exactly what the repeated sample gives.
* Probabilities are a whole distribution: the descriptors are the population values, checked
  against closed forms (Johnson, Kemp & Kotz, *Univariate Discrete Distributions*, 3rd ed., 2005;
  values in tests/reference/discrete_distributions.json) and scipy.stats 1.17.1.
* Reliability weights follow the textbook variance with divisor V1 - V2/V1 (GNU Scientific
  Library reference manual, "Weighted Samples"); frequency weights are checked against
  statsmodels 0.15.0 ``DescrStatsW``, which uses frequency-weight semantics.
"""

from __future__ import annotations

import json
import math
from fractions import Fraction
from pathlib import Path

import numpy as np
import pytest
from scipy import stats
from statsmodels.stats.weightstats import DescrStatsW

from tailgauge.core import (
    DescribeOptions,
    UncomputableInput,
    WeightMeaning,
    describe,
    from_samples,
    from_table,
)
from tailgauge.core.describe import SCALAR_DESCRIPTORS

REFERENCE = json.loads(
    (Path(__file__).resolve().parents[1] / "reference" / "discrete_distributions.json").read_text()
)
DISTRIBUTIONS = {entry["name"]: entry for entry in REFERENCE["distributions"]}

# Descriptors read from order statistics: a table and its repeated sample select the very same
# order statistics, so these must agree exactly. The rest are moment descriptors (rtol 1e-12).
ORDER_DESCRIPTORS = {
    "median",
    "minimum",
    "maximum",
    "range",
    "interquartile_range",
    "median_absolute_deviation",
    "median_absolute_deviation_normal",
}
RTOL = 1e-12


def codes(description) -> set[str]:
    return {note.code for note in description.warnings}


def table(values, weights, *, probability=False, normalise=False, **options):
    data = from_table(
        np.asarray(values, dtype=np.float64),
        np.asarray(weights, dtype=np.float64),
        probabilities=probability,
        normalise=normalise,
    )
    return describe(data, DescribeOptions(**options), kind="table")


def samples(values, weights=None, meaning=WeightMeaning.FREQUENCY, **options):
    data = from_samples(
        [float(v) for v in values],
        omit_missing=False,
        weights=None if weights is None else [float(w) for w in weights],
        meaning=meaning,
    )
    return describe(data, DescribeOptions(**options), kind="samples")


def close(a: float | None, b: float | None, scale: float = 0.0) -> bool:
    """Both None, or equal to rtol 1e-12 (with an absolute floor ``RTOL * scale`` for values near 0)."""
    if a is None or b is None:
        return a is None and b is None
    return math.isclose(a, b, rel_tol=RTOL, abs_tol=RTOL * scale)


def assert_same_description(got, expected) -> None:
    """``got`` (a table or weighted sample) describes exactly what ``expected`` (the repeated sample) does."""
    assert got.size.n == expected.size.n
    assert got.size.total_weight == expected.size.total_weight
    assert got.size.distinct_values == expected.size.distinct_values
    sd = expected.descriptors["standard_deviation"].value or 0.0
    for name in SCALAR_DESCRIPTORS:
        if name == "lag1_autocorrelation":
            continue  # needs observation order, which a table does not have
        mine, theirs = got.descriptors[name], expected.descriptors[name]
        if name in ORDER_DESCRIPTORS:
            assert mine.value == theirs.value, name
        elif name.startswith("l_") and mine.value is not None and theirs.value is not None:
            # L-moments come from probability-weighted moments whose weights sum to zero, so
            # digits cancel in proportion to (spread of the data) / l2, up to ~1e4 for these
            # tables with one dominant count: the table and raw paths (both exact in theory)
            # then agree to about 1e4 * eps. Accuracy itself is pinned in test_lmoments.py.
            spread = float(expected.descriptors["maximum"].value - expected.descriptors["minimum"].value)
            l2 = expected.descriptors["l_scale"].value or 1.0
            tolerance = max(RTOL, 64 * np.finfo(float).eps * spread / l2)
            assert math.isclose(mine.value, theirs.value, rel_tol=tolerance, abs_tol=tolerance), (name, mine.value, theirs.value)
        else:
            scale = {"mean": sd, "variance": sd * sd, "standard_deviation": sd}.get(name, 1.0)
            assert close(mine.value, theirs.value, scale), (name, mine.value, theirs.value)
            assert close(mine.standard_error_under_normality, theirs.standard_error_under_normality), name
    assert got.descriptors["skewness"].estimator == expected.descriptors["skewness"].estimator
    assert got.descriptors["kurtosis"].estimator == expected.descriptors["kurtosis"].estimator
    assert [q.probability for q in got.quantiles] == [q.probability for q in expected.quantiles]
    assert [q.value for q in got.quantiles] == [q.value for q in expected.quantiles]
    assert got.modes == expected.modes
    assert got.moments.order == expected.moments.order
    for k, (a, b) in enumerate(zip(got.moments.raw, expected.moments.raw), start=1):
        scale = max(abs(expected.descriptors["mean"].value), sd) ** k
        assert close(a, b, scale), ("raw", k, a, b)
    for k, (a, b) in enumerate(zip(got.moments.central, expected.moments.central), start=1):
        assert close(a, b, sd**k), ("central", k, a, b)
    for k, (a, b) in enumerate(zip(got.moments.standardized, expected.moments.standardized), start=1):
        assert close(a, b, 1.0), ("standardized", k, a, b)
    for family in ("skewness", "excess_kurtosis"):
        for a, b in zip(getattr(got.shape_estimators, family), getattr(expected.shape_estimators, family)):
            assert a.estimator == b.estimator
            assert close(a.value, b.value, 1.0), (family, a.estimator, a.value, b.value)
            assert close(a.standard_error_under_normality, b.standard_error_under_normality)
    assert got.conventions.quantile_type == expected.conventions.quantile_type
    assert got.conventions.convention == expected.conventions.convention
    # Same warnings, apart from the one saying a table has no observation order.
    assert codes(got) - {"no_observation_order"} == codes(expected)
    assert got.descriptors["lag1_autocorrelation"].value is None
    assert "no_observation_order" in codes(got)


# ---------------------------------------------------------------------------------------------
# (a) counts table == repeated sample
# ---------------------------------------------------------------------------------------------


def _random_table(seed: int):
    """Integer counts with ties, counts of 1, a large count, repeated outcomes, shuffled order."""
    rng = np.random.default_rng(seed)
    k = int(rng.integers(3, 40))
    if seed % 2:
        values = rng.integers(-20, 60, size=k).astype(np.float64)  # repeats across rows likely
    else:
        values = np.round(rng.normal(100.0, 15.0, size=k), 2)
        values[rng.integers(0, k, size=3)] = values[0]  # force repeated outcome values
    counts = rng.integers(1, 6, size=k).astype(np.float64)
    counts[rng.integers(0, k, size=max(1, k // 3))] = 1.0
    counts[int(rng.integers(0, k))] = float(rng.integers(20_000, 60_000))  # one large count
    counts[1] = counts[2]  # at least one tie between counts
    order = rng.permutation(k)
    return values[order], counts[order]


# Probabilities at the knots of the piecewise-linear types and at the steps of types 1-3.
def _probabilities(n: int) -> tuple[float, ...]:
    knots = []
    for j in (1, 2, 3, n // 3, n // 2, n - 2, n - 1):
        knots += [j / n, (j - 0.5) / n, j / (n + 1), (j - 1) / (n - 1)]
    grid = [0.0, 0.001, 0.01, 0.05, 0.1, 0.25, 0.3, 0.5, 0.7, 0.75, 0.9, 0.95, 0.99, 0.999, 1.0]
    return tuple(float(p) for p in grid + [q for q in knots if 0.0 <= q <= 1.0])


@pytest.mark.parametrize("seed", [11, 12, 13, 14, 2025])
def test_counts_table_equals_repeated_sample_for_every_quantile_type(seed):
    values, counts = _random_table(seed)
    repeated = np.repeat(values, counts.astype(np.int64))
    np.random.default_rng(seed + 1).shuffle(repeated)  # observation order must not matter either
    probabilities = _probabilities(repeated.size)
    for quantile_type in range(1, 10):
        options = dict(probabilities=probabilities, quantile_type=quantile_type, moment_order=6)
        got = table(values, counts, **options)
        expected = samples(repeated, **options)
        assert got.conventions.quantile_type == quantile_type
        assert_same_description(got, expected)


@pytest.mark.parametrize(
    "options",
    [
        {},  # defaults: sample convention, G1/G2, type 7
        {"convention": "population"},
        {"skewness_estimator": "b1", "kurtosis_estimator": "b2"},
    ],
)
def test_counts_table_equals_repeated_sample_under_each_convention(options):
    values, counts = _random_table(7)
    repeated = np.repeat(values, counts.astype(np.int64))
    assert_same_description(table(values, counts, **options), samples(repeated, **options))


def test_small_tables_with_all_counts_one_and_tied_modes():
    # Every count 1: no mode (like a sample with no repeated value); ties of counts: every mode listed.
    single = table([3.0, 1.0, 2.0], [1, 1, 1])
    assert_same_description(single, samples([3.0, 1.0, 2.0]))
    assert single.modes.values == [] and "no_repeated_values" in codes(single)
    tied = table([5.0, 2.0, 9.0, 2.0, 7.0], [2, 1, 3, 2, 1])
    assert_same_description(tied, samples([5, 5, 2, 9, 9, 9, 2, 2, 7]))
    assert tied.modes.values == [2.0, 9.0] and tied.modes.tied == 2 and tied.modes.count == 3.0


def test_frequency_weights_on_samples_equal_the_repeated_sample():
    rng = np.random.default_rng(404)
    values = np.round(rng.gamma(2.0, 3.0, size=60), 1)
    weights = rng.integers(0, 7, size=60).astype(np.float64)  # zeros are dropped, not counted
    repeated = np.repeat(values, weights.astype(np.int64))
    for quantile_type in (1, 2, 3, 4, 5, 6, 7, 8, 9):
        got = samples(values, weights, quantile_type=quantile_type)
        expected = samples(repeated, quantile_type=quantile_type)
        assert got.size.zero_weight == int(np.count_nonzero(weights == 0))
        got.warnings = [w for w in got.warnings if w.code != "zero_weights_dropped"]
        assert_same_description(got, expected)


# ---------------------------------------------------------------------------------------------
# (b) probability tables against closed forms (Johnson, Kemp & Kotz 2005) and scipy.stats
# ---------------------------------------------------------------------------------------------


def _truncated(distribution, start: int, mean: float):
    """Support from ``start`` up to where the omitted tail adds < 1e-17 to E|X - mean|^4.

    (The omitted mass is smaller still, below 1e-17.) Cutting only where the remaining mass
    falls below 1e-15 is not enough for 1e-12 on the kurtosis: the far tail carries (x - mean)^4.
    The kept probabilities are then renormalised explicitly.
    """
    k = np.arange(start, start + 3000)
    pmf = distribution.pmf(k)
    tail = np.cumsum((pmf * (k - mean) ** 4)[::-1])[::-1]  # tail[i] = sum over j >= k[i]
    stop = int(np.flatnonzero(tail < 1e-17)[0])
    assert pmf[stop:].sum() < 1e-17
    kept = pmf[:stop]
    return k[:stop].astype(np.float64), kept / kept.sum()


def _poisson_pmf(lam: float, support: np.ndarray) -> np.ndarray:
    # e^-lam lam^k / k! evaluated so that k = lam - 1 and k = lam give bit-identical floats when
    # lam is an integer (64/6 and 256/24 round to the same double), so the two modes tie exactly.
    return np.array([math.exp(-lam) * (lam**k / math.factorial(int(k))) for k in support])


def _cases():
    p = DISTRIBUTIONS["bernoulli"]["parameters"]["p"]
    yield "bernoulli", np.array([0.0, 1.0]), np.array([1.0 - p, p]), stats.bernoulli(p), {
        "mean": p,
        "variance": p * (1 - p),
        "skewness": (1 - 2 * p) / math.sqrt(p * (1 - p)),
        "excess_kurtosis": (1 - 6 * p * (1 - p)) / (p * (1 - p)),
    }
    n, p = DISTRIBUTIONS["binomial"]["parameters"]["n"], DISTRIBUTIONS["binomial"]["parameters"]["p"]
    k = np.arange(n + 1, dtype=np.float64)
    yield "binomial", k, stats.binom.pmf(k, n, p), stats.binom(n, p), {
        "mean": n * p,
        "variance": n * p * (1 - p),
        "skewness": (1 - 2 * p) / math.sqrt(n * p * (1 - p)),
        "excess_kurtosis": (1 - 6 * p * (1 - p)) / (n * p * (1 - p)),
    }
    lam = DISTRIBUTIONS["poisson"]["parameters"]["lambda"]
    k, _ = _truncated(stats.poisson(lam), 0, lam)
    pmf = _poisson_pmf(lam, k)
    yield "poisson", k, pmf / pmf.sum(), stats.poisson(lam), {
        "mean": lam,
        "variance": lam,
        "skewness": lam**-0.5,
        "excess_kurtosis": 1 / lam,
    }
    p = DISTRIBUTIONS["geometric"]["parameters"]["p"]
    k, pmf = _truncated(stats.geom(p), 1, 1 / p)  # scipy's geom has support 1, 2, ...
    yield "geometric", k, pmf, stats.geom(p), {
        "mean": 1 / p,
        "variance": (1 - p) / p**2,
        "skewness": (2 - p) / math.sqrt(1 - p),
        "excess_kurtosis": 6 + p**2 / (1 - p),
    }
    faces = DISTRIBUTIONS["die"]["parameters"]["faces"]
    yield "die", np.arange(1.0, faces + 1), np.full(faces, 1.0 / faces), stats.randint(1, faces + 1), {
        "mean": (faces + 1) / 2,
        "variance": (faces**2 - 1) / 12,
        "skewness": 0.0,
        "excess_kurtosis": -6 * (faces**2 + 1) / (5 * (faces**2 - 1)),
    }


CASES = {name: rest for name, *rest in _cases()}
PROBABILITY_GRID = (0.001, 0.01, 0.05, 0.1, 0.2, 0.25, 0.3, 0.4, 0.5, 0.6, 0.7, 0.75, 0.9, 0.95, 0.99, 0.999)


@pytest.mark.parametrize("name", list(CASES))
def test_probability_table_moments_match_closed_forms_and_scipy(name):
    support, pmf, frozen, closed = CASES[name]
    reference = DISTRIBUTIONS[name]
    result = table(support, pmf, probability=True)
    d = result.descriptors
    scipy_mvsk = [float(v) for v in frozen.stats(moments="mvsk")]
    for key, scipy_value in zip(("mean", "variance", "skewness", "excess_kurtosis"), scipy_mvsk):
        # The closed form written above, the stored reference value and scipy agree ...
        assert math.isclose(closed[key], reference[key], rel_tol=1e-13, abs_tol=1e-15), key
        assert math.isclose(closed[key], scipy_value, rel_tol=1e-12, abs_tol=1e-12), key
        # ... and the service gives it to 1e-12.
        assert math.isclose(d[key].value, closed[key], rel_tol=1e-12, abs_tol=1e-12), (key, d[key].value)
    assert math.isclose(d["standard_deviation"].value, math.sqrt(closed["variance"]), rel_tol=1e-12)
    assert math.isclose(d["kurtosis"].value, closed["excess_kurtosis"] + 3.0, rel_tol=1e-12)
    assert d["skewness"].estimator == "g1" and d["excess_kurtosis"].estimator.startswith("g2")
    assert result.size.n is None
    assert result.conventions.convention == "population"
    assert result.conventions.weights == "probability"
    assert result.conventions.quantile_type == 1
    assert result.moments.central[1] == pytest.approx(closed["variance"], rel=1e-12)


@pytest.mark.parametrize("name", list(CASES))
def test_probability_table_quantiles_are_the_inverse_distribution_function(name):
    support, pmf, frozen, _ = CASES[name]
    reference = DISTRIBUTIONS[name]
    result = describe(
        from_table(support, pmf, probabilities=True, normalise=False),
        DescribeOptions(probabilities=PROBABILITY_GRID),
        kind="table",
    )
    expected = frozen.ppf(np.array(PROBABILITY_GRID))  # scipy: smallest x with F(x) >= p
    assert [q.value for q in result.quantiles] == [float(x) for x in expected]
    assert result.descriptors["median"].value == reference["median"] == float(frozen.ppf(0.5))
    assert result.modes.values == [float(m) for m in reference["modes"]]
    assert result.modes.tied == len(reference["modes"])


def test_die_quantiles_at_and_between_the_steps():
    die = from_table(np.arange(1.0, 7.0), np.full(6, 1 / 6), probabilities=True, normalise=False)
    # Between the steps: F(k) = k/6 exactly (Fractions); Q(p) = smallest k with F(k) >= p.
    between = tuple(k / 6 + offset for k in range(1, 6) for offset in (-1e-6, 1e-6)) + (1e-9, 0.999999)
    result = describe(die, DescribeOptions(probabilities=between), kind="table")
    expected = [min(k for k in range(1, 7) if Fraction(k, 6) >= Fraction(p)) for p in between]
    assert [q.value for q in result.quantiles] == [float(k) for k in expected]
    # At the steps: p = k/6 arrives as the nearest double (for k = 5 just above 5/6). It is read as
    # the step itself (a relative 1e-12 allowance, documented in order.cdf_quantiles), as scipy
    # 1.17.1 randint.ppf does too: Q(k/6) = k.
    steps = tuple(k / 6 for k in range(1, 7))
    result = describe(die, DescribeOptions(probabilities=steps), kind="table")
    assert [q.value for q in result.quantiles] == [1.0, 2.0, 3.0, 4.0, 5.0, 6.0]
    assert [q.value for q in result.quantiles] == [float(x) for x in stats.randint(1, 7).ppf(steps)]
    # Type 2 averages at a step where F(x) = p exactly: the die's median is then (3 + 4) / 2.
    type2 = table(np.arange(1.0, 7.0), np.full(6, 1 / 6), probability=True, quantile_type=2)
    assert type2.descriptors["median"].value == 3.0  # the median rule stays "smallest x with F >= 1/2"
    assert next(q.value for q in type2.quantiles if q.probability == 0.5) == 3.5


def test_probability_table_modes():
    assert table([0.0, 1.0], [0.8, 0.2], probability=True).modes.values == [0.0]
    support, pmf, _, _ = CASES["binomial"]
    assert table(support, pmf, probability=True).modes.values == [3.0]
    die = table(np.arange(1.0, 7.0), np.full(6, 1 / 6), probability=True)
    assert die.modes.values == [1.0, 2.0, 3.0, 4.0, 5.0, 6.0] and die.modes.tied == 6
    assert "no_repeated_values" not in codes(die)  # a uniform distribution is not a sample without repeats


def test_probability_table_rejects_sample_estimators():
    with pytest.raises(UncomputableInput) as raised:
        table([0.0, 1.0], [0.5, 0.5], probability=True, convention="sample")
    assert raised.value.locations[0].path == "options.convention"
    with pytest.raises(UncomputableInput) as raised:
        table([0.0, 1.0], [0.5, 0.5], probability=True, skewness_estimator="G1")
    assert raised.value.locations[0].path == "options.skewness_estimator"
    with pytest.raises(UncomputableInput) as raised:
        table([0.0, 1.0], [0.5, 0.5], probability=True, quantile_type=7)
    assert raised.value.locations[0].path == "options.quantile_type"


# ---------------------------------------------------------------------------------------------
# (c) probabilities must sum to 1
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize("weights, amount", [([0.5, 0.6], "+0.1"), ([0.3, 0.6], "-0.1"), ([2.0, 2.0], "+3")])
def test_probabilities_not_summing_to_one_are_rejected_with_the_amount(weights, amount):
    with pytest.raises(UncomputableInput) as raised:
        from_table(np.array([1.0, 2.0]), np.array(weights), probabilities=True, normalise=False)
    (location,) = raised.value.locations
    assert location.path == "outcomes"
    assert f"off by {amount}" in location.message
    assert f"off by {amount}" in raised.value.detail


def test_probabilities_within_tolerance_need_no_normalisation():
    result = table([1.0, 2.0], [0.5, 0.5 + 5e-10], probability=True)
    assert "probabilities_normalized" not in codes(result)


def test_normalise_rescales_and_warns():
    result = table([1.0, 2.0, 4.0], [2.0, 1.0, 1.0], probability=True, normalise=True)
    assert "probabilities_normalized" in codes(result)
    exact = table([1.0, 2.0, 4.0], [0.5, 0.25, 0.25], probability=True)
    for name in ("mean", "variance", "skewness", "excess_kurtosis", "median"):
        assert result.descriptors[name].value == pytest.approx(exact.descriptors[name].value, rel=1e-15)
    assert result.descriptors["mean"].value == 2.0
    assert "probabilities_normalized" not in codes(exact)


def test_all_zero_weights_are_rejected():
    with pytest.raises(UncomputableInput) as raised:
        from_table(np.array([1.0, 2.0]), np.array([0.0, 0.0]), probabilities=False, normalise=False)
    assert raised.value.locations[0].path == "outcomes"


# ---------------------------------------------------------------------------------------------
# (d) reliability and frequency weights on samples
# ---------------------------------------------------------------------------------------------


def _weighted_sample(seed: int):
    rng = np.random.default_rng(seed)
    values = rng.gamma(3.0, 2.0, size=250)
    weights = rng.uniform(0.2, 4.0, size=250)
    return values, weights


def test_reliability_weights_variance_mean_and_effective_size():
    values, w = _weighted_sample(77)
    result = samples(values, w, WeightMeaning.RELIABILITY)
    d = result.descriptors
    v1, v2 = w.sum(), (w * w).sum()
    mean = (w * values).sum() / v1
    # Reliability (analytic) weights, GNU Scientific Library manual, "Weighted Samples":
    #   s^2 = sum w_i (x_i - xbar_w)^2 / (V1 - V2 / V1),   V1 = sum w_i, V2 = sum w_i^2.
    variance = (w * (values - mean) ** 2).sum() / (v1 - v2 / v1)
    assert d["mean"].value == pytest.approx(DescrStatsW(values, weights=w).mean, rel=1e-13)
    assert d["mean"].value == pytest.approx(mean, rel=1e-13)
    assert d["variance"].value == pytest.approx(variance, rel=1e-12)
    assert d["standard_deviation"].value == pytest.approx(math.sqrt(variance), rel=1e-12)
    # Kish's effective sample size n_eff = V1^2 / V2.
    assert result.size.effective_n == pytest.approx(v1 * v1 / v2, rel=1e-12)
    assert result.size.n == values.size
    assert result.conventions.weights == "reliability"
    assert "V1 - V2" in result.conventions.variance_divisor


def test_reliability_weights_shape_is_the_named_plug_in():
    values, w = _weighted_sample(78)
    v1 = w.sum()
    mean = (w * values).sum() / v1
    m2, m3, m4 = ((w * (values - mean) ** k).sum() / v1 for k in (2, 3, 4))
    g1, g2 = m3 / m2**1.5, m4 / m2**2 - 3.0
    result = samples(values, w, WeightMeaning.RELIABILITY)
    d = result.descriptors
    assert d["skewness"].value == pytest.approx(g1, rel=1e-12)
    assert d["excess_kurtosis"].value == pytest.approx(g2, rel=1e-12)
    assert d["kurtosis"].value == pytest.approx(g2 + 3.0, rel=1e-12)
    assert "plug-in" in d["skewness"].estimator and d["skewness"].estimator.startswith("g1")
    assert "plug-in" in d["excess_kurtosis"].estimator and d["excess_kurtosis"].estimator.startswith("g2")
    assert d["skewness"].standard_error_under_normality is None
    # The default (sample) convention asks for a bias correction these weights lack: the plug-in
    # value is given and said to be one (issue 15: the warning was missing); the population
    # convention asks for the plug-in itself.
    (note,) = [n for n in result.warnings if n.code == "plug_in_estimator" and "skewness" in n.descriptors]
    assert "g1" in note.message
    population = samples(values, w, WeightMeaning.RELIABILITY, convention="population")
    assert population.descriptors["skewness"].value == d["skewness"].value
    assert "plug_in_estimator" not in codes(population)

    corrected = samples(
        values, w, WeightMeaning.RELIABILITY, skewness_estimator="G1", kurtosis_estimator="G2"
    )
    notes = [n for n in corrected.warnings if n.code == "plug_in_estimator"]
    assert {name for n in notes for name in n.descriptors} >= {"skewness", "kurtosis", "excess_kurtosis"}
    assert corrected.descriptors["skewness"].value == pytest.approx(g1, rel=1e-12)  # not a G1 "correction"
    assert corrected.descriptors["excess_kurtosis"].value == pytest.approx(g2, rel=1e-12)
    assert corrected.descriptors["skewness"].estimator == "g1 (plug-in)"
    # Only the plug-in row of the estimator table has a value for reliability weights.
    rows = {row.estimator: row.value for row in corrected.shape_estimators.skewness}
    assert rows["g1"] == pytest.approx(g1, rel=1e-12) and rows["G1"] is None and rows["b1"] is None


def test_frequency_weights_against_statsmodels():
    values, w = _weighted_sample(79)  # non-integer frequency weights
    result = samples(values, w, WeightMeaning.FREQUENCY)
    reference = DescrStatsW(values, weights=w, ddof=1)  # divisor sum(w) - 1
    d = result.descriptors
    assert d["mean"].value == pytest.approx(reference.mean, rel=1e-13)
    assert d["variance"].value == pytest.approx(reference.var, rel=1e-12)
    assert d["standard_deviation"].value == pytest.approx(reference.std, rel=1e-12)
    assert result.size.effective_n is None
    assert result.conventions.weights == "frequency"
    integer = np.random.default_rng(80).integers(1, 9, size=values.size).astype(np.float64)
    reference = DescrStatsW(values, weights=integer, ddof=1)
    d = samples(values, integer).descriptors
    assert d["variance"].value == pytest.approx(reference.var, rel=1e-12)
    assert d["standard_deviation"].value == pytest.approx(reference.std, rel=1e-12)


# ---------------------------------------------------------------------------------------------
# (e) non-integer counts
# ---------------------------------------------------------------------------------------------


NON_INTEGER = ([4.0, 1.0, 3.0, 2.0], [0.5, 1.5, 2.5, 1.5])  # total 6; sorted: 1:1.5, 2:1.5, 3:2.5, 4:0.5


def test_non_integer_counts_default_to_type_2_from_the_distribution_function():
    grid = (0.1, 0.25, 0.5, 0.75, 0.9, 1.0)
    result = table(*NON_INTEGER, probabilities=grid)
    assert result.conventions.quantile_type == 2
    # F: 1 -> 0.25, 2 -> 0.5, 3 -> 11/12, 4 -> 1. Type 2 takes the smallest x with F(x) >= p and
    # averages with the next value where F(x) = p exactly (p = 0.25 and p = 0.5 here).
    assert [q.value for q in result.quantiles] == [1.0, 1.5, 2.5, 3.0, 3.0, 4.0]
    assert result.descriptors["median"].value == 2.5
    assert result.descriptors["interquartile_range"].value == 1.5
    assert "integer_counts_required" not in codes(result)
    type1 = table(*NON_INTEGER, probabilities=grid, quantile_type=1)
    assert [q.value for q in type1.quantiles] == [1.0, 1.0, 2.0, 3.0, 3.0, 4.0]


@pytest.mark.parametrize("quantile_type", range(3, 10))
def test_non_integer_counts_have_no_order_statistic_quantiles(quantile_type):
    result = table(*NON_INTEGER, quantile_type=quantile_type)
    assert all(q.value is None for q in result.quantiles)
    assert result.descriptors["interquartile_range"].value is None
    (note,) = [n for n in result.warnings if n.code == "integer_counts_required"]
    assert "quantiles" in note.descriptors and "interquartile_range" in note.descriptors
    # Moments do not need whole counts: mean = (1*1.5 + 2*1.5 + 3*2.5 + 4*0.5) / 6 = 14/6.
    assert result.descriptors["mean"].value == pytest.approx(14.0 / 6.0, rel=1e-15)
