"""Normality evidence: D'Agostino's skewness test, Anscombe & Glynn's kurtosis test, the omnibus K^2
and Jarque & Bera, against scipy 1.17.1 (``scipy.stats.skewtest``, ``kurtosistest``,
``normaltest``, ``jarque_bera``, all two-sided) on the same data.

One documented difference: for an exactly symmetric sample (g1 = 0, so D'Agostino's Y = 0)
scipy replaces Y = 0 by 1 before the transform Z = delta asinh(Y / alpha) (``y = xp.where(y == 0,
1., y)`` in scipy/stats/_stats_py.py, 1.17.1), while the published formula (R. B. D'Agostino,
Biometrika 57, 679-681, 1970) gives Z = 0, which the service returns.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
from scipy import stats

from tailgauge.core import DescribeOptions, describe, from_array, from_bins, from_samples, from_table
from tailgauge.core.normality import MINIMUM_N, skewness_z

TESTS = ("skewness_test", "kurtosis_test", "omnibus_k2", "jarque_bera")


def normality_of(data, kind: str) -> dict:
    result = describe(data, DescribeOptions(), kind=kind)
    assert [t.test for t in result.normality] == list(TESTS)
    return {t.test: t for t in result.normality}, {w.code for w in result.warnings}


def of_sample(x):
    return normality_of(from_array(np.asarray(x, dtype=np.float64)), "samples")[0]


def scipy_reference(x: np.ndarray) -> dict:
    with warnings.catch_warnings():
        # scipy warns that kurtosistest (and normaltest) are inaccurate for n < 20.
        warnings.simplefilter("ignore", UserWarning)
        return {
            "skewness_test": stats.skewtest(x),
            "kurtosis_test": stats.kurtosistest(x),
            "omnibus_k2": stats.normaltest(x),
            "jarque_bera": stats.jarque_bera(x),
        }


def assert_same_as_scipy(got: dict, reference: dict, label: str) -> None:
    for name in TESTS:
        test, expected = got[name], reference[name]
        assert test.reason is None, (label, name, test.reason)
        assert test.statistic == pytest.approx(float(expected.statistic), rel=1e-10, abs=1e-12), (label, name)
        assert test.p_value == pytest.approx(float(expected.pvalue), rel=1e-8, abs=1e-300), (label, name)


def _seeded_samples() -> list[tuple[str, np.ndarray]]:
    rng = np.random.default_rng(19700101)
    cases = []
    for n in (8, 9, 10, 15, 19, 20, 21, 50, 200, 1000, 5000):
        cases.append((f"normal-{n}", rng.normal(1.0, 2.0, size=n)))
        cases.append((f"exponential-{n}", rng.exponential(size=n)))
        cases.append((f"uniform-{n}", rng.uniform(size=n)))  # light tails: negative kurtosis z
        cases.append((f"student-t4-{n}", rng.standard_t(4, size=n)))
    for n in (30, 500, 5000):
        cases.append((f"poisson-{n}", rng.poisson(5.0, size=n).astype(np.float64)))  # ties
    return cases


SAMPLES = _seeded_samples()


@pytest.mark.parametrize("name,x", SAMPLES, ids=[n for n, _ in SAMPLES])
def test_statistics_and_p_values_match_scipy(name, x):
    # The published formula and scipy's differ only at g1 == 0 exactly (see the module note).
    assert stats.skew(x) != 0.0
    assert_same_as_scipy(of_sample(x), scipy_reference(x), name)


def test_the_samples_cover_small_and_large_p_values_and_both_signs():
    """The comparison above is not only of p-values near 1: it spans both rejection and not."""
    p_values = [of_sample(x)["omnibus_k2"].p_value for _, x in SAMPLES]
    z_kurt = [of_sample(x)["kurtosis_test"].statistic for _, x in SAMPLES]
    assert min(p_values) < 1e-10 and max(p_values) > 0.3
    assert min(z_kurt) < -2.0 and max(z_kurt) > 2.0


def _table_cases() -> list[tuple[str, np.ndarray, np.ndarray]]:
    rng = np.random.default_rng(1973)
    cases = []
    # A discretized normal with an off-grid centre: nearly normal, so p-values are not all 0.
    grid = np.round(np.arange(-40, 41) * 0.1, 1)
    counts = np.round(1e6 * 0.1 * stats.norm.pdf(grid, loc=0.003, scale=1.0)).astype(np.int64)
    keep = counts > 0
    cases.append(("discretized-normal-1e6", grid[keep], counts[keep]))
    for seed in range(3):
        values = np.unique(np.round(rng.gamma(4.0, size=25), 1))
        counts = rng.integers(1, 200, size=values.size)
        cases.append((f"gamma-table-{seed}", values, counts))
    cases.append(("small-table", np.array([1.0, 2.0, 4.0]), np.array([3, 4, 2])))  # n = 9
    return cases


TABLES = _table_cases()


@pytest.mark.parametrize("name,values,counts", TABLES, ids=[c[0] for c in TABLES])
def test_count_tables_equal_the_repeated_sample(name, values, counts):
    got, _ = normality_of(
        from_table(values, counts.astype(np.float64), probabilities=False, normalise=False), "table"
    )
    expanded = np.repeat(values, counts)  # only the reference expands the table
    assert_same_as_scipy(got, scipy_reference(expanded), name)


def test_the_discretized_normal_table_gives_non_trivial_p_values():
    _, values, counts = TABLES[0]
    data = from_table(values, counts.astype(np.float64), probabilities=False, normalise=False)
    got, _ = normality_of(data, "table")
    assert int(counts.sum()) > 900_000
    for name in ("skewness_test", "omnibus_k2", "jarque_bera"):
        assert 0.001 < got[name].p_value < 0.999, (name, got[name])


# ---------------------------------------------------------------------------------------------
# Minimum sample sizes


def test_minimum_sizes_and_references_are_reported():
    assert MINIMUM_N == {"skewness_test": 8, "kurtosis_test": 5, "omnibus_k2": 8, "jarque_bera": 2}
    got = of_sample(np.random.default_rng(2).normal(size=30))
    for name in TESTS:
        assert got[name].minimum_n == MINIMUM_N[name]
        assert got[name].reference


@pytest.mark.parametrize("n", [2, 3, 4, 5, 6, 7, 8])
def test_below_its_minimum_a_test_is_null_with_a_reason(n):
    x = np.random.default_rng(100 + n).exponential(size=n)
    got = of_sample(x)
    for name in TESTS:
        test = got[name]
        if n < MINIMUM_N[name]:
            assert test.statistic is None and test.p_value is None, (n, name)
            assert test.reason is not None and str(MINIMUM_N[name]) in test.reason, (n, name, test.reason)
        else:
            assert test.reason is None and test.statistic is not None, (n, name)
    # Those that are computed agree with scipy 1.17.1 even at these sizes.
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        jb = stats.jarque_bera(x)
        assert got["jarque_bera"].statistic == pytest.approx(float(jb.statistic), rel=1e-10)
        assert got["jarque_bera"].p_value == pytest.approx(float(jb.pvalue), rel=1e-8)
        if n >= 5:
            kt = stats.kurtosistest(x)
            assert got["kurtosis_test"].statistic == pytest.approx(float(kt.statistic), rel=1e-10)
            assert got["kurtosis_test"].p_value == pytest.approx(float(kt.pvalue), rel=1e-8)
        else:
            # scipy 1.17.1 also refuses n < 5: it warns (a RuntimeWarning subclass) and gives NaN.
            with pytest.warns(RuntimeWarning, match="too small"):
                assert math.isnan(stats.kurtosistest(x).statistic)
        if n < 8:
            with pytest.warns(RuntimeWarning, match="too small"):
                assert math.isnan(stats.skewtest(x).statistic)  # and n < 8 for skewtest


def test_count_table_below_the_minimum_uses_the_total_count():
    values, counts = np.array([1.0, 2.0, 5.0]), np.array([3.0, 2.0, 2.0])
    data = from_table(values, counts, probabilities=False, normalise=False)
    got, _ = normality_of(data, "table")  # n = 7
    assert got["skewness_test"].statistic is None and "8" in got["skewness_test"].reason
    assert got["omnibus_k2"].statistic is None
    expanded = np.repeat([1.0, 2.0, 5.0], [3, 2, 2])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        expected = float(stats.kurtosistest(expanded).statistic)
    assert got["kurtosis_test"].statistic == pytest.approx(expected, rel=1e-10)


def test_a_single_observation_gives_no_tests_with_a_reason():
    got = of_sample([3.0])
    for name in TESTS:
        assert got[name].statistic is None and got[name].p_value is None and got[name].reason


def test_small_samples_carry_the_small_sample_warning():
    _, codes = normality_of(from_array(np.random.default_rng(3).normal(size=19)), "samples")
    assert "normality_small_sample" in codes
    _, codes = normality_of(from_array(np.random.default_rng(3).normal(size=20)), "samples")
    assert "normality_small_sample" not in codes


@pytest.mark.parametrize(
    "data,kind",
    [
        (lambda: from_table(np.array([0.0, 1.0, 2.0]), np.array([0.2, 0.5, 0.3]),
                            probabilities=True, normalise=False), "table"),
        (lambda: from_bins([0.0, 1.0, 2.0, 3.0], [10.0, 30.0, 5.0]), "bins"),
        (lambda: from_samples([1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 9.0, 12.0], omit_missing=False,
                              weights=[0.5, 1.5, 1.0, 2.0, 1.0, 1.0, 1.0, 3.0, 1.0]), "samples"),
    ],
    ids=["probabilities", "bins", "fractional-weights"],
)
def test_no_tests_for_distributions_bins_or_fractional_weights(data, kind):
    got, _ = normality_of(data(), kind)
    for name in TESTS:
        assert got[name].statistic is None and got[name].reason, name


# ---------------------------------------------------------------------------------------------
# The exactly symmetric sample: published formula versus scipy's replacement of Y = 0

SYMMETRIC = np.arange(1.0, 9.0)  # the sample of scipy's documented skewtest example
SCIPY_DOCUMENTED_Z = 1.0108048609177787  # scipy 1.17.1 docs: skewtest([1, 2, 3, 4, 5, 6, 7, 8])


def test_exactly_symmetric_sample_gives_z_zero_by_the_published_formula():
    assert stats.skew(SYMMETRIC) == 0.0  # g1 = 0 exactly, so Y = 0 and Z = delta asinh(0) = 0
    got = of_sample(SYMMETRIC)["skewness_test"]
    assert got.statistic == 0.0
    assert got.p_value == 1.0


def test_scipys_documented_value_is_the_formula_at_y_equal_one():
    """scipy's 1.0108... is D'Agostino's transform evaluated at Y = 1 instead of Y = 0.

    Y = g1 sqrt((n + 1)(n + 3) / (6 (n - 2))), so Y = 1 at g1 = 1 / sqrt((n + 1)(n + 3) / (6 (n - 2))).
    """
    n = 8.0
    assert float(stats.skewtest(SYMMETRIC).statistic) == SCIPY_DOCUMENTED_Z  # still scipy's value
    g1_at_y_one = 1.0 / math.sqrt((n + 1.0) * (n + 3.0) / (6.0 * (n - 2.0)))
    assert skewness_z(g1_at_y_one, n) == pytest.approx(SCIPY_DOCUMENTED_Z, rel=1e-14)
    # Independently of the service's formula, from the published constants (D'Agostino 1970):
    beta2 = (
        3.0 * (n * n + 27.0 * n - 70.0) * (n + 1.0) * (n + 3.0)
        / ((n - 2.0) * (n + 5.0) * (n + 7.0) * (n + 9.0))
    )
    w2 = -1.0 + math.sqrt(2.0 * (beta2 - 1.0))
    delta, alpha = 1.0 / math.sqrt(0.5 * math.log(w2)), math.sqrt(2.0 / (w2 - 1.0))
    assert delta * math.asinh(1.0 / alpha) == pytest.approx(SCIPY_DOCUMENTED_Z, rel=1e-14)
    assert delta * math.asinh(0.0 / alpha) == 0.0


def test_almost_symmetric_sample_agrees_with_scipy():
    x = np.array([1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 8.001])
    got = of_sample(x)["skewness_test"]
    expected = stats.skewtest(x)
    # g1 here is a cancellation (about 1e-4 of its terms), so agreement is absolute, to 1e-12.
    assert got.statistic == pytest.approx(float(expected.statistic), abs=1e-12)
    assert got.statistic != 0.0
    assert got.p_value == pytest.approx(float(expected.pvalue), abs=1e-12)


def test_count_tables_too_large_to_expand_scale_jarque_bera_with_n():
    """Multiplying every count by k leaves g1 and b2 unchanged, so JB = n/6 (g1^2 + (b2 - 3)^2/4)
    grows by exactly k. With k = 1e9 the table holds about 1e12 observations (8 TB expanded)."""
    values = np.array([-1.0, 0.0, 0.5, 2.0, 3.5])
    counts = np.array([40.0, 310.0, 420.0, 200.0, 30.0])
    small, _ = normality_of(from_table(values, counts, probabilities=False, normalise=False), "table")
    huge, _ = normality_of(from_table(values, counts * 1e9, probabilities=False, normalise=False), "table")
    assert huge["jarque_bera"].statistic == pytest.approx(1e9 * small["jarque_bera"].statistic, rel=1e-9)
    assert all(huge[name].statistic is not None for name in TESTS)


def test_tail_probabilities_equal_scipys_distribution_objects_exactly():
    """The p-values skip scipy's distribution objects (their argument handling cost about 30 us a
    call at n = 100); the special functions underneath give the same doubles."""
    from tailgauge.core.normality import chi_square_2_upper, two_sided_normal

    rng = np.random.default_rng(16)
    z = np.concatenate((rng.normal(0.0, 3.0, 2000), [0.0, -0.0, 1e-300, 8.0, -8.0, 37.5, -40.0, 1e10, np.inf]))
    x = np.concatenate((rng.exponential(40.0, 2000), [0.0, 5e-324, 1e-12, 700.0, 1400.0, 1490.0, 1e10, np.inf]))
    assert [two_sided_normal(v) for v in z] == [float(2.0 * stats.norm.sf(abs(v))) for v in z]
    assert [chi_square_2_upper(v) for v in x] == [float(stats.chi2.sf(v, 2)) for v in x]
    assert math.isnan(two_sided_normal(math.nan)) and math.isnan(chi_square_2_upper(math.nan))
    # Both tails are exercised: tiny p-values (not rounded to zero) and p = 1.
    assert 0.0 < two_sided_normal(37.5) < 1e-300 and chi_square_2_upper(0.0) == 1.0
