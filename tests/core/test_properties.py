"""Invariance and equivariance of every descriptor, checked on generated samples (Hypothesis).

Properties of the definitions themselves (no outside numbers): permutation invariance; location
shifts move location descriptors and leave spread and shape alone; scaling by a power of two
(exact in float64) scales location and spread and leaves shape alone; negation flips the sign of
odd-order shape and reflects location.
"""

import math

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from service.core import DescribeOptions, describe, from_array

LOCATION = ("mean", "median", "minimum", "maximum", "half_sample_mode", "l_location")
SPREAD = (
    "variance",
    "standard_deviation",
    "range",
    "interquartile_range",
    "median_absolute_deviation",
    "median_absolute_deviation_normal",
    "l_scale",
)
SHAPE_ODD = ("skewness", "quartile_skewness", "medcouple", "mean_median_gap", "l_skewness")
SHAPE_EVEN = ("kurtosis", "excess_kurtosis", "octile_kurtosis", "octile_excess_kurtosis", "l_kurtosis")

samples = st.lists(
    st.floats(min_value=-1e6, max_value=1e6, allow_nan=False, allow_infinity=False),
    min_size=5,
    max_size=60,
).filter(lambda xs: len(set(xs)) >= 3)

PROPERTY_SETTINGS = settings(
    max_examples=150, deadline=None, derandomize=True, suppress_health_check=[HealthCheck.filter_too_much]
)


def values_of(x: np.ndarray) -> dict[str, float | None]:
    result = describe(from_array(x), DescribeOptions(), kind="samples")
    return {name: d.value for name, d in result.descriptors.items()}


def close(a, b, scale: float, rel: float = 1e-9) -> bool:
    if a is None or b is None:
        return a is None and b is None
    return math.isclose(a, b, rel_tol=rel, abs_tol=rel * scale)


@PROPERTY_SETTINGS
@given(samples, st.randoms(use_true_random=False))
def test_permutation_changes_nothing_but_the_serial_descriptor(xs, rng):
    x = np.array(xs)
    shuffled = x.copy()
    rng.shuffle(shuffled)
    before, after = values_of(x), values_of(shuffled)
    spread = float(np.ptp(x)) + float(np.max(np.abs(x)))
    for name, value in before.items():
        if name == "lag1_autocorrelation":
            continue
        # Order statistics are identical bit for bit; sums may differ by rounding.
        assert close(value, after[name], spread, rel=1e-9), (name, value, after[name])


# Quarter-integers below 2**40 shifted by integers are exact in float64, so the shifted sample is
# exactly the shifted data and every difference between order statistics is unchanged.
grid_samples = st.lists(st.integers(min_value=-(2**30), max_value=2**30), min_size=5, max_size=60).filter(
    lambda xs: len(set(xs)) >= 3
)


@PROPERTY_SETTINGS
@given(grid_samples, st.integers(min_value=-(2**30), max_value=2**30))
def test_shift_moves_location_only(quarters, shift):
    x = np.array(quarters, dtype=np.float64) / 4.0
    before, after = values_of(x), values_of(x + shift)
    magnitude = float(np.max(np.abs(x))) + abs(shift)
    for name in LOCATION:
        if before[name] is not None:
            assert math.isclose(after[name], before[name] + shift, rel_tol=1e-12, abs_tol=1e-12 * magnitude), name
    # Sums about the mean carry rounding of size eps * magnitude; relative to the spread that is
    # at most eps * 2**32, so 1e-6 is a safe bound for moment-based spread and shape.
    for name in SPREAD:
        assert close(after[name], before[name], float(np.ptp(x)), rel=1e-6), name
    for name in SHAPE_ODD + SHAPE_EVEN:
        assert close(after[name], before[name], 1.0, rel=1e-6), name


@PROPERTY_SETTINGS
@given(grid_samples, st.integers(min_value=-60, max_value=60))
def test_power_of_two_scaling_scales_location_and_spread(quarters, power):
    x = np.array(quarters, dtype=np.float64) / 4.0  # normal doubles: scaling by 2**power is exact
    factor = 2.0**power
    before, after = values_of(x), values_of(x * factor)
    for name in LOCATION + ("standard_deviation", "range", "interquartile_range", "median_absolute_deviation"):
        if before[name] is not None:
            assert math.isclose(after[name], before[name] * factor, rel_tol=1e-12, abs_tol=1e-300), name
    assert math.isclose(after["variance"], before["variance"] * factor * factor, rel_tol=1e-12)
    for name in SHAPE_ODD + SHAPE_EVEN:
        assert close(after[name], before[name], 1.0, rel=1e-12), name


@PROPERTY_SETTINGS
@given(samples)
def test_negation_flips_odd_shape_and_reflects_location(xs):
    x = np.array(xs)
    before, after = values_of(x), values_of(-x)
    for name in ("mean", "median", "l_location"):
        assert math.isclose(after[name], -before[name], rel_tol=1e-12, abs_tol=1e-12 * float(np.max(np.abs(x)))), name
    assert after["minimum"] == -before["maximum"] and after["maximum"] == -before["minimum"]
    for name in SHAPE_ODD:
        if before[name] is not None:
            assert math.isclose(after[name], -before[name], rel_tol=1e-9, abs_tol=1e-9), name
    for name in SHAPE_EVEN + SPREAD:
        assert close(after[name], before[name], 1.0, rel=1e-9), name


def test_the_property_checks_have_teeth():
    """A skewed sample really has a non-zero skewness whose sign negation flips (so the checks bite)."""
    x = np.array([1.0, 2.0, 2.0, 3.0, 10.0])
    before, after = values_of(x), values_of(-x)
    assert before["skewness"] > 0.5 and after["skewness"] == -before["skewness"]
