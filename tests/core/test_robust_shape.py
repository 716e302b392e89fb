"""Robust shape, L-moments and normality tests against outside references.

References: statsmodels 0.15 (robust_skewness, robust_kurtosis, medcouple with use_fast=False,
the exact O(n^2) definition); scipy 1.17 (lmoment, skewtest, kurtosistest, normaltest,
jarque_bera); lmoments3 1.0.8 (lmom_ratios); Hosking (1990) theoretical L-moment ratios;
Moors (1988) for the octile kurtosis of the normal.
"""

import math
import warnings

import lmoments3
import numpy as np
import pytest
import scipy.stats as st
from statsmodels.stats.stattools import medcouple as sm_medcouple
from statsmodels.stats.stattools import robust_kurtosis, robust_skewness

from service.core import DescribeOptions, describe, from_array, from_table
from service.core import normality
from service.core.describe import NORMAL_OCTILE_KURTOSIS


def describe_values(x, **options):
    return describe(from_array(np.asarray(x, dtype=float)), DescribeOptions(**options), kind="samples")


def value(result, name):
    return result.descriptors[name].value


def seeded_samples():
    rng = np.random.default_rng(20261205)
    yield rng.normal(10, 2, 51)
    yield rng.lognormal(0, 1, 200)
    yield np.round(rng.exponential(3, 120))  # heavy ties, integer data
    yield np.concatenate([np.full(9, 5.0), rng.normal(5, 1, 30)])  # ties at the median
    yield rng.standard_t(3, 64)


@pytest.mark.parametrize("x", list(seeded_samples()))
def test_quartile_skewness_and_octile_kurtosis_match_statsmodels(x):
    result = describe_values(x)
    # statsmodels: SK2 is Bowley's quartile skewness, KR2 Moors' octile kurtosis minus its normal value;
    # both from numpy percentiles (Hyndman & Fan type 7, our default).
    with warnings.catch_warnings():
        # statsmodels' other measures (KR3, KR4: means of tails) warn on heavily tied data.
        warnings.simplefilter("ignore", RuntimeWarning)
        sk2 = robust_skewness(x)[1]
        kr2 = robust_kurtosis(x)[1]
    assert value(result, "quartile_skewness") == pytest.approx(sk2, rel=1e-12, abs=1e-12)
    assert value(result, "octile_excess_kurtosis") == pytest.approx(kr2, rel=1e-9, abs=1e-9)


@pytest.mark.parametrize("x", list(seeded_samples()))
def test_medcouple_matches_the_exact_definition(x):
    expected = float(sm_medcouple(x, use_fast=False))
    assert value(describe_values(x), "medcouple") == pytest.approx(expected, rel=1e-12, abs=1e-12)


def test_medcouple_recorded_values():
    # Values recorded in statsmodels' own tests.
    assert value(describe_values([1, 2, 7, 9, 10]), "medcouple") == pytest.approx(-1 / 3, abs=1e-15)
    assert value(describe_values([1, 2, 3, 10]), "medcouple") == pytest.approx(1 / 3, abs=1e-15)


def test_robust_shape_of_a_count_table_equals_the_repeated_sample():
    rng = np.random.default_rng(3)
    values = np.unique(np.round(rng.normal(50, 8, 40)))
    counts = rng.integers(1, 30, values.size).astype(float)
    table = describe(from_table(values, counts, probabilities=False, normalise=False), DescribeOptions(), kind="table")
    repeated = describe_values(np.repeat(values, counts.astype(int)))
    for name in ("quartile_skewness", "octile_kurtosis", "medcouple", "half_sample_mode"):
        assert value(table, name) == pytest.approx(value(repeated, name), rel=1e-12, abs=1e-12), name


def test_half_sample_mode_worked_example():
    # By the definition: n = 8 keeps 4 consecutive values spanning the least: [2, 2.9] (0.9);
    # n = 4 keeps 2: [2.5, 2.6] (0.1); two remain, so the mode is their mean, 2.55.
    assert value(describe_values([1, 2, 2.5, 2.6, 2.9, 5, 9, 20]), "half_sample_mode") == pytest.approx(2.55)


def test_octile_kurtosis_of_the_normal():
    e = st.norm.ppf(np.arange(1, 8) / 8)
    assert NORMAL_OCTILE_KURTOSIS == pytest.approx(((e[6] - e[4]) + (e[2] - e[0])) / (e[5] - e[1]), rel=1e-15)
    assert NORMAL_OCTILE_KURTOSIS == pytest.approx(1.2330951, abs=1e-7)  # Moors (1988)
    x = np.random.default_rng(8).normal(0, 1, 1_000_000)
    # Sampling sd of the octile kurtosis at n = 1e6 is about 1e-3; 5e-3 is five of them.
    assert value(describe_values(x), "octile_kurtosis") == pytest.approx(1.2331, abs=5e-3)


@pytest.mark.parametrize("x", list(seeded_samples()))
def test_l_moments_match_scipy_and_lmoments3(x):
    result = describe_values(x)
    l1, l2, t3, t4 = st.lmoment(x, order=[1, 2, 3, 4])  # scipy: unbiased, t3 and t4 standardized
    assert value(result, "l_location") == pytest.approx(l1, rel=1e-12)
    assert value(result, "l_scale") == pytest.approx(l2, rel=1e-10)
    assert value(result, "l_skewness") == pytest.approx(t3, rel=1e-9, abs=1e-12)
    assert value(result, "l_kurtosis") == pytest.approx(t4, rel=1e-9, abs=1e-12)
    ratios = lmoments3.lmom_ratios(list(x), nmom=4)
    assert value(result, "l_skewness") == pytest.approx(ratios[2], rel=1e-9, abs=1e-12)


def test_l_moments_worked_example_and_theoretical_limits():
    result = describe_values([1, 2, 3, 4, 10])
    assert value(result, "l_location") == pytest.approx(4.0)
    assert value(result, "l_scale") == pytest.approx(2.0)
    assert value(result, "l_skewness") == pytest.approx(0.5)
    assert value(result, "l_kurtosis") == pytest.approx(0.5)
    rng = np.random.default_rng(9)
    # Hosking (1990): normal t4 = 0.1226; exponential t3 = 1/3, t4 = 1/6. At n = 2e5 the sampling
    # sd of t3 and t4 is about 2e-3, so 1e-2 is a safe bound.
    normal = describe_values(rng.normal(0, 1, 200_000))
    assert value(normal, "l_kurtosis") == pytest.approx(0.1226, abs=1e-2)
    exponential = describe_values(rng.exponential(1, 200_000))
    assert value(exponential, "l_skewness") == pytest.approx(1 / 3, abs=1e-2)
    assert value(exponential, "l_kurtosis") == pytest.approx(1 / 6, abs=1e-2)


@pytest.mark.parametrize("n", [8, 20, 57, 500, 5000])
def test_normality_tests_match_scipy(n):
    x = np.random.default_rng(n).gamma(4, 1, n)
    tests = {t.test: t for t in describe_values(x).normality}
    for name, reference in (
        ("skewness_test", st.skewtest(x)),
        ("kurtosis_test", st.kurtosistest(x)),
        ("omnibus_k2", st.normaltest(x)),
        ("jarque_bera", st.jarque_bera(x)),
    ):
        assert tests[name].statistic == pytest.approx(reference.statistic, rel=1e-10), name
        assert tests[name].p_value == pytest.approx(reference.pvalue, rel=1e-8, abs=1e-300), name


def test_normality_of_a_count_table_needs_no_expansion():
    values = np.array([1.0, 2.0, 3.0, 5.0, 8.0])
    counts = np.array([3.0, 9.0, 5.0, 2.0, 1.0])
    table = describe(from_table(values, counts, probabilities=False, normalise=False), DescribeOptions(), kind="table")
    repeated = np.repeat(values, counts.astype(int))
    got = {t.test: t for t in table.normality}
    assert got["omnibus_k2"].statistic == pytest.approx(st.normaltest(repeated).statistic, rel=1e-10)


def test_below_the_minimum_n_the_tests_are_null_with_a_reason():
    tests = {t.test: t for t in describe_values([1.0, 2.0, 4.0, 7.0, 11.0, 3.0]).normality}
    assert tests["skewness_test"].statistic is None and "at least 8" in tests["skewness_test"].reason
    assert tests["kurtosis_test"].statistic is not None  # n = 6 >= 5


def test_symmetric_sample_has_skewness_z_zero_where_scipy_substitutes_one():
    # scipy's documented example skewtest([1..8]) gives 1.0108048609177787, but g1 = 0 there and
    # D'Agostino's Z = delta * asinh(Y / alpha) is 0 at Y = 0; scipy replaces Y = 0 by 1 first.
    x = [1, 2, 3, 4, 5, 6, 7, 8]
    tests = {t.test: t for t in describe_values(x).normality}
    assert tests["skewness_test"].statistic == 0.0
    n = 8
    g1_with_y_one = 1.0 / math.sqrt(((n + 1) * (n + 3)) / (6.0 * (n - 2)))
    assert normality.skewness_z(g1_with_y_one, n) == pytest.approx(1.0108048609177787, rel=1e-14)
    assert st.skewtest(x).statistic == pytest.approx(1.0108048609177787, rel=1e-14)
    nearly = [1, 2, 3, 4, 5, 6, 7, 8.001]
    ours = {t.test: t for t in describe_values(nearly).normality}["skewness_test"].statistic
    assert ours == pytest.approx(st.skewtest(nearly).statistic, rel=1e-12)
