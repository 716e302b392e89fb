"""Order statistics: Hyndman & Fan (1996) quantile types 1-9, median, MAD and modes.

Reference values come from three independent places:

* numpy.quantile / numpy.median (reference library, numpy 2.4.x as pinned in pyproject.toml),
  whose ``method=`` names follow Hyndman & Fan's nine types;
* scipy.stats.median_abs_deviation and scipy.stats.norm (reference library, scipy 1.17.x);
* a naive implementation of the definitions written below in exact rational arithmetic from
  R. J. Hyndman and Y. Fan, "Sample quantiles in statistical packages", The American
  Statistician 50(4), 361-365, 1996 (section 2: ``Q(p) = (1 - gamma) x_(j) + gamma x_(j+1)``
  with ``j = floor(n p + m)``, ``g = n p + m - j``; order statistics outside 1..n are clamped to
  the sample minimum and maximum).
"""

from __future__ import annotations

import collections
import math
from fractions import Fraction

import numpy as np
import pytest
import scipy.stats

from tailgauge.core.order_statistics import NORMAL_MAD_FACTOR, median, median_absolute_deviation, modes, quantiles
from tailgauge.core.weighted import WeightedData, WeightMeaning, from_array

EPS = np.finfo(np.float64).eps
TYPES = range(1, 10)
SIZES = (1, 2, 3, 10, 101)
NUMPY_METHOD = {
    1: "inverted_cdf",
    2: "averaged_inverted_cdf",
    3: "closest_observation",
    4: "interpolated_inverted_cdf",
    5: "hazen",
    6: "weibull",
    7: "linear",
    8: "median_unbiased",
    9: "normal_unbiased",
}
# Hyndman & Fan (1996), section 2: the continuous types 4-9 have knots p_k = (k - alpha) /
# (n - alpha - beta + 1) and m = alpha + p (1 - alpha - beta).
ALPHA_BETA = {
    4: (Fraction(0), Fraction(1)),
    5: (Fraction(1, 2), Fraction(1, 2)),
    6: (Fraction(0), Fraction(0)),
    7: (Fraction(1), Fraction(1)),
    8: (Fraction(1, 3), Fraction(1, 3)),
    9: (Fraction(3, 8), Fraction(3, 8)),
}


def hf_quantile(sorted_values: list[float], p: Fraction, quantile_type: int) -> Fraction:
    """Hyndman & Fan (1996) sample quantile, computed exactly in rationals."""
    n = len(sorted_values)

    def x(j: int) -> Fraction:
        return Fraction(sorted_values[min(max(j, 1), n) - 1])

    if quantile_type in (1, 2, 3):
        m = Fraction(-1, 2) if quantile_type == 3 else Fraction(0)
        h = n * p + m
        j = math.floor(h)
        g = h - j
        if quantile_type == 1:
            gamma = Fraction(0) if g == 0 else Fraction(1)
        elif quantile_type == 2:
            gamma = Fraction(1, 2) if g == 0 else Fraction(1)
        else:
            gamma = Fraction(0) if (g == 0 and j % 2 == 0) else Fraction(1)
    else:
        alpha, beta = ALPHA_BETA[quantile_type]
        h = n * p + alpha + p * (1 - alpha - beta)
        j = math.floor(h)
        gamma = h - j
    return (1 - gamma) * x(j) + gamma * x(j + 1)


def samples(n: int, seed: int) -> dict[str, np.ndarray]:
    """Continuous data and data with many ties (so neighbouring order statistics are equal)."""
    rng = np.random.default_rng(seed)
    return {
        "normal": rng.normal(loc=3.0, scale=2.0, size=n),
        "ties": rng.integers(-3, 4, size=n).astype(np.float64),
    }


def grid_probabilities(n: int) -> list[Fraction]:
    """0, 1 and the knots of every type: k/n, (k - 1/2)/n, k/(n + 1), (k - 1)/(n - 1)."""
    grid = {Fraction(0), Fraction(1)}
    grid.update(Fraction(k, n) for k in range(n + 1))
    grid.update(Fraction(2 * k - 1, 2 * n) for k in range(1, n + 1))
    grid.update(Fraction(k, n + 1) for k in range(n + 2))
    if n > 1:
        grid.update(Fraction(k - 1, n - 1) for k in range(1, n + 1))
    return sorted(grid)


def random_probabilities(seed: int, count: int = 200) -> np.ndarray:
    rng = np.random.default_rng(seed)
    extremes = [0.0, 1.0, 1e-300, 1e-12, 0.5, 1.0 - 1e-12, np.nextafter(1.0, 0.0)]
    return np.concatenate([extremes, rng.uniform(size=count)])


def continuous_tolerance(values: np.ndarray) -> float:
    """Bound on float64 rounding for types 4-9: ``h = n p + m`` carries an absolute error of a
    few ``eps * (n + 1)``, which moves the interpolated value by that times the gap between
    neighbouring order statistics (at most the range), plus a few ulps for the interpolation."""
    n = values.size
    spread = float(np.max(values) - np.min(values))
    return 4.0 * EPS * ((n + 1) * spread + float(np.max(np.abs(values))))


# --- (a) against numpy.quantile -------------------------------------------------------------


@pytest.mark.parametrize("quantile_type", TYPES)
@pytest.mark.parametrize("n", SIZES)
def test_quantiles_match_numpy(n, quantile_type):
    for seed, (name, values) in enumerate(samples(n, seed=100 + n).items()):
        data = from_array(values)
        probabilities = np.unique(
            np.concatenate(
                [
                    random_probabilities(seed=200 + n + seed),
                    [float(p) for p in grid_probabilities(n)],
                ]
            )
        )
        if quantile_type in (1, 2, 3):
            # Deliberate difference: where n p is within rounding of a whole number (a grid
            # probability k/n sent as the nearest double) the service snaps to it and numpy does
            # not; those points are checked against the definition in
            # test_discontinuous_types_match_definition_at_grid_points instead.
            h = n * probabilities - (0.5 if quantile_type == 3 else 0.0)
            probabilities = probabilities[np.abs(h - np.round(h)) > 4.0 * EPS * np.maximum(np.abs(h), 1.0)]
        got = quantiles(data, probabilities, quantile_type)
        # numpy 2.4 (reference library), method names are Hyndman & Fan's types.
        expected = np.quantile(values, probabilities, method=NUMPY_METHOD[quantile_type])
        assert got.shape == expected.shape
        if quantile_type in (1, 3):
            # Both pick one order statistic: no arithmetic on the values, so exact.
            np.testing.assert_array_equal(got, expected, err_msg=f"{name}, type {quantile_type}")
        else:
            # numpy interpolates as a + (b - a) t; the service as a (1 - t) + b t.
            np.testing.assert_allclose(
                got,
                expected,
                rtol=0,
                atol=continuous_tolerance(values),
                err_msg=f"{name}, type {quantile_type}",
            )


# --- (b) against the definitions of Hyndman & Fan (1996), exactly ---------------------------


@pytest.mark.parametrize("quantile_type", TYPES)
@pytest.mark.parametrize("n", SIZES)
def test_quantiles_match_definition_at_random_probabilities(n, quantile_type):
    for seed, (name, values) in enumerate(samples(n, seed=300 + n).items()):
        data = from_array(values)
        ordered = sorted(values.tolist())
        probabilities = random_probabilities(seed=400 + n + seed)
        got = quantiles(data, probabilities, quantile_type)
        for p, value in zip(probabilities.tolist(), got.tolist()):
            # Away from the discontinuities, the float p stands for its own exact value.
            expected = float(hf_quantile(ordered, Fraction(p), quantile_type))
            if quantile_type in (1, 2, 3):
                # One order statistic, or 0.5 x_j + 0.5 x_(j+1) (exact halves, one rounding):
                # both equal the correctly rounded exact value.
                assert value == expected, f"{name}, type {quantile_type}, p = {p!r}"
            else:
                assert abs(value - expected) <= continuous_tolerance(values), (
                    f"{name}, type {quantile_type}, p = {p!r}: got {value!r}, expected {expected!r}"
                )


def grid_mismatches(n: int, quantile_type: int) -> list[tuple[str, str, float, float]]:
    """(p, p as sent, got, expected) wherever the service departs from H&F at the grid."""
    values = samples(n, seed=500 + n)["normal"]
    ordered = sorted(values.tolist())
    grid = grid_probabilities(n)
    got = quantiles(from_array(values), np.array([float(p) for p in grid]), quantile_type)
    wrong = []
    for p, value in zip(grid, got.tolist()):
        expected = float(hf_quantile(ordered, p, quantile_type))
        if quantile_type in (1, 2, 3):
            bad = value != expected
        else:
            bad = abs(value - expected) > continuous_tolerance(values)
        if bad:
            wrong.append((str(p), repr(float(p)), value, expected))
    return wrong


@pytest.mark.parametrize("quantile_type", (4, 5, 6, 7, 8, 9))
@pytest.mark.parametrize("n", SIZES + (100,))
def test_continuous_types_match_definition_at_grid_points(n, quantile_type):
    assert grid_mismatches(n, quantile_type) == []


# The grid k/n (and (k + 1/2)/n for type 3) is where types 1-3 jump. A caller can only send the
# double nearest to k/n, and n * fl(k/n) is not always k in float64: it misses by an ulp for
# n = 100 at the everyday percentiles 0.07, 0.14, 0.28, 0.29 and 0.55-0.58 (type 3: 0.545,
# 0.575), and for n = 101 at k = 7, 14, 28, 29, 55-59. Type 1 goes wrong where the product
# lands above k, type 2 on either side. The expected value is the definition at the rational
# the caller meant. Reading the float literally would not rescue the service: fl(0.1) is above
# 1/10, yet for n = 10 the service (rightly) returns x_(1) at p = 0.1 for type 1. numpy.quantile
# rounds the same way as the service, so test (a) cannot see this.
def test_discontinuous_types_match_definition_at_grid_points():
    wrong = {}
    for n in SIZES + (100,):
        for quantile_type in (1, 2, 3):
            found = grid_mismatches(n, quantile_type)
            if found:
                wrong[f"n={n}, type {quantile_type}"] = found
    assert wrong == {}, f"(p, p as sent, got, expected per H&F): {wrong}"


def test_definition_helper_matches_hand_worked_values():
    """The naive helper itself, on 1..10 at p = 0.25, against values worked by hand from the
    definitions (so a mistake in the helper cannot silently agree with the service)."""
    x = [float(v) for v in range(1, 11)]
    p = Fraction(1, 4)
    by_hand = {
        1: 3,  # h = 2.5, g > 0 -> x_3
        2: 3,  # same
        3: 2,  # h = 2.0, j = 2 even, g = 0 -> x_2
        4: Fraction(5, 2),  # h = 2.5
        5: 3,  # h = 3.0
        6: Fraction(11, 4),  # h = 2.75
        7: Fraction(13, 4),  # h = 3.25
        8: Fraction(35, 12),  # h = 2.5 + 5/12
        9: Fraction(47, 16),  # h = 2.5 + 1/16 + 3/8
    }
    for quantile_type, expected in by_hand.items():
        assert hf_quantile(x, p, quantile_type) == expected, quantile_type


# --- (c) frequency weights are repetition ---------------------------------------------------


def frequency_case(n_distinct: int, seed: int):
    rng = np.random.default_rng(seed)
    # Values drawn with replacement from a small set, so the weighted form has repeated support
    # values that must be merged, and values are not sorted.
    pool = np.round(rng.normal(size=max(1, n_distinct)), 3)
    values = rng.choice(pool, size=n_distinct)
    # Positive counts: the builders drop zero weights before this form is made.
    counts = rng.integers(1, 6, size=n_distinct)
    weighted = WeightedData(
        values=values,
        weights=counts.astype(np.float64),
        meaning=WeightMeaning.FREQUENCY,
        ordered=False,
    )
    repeated = np.repeat(values, counts)
    return weighted, repeated


@pytest.mark.parametrize("seed", (1, 2, 3))
@pytest.mark.parametrize("n_distinct", SIZES)
def test_frequency_weights_equal_repeated_sample(n_distinct, seed):
    weighted, repeated = frequency_case(n_distinct, seed=700 + 10 * n_distinct + seed)
    raw = from_array(repeated)
    total = repeated.size
    assert weighted.total_weight == total
    probabilities = np.unique(
        np.concatenate(
            [
                random_probabilities(seed=800 + n_distinct + seed),
                [float(p) for p in grid_probabilities(total)],
            ]
        )
    )
    for quantile_type in TYPES:
        np.testing.assert_array_equal(
            quantiles(weighted, probabilities, quantile_type),
            quantiles(raw, probabilities, quantile_type),
            err_msg=f"type {quantile_type}",
        )
    centre_weighted = median(weighted)
    centre_raw = median(raw)
    assert centre_weighted == centre_raw
    assert median_absolute_deviation(weighted, centre_weighted) == median_absolute_deviation(raw, centre_raw)
    found_weighted, found_raw = modes(weighted), modes(raw)
    np.testing.assert_array_equal(found_weighted.values, found_raw.values)
    assert found_weighted.weight == found_raw.weight
    assert found_weighted.tied == found_raw.tied
    assert found_weighted.distinct_values == found_raw.distinct_values


# --- (d) median, MAD, modes against reference libraries and a naive count --------------------


MEDIAN_SIZES = SIZES + (4, 1000, 1001)


@pytest.mark.parametrize("n", MEDIAN_SIZES)
def test_median_matches_numpy(n):
    for name, values in samples(n, seed=900 + n).items():
        # numpy 2.4 (reference library): mean of the middle pair, computed differently
        # ((a + b) / 2) but equal in float64 because halving is exact.
        assert median(from_array(values)) == float(np.median(values)), name


@pytest.mark.parametrize("n", MEDIAN_SIZES)
def test_mad_matches_scipy(n):
    for name, values in samples(n, seed=1000 + n).items():
        data = from_array(values)
        mad = median_absolute_deviation(data, median(data))
        # scipy 1.17 (reference library): median(|x - median(x)|), unscaled by default.
        expected = scipy.stats.median_abs_deviation(values)
        assert mad == pytest.approx(expected, rel=4 * EPS, abs=0), name
        # scale="normal" divides by Phi^{-1}(3/4); the service multiplies by its reciprocal.
        expected_normal = scipy.stats.median_abs_deviation(values, scale="normal")
        assert mad * NORMAL_MAD_FACTOR == pytest.approx(expected_normal, rel=4 * EPS, abs=0), name


def test_normal_mad_factor_is_reciprocal_of_normal_quartile():
    # scipy 1.17 (reference library): the standard normal 0.75 quantile.
    assert NORMAL_MAD_FACTOR == pytest.approx(1.0 / scipy.stats.norm.ppf(0.75), rel=2 * EPS)


def test_mad_known_value():
    # x = 1, 2, 3, 4, 100: median 3, |x - 3| = 2, 1, 0, 1, 97, whose median is 1.
    data = from_array(np.array([4.0, 100.0, 1.0, 3.0, 2.0]))
    assert median(data) == 3.0
    assert median_absolute_deviation(data, 3.0) == 1.0


def naive_modes(values) -> tuple[list[float], int]:
    counts = collections.Counter(values)
    top = max(counts.values())
    return sorted(v for v, c in counts.items() if c == top), top


@pytest.mark.parametrize("n", MEDIAN_SIZES)
def test_modes_match_naive_count(n):
    for name, values in samples(n, seed=1100 + n).items():
        found = modes(from_array(values))
        expected, top = naive_modes(values.tolist())
        assert found.values.tolist() == expected, name
        assert found.weight == top
        assert found.tied == len(expected)
        assert found.distinct_values == len(set(values.tolist()))


def test_modes_report_every_tie():
    values = np.array([5.0, 1.0, 2.0, 5.0, 2.0, 9.0, 1.0, 7.0])
    found = modes(from_array(values))
    assert found.values.tolist() == [1.0, 2.0, 5.0]
    assert found.weight == 2.0
    assert found.tied == 3
    assert found.distinct_values == 5


def test_weighted_modes_match_naive_count_of_repeated_sample():
    rng = np.random.default_rng(1200)
    values = rng.integers(0, 8, size=40).astype(np.float64)
    counts = rng.integers(1, 4, size=40)
    weighted = WeightedData(
        values=values, weights=counts.astype(np.float64), meaning=WeightMeaning.FREQUENCY, ordered=False
    )
    expected, top = naive_modes(np.repeat(values, counts).tolist())
    found = modes(weighted)
    assert found.values.tolist() == expected
    assert found.weight == top


def test_raw_mad_selection_matches_numpy_median_of_absolute_deviations():
    # Reference: numpy, np.median(np.abs(x - centre)) on the same values and centre (centres on
    # and off the data, ties, one to a few values, and values whose deviation overflows to inf).
    from tailgauge.core import order_statistics

    rng = np.random.default_rng(808)
    cases = [rng.normal(size=n) for n in (1, 2, 3, 4, 5, 10, 101, 1000)]
    cases += [np.round(rng.normal(size=500), 1), np.full(7, 2.5), np.array([-1.7e308, 0.0, 1.7e308, 1.7e308])]
    for x in cases:
        data = from_array(x)
        for centre in (float(np.median(x)), float(x.min()), float(x.max()), float(np.mean(x[:1])) + 0.3):
            with np.errstate(over="ignore"):
                want = float(np.median(np.abs(x - centre)))
            assert order_statistics.median_absolute_deviation(data, centre) == want, (x.size, centre)
