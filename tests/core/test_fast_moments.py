"""The power sums behind every moment: dot products for long unit-weight samples.

``moments._power_sums`` takes long unit-weight samples (more than ``_DOT_ABOVE`` values) as dot
products over short runs; everything else keeps the blocked pairwise sums, written out below as
the oracle (the formula the module used before, one product and one pairwise sum per power and
block, blocks added in turn). Checked here: the same bits where the rule is unchanged, the same
first power sum (so the same mean) everywhere, and on the dot path an error no larger than a
few units of rounding against an extended-precision reference, and agreement with
``scipy.stats`` (1.17.1) ``moment``, ``skew`` and ``kurtosis`` on data far from zero.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats
from tailgauge.core import moments

EPS = np.finfo(np.float64).eps
LONG = moments._DOT_ABOVE + 4_321  # on the dot path, with a tail shorter than one run


def oracle_power_sums(values, weights, pre, shift, post, order, block=1 << 16):
    """``sum w ((x 2^pre - shift) 2^post)^j`` block by block: pairwise sums of chained products."""
    sums = np.zeros(order + 1)
    for start in range(0, values.size, block):
        d = (np.ldexp(values[start : start + block], pre) - shift) * 2.0**post
        w = np.ones(d.size) if weights is None else weights[start : start + block]
        sums[0] += d.size if weights is None else w.sum()
        power = d.copy() if weights is None else w * d
        sums[1] += power.sum()
        for j in range(2, order + 1):
            power = power * d
            sums[j] += power.sum()
    return sums


def extended_reference(values, shift, order):
    """The power sums of the same float64 deviations in 80-bit long double, and the sums of
    their absolute values (the scale against which a sum's rounding is measured)."""
    d = (values - shift).astype(np.longdouble)
    exact = np.array([np.sum(d**j) for j in range(order + 1)])
    scale = np.array([np.sum(np.abs(d) ** j) for j in range(order + 1)])
    return exact, scale


def samples(n: int, seed: int) -> dict[str, np.ndarray]:
    rng = np.random.default_rng(seed)
    return {
        "offset normal": rng.normal(1e9, 1.0, n),
        "offset exponential": 1e9 + rng.exponential(2.0, n),
        "lognormal": rng.lognormal(0.0, 1.0, n),
        "student t5": rng.standard_t(5, n) + 3.0,
    }


def test_extended_precision_is_available():
    # The reference needs more than float64's 53 bits (x86 long double has 64).
    assert np.finfo(np.longdouble).nmant >= 63


@pytest.mark.parametrize("n", [1, 2, 511, 512, 513, 65_536, 65_537, moments._DOT_ABOVE])
def test_up_to_the_switch_the_numbers_are_unchanged(n):
    for name, x in samples(n, seed=n).items():
        shift = float(x[0])
        for order in (2, 3, 4, 6):
            got = moments._power_sums(x, None, 0, shift, 0, order)
            assert got.tobytes() == oracle_power_sums(x, None, 0, shift, 0, order).tobytes(), (name, order)


def test_weighted_sums_are_unchanged_at_any_length():
    rng = np.random.default_rng(5)
    x = rng.normal(40.0, 3.0, LONG)
    w = rng.integers(1, 9, LONG).astype(np.float64)
    got = moments._power_sums(x, w, 0, 40.1, 0, 4)
    assert got.tobytes() == oracle_power_sums(x, w, 0, 40.1, 0, 4).tobytes()


@pytest.mark.parametrize("order", [2, 3, 4, 5, 6])
def test_long_samples_are_as_accurate_as_the_blocked_sums(order):
    """Errors in units of rounding of sum |d|^j: the dot path's stays within 2 (it is typically
    below 1), and the first sum is the blocked form's own number, so the mean does not move."""
    for name, x in samples(LONG, seed=order).items():
        shift = moments._shift_estimate(x, None)
        exact, scale = extended_reference(x, shift, order)
        got = moments._power_sums(x, None, 0, shift, 0, order)
        old = oracle_power_sums(x, None, 0, shift, 0, order)
        assert got[0] == LONG and got[1] == old[1], name
        error = np.abs((got.astype(np.longdouble) - exact) / scale).astype(np.float64)[2:] / EPS
        old_error = np.abs((old.astype(np.longdouble) - exact) / scale).astype(np.float64)[2:] / EPS
        assert np.all(error <= 2.0), (name, error, old_error)
        # The two forms agree to that accuracy; they are not the same computation.
        np.testing.assert_allclose(got[2:], old[2:], rtol=4 * EPS * np.max(scale[2:] / np.abs(exact[2:]).astype(float)))


def test_the_dot_path_wins_where_blocks_pile_up():
    """Sixteen blocks added in turn: the oracle's error grows with their number, the dot path's
    does not (summed over three datasets, so one lucky rounding cannot decide)."""
    total_new = total_old = 0.0
    for name, x in samples(16 * (1 << 16), seed=99).items():
        if name == "lognormal":
            continue
        shift = moments._shift_estimate(x, None)
        exact, scale = extended_reference(x, shift, 4)
        for sums, tally in ((moments._power_sums(x, None, 0, shift, 0, 4), "new"), (oracle_power_sums(x, None, 0, shift, 0, 4), "old")):
            error = float(np.sum(np.abs((sums.astype(np.longdouble) - exact) / scale).astype(np.float64)[2:])) / EPS
            if tally == "new":
                total_new += error
            else:
                total_old += error
    assert total_new < total_old, (total_new, total_old)


def test_central_moments_against_scipy_far_from_zero():
    """1e9 + noise. scipy's ``moment`` subtracts a float64 mean whose rounding (up to about 1e-7
    here) moves the k-th moment by about k 1e-7 sigma^k; ours re-centre exactly after the shift.
    So: ours agree with an extended-precision two-pass reference to 1e-9 of sigma^k, and with
    scipy to its own accuracy, 1e-6 of sigma^k (skewness and Fisher's kurtosis likewise)."""
    rng = np.random.default_rng(1983)
    for noise in (rng.exponential(3.0, LONG), rng.normal(0.0, 1.0, LONG), rng.gamma(0.5, 1.0, LONG)):
        x = 1e9 + noise
        sums = moments.central_sums(x, None, 4)
        extended = x.astype(np.longdouble)
        mean = extended.sum() / x.size
        mean += (extended - mean).sum() / x.size
        d = extended - mean
        sigma = float(np.sqrt(np.mean(d * d)))
        assert sums.mean == pytest.approx(float(mean), rel=2 * EPS, abs=0)
        for order in (2, 3, 4):
            got = sums.central_moment(order)
            assert got == pytest.approx(float(np.mean(d**order)), rel=0, abs=1e-9 * sigma**order), order
            assert got == pytest.approx(float(stats.moment(x, order)), rel=0, abs=1e-6 * sigma**order), order
        assert sums.standardized_moment(3) == pytest.approx(float(stats.skew(x)), rel=0, abs=1e-6)
        assert sums.standardized_moment(4) - 3.0 == pytest.approx(float(stats.kurtosis(x)), rel=0, abs=1e-6)


def test_the_scaled_fallback_takes_the_dot_path_exactly():
    """Values near 1e200 overflow the one-pass powers, so the two-pass form scales them by powers
    of two; scaling the data by another power of two then changes nothing but the exponent."""
    rng = np.random.default_rng(7)
    noise = rng.standard_t(6, LONG)
    a = moments.central_sums(np.ldexp(noise, 660), None, 4)
    b = moments.central_sums(np.ldexp(noise, 700), None, 4)
    assert a.pre_exponent != 0 and a.sums.tobytes() == b.sums.tobytes()
    assert a.standardized_moment(3) == pytest.approx(float(stats.skew(noise)), rel=1e-12)
    assert a.standardized_moment(4) == pytest.approx(float(stats.kurtosis(noise, fisher=False)), rel=1e-12)
    # The variance itself (~1e398) is beyond float64; the standard deviation is not.
    assert math.isnan(a.central_moment(2))
    assert math.isfinite(a.standard_deviation()) and b.standard_deviation() == a.standard_deviation() * 2.0**40
