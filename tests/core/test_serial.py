"""Serial structure of ordered samples (tailgauge.core.serial): autocovariances, the effective n
and the automatic block lengths, checked against outside references.

References, each named again beside its check:

* the ``arch`` package (8.0.0, PyPI), ``arch.bootstrap.optimal_block_length``: Politis & White
  (2004) with the correction of Patton, Politis & White (2009);
* the AR(1) closed form of the integrated autocorrelation time, tau = (1 + phi) / (1 - phi)
  (rho_k = phi^k, so 1 + 2 sum_k phi^k), hence the effective n = n (1 - phi) / (1 + phi);
* naive sums written here (autocovariances by their definition, Geyer's pairs by a loop).

Every generator is seeded.
"""

from __future__ import annotations

import tracemalloc
import warnings

import numpy as np
import pytest

from tailgauge.core import central_sums, serial


def ar1(phi: float, n: int, rng: np.random.Generator, burn: int = 200) -> np.ndarray:
    """x_t = phi x_{t-1} + e_t, e_t ~ N(0, 1), started at 0 and burnt in."""
    e = rng.standard_normal(n + burn)
    x = np.empty(n + burn)
    x[0] = e[0]
    for t in range(1, n + burn):
        x[t] = phi * x[t - 1] + e[t]
    return x[burn:]


def _covariances(x: np.ndarray) -> np.ndarray:
    return serial.autocovariances(x, central_sums(x, None, 4))


def test_autocovariances_equal_their_definition():
    # Naive: c_k = n^-1 sum_{i<n-k} (x_i - xbar)(x_{i+k} - xbar), in float64 on the raw scale; the
    # engine's are in the sums' power-of-two units, so they are scaled back.
    x = ar1(0.5, 357, np.random.default_rng(11)) * 1e3 + 5e4
    sums = central_sums(x, None, 4)
    got = serial.autocovariances(x, sums) * 4.0**sums.scale_exponent
    d = x - x.mean()
    naive = np.array([np.dot(d[: x.size - k], d[k:]) / x.size for k in range(x.size)])
    np.testing.assert_allclose(got, naive, rtol=0, atol=1e-10 * naive[0])


def test_geyer_initial_positive_sequence_equals_a_loop():
    # Geyer (1992), section 3.3: Gamma_m = c_2m + c_2m+1 summed while positive; tau = (-c0 + 2 sum) / c0.
    c = _covariances(ar1(0.7, 1000, np.random.default_rng(5)))
    total, m = 0.0, 0
    while 2 * m + 1 < c.size and c[2 * m] + c[2 * m + 1] > 0.0:
        total += c[2 * m] + c[2 * m + 1]
        m += 1
    assert serial.integrated_time(c) == pytest.approx((-c[0] + 2.0 * total) / c[0], rel=1e-12)
    assert serial.effective_size(c) == pytest.approx(c.size / serial.integrated_time(c), rel=1e-15)  # tau > floor


@pytest.mark.parametrize("phi", [0.0, 0.3, 0.6, 0.9])
def test_effective_n_of_ar1_against_its_closed_form(phi):
    # Closed form (AR(1)): n_eff = n (1 - phi) / (1 + phi). The estimator's spread is taken from
    # 60 independent series of n = 4000 (seeded); their mean must lie within 4 standard errors of
    # that mean (plus the estimator's known downward bias of order tau^2 / n, below 2 % here).
    rng = np.random.default_rng(20261205)
    n, series = 4000, 60
    ratios = np.array([serial.effective_size(_covariances(ar1(phi, n, rng))) / n for _ in range(series)])
    expected = (1.0 - phi) / (1.0 + phi)
    standard_error = ratios.std(ddof=1) / np.sqrt(series)
    assert abs(ratios.mean() - expected) <= 4.0 * standard_error + 0.02 * expected
    # And the spread itself is what makes the check meaningful: a few percent of the value.
    assert ratios.std(ddof=1) < 0.25 * expected


def test_effective_n_of_negatively_correlated_neighbours_is_bounded():
    # AR(1) with phi = -0.95: the closed form n (1 - phi) / (1 + phi) = 39 n is beyond n log10 n,
    # where tau's floor 1 / log10(n) holds it.
    n = 2000
    c = _covariances(ar1(-0.95, n, np.random.default_rng(9)))
    assert serial.integrated_time(c) < 1.0 / np.log10(n)
    assert serial.effective_size(c) == pytest.approx(n * np.log10(n), rel=1e-12)
    # Few values: at most n; two values give tau = 0 exactly (c_0 = 0.25, c_1 = -0.125 for 1, 2).
    assert serial.effective_size(_covariances(np.array([3.0, -2.0, 3.5, -1.0, 2.0, -2.5]))) <= 6.0
    assert serial.integrated_time(_covariances(np.array([1.0, 2.0]))) == 0.0
    assert serial.effective_size(_covariances(np.array([1.0, 2.0]))) == 2.0


def test_effective_n_is_undefined_for_constant_data():
    assert serial.effective_size(np.zeros(10)) is None
    assert serial.integrated_time(np.array([])) is None


@pytest.mark.parametrize(("phi", "n"), [(0.3, 1000), (0.6, 500), (0.6, 2000), (0.6, 20000), (0.9, 5000), (-0.4, 3000)])
def test_block_lengths_against_arch(phi, n):
    # arch 8.0.0 (PyPI), arch.bootstrap.optimal_block_length: columns "stationary" and
    # "circular". Ours floors both at 1 (a block of less than one observation is no block);
    # arch does not, so its value is compared after the same floor.
    arch_bootstrap = pytest.importorskip("arch.bootstrap")
    x = ar1(phi, n, np.random.default_rng(int(1000 * phi) + n)) * 2.5 + 40.0
    ours = serial.optimal_block_lengths(_covariances(x))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        theirs = arch_bootstrap.optimal_block_length(x)
    assert ours.stationary == pytest.approx(max(1.0, float(theirs["stationary"].iloc[0])), rel=1e-9)
    assert ours.circular == pytest.approx(max(1.0, float(theirs["circular"].iloc[0])), rel=1e-9)


def test_block_lengths_grow_with_dependence_and_stay_within_bounds():
    rng = np.random.default_rng(7)
    lengths = [serial.optimal_block_lengths(_covariances(ar1(phi, 3000, rng))).stationary for phi in (0.2, 0.5, 0.8)]
    assert lengths == sorted(lengths)
    # Politis & White's ceiling ceil(min(3 sqrt(n), n / 3)) on a random walk.
    walk = np.cumsum(rng.standard_normal(300))
    assert serial.optimal_block_lengths(_covariances(walk)).stationary <= np.ceil(min(3 * np.sqrt(300), 100))
    assert serial.optimal_block_lengths(_covariances(np.array([1.0, 2.0]))).stationary == 1.0


def test_autocovariance_memory_within_the_model():
    # tracemalloc's peak per value against serial.AUTOCOVARIANCE_BYTES_PER_VALUE (the cost model's).
    x = np.random.default_rng(3).standard_normal(200_001)
    sums = central_sums(x, None, 4)
    tracemalloc.start()
    try:
        serial.autocovariances(x, sums)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert peak / x.size < serial.AUTOCOVARIANCE_BYTES_PER_VALUE
