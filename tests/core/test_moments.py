"""Accuracy of the power sums about the mean (service/tailgauge/core/moments.py) and of the lag-1
autocorrelation (service/tailgauge/core/serial.py).

Outside references, named beside each check:

* NIST Statistical Reference Datasets, univariate summary statistics (Michelso, NumAcc1-4,
  PiDigits) in tests/reference/strd/: certified mean, sample standard deviation and lag-1
  autocorrelation; achievable accuracy from tests/reference/strd/README.md.
* Exact rational arithmetic (Python integers) on the float64 values themselves: the float64
  ceiling, i.e. what a perfect computation on the data as read would return.
* A naive two-pass formula with math.fsum on Python floats, written here.
"""

from __future__ import annotations

import math
import pathlib
from decimal import Decimal, localcontext
from fractions import Fraction

import numpy as np
import pytest

from tailgauge.core import moments
from tailgauge.core.describe import DescribeOptions, describe
from tailgauge.core.moments import central_sums
from tailgauge.core.serial import lag1_autocorrelation
from tailgauge.core.weighted import from_array

STRD = pathlib.Path(__file__).resolve().parents[1] / "reference" / "strd"
DATASETS = ("Michelso", "NumAcc1", "NumAcc2", "NumAcc3", "NumAcc4", "PiDigits")
U = np.finfo(np.float64).eps / 2.0  # unit roundoff of float64

# Correct significant digits of the sample sd that float64 can reach (README.md in
# tests/reference/strd: NumAcc4 "about 8.3", NumAcc3 9.5, Michelso 13.8, others 15). The README
# rounds: exact arithmetic on the float64-rounded data gives 8.25 and 9.46 digits for NumAcc4 and
# NumAcc3 (see test_strd_exact_float_data_sets_the_ceiling), so those two use 8.2 and 9.4.
SD_DIGITS = {
    "Michelso": 13.8,
    "NumAcc1": 15.0,
    "NumAcc2": 15.0,
    "NumAcc3": 9.4,
    "NumAcc4": 8.2,
    "PiDigits": 15.0,
}


def load_strd(name: str) -> tuple[dict[str, str], np.ndarray]:
    header: dict[str, str] = {}
    values: list[float] = []
    for line in (STRD / f"{name}.txt").read_text().splitlines():
        if line.startswith("#"):
            body = line[1:].strip()
            for key in ("certified_mean", "certified_sd", "certified_r1", "n"):
                if body.startswith(f"{key}:"):
                    header[key] = body.split(":", 1)[1].strip()
        elif line.strip():
            values.append(float(line))
    data = np.array(values)
    assert data.size == int(header["n"]), name
    return header, data


def exact_moments(values, orders, weights=None) -> tuple[Fraction, dict[int, Fraction], list[int]]:
    """Exact weighted mean and central moments (divisor: total weight) of float64 values.

    Every float64 is a dyadic rational, so with a common power-of-two denominator the values
    and weights become integers and everything below is exact integer arithmetic. Also returns
    the integer deviations ``B D (x_i - mean)`` (same ratios as the true deviations).
    """
    xs = [Fraction(float(v)) for v in values]
    ws = [Fraction(1)] * len(xs) if weights is None else [Fraction(float(w)) for w in weights]
    d_x = max(f.denominator for f in xs)
    d_w = max(f.denominator for f in ws)
    ints = [int(f * d_x) for f in xs]
    int_weights = [int(f * d_w) for f in ws]
    a = sum(w * v for w, v in zip(int_weights, ints))
    b = sum(int_weights)
    deviations = [b * v - a for v in ints]
    central = {
        k: Fraction(sum(w * d**k for w, d in zip(int_weights, deviations)), b * (b * d_x) ** k)
        for k in orders
    }
    return Fraction(a, b * d_x), central, deviations


def exact_sd(variance: Fraction) -> float:
    with localcontext() as context:
        context.prec = 50
        return float((Decimal(variance.numerator) / Decimal(variance.denominator)).sqrt())


def sample_sd(sums) -> float:
    n = sums.total_weight
    return sums.standard_deviation(n / (n - 1.0))


def relative_error(got: float, expected: float) -> float:
    return abs(got - expected) / abs(expected) if expected != 0 else abs(got)


# --- (a) NIST StRD -----------------------------------------------------------------------------


@pytest.mark.parametrize("name", DATASETS)
def test_strd_matches_certified_values(name):
    header, x = load_strd(name)
    sums = central_sums(x, None, 4)
    certified_mean = float(header["certified_mean"])  # NIST StRD certified value
    certified_sd = float(header["certified_sd"])  # NIST StRD certified value
    certified_r1 = float(header["certified_r1"])  # NIST StRD certified value

    assert relative_error(sums.mean, certified_mean) <= 1e-15
    assert relative_error(sample_sd(sums), certified_sd) <= 10.0 ** -SD_DIGITS[name]

    # r(1) tolerance: the certified value is for the decimal data; reading them into float64
    # alone moves the exact r(1) of the data by `shift` (exact arithmetic below: 9.3e-12 for
    # NumAcc4, 5.8e-13 NumAcc3, 1.9e-14 Michelso, below 2e-18 for the others). Any float64
    # computation also rounds the mean, a perturbation of the same size as that data rounding,
    # so a result at the float64 ceiling lies within a small multiple of `shift` (10x here)
    # plus a few roundings of r(1) itself.
    _, _, deviations = exact_moments(x, ())
    exact_r1 = Fraction(
        sum(a * b for a, b in zip(deviations[:-1], deviations[1:])), sum(d * d for d in deviations)
    )
    shift = abs(float(exact_r1) - certified_r1)
    r1 = lag1_autocorrelation(x, sums)
    assert abs(r1 - certified_r1) <= 10.0 * shift + 8.0 * U, (r1, certified_r1, shift)

    # The same numbers through the public descriptor set.
    result = describe(from_array(x), DescribeOptions(), kind="samples")
    assert result.descriptors["mean"].value == sums.mean
    reported_sd = result.descriptors["standard_deviation"].value
    assert relative_error(reported_sd, certified_sd) <= 10.0 ** -SD_DIGITS[name]
    assert result.descriptors["lag1_autocorrelation"].value == r1


@pytest.mark.parametrize("name", DATASETS)
def test_strd_exact_float_data_sets_the_ceiling(name):
    """Against exact arithmetic on the float64 values: mean and sd within a few roundings."""
    header, x = load_strd(name)
    sums = central_sums(x, None, 4)
    mean, central, _ = exact_moments(x, (2,))
    n = x.size
    assert relative_error(sums.mean, float(mean)) <= 2.0 * U
    assert relative_error(sample_sd(sums), exact_sd(central[2] * n / (n - 1))) <= 4.0 * U
    # The README's digit counts are those of the exact float64 data (rounded there to 0.1).
    exact_data_error = relative_error(exact_sd(central[2] * n / (n - 1)), float(header["certified_sd"]))
    assert exact_data_error <= 10.0 ** -SD_DIGITS[name]


def test_numacc4_skewness_is_zero():
    # NumAcc4 is 10000000.2 followed by 500 pairs (10000000.1, 10000000.3): symmetric, so the
    # skewness of the decimal data is 0 (NIST StRD construction). Rounding to float64 leaves
    # about 2.8e-11 (exact arithmetic on the float64 values).
    _, x = load_strd("NumAcc4")
    assert abs(central_sums(x, None, 4).standardized_moment(3)) <= 1e-10


# --- (e) the check has teeth: the textbook one-pass formula fails NumAcc4 ----------------------


@pytest.mark.parametrize("name", ("NumAcc3", "NumAcc4"))
def test_naive_one_pass_fails_where_central_sums_pass(name):
    header, x = load_strd(name)
    n = x.size
    certified_variance = float(header["certified_sd"]) ** 2  # NIST StRD certified value
    tolerance = 2.0 * 10.0 ** -SD_DIGITS[name]  # the sd tolerance above, for the variance
    naive = (float(np.sum(x * x)) - float(np.sum(x)) ** 2 / n) / (n - 1)
    ours = central_sums(x, None, 2).central_moment(2) * n / (n - 1)
    assert relative_error(naive, certified_variance) > 1e3 * tolerance
    assert relative_error(ours, certified_variance) <= tolerance


# --- (b) against a naive two-pass formula with math.fsum ---------------------------------------


def naive_two_pass(
    values: np.ndarray, weights: np.ndarray | None, order: int
) -> tuple[float, list[float], list[float]]:
    """mean, central moments 0..order and absolute central moments 0..order (divisor W)."""
    x = values.tolist()
    w = [1.0] * len(x) if weights is None else weights.tolist()
    total = math.fsum(w)
    mean = math.fsum(a * b for a, b in zip(w, x)) / total
    d = [v - mean for v in x]
    central = [math.fsum(a * t**k for a, t in zip(w, d)) / total for k in range(order + 1)]
    absolute = [math.fsum(a * abs(t) ** k for a, t in zip(w, d)) / total for k in range(order + 1)]
    return mean, central, absolute


def two_pass_cases():
    rng = np.random.default_rng(31)
    big = 2**17 + 4321  # more than one block of the blocked sums
    return {
        "normal offset": (rng.normal(50.0, 3.0, size=1000), None),
        "gamma": (rng.gamma(2.0, 1.0, size=5000) + 5.0, None),
        "two blocks": (rng.normal(-20.0, 2.0, size=big), None),
        "n=2": (np.array([3.0, 4.5]), None),
        "n=3": (np.array([-1.0, 0.25, 7.0]), None),
        "real weights": (rng.normal(10.0, 1.0, size=3000), rng.uniform(0.1, 3.0, size=3000)),
        "integer weights": (rng.gamma(3.0, 2.0, size=2000), rng.integers(1, 9, size=2000).astype(float)),
        "wild weights": (rng.normal(0.5, 2.0, size=2000), rng.lognormal(0.0, 2.0, size=2000)),
        "weighted two blocks": (rng.normal(7.0, 1.0, size=big), rng.uniform(0.5, 1.5, size=big)),
    }


@pytest.mark.parametrize("case", list(two_pass_cases()))
def test_central_moments_match_naive_two_pass(case):
    values, weights = two_pass_cases()[case]
    order = 8
    sums = central_sums(values, weights, order)
    mean, central, absolute = naive_two_pass(values, weights, order)
    assert sums.order == order
    assert relative_error(sums.mean, mean) <= 1e-15
    expected_total = float(values.size) if weights is None else math.fsum(weights.tolist())
    assert sums.total_weight == pytest.approx(expected_total, rel=1e-15)
    for k in range(2, order + 1):
        # The naive reference itself is good to a few (k + 1) u relative to the absolute moment,
        # plus k u |mean| / sd from rounding the mean (|mean| / sd <= 20 here): 1e-12 is loose for
        # both, yet a one-pass sum of raw powers would miss by about 1e-6 at order 8.
        assert abs(sums.central_moment(k) - central[k]) <= 1e-12 * absolute[k], (case, k)
        expected_standardized = central[k] / central[2] ** (k / 2)
        scale = central[2] ** (k / 2)
        assert abs(sums.standardized_moment(k) - expected_standardized) <= 1e-12 * absolute[k] / scale


def test_well_conditioned_offset_matches_exact_arithmetic(monkeypatch):
    """Mean 1e9, sd 1: the naive two-pass is limited by rounding the mean (k u |mean| / sd is
    about 1e-6 at order 8); the service must do better, so compare with exact arithmetic."""
    calls = []
    original = moments.weighted_mean
    monkeypatch.setattr(moments, "weighted_mean", lambda *a: (calls.append(1), original(*a))[1])
    rng = np.random.default_rng(41)
    x = 1e9 + rng.normal(size=20000)
    sums = central_sums(x, None, 8)
    assert calls == [], "expected the one-pass fast path for these data"
    mean, central, _ = exact_moments(x, range(2, 9))
    _, _, absolute = naive_two_pass(x - float(mean), None, 8)
    assert relative_error(sums.mean, float(mean)) <= 2.0 * U
    for k in range(2, 9):
        assert abs(sums.central_moment(k) - float(central[k])) <= 1e-13 * absolute[k], k


# --- (c) magnitudes from 1e-300 to 1e307 --------------------------------------------------------


def magnitude_base():
    rng = np.random.default_rng(53)
    z = rng.exponential(size=5000) + 0.5  # skewness 2: every standardized moment is O(1) or more
    w = rng.uniform(0.2, 2.0, size=5000)
    return z, w


EXPONENTS = (-300, -150, -100, -50, 0, 50, 100, 150, 300, 307)


def power_of(value: float, factor: float, k: int) -> float:
    """value * factor**k by repeated multiplication (monotone, so no spurious over/underflow)."""
    for _ in range(k):
        value *= factor
    return value


@pytest.mark.parametrize("weighted", (False, True), ids=("unweighted", "weighted"))
@pytest.mark.parametrize("exponent", EXPONENTS)
def test_extreme_magnitudes(exponent, weighted):
    z, w = magnitude_base()
    weights = w if weighted else None
    order = 8
    base = central_sums(z, weights, order)
    factor = 10.0**exponent
    x = z * factor
    sums = central_sums(x, weights, order)

    # Scale-free quantities: equal to those of the unscaled data (10**e is not a power of two,
    # so each value moves by half an ulp; 1e-12 leaves room for that, amplified by order 8).
    assert relative_error(sums.mean, base.mean * factor) <= 1e-14
    for k in range(3, order + 1):
        standardized = sums.standardized_moment(k)
        assert math.isfinite(standardized), k
        assert relative_error(standardized, base.standardized_moment(k)) <= 1e-12, k

    # Moments with units: accurate where float64 holds them, NaN where it cannot; never an
    # infinity and never a zero standing in for an underflowed non-zero value.
    representable = not_representable = 0
    for label, got_of, base_of, orders in (
        ("central", sums.central_moment, base.central_moment, range(2, order + 1)),
        ("raw", sums.raw_moment, base.raw_moment, range(1, order + 1)),
    ):
        for k in orders:
            got, reference = got_of(k), base_of(k)
            assert reference > 0.0  # z is positive and skewed right: every one of these is > 0
            log2_magnitude = math.log2(reference) + k * math.log2(factor)
            assert not math.isinf(got) and got != 0.0, (label, k, got)
            # float64 holds magnitudes 2**-1022 (normal) to 2**1024.
            if -1020.0 < log2_magnitude < 1023.5:
                representable += 1
                assert relative_error(got, power_of(reference, factor, k)) <= 1e-12, (label, k, got)
            elif log2_magnitude > 1024.5 or log2_magnitude < -1030.0:
                not_representable += 1
                assert math.isnan(got), (label, k, got)
            else:
                # At the very edge (or in the subnormal range, where 1e-12 cannot be met): NaN,
                # or a value that is right.
                assert math.isnan(got) or relative_error(got, power_of(reference, factor, k)) <= 1e-12
    assert representable >= 1  # the test does reach the accurate branch
    if abs(exponent) >= 150:
        assert not_representable >= 1  # the test does reach the NaN branch


def test_subnormal_data_keep_their_standardized_moments():
    """Data entirely in the subnormal range (|x| < 2.2e-308) are finite float64 input. Scaling by
    2**600 is exact for them, so their standardized moments must equal those of the scaled copy;
    the central moments themselves are far below float64's range, so NaN."""
    z, _ = magnitude_base()
    x = z * 1e-310
    assert np.all(np.abs(x) < np.finfo(np.float64).tiny) and np.all(x > 0)
    scaled = x * 2.0**600
    sums = central_sums(x, None, 8)
    reference = central_sums(scaled, None, 8)
    assert relative_error(sums.mean, reference.mean * 2.0**-600) <= 1e-12
    for k in range(3, 9):
        assert relative_error(sums.standardized_moment(k), reference.standardized_moment(k)) <= 1e-12, k
    for k in range(2, 9):
        assert math.isnan(sums.central_moment(k)), k


# --- (d) the fallback when the strided shift misses a cluster ----------------------------------


def clustered(weighted: bool):
    """102,400 values: the strided subsample (every 100th value) sees only a small cluster at
    1e9 + 1000, while 99% of the data sit at 1e9 + N(0, 1). The shift estimate is ~10 standard
    deviations from the mean, far outside the one-pass acceptance rule."""
    rng = np.random.default_rng(61)
    n = 1024 * 100
    x = 1e9 + rng.normal(size=n)
    x[::100] = 1e9 + 1000.0 + rng.normal(size=1024)
    weights = rng.uniform(0.5, 1.5, size=n) if weighted else None
    return x, weights


@pytest.mark.parametrize("weighted", (False, True), ids=("unweighted", "weighted"))
def test_fallback_when_the_shift_is_far_from_the_mean(weighted, monkeypatch):
    calls = []
    original = moments.weighted_mean
    monkeypatch.setattr(moments, "weighted_mean", lambda *a: (calls.append(1), original(*a))[1])
    x, weights = clustered(weighted)
    sums = central_sums(x, weights, 8)
    assert calls, "the data were meant to force the two-pass fallback"
    # Exact arithmetic on the float64 data (the naive two-pass would itself be off by ~3e-10
    # here, from rounding a mean of 1e9).
    mean, central, _ = exact_moments(x, range(2, 9), weights)
    _, _, absolute = naive_two_pass(x - float(mean), weights, 8)
    assert relative_error(sums.mean, float(mean)) <= 2.0 * U
    for k in range(2, 9):
        assert abs(sums.central_moment(k) - float(central[k])) <= 1e-13 * absolute[k], k


def test_variance_factor_is_the_divisor_of_each_rule():
    # Reference: the divisors by definition, n (population), n - 1 (sample) and V1 - V2 / V1
    # (reliability weights), as the plug-in variance's factor n / divisor.
    assert moments.variance_factor("population", 10.0) == 1.0
    assert moments.variance_factor("sample", 10.0) == 10.0 / 9.0
    w = np.array([0.5, 1.0, 2.5])
    v1, v2 = float(np.sum(w)), float(np.sum(w * w))
    assert moments.variance_factor("reliability", v1, v2 / v1**2) == pytest.approx(v1 / (v1 - v2 / v1), rel=1e-15)
    rows = moments.variance_factor("sample", np.array([2.0, 4.0, 1.0]))
    assert rows.tolist() == [2.0, 4.0 / 3.0, np.inf]  # one observation: no divisor
    with pytest.raises(ValueError):
        moments.variance_factor("median", 3.0)



def test_subnormal_mean_and_first_raw_moment_agree():
    """Issue 15 regression: subnormal data gave descriptors.mean = 1.5e-323 but moments.raw[0]
    null. Both are the representable mean; numpy 2.x np.mean (reference library) gives the same."""
    from tailgauge.core import DescribeOptions, describe, from_array

    x = np.array([1e-323, 1e-323, 2e-323])
    described = describe(from_array(x), DescribeOptions(), kind="samples")
    assert described.descriptors["mean"].value == described.moments.raw[0] == float(np.mean(x)) == 1.5e-323
    assert not any("moments.raw[0]" in name for note in described.warnings for name in note.descriptors)
