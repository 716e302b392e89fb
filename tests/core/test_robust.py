"""Robust shape: quartile skewness, octile kurtosis, medcouple and the half-sample mode.

Outside references, each named beside its check:

* statsmodels 0.15.0, ``statsmodels.stats.stattools``: ``robust_skewness`` (its SK2 is the
  quartile skewness (Q3 + Q1 - 2 Q2) / (Q3 - Q1) from ``np.percentile``, i.e. Hyndman & Fan
  type 7 quartiles), ``robust_kurtosis`` (its KR2 is the octile kurtosis of Moors minus its
  normal value; with ``excess=False`` the octile kurtosis itself), ``medcouple`` with
  ``use_fast=False`` (the exact O(n^2) enumeration of the kernel, with the sign kernel of Brys,
  Hubert & Struyf for ties at the median), and values recorded in statsmodels' own test file
  ``statsmodels/stats/tests/test_statstools.py`` (0.15.0);
* J. J. A. Moors, "A quantile alternative for kurtosis", The Statistician 37, 25-32, 1988
  (octile kurtosis 1.233 for every normal distribution);
* D. R. Bickel and R. Fruhwirth, CSDA 50, 3500-3530, 2006 (the half-sample mode), checked by
  hand and against a naive implementation written below;
* the asymptotic covariance of sample quantiles, Cov(Q_p, Q_q) = p (1 - q) / (n f(x_p) f(x_q))
  for p <= q (e.g. R. J. Serfling, Approximation Theorems of Mathematical Statistics, 1980,
  section 2.3.3), for the sampling error of the octile kurtosis and quartile skewness.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
from scipy import stats
from statsmodels.stats.stattools import expected_robust_kurtosis, medcouple, robust_kurtosis, robust_skewness

from tailgauge.core import (
    DescribeOptions,
    WeightMeaning,
    describe,
    from_array,
    from_bins,
    from_samples,
    from_table,
)
from tailgauge.core.describe import NORMAL_OCTILE_KURTOSIS

ROBUST = (
    "quartile_skewness",
    "octile_kurtosis",
    "octile_excess_kurtosis",
    "medcouple",
    "half_sample_mode",
    "mean_median_gap",
    "l_location",
    "l_scale",
    "l_skewness",
    "l_kurtosis",
)


def run(data, kind: str, **options):
    return describe(data, DescribeOptions(**options), kind=kind)


def values_of(result) -> dict[str, float | None]:
    return {name: d.value for name, d in result.descriptors.items()}


def sample(x, **options) -> dict[str, float | None]:
    return values_of(run(from_array(np.asarray(x, dtype=np.float64)), "samples", **options))


def table(values, weights, *, probabilities=False, **options) -> dict[str, float | None]:
    data = from_table(
        np.asarray(values, dtype=np.float64),
        np.asarray(weights, dtype=np.float64),
        probabilities=probabilities,
        normalise=False,
    )
    return values_of(run(data, "table", **options))


def _seeded_samples() -> list[tuple[str, np.ndarray]]:
    """Seeded samples: continuous, heavy ties, ties at the median, even and odd n, integers."""
    rng = np.random.default_rng(20260101)
    cases = []
    for n in (3, 4, 5, 8, 9, 50, 51, 400, 401):
        cases.append((f"normal-{n}", rng.normal(10.0, 3.0, size=n)))
    for n in (30, 31, 200, 201):
        cases.append((f"exponential-{n}", rng.exponential(2.0, size=n)))
        cases.append((f"lognormal-{n}", rng.lognormal(0.0, 1.0, size=n)))
        cases.append((f"student-t2-{n}", rng.standard_t(2, size=n)))
    for n in (20, 21, 100, 101, 500):
        # Heavy ties: integer data.
        cases.append((f"poisson3-{n}", rng.poisson(3.0, size=n).astype(np.float64)))
        cases.append((f"integers0to4-{n}", rng.integers(0, 5, size=n).astype(np.float64)))
        cases.append((f"geometric-{n}", rng.geometric(0.3, size=n).astype(np.float64)))
    for n in (11, 12, 60, 61, 300):
        # Ties at the median: a large block exactly at the sample median.
        x = rng.normal(size=n)
        x[: (2 * n) // 5] = np.median(x)
        cases.append((f"median-block-{n}", x))
        y = np.round(rng.exponential(1.0, size=n), 1)  # rounded: ties everywhere, some at the median
        cases.append((f"rounded-exponential-{n}", y))
    return cases


SAMPLES = _seeded_samples()
SAMPLE_IDS = [name for name, _ in SAMPLES]


def _statsmodels_reference(x: np.ndarray) -> dict[str, float]:
    """SK2, KR2 (excess and raw) and the exact medcouple from statsmodels 0.15.0."""
    with warnings.catch_warnings(), np.errstate(all="ignore"):
        # KR3 and KR4 (not used here) warn for tiny samples; zero quartile spreads give NaN.
        warnings.simplefilter("ignore", RuntimeWarning)
        sk2 = float(robust_skewness(x)[1])
        kr2_excess = float(robust_kurtosis(x, excess=True)[1])
        kr2 = float(robust_kurtosis(x, excess=False)[1])
    return {
        "quartile_skewness": sk2,
        "octile_excess_kurtosis": kr2_excess,
        "octile_kurtosis": kr2,
        "medcouple": float(medcouple(x, use_fast=False)),
    }


def assert_matches(got: float | None, expected: float, tolerance: float, what: str) -> None:
    if not math.isfinite(expected):
        assert got is None, f"{what}: reference undefined ({expected}), service gave {got}"
        return
    assert got is not None, f"{what}: service gave null, reference {expected!r}"
    assert got == pytest.approx(expected, rel=tolerance, abs=tolerance), what


@pytest.mark.parametrize("name,x", SAMPLES, ids=SAMPLE_IDS)
def test_quartile_skewness_octile_kurtosis_and_medcouple_match_statsmodels(name, x):
    got = sample(x)
    reference = _statsmodels_reference(x)
    for key, expected in reference.items():
        # Same quantiles and kernels; only the order of floating-point operations differs.
        assert_matches(got[key], expected, 1e-12, f"{name}: {key}")


def test_at_least_some_seeded_samples_have_ties_at_the_median():
    """The tie cases above really exercise the sign kernel (several values equal the median)."""
    tied = [name for name, x in SAMPLES if np.count_nonzero(x == np.median(x)) >= 3]
    assert len(tied) >= 10, tied


@pytest.mark.parametrize(
    "x,expected",
    [
        # statsmodels 0.15.0 test_statstools.py, test_medcouple_nonzero: -0.3333333.
        ([1.0, 2.0, 7.0, 9.0, 10.0], -1.0 / 3.0),
        # statsmodels 0.15.0 test_statstools.py, test_medcouple_even_hcount_regression: 1/3.
        ([1.0, 2.0, 3.0, 10.0], 1.0 / 3.0),
        # statsmodels 0.15.0 test_statstools.py, test_medcouple_ties / r_reference_ties
        # (values there attributed to R robustbase::mc 0.99.7): 1/6, -1/6 and 0.5.
        ([1.0, 2.0, 2.0, 3.0, 4.0], 1.0 / 6.0),
        ([1.0, 3.0, 5.0, 7.0, 7.0, 7.0, 8.0, 8.0, 9.0, 9.0, 9.0], -1.0 / 6.0),
        ([2.0, 2.0, 3.0, 3.0, 3.0, 4.0, 5.0, 5.0, 8.0, 10.0], 0.5),
        # statsmodels 0.15.0 test_statstools.py, test_medcouple_symmetric: 0.
        ([0.0, 1.0, 2.0, 3.0, 4.0], 0.0),
    ],
)
def test_medcouple_values_recorded_in_statsmodels_tests(x, expected):
    assert sample(x)["medcouple"] == pytest.approx(expected, abs=1e-15)
    assert float(medcouple(np.array(x), use_fast=False)) == pytest.approx(expected, abs=1e-15)


def test_medcouple_by_hand_for_one_five_point_sample():
    """[1, 2, 7, 9, 10]: median 7, z = x - 7 = (-6, -5, 0, 2, 3).

    Kernel h(l, u) = (u + l) / (u - l) on z for l <= 0 <= u: the tie (0, 0) gives 0; (0, -6) and
    (0, -5) give -1; (2, 0) and (3, 0) give +1; (2, -6) = -1/2, (2, -5) = -3/7, (3, -6) = -1/3,
    (3, -5) = -1/4. Sorted: -1, -1, -1/2, -3/7, -1/3, -1/4, 0, 1, 1: the 5th of 9 is -1/3.
    """
    assert sample([1.0, 2.0, 7.0, 9.0, 10.0])["medcouple"] == pytest.approx(-1.0 / 3.0, abs=1e-15)


def test_medcouple_where_most_values_tie_at_the_median_follows_the_kernel_definition():
    """Nine values at the median and one above: the sign kernel gives 36 values -1, 9 zeros and
    45 values +1 (the 9 pairs of the upper value with a tie, plus 36 signs): median (0 + 1)/2.

    statsmodels 0.15.0 use_fast=False agrees (0.5); its test file notes that R robustbase::mc
    returns 1 here by a different convention, which this service does not follow.
    """
    x = [1.0] * 9 + [5.0]
    assert float(medcouple(np.array(x), use_fast=False)) == 0.5
    assert sample(x)["medcouple"] == 0.5


@pytest.mark.parametrize("name,x", SAMPLES, ids=SAMPLE_IDS)
def test_count_table_equals_the_repeated_sample_for_every_robust_descriptor(name, x):
    raw = sample(x)
    values, counts = np.unique(x, return_counts=True)
    merged = table(values, counts)
    # The same table with every outcome split into rows and shuffled (rows are merged by value).
    rng = np.random.default_rng(len(x))
    rows = rng.permutation(x)
    split = table(rows, np.ones(rows.size))
    for key in ROBUST:
        for got, label in ((merged[key], "merged"), (split[key], "split rows")):
            if raw[key] is None:
                assert got is None, f"{name} {label}: {key}"
            else:
                assert got == pytest.approx(raw[key], rel=1e-12, abs=1e-14), f"{name} {label}: {key}"


def test_count_table_with_large_counts_matches_statsmodels_on_the_expanded_sample():
    rng = np.random.default_rng(77)
    values = np.sort(rng.choice(np.arange(-20.0, 21.0), size=15, replace=False))
    counts = rng.integers(1, 400, size=values.size)
    x = np.repeat(values, counts)
    got = table(values, counts)
    for key, expected in _statsmodels_reference(x).items():
        assert_matches(got[key], expected, 1e-12, key)


# ---------------------------------------------------------------------------------------------
# Half-sample mode


def naive_half_sample_mode(x) -> float:
    """Bickel & Fruhwirth (2006), written directly on the sorted observations.

    While more than three remain, keep the ceil(n/2) consecutive observations of smallest range
    (the first on ties); two remaining give their mean, three the mean of the closer pair, or the
    middle one when both gaps are equal.
    """
    y = np.sort(np.asarray(x, dtype=np.float64))
    while y.size > 3:
        half = (y.size + 1) // 2
        widths = y[half - 1 :] - y[: y.size - half + 1]
        start = int(np.argmin(widths))
        y = y[start : start + half]
    if y.size == 1:
        return float(y[0])
    if y.size == 2:
        return float((y[0] + y[1]) / 2.0)
    left, right = y[1] - y[0], y[2] - y[1]
    if left < right:
        return float((y[0] + y[1]) / 2.0)
    if left > right:
        return float((y[1] + y[2]) / 2.0)
    return float(y[1])


def test_half_sample_mode_by_hand():
    """[1, 2, 2.5, 2.6, 2.9, 5, 9, 20], checked by the definition:

    n = 8, keep 4: windows [1, 2.6] width 1.6, [2, 2.9] 0.9, [2.5, 5] 2.5, [2.6, 9] 6.4,
    [2.9, 20] 17.1; the shortest is (2, 2.5, 2.6, 2.9).
    n = 4, keep 2: [2, 2.5] 0.5, [2.5, 2.6] 0.1, [2.6, 2.9] 0.3; the shortest is (2.5, 2.6).
    n = 2: the mean, (2.5 + 2.6) / 2 = 2.55.
    """
    x = [1.0, 2.0, 2.5, 2.6, 2.9, 5.0, 9.0, 20.0]
    assert sample(x)["half_sample_mode"] == pytest.approx(2.55, abs=1e-15)
    assert naive_half_sample_mode(x) == pytest.approx(2.55, abs=1e-15)
    # Order and a table form do not matter.
    assert sample(x[::-1])["half_sample_mode"] == pytest.approx(2.55, abs=1e-15)
    assert table(x, [1.0] * len(x))["half_sample_mode"] == pytest.approx(2.55, abs=1e-15)


@pytest.mark.parametrize(
    "x,expected",
    [
        ([4.0], 4.0),
        ([1.0, 3.0], 2.0),
        ([1.0, 2.0, 10.0], 1.5),  # closer pair on the left
        ([1.0, 9.0, 10.0], 9.5),  # closer pair on the right
        ([1.0, 2.0, 3.0], 2.0),  # equal gaps: the middle value
        ([5.0, 5.0, 5.0, 5.0, 5.0], 5.0),
    ],
)
def test_half_sample_mode_of_small_samples(x, expected):
    assert sample(x)["half_sample_mode"] == expected
    assert naive_half_sample_mode(x) == expected


@pytest.mark.parametrize("name,x", SAMPLES, ids=SAMPLE_IDS)
def test_half_sample_mode_of_samples_matches_the_naive_definition(name, x):
    assert sample(x)["half_sample_mode"] == naive_half_sample_mode(x)


@pytest.mark.parametrize("seed", range(40))
def test_half_sample_mode_of_count_tables_matches_the_naive_definition_on_expanded_data(seed):
    rng = np.random.default_rng(1000 + seed)
    k = int(rng.integers(1, 25))
    if seed % 3 == 0:
        values = rng.choice(np.arange(0.0, 40.0), size=k, replace=False)  # integer support, gaps tie
    else:
        values = np.round(rng.normal(0.0, 5.0, size=k), 2)
    values = np.unique(values)
    counts = rng.integers(1, 60 if seed % 2 else 4, size=values.size)
    expanded = np.repeat(values, counts)
    got = table(values, counts)["half_sample_mode"]
    assert got == naive_half_sample_mode(expanded), (values.tolist(), counts.tolist())


def test_half_sample_mode_is_not_given_for_probabilities_or_bins():
    assert table([1.0, 2.0, 3.0], [0.2, 0.5, 0.3], probabilities=True)["half_sample_mode"] is None
    binned = values_of(run(from_bins([0.0, 1.0, 2.0, 3.0], [4.0, 9.0, 2.0]), "bins"))
    assert binned["half_sample_mode"] is None
    assert binned["medcouple"] is None


# ---------------------------------------------------------------------------------------------
# The normal value of the octile kurtosis


def _quantile_covariance(probabilities: np.ndarray) -> np.ndarray:
    """n Cov(Q_p, Q_q) = p (1 - q) / (f(x_p) f(x_q)), p <= q, for the standard normal."""
    density = stats.norm.pdf(stats.norm.ppf(probabilities))
    p, q = np.meshgrid(probabilities, probabilities, indexing="ij")
    return np.minimum(p, q) * (1.0 - np.maximum(p, q)) / np.outer(density, density)


def test_normal_octile_kurtosis_constant_equals_the_normal_quantile_formula():
    e = stats.norm.ppf(np.arange(1, 8) / 8.0)  # scipy 1.17.1 normal quantiles E1 .. E7
    formula = ((e[6] - e[4]) + (e[2] - e[0])) / (e[5] - e[1])
    assert NORMAL_OCTILE_KURTOSIS == pytest.approx(formula, rel=1e-15)
    assert round(NORMAL_OCTILE_KURTOSIS, 3) == 1.233  # Moors (1988), as published
    # statsmodels 0.15.0 expected_robust_kurtosis()[1], also the constant in its test file.
    assert NORMAL_OCTILE_KURTOSIS == pytest.approx(float(expected_robust_kurtosis()[1]), rel=1e-15)
    assert NORMAL_OCTILE_KURTOSIS == pytest.approx(1.2330951154852172, rel=1e-15)


@pytest.fixture(scope="module")
def large_normal():
    rng = np.random.default_rng(19880101)
    n = 1_000_000
    return n, sample(rng.normal(5.0, 2.0, size=n))


def test_octile_kurtosis_of_a_large_normal_sample_is_moors_value_within_sampling_error(large_normal):
    n, got = large_normal
    probabilities = np.array([1, 2, 3, 5, 6, 7]) / 8.0
    e1, e2, e3, e5, e6, e7 = stats.norm.ppf(probabilities)
    numerator, denominator = (e7 - e5) + (e3 - e1), e6 - e2
    # Delta method: gradient of ((E7 - E5) + (E3 - E1)) / (E6 - E2) in (E1, E2, E3, E5, E6, E7).
    gradient = np.array(
        [-1.0, numerator / denominator, 1.0, -1.0, -numerator / denominator, 1.0]
    ) / denominator
    sd = math.sqrt(gradient @ _quantile_covariance(probabilities) @ gradient / n)  # about 0.0018
    assert got["octile_kurtosis"] == pytest.approx(1.2331, abs=4.0 * sd)
    assert got["octile_excess_kurtosis"] == pytest.approx(0.0, abs=4.0 * sd)
    difference = got["octile_kurtosis"] - NORMAL_OCTILE_KURTOSIS
    assert got["octile_excess_kurtosis"] == pytest.approx(difference, abs=1e-15)


def test_quartile_skewness_of_a_large_normal_sample_is_zero_within_sampling_error(large_normal):
    n, got = large_normal
    probabilities = np.array([0.25, 0.5, 0.75])
    spread = stats.norm.ppf(0.75) - stats.norm.ppf(0.25)
    gradient = np.array([1.0, -2.0, 1.0]) / spread
    sd = math.sqrt(gradient @ _quantile_covariance(probabilities) @ gradient / n)
    assert got["quartile_skewness"] == pytest.approx(0.0, abs=4.0 * sd)


# ---------------------------------------------------------------------------------------------
# Invariances under x -> a + b x

SHAPE = (
    "quartile_skewness", "octile_kurtosis", "octile_excess_kurtosis", "medcouple", "l_skewness", "l_kurtosis",
)
ODD = {"quartile_skewness", "medcouple", "l_skewness"}
INVARIANCE_SAMPLES = [
    ("normal", np.random.default_rng(1).normal(size=41)),
    ("exponential", np.random.default_rng(2).exponential(size=60)),
    ("poisson", np.random.default_rng(3).poisson(4.0, size=50).astype(np.float64)),
    ("lognormal", np.random.default_rng(4).lognormal(size=101)),
    ("median-block", np.concatenate([np.random.default_rng(5).normal(size=30), np.zeros(12)])),
]


@pytest.mark.parametrize("name,x", INVARIANCE_SAMPLES, ids=[n for n, _ in INVARIANCE_SAMPLES])
@pytest.mark.parametrize("b", [2.0, 0.25, 1024.0])
def test_robust_shape_is_exactly_unchanged_by_scaling_with_a_positive_power_of_two(name, x, b):
    # Multiplying by a power of two is exact in float64, so every quantile and kernel scales exactly.
    base, scaled = sample(x), sample(b * x)
    for key in SHAPE:
        assert base[key] is not None, (name, key)
        assert scaled[key] == pytest.approx(base[key], rel=1e-13, abs=1e-15), (name, key)


@pytest.mark.parametrize("name,x", INVARIANCE_SAMPLES, ids=[n for n, _ in INVARIANCE_SAMPLES])
@pytest.mark.parametrize(
    "a,b", [(1000.5, 1.0), (-3.25, 8.0), (7.0, 0.125), (0.0, -1.0), (1000.5, -4.0), (-3.25, -0.5)]
)
def test_robust_shape_under_affine_maps_even_unchanged_odd_flip_sign_for_negative_b(name, x, a, b):
    base, mapped = sample(x), sample(a + b * x)
    for key in SHAPE:
        expected = -base[key] if (b < 0 and key in ODD) else base[key]
        # A shift rounds the data (about 1e-13 of 1000); ratios of differences keep ~1e-10.
        assert mapped[key] == pytest.approx(expected, abs=1e-9), (name, key, a, b)


# ---------------------------------------------------------------------------------------------
# Probability tables, weighted samples and bins: robust shape from their own quantiles


def inverse_cdf(values: np.ndarray, probabilities: np.ndarray, p: float) -> float:
    """Smallest value with F(x) >= p (Hyndman & Fan type 1), p never at a step in these tests."""
    cumulative = np.cumsum(probabilities) / np.sum(probabilities)
    return float(values[np.flatnonzero(cumulative >= p)[0]])


def shape_from_quantiles(q) -> tuple[float, float]:
    quartile = (q(0.75) + q(0.25) - 2.0 * q(0.5)) / (q(0.75) - q(0.25))
    octile = ((q(7 / 8) - q(5 / 8)) + (q(3 / 8) - q(1 / 8))) / (q(6 / 8) - q(2 / 8))
    return quartile, octile


def test_probability_table_robust_shape_comes_from_the_inverse_distribution_function():
    values = np.array([0.0, 1.0, 2.0, 3.0, 5.0, 8.0, 13.0])
    probabilities = np.array([0.05, 0.1, 0.2, 0.3, 0.15, 0.1, 0.1])  # F never hits k/8
    quartile, octile = shape_from_quantiles(lambda p: inverse_cdf(values, probabilities, p))
    for quantile_type in (None, 1, 2):  # no step at a quartile or octile: types 1 and 2 agree
        options = {} if quantile_type is None else {"quantile_type": quantile_type}
        got = table(values, probabilities, probabilities=True, **options)
        assert got["quartile_skewness"] == pytest.approx(quartile, rel=1e-15)
        assert got["octile_kurtosis"] == pytest.approx(octile, rel=1e-15)
        assert got["octile_excess_kurtosis"] == pytest.approx(octile - NORMAL_OCTILE_KURTOSIS, rel=1e-15)
        assert got["medcouple"] is not None and math.isfinite(got["medcouple"])


def test_fair_die_quartile_skewness_depends_on_the_population_quantile_rule():
    """A fair die: F(3) = 1/2 exactly. Type 1 takes Q2 = 3 (Q1 = 2, Q3 = 5): (5 + 2 - 6)/3 = 1/3;
    type 2 averages at the step, Q2 = 3.5: (5 + 2 - 7)/3 = 0. Octiles (1, 2, 3, 4, 5, 6 at
    k/8, none at a step) give ((6 - 4) + (3 - 1)) / (5 - 2) = 4/3 either way."""
    faces, sixth = np.arange(1.0, 7.0), np.full(6, 1.0 / 6.0)
    type1 = table(faces, sixth, probabilities=True)
    type2 = table(faces, sixth, probabilities=True, quantile_type=2)
    assert type1["quartile_skewness"] == pytest.approx(1.0 / 3.0, rel=1e-15)
    assert type2["quartile_skewness"] == pytest.approx(0.0, abs=1e-15)
    assert type1["octile_kurtosis"] == pytest.approx(4.0 / 3.0, rel=1e-15)
    assert type2["octile_kurtosis"] == pytest.approx(4.0 / 3.0, rel=1e-15)


def naive_weighted_medcouple(values: np.ndarray, weights: np.ndarray, median: float) -> float:
    """Medcouple of a distribution by enumerating every pair of support values.

    Pairs (l, u) with l <= m <= u carry weight w_l w_u and kernel ((u - m) + (l - m)) / (u - l);
    a tie paired with a value below the median gives -1, above it +1; the block of pairs of
    median ties (weight T^2) is split evenly between -1 and +1 (Brys et al. 2004, definition 2,
    for a distribution, as the service documents). The result is the smallest kernel value with
    at least half of the pair weight at or below it.
    """
    z = values - median
    lower, upper = z <= 0, z >= 0
    kernels, pair_weights = [], []
    for zl, wl in zip(z[lower], weights[lower]):
        for zu, wu in zip(z[upper], weights[upper]):
            if zl == 0.0 and zu == 0.0:
                kernels += [-1.0, 1.0]
                pair_weights += [0.5 * wl * wu, 0.5 * wl * wu]
            else:
                kernels.append((zu + zl) / (zu - zl))
                pair_weights.append(wl * wu)
    kernels, pair_weights = np.array(kernels), np.array(pair_weights)
    order = np.argsort(kernels, kind="stable")
    cumulative = np.cumsum(pair_weights[order])
    index = int(np.searchsorted(cumulative, 0.5 * cumulative[-1] * (1.0 - 1e-12), side="left"))
    return float(kernels[order][index])


def test_fair_die_medcouple_by_the_weighted_pair_definition():
    """Median 3, T = 1/6. Pair weights (in 1/36): -1 from ties x {1, 2} (2) and half the tie block
    (1/2); kernels -1/3 (4, 1), 0 (4, 2) and (5, 1), 1/5 (6, 1), 1/3 (5, 2), 1/2 (6, 2), 1 each;
    +1 from {4, 5, 6} x ties (3) and half the block. Total 12; the cumulative weight reaches 6 at
    1/5 (2.5, 3.5, 5.5, 6.5)."""
    faces, sixth = np.arange(1.0, 7.0), np.full(6, 1.0 / 6.0)
    assert naive_weighted_medcouple(faces, sixth, 3.0) == pytest.approx(0.2, abs=1e-15)
    assert table(faces, sixth, probabilities=True)["medcouple"] == pytest.approx(0.2, abs=1e-15)


@pytest.mark.parametrize("seed", range(12))
def test_probability_table_medcouple_matches_the_naive_weighted_definition(seed):
    rng = np.random.default_rng(500 + seed)
    k = int(rng.integers(3, 40))
    values = np.unique(np.round(rng.exponential(3.0, size=k), 1))
    probabilities = rng.dirichlet(np.ones(values.size))
    got = table(values, probabilities, probabilities=True)
    median = inverse_cdf(values, probabilities, 0.5)
    expected = naive_weighted_medcouple(values, probabilities, median)
    assert got["medcouple"] == pytest.approx(expected, abs=1e-14)


def test_weighted_sample_with_fractional_frequency_weights_uses_weighted_quantiles():
    rng = np.random.default_rng(606)
    values = np.sort(rng.normal(size=25))
    weights = rng.uniform(0.1, 3.0, size=25)
    data = from_samples(
        values.tolist(), omit_missing=False, weights=weights.tolist(), meaning=WeightMeaning.FREQUENCY
    )
    got = values_of(run(data, "samples"))

    def averaged_inverse_cdf(p: float) -> float:  # type 2: average where F = p exactly (never here)
        return inverse_cdf(values, weights, p)

    quartile, octile = shape_from_quantiles(averaged_inverse_cdf)
    assert got["quartile_skewness"] == pytest.approx(quartile, rel=1e-13)
    assert got["octile_kurtosis"] == pytest.approx(octile, rel=1e-13)
    assert got["medcouple"] is not None and math.isfinite(got["medcouple"])


@pytest.mark.parametrize("seed", range(6))
def test_bins_robust_shape_comes_from_the_grouped_quantiles(seed):
    rng = np.random.default_rng(900 + seed)
    inner = np.sort(rng.uniform(0.0, 20.0, size=int(rng.integers(3, 15))))
    edges = np.concatenate(([0.0], inner, [21.0]))  # unequal widths
    counts = rng.integers(1, 50, size=edges.size - 1).astype(np.float64)  # every bin occupied
    got = values_of(run(from_bins(edges.tolist(), counts.tolist()), "bins"))
    cumulative = np.concatenate(([0.0], np.cumsum(counts))) / np.sum(counts)

    def grouped_quantile(p: float) -> float:  # even spread within each bin: interpolate F^-1
        return float(np.interp(p, cumulative, edges))

    quartile, octile = shape_from_quantiles(grouped_quantile)
    assert got["quartile_skewness"] == pytest.approx(quartile, rel=1e-12, abs=1e-14)
    assert got["octile_kurtosis"] == pytest.approx(octile, rel=1e-12)
    excess = octile - NORMAL_OCTILE_KURTOSIS
    assert got["octile_excess_kurtosis"] == pytest.approx(excess, rel=1e-12, abs=1e-14)


def test_medcouple_of_tied_heavy_tailed_samples_matches_statsmodels_exact():
    # Reference: statsmodels.stats.stattools.medcouple(use_fast=False), the O(n^2) definition.
    # Rounded t(2) samples of 20-300 values: ties at and around the median, and (in several
    # of these seeded cases) the two middle kernel values parting during the bisection.
    from tailgauge.core import robust

    rng = np.random.default_rng(0)
    for case in range(400):
        n = int(rng.integers(20, 300))
        x = np.sort(np.round(rng.standard_t(2, n), int(rng.integers(0, 3))))
        got = robust.medcouple(x, None, float(np.median(x)))
        assert got == pytest.approx(float(medcouple(x, use_fast=False)), abs=1e-12), case
