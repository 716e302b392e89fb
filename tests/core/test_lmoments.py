"""L-moments (l_location, l_scale, l_skewness, l_kurtosis) of samples, count tables, distributions and bins.

Outside references, each named beside its check:

* scipy 1.17.1 ``scipy.stats.lmoment`` (default: the unbiased sample estimator, ratios for
  orders 3 and 4) and lmoments3 1.0.8 ``lmoments3.lmom_ratios`` (l1, l2, t3, t4);
* J. R. M. Hosking, "L-moments: analysis and estimation of distributions using linear
  combinations of order statistics", JRSS-B 52(1), 105-124, 1990: theoretical values for the
  normal (t3 = 0, t4 = 30 arctan(sqrt 2)/pi - 9 = 0.1226), exponential (l1 = 1, l2 = 1/2,
  t3 = 1/3, t4 = 1/6) and uniform on [0, 1] (l1 = 1/2, l2 = 1/6, t3 = t4 = 0) distributions,
  and the definition lambda_r = integral_0^1 x(u) P*_{r-1}(u) du with the shifted Legendre
  polynomials P*_0 = 1, P*_1 = 2u - 1, P*_2 = 6u^2 - 6u + 1, P*_3 = 20u^3 - 30u^2 + 12u - 1,
  evaluated below in exact rational arithmetic for discrete distributions.
"""

from __future__ import annotations

import math
from fractions import Fraction

import lmoments3
import numpy as np
import pytest
from scipy import stats

from tailgauge.core import DescribeOptions, describe, from_array, from_bins, from_table

NAMES = ("l_location", "l_scale", "l_skewness", "l_kurtosis")


def lmoments_of(data, kind: str) -> tuple[float, float, float, float]:
    result = describe(data, DescribeOptions(), kind=kind)
    found = tuple(result.descriptors[name].value for name in NAMES)
    assert all(v is not None for v in found), found
    return found  # type: ignore[return-value]


def sample_lmoments(x) -> tuple[float, float, float, float]:
    return lmoments_of(from_array(np.asarray(x, dtype=np.float64)), "samples")


def table_lmoments(values, weights, *, probabilities=False) -> tuple[float, float, float, float]:
    data = from_table(
        np.asarray(values, dtype=np.float64), np.asarray(weights, dtype=np.float64),
        probabilities=probabilities, normalise=False,
    )
    return lmoments_of(data, "table")


def _seeded_samples() -> list[tuple[str, np.ndarray]]:
    rng = np.random.default_rng(19900101)
    cases = []
    for n in (4, 5, 6, 7, 10, 33, 100, 1001, 3000):
        cases.append((f"normal-{n}", rng.normal(-2.0, 4.0, size=n)))
        cases.append((f"exponential-{n}", rng.exponential(3.0, size=n)))
    for n in (8, 50, 500):
        cases.append((f"gumbel-{n}", rng.gumbel(size=n)))
        cases.append((f"poisson-{n}", rng.poisson(2.0, size=n).astype(np.float64)))  # ties
        cases.append((f"pareto-{n}", rng.pareto(1.5, size=n)))  # heavy right tail
        cases.append((f"rounded-{n}", np.round(rng.normal(size=n), 1)))
    return cases


SAMPLES = _seeded_samples()


@pytest.mark.parametrize("name,x", SAMPLES, ids=[n for n, _ in SAMPLES])
def test_sample_lmoments_match_scipy_lmoment_and_lmoments3(name, x):
    got = sample_lmoments(x)
    scipy_values = stats.lmoment(x)  # scipy 1.17.1: l1, l2, t3, t4, unbiased
    lm3_values = lmoments3.lmom_ratios(x, nmom=4)  # lmoments3 1.0.8: l1, l2, t3, t4
    for label, g, s, m in zip(NAMES, got, scipy_values, lm3_values):
        assert g == pytest.approx(float(s), rel=1e-11, abs=1e-13), (name, label, "scipy")
        assert g == pytest.approx(float(m), rel=1e-9, abs=1e-12), (name, label, "lmoments3")


def test_lmoments_of_a_small_sample_by_hand():
    """x = (1, 2, 3, 4, 10): b0 = 4, b1 = (1*2 + 2*3 + 3*4 + 4*10)/(5*4) = 3 (weights (j-1)/(n-1)),
    b2 = (1*3 + 3*4 + 6*10)/(5*6) = 2.5, b3 = (1*4 + 4*10)/(5*4) = 2.2 (weights C(j-1, r)/C(n-1, r)).
    l1 = 4, l2 = 2 b1 - b0 = 2, l3 = 6 b2 - 6 b1 + b0 = 1, l4 = 20 b3 - 30 b2 + 12 b1 - b0 = 1:
    t3 = t4 = 1/2 (scipy 1.17.1 lmoment gives the same)."""
    got = sample_lmoments([1.0, 2.0, 3.0, 4.0, 10.0])
    assert got == pytest.approx((4.0, 2.0, 0.5, 0.5), rel=1e-13)
    reference = tuple(stats.lmoment(np.array([1.0, 2.0, 3.0, 4.0, 10.0])))
    assert reference == pytest.approx((4.0, 2.0, 0.5, 0.5), rel=1e-13)


@pytest.mark.parametrize("seed", range(4))
def test_count_tables_with_a_million_observations_equal_the_repeated_sample(seed):
    rng = np.random.default_rng(4000 + seed)
    values = np.unique(np.round(rng.lognormal(1.0, 0.8, size=40), 2))
    counts = rng.multinomial(1_000_000, rng.dirichlet(np.ones(values.size)))
    values, counts = values[counts > 0], counts[counts > 0]
    # The repeat of sorted distinct values is sorted: scipy need not sort a million values.
    reference = stats.lmoment(np.repeat(values, counts), sorted=True)
    got = table_lmoments(values, counts)
    for label, g, r in zip(NAMES, got, reference):
        assert g == pytest.approx(float(r), rel=1e-10, abs=1e-12), label


def test_count_table_with_a_trillion_observations_needs_no_expansion():
    """Counts totalling 1.6e12 (12.8 TB if expanded): the unbiased estimators then differ from
    the population L-moments of the same proportions only by O(1/n) = O(1e-12)."""
    values = np.array([-4.0, 0.0, 1.5, 2.0, 7.0, 30.0])
    counts = np.array([3.0, 1.0, 4.0, 1.0, 5.0, 2.0]) * 1e11
    got = table_lmoments(values, counts)
    population = table_lmoments(values, counts / counts.sum(), probabilities=True)
    assert got == pytest.approx(population, rel=1e-9, abs=1e-10)
    # The population values themselves: the quantile-function integral in exact rationals.
    assert population == pytest.approx(exact_discrete(values, counts / counts.sum()), rel=1e-12, abs=1e-14)


# ---------------------------------------------------------------------------------------------
# Large samples against Hosking's theoretical values
#
# Sampling error: n Var(t3) and n Var(t4) were estimated by simulation while writing this test
# (2000 samples of n = 1000, numpy default_rng(5), scipy.stats.lmoment): normal 0.198 and 0.090
# (Hosking 1990 gives the asymptotic 0.1866 and 0.0883), exponential 0.244 and 0.219. The
# tolerances are five standard errors computed with the rounded-up value 0.25 / n.

LARGE_N = 200_000
FIVE_SE = 5.0 * math.sqrt(0.25 / LARGE_N)  # 0.0056


def test_large_normal_sample_has_hosking_normal_l_kurtosis():
    x = np.random.default_rng(90).normal(3.0, 2.0, size=LARGE_N)
    l1, l2, t3, t4 = sample_lmoments(x)
    tau4 = 30.0 / math.pi * math.atan(math.sqrt(2.0)) - 9.0
    assert tau4 == pytest.approx(0.1226, abs=5e-5)  # Hosking (1990), table of L-moment ratios
    assert t4 == pytest.approx(tau4, abs=FIVE_SE)
    assert t3 == pytest.approx(0.0, abs=FIVE_SE)
    # l2 of N(mu, sigma) is sigma / sqrt(pi) (Hosking 1990). l2 is the U-statistic of the kernel
    # h = |X1 - X2| / 2, with Var h = sigma^2 (2 - 4/pi) / 4; for a degree-2 U-statistic
    # Var(U) ~ 4 zeta1 / n <= 2 Var(h) / n, which bounds its standard error.
    l2_se = math.sqrt(2.0 * 4.0 * (2.0 - 4.0 / math.pi) / 4.0 / LARGE_N)
    assert l2 == pytest.approx(2.0 / math.sqrt(math.pi), abs=5.0 * l2_se)
    assert l1 == pytest.approx(3.0, abs=5.0 * 2.0 / math.sqrt(LARGE_N))


def test_large_exponential_sample_has_hosking_exponential_ratios():
    x = np.random.default_rng(91).exponential(1.0, size=LARGE_N)
    l1, l2, t3, t4 = sample_lmoments(x)
    assert t3 == pytest.approx(1.0 / 3.0, abs=FIVE_SE)
    assert t4 == pytest.approx(1.0 / 6.0, abs=FIVE_SE)
    assert l1 == pytest.approx(1.0, abs=5.0 / math.sqrt(LARGE_N))  # sd of the mean: 1/sqrt(n)


# ---------------------------------------------------------------------------------------------
# Population L-moments of probability tables

_SHIFTED_LEGENDRE = (
    lambda u: u,  # antiderivatives of P*_0 .. P*_3
    lambda u: u * u - u,
    lambda u: 2 * u**3 - 3 * u**2 + u,
    lambda u: 5 * u**4 - 10 * u**3 + 6 * u**2 - u,
)


def exact_discrete(values, probabilities) -> tuple[float, float, float, float]:
    """lambda_r = sum_i x_i integral_{F_(i-1)}^{F_i} P*_{r-1}(u) du, in exact rationals.

    The quantile function of a discrete distribution is x_i on (F_(i-1), F_i].
    """
    fractions = [Fraction(float(p)) for p in probabilities]
    total = sum(fractions)
    edges = [Fraction(0)]
    for p in fractions:
        edges.append(edges[-1] + p / total)
    lam = []
    for antiderivative in _SHIFTED_LEGENDRE:
        lam.append(sum(Fraction(float(x)) * (antiderivative(b) - antiderivative(a))
                       for x, a, b in zip(values, edges[:-1], edges[1:])))
    return float(lam[0]), float(lam[1]), float(lam[2] / lam[1]), float(lam[3] / lam[1])


def test_fair_die_population_lmoments_from_the_quantile_function_integral():
    faces = np.arange(1.0, 7.0)
    sixth = np.full(6, 1.0 / 6.0)
    exact = exact_discrete(faces, sixth)
    # By symmetry t3 = 0; l1 = 7/2. By hand, with F_i = i/6: l2 = sum x_i (F_i^2 - F_i - F_(i-1)^2
    # + F_(i-1)) = 35/36, and l4 = -35/1296 (the antiderivative 5u^4 - 10u^3 + 6u^2 - u), t4 = -1/36.
    assert exact[0] == pytest.approx(3.5, rel=1e-15)
    assert exact[1] == pytest.approx(35.0 / 36.0, rel=1e-14)
    assert exact[2] == pytest.approx(0.0, abs=1e-15)
    assert exact[3] == pytest.approx(-1.0 / 36.0, rel=1e-14)
    assert table_lmoments(faces, sixth, probabilities=True) == pytest.approx(exact, rel=1e-13, abs=1e-14)


@pytest.mark.parametrize("a,b,p", [(-1.0, 3.0, 0.2), (0.0, 1.0, 0.5), (10.0, 10.5, 0.9), (-7.0, 100.0, 0.01)])
def test_two_point_distribution_population_lmoments_in_closed_form(a, b, p):
    """P(X = b) = p, P(X = a) = q = 1 - p: x(u) = b on (q, 1], so integrating P*_1..P*_3 over (q, 1]
    gives l2 = (b - a) p q, l3 = (b - a) p q (q - p), l4 = (b - a) p q (1 - 5 p q):
    t3 = 1 - 2p, t4 = 1 - 5 p (1 - p)."""
    q = 1.0 - p
    closed = (a + (b - a) * p, (b - a) * p * q, 1.0 - 2.0 * p, 1.0 - 5.0 * p * q)
    assert exact_discrete([a, b], [q, p]) == pytest.approx(closed, rel=1e-12, abs=1e-14)
    assert table_lmoments([a, b], [q, p], probabilities=True) == pytest.approx(closed, rel=1e-12, abs=1e-13)


@pytest.mark.parametrize("seed", range(3))
def test_population_lmoments_are_the_limit_of_the_repeated_table_sample_lmoments(seed):
    """Counts N p rounded, N = 1e7, and scipy 1.17.1 lmoment on the repeated sample.

    Two effects separate them: rounding moves each probability by at most 0.5/N, and the
    unbiased estimator of a finite sample differs from the population value by O(1/N). Each
    moves l1 and l2 by at most a few times (range / N) = 1e-7 * range; the tolerance is twenty
    times that (and divided by l2 for the ratios)."""
    rng = np.random.default_rng(7000 + seed)
    values = np.unique(rng.integers(-10, 30, size=8).astype(np.float64))
    probabilities = rng.dirichlet(np.ones(values.size) * 2.0)
    probabilities = probabilities / probabilities.sum()
    n = 10_000_000
    counts = np.round(probabilities * n).astype(np.int64)
    reference = stats.lmoment(np.repeat(values, counts), sorted=True)
    got = table_lmoments(values, probabilities, probabilities=True)
    tolerance = 20.0 * (values[-1] - values[0]) / n
    assert got[0] == pytest.approx(reference[0], abs=tolerance)
    assert got[1] == pytest.approx(reference[1], abs=tolerance)
    assert got[2] == pytest.approx(reference[2], abs=tolerance / got[1])
    assert got[3] == pytest.approx(reference[3], abs=tolerance / got[1])
    # And exactly the quantile-function integral.
    assert got == pytest.approx(exact_discrete(values, probabilities), rel=1e-12, abs=1e-13)


# ---------------------------------------------------------------------------------------------
# Bins: population L-moments of the even spread within each bin (an approximation)


def binned(edges, counts) -> tuple[float, float, float, float]:
    return lmoments_of(from_bins(list(map(float, edges)), list(map(float, counts))), "bins")


def test_equal_bins_of_a_uniform_give_the_uniform_lmoments():
    # Even spread within equal bins of equal counts is exactly the uniform on [0, 1].
    got = binned(np.linspace(0.0, 1.0, 1001), np.full(1000, 7.0))
    assert got == pytest.approx((0.5, 1.0 / 6.0, 0.0, 0.0), abs=1e-12)
    # And a uniform on [2, 6]: l1 = 4, l2 = 4/6.
    wider = binned(np.linspace(2.0, 6.0, 401), np.full(400, 3.0))
    assert wider == pytest.approx((4.0, 4.0 / 6.0, 0.0, 0.0), abs=1e-11)


@pytest.mark.parametrize("width", [0.02, 0.005])
def test_narrow_bins_of_an_exponential_approach_the_exponential_lmoments(width):
    """Bins of width h on [0, 60] holding the exponential(1) probabilities (times 1e6).

    Spreading a bin's mass evenly replaces the exponential's within-bin mean a + h/2 - h^2/12 + ...
    by the midpoint, so l1 is off by about h^2/12; the quantile function moves by O(h^2) in every
    bin, so l2, l3 and l4 are off by O(h^2) as well. Tolerance: h^2. The tail beyond 60 (e^-60)
    is negligible."""
    edges = np.arange(0.0, 60.0 + width / 2.0, width)
    counts = 1e6 * (np.exp(-edges[:-1]) - np.exp(-edges[1:]))
    l1, l2, t3, t4 = binned(edges, counts)
    tolerance = width * width
    assert l1 == pytest.approx(1.0, abs=tolerance)
    assert l1 - 1.0 == pytest.approx(width * width / 12.0, rel=0.01)  # the size of the leading error
    assert l2 == pytest.approx(0.5, abs=tolerance)
    assert t3 == pytest.approx(1.0 / 3.0, abs=tolerance)
    assert t4 == pytest.approx(1.0 / 6.0, abs=tolerance)


@pytest.mark.parametrize("exponent", [-3, 0, 7, 900, -900])
def test_scaling_inside_the_raw_estimator_equals_scaling_the_data_first(exponent):
    # Scaling by a power of two is exact, so the two orders must agree bit for bit (the raw
    # path skips the scaling pass where nothing nears float64's limits).
    from tailgauge.core import lmoments

    x = np.sort(np.random.default_rng(5).lognormal(0.0, 1.0, 5000))
    if exponent > 0:
        x = np.ldexp(x, -exponent)  # data near the bottom of the range, scaled up
    assert lmoments.sample_lmoments(x, None, exponent) == lmoments.sample_lmoments(np.ldexp(x, exponent), None)
