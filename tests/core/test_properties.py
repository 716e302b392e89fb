"""Invariance and equivariance of every descriptor, checked on generated data (Hypothesis, derandomized).

Properties of the definitions themselves, so no outside numbers are involved:

* permutation: reordering the observations changes nothing but the lag-1 autocorrelation;
* location, scale and sign: LAWS says for every scalar descriptor (SCALAR_DESCRIPTORS) how it
  moves under x -> x + a, x -> c x (c > 0) and x -> -x; a test keeps LAWS complete;
* a table of whole counts equals the repeated sample, descriptor by descriptor (the fixed-seed
  cases of tests/core/test_tables.py go through every quantile type; this one through
  generated tables);
* merging partial states: the descriptors of a merge do not depend on how the parts are grouped
  and equal those of the concatenation (tests/core/test_partial.py checks the states themselves:
  associativity, order and the empty identity, at the state level);
* finiteness: for magnitudes from 1e-150 to 1e150 and for spreads in the subnormal range, the
  encoded answer holds no NaN or infinity, and every null descriptor has a warning naming it;
* constant data: every shape descriptor is null and a ``constant_data`` warning names it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import msgspec
import numpy as np
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from tailgauge.api.schemas import DescriptionResponse, MergedDescriptionResponse
from tailgauge.core import (
    DescribeOptions,
    IntervalOptions,
    describe,
    describe_state,
    from_array,
    from_bins,
    from_samples,
    from_table,
    merge,
    merge_states,
    partial_state,
)
from tailgauge.core.describe import SCALAR_DESCRIPTORS, SHAPE_DESCRIPTORS


@dataclass(frozen=True)
class Law:
    """How a descriptor d moves under x -> x + a, x -> c x (c > 0) and x -> -x.

    ``shift``: "moves" (d + a), "fixed" (d), or None (no law). ``power``: d(c x) = c**power d(x).
    ``negation``: "flips" (-d), "fixed" (d), or the descriptor whose negative it becomes
    (minimum -> -maximum), or None (no law).
    """

    shift: str | None
    power: int | None
    negation: str | None
    why: str = ""


LOCATION = Law("moves", 1, "flips")
SPREAD = Law("fixed", 1, "fixed")
EVEN_SHAPE = Law("fixed", 0, "fixed")
ODD_SHAPE = Law("fixed", 0, "flips")
LAWS = {
    "mean": LOCATION,
    "median": LOCATION,
    "variance": Law("fixed", 2, "fixed"),
    "standard_deviation": SPREAD,
    # sd / mean is defined on a ratio scale only: a shift has no law, a sign change leaves the scale.
    "coefficient_of_variation": Law(None, 0, None, "ratio scale only; checked separately under negation"),
    "skewness": ODD_SHAPE,
    "kurtosis": EVEN_SHAPE,
    "excess_kurtosis": EVEN_SHAPE,
    "minimum": Law("moves", 1, "maximum"),
    "maximum": Law("moves", 1, "minimum"),
    "range": SPREAD,
    "interquartile_range": SPREAD,  # negation: Q(1-p) of -x is -Q(p) for the symmetric type 7 (the default)
    "median_absolute_deviation": SPREAD,
    "median_absolute_deviation_normal": SPREAD,
    # Both deviations of each product change sign together.
    "lag1_autocorrelation": Law("fixed", 0, "fixed"),
    "quartile_skewness": ODD_SHAPE,
    "octile_kurtosis": EVEN_SHAPE,
    "octile_excess_kurtosis": EVEN_SHAPE,
    "medcouple": ODD_SHAPE,
    # Ties between shortest windows go to the first window, which negation makes the last: the
    # sign law holds when no two windows tie (test_negation_reflects_the_half_sample_mode).
    "half_sample_mode": Law("moves", 1, None, "tie rule; checked on data without tied windows"),
    "mean_median_gap": ODD_SHAPE,
    "l_location": LOCATION,
    "l_scale": SPREAD,
    "l_skewness": ODD_SHAPE,
    "l_kurtosis": EVEN_SHAPE,
    # Symmetric trimming: -x trims the same observations (core/location_means.py).
    "trimmed_mean": LOCATION,
    "winsorized_mean": LOCATION,
    "geometric_mean": Law(None, 1, None, "positive data only (a ratio scale): null with a reason otherwise"),
    "harmonic_mean": Law(None, 1, None, "positive data only (a ratio scale): null with a reason otherwise"),
    # k / sum ln(X_(n-i+1) / X_(n-k)): free of scale, defined only for a positive tail.
    "upper_tail_index": Law(None, 0, None, "defined for a positive tail only: a shift or sign change has no law"),
}
# Where sums about the mean are involved (moments, L-moments from sums) rounding is relative to
# the magnitude of the data, not the result; order statistics are exact.
FROM_SUMS = {
    "mean", "variance", "standard_deviation", "coefficient_of_variation", "skewness", "kurtosis",
    "excess_kurtosis", "lag1_autocorrelation", "mean_median_gap", "l_location", "l_scale", "l_skewness",
    "l_kurtosis", "trimmed_mean", "winsorized_mean", "geometric_mean", "harmonic_mean", "upper_tail_index",
}
SHAPE_NULL_WHEN_CONSTANT = (
    *SHAPE_DESCRIPTORS, "quartile_skewness", "octile_kurtosis", "octile_excess_kurtosis", "medcouple",
    "mean_median_gap", "l_skewness", "l_kurtosis", "lag1_autocorrelation",
)

PROPERTY_SETTINGS = settings(
    max_examples=150, deadline=None, derandomize=True, database=None, suppress_health_check=[HealthCheck.filter_too_much]
)
SMALL_SETTINGS = settings(
    max_examples=60, deadline=None, derandomize=True, database=None, suppress_health_check=[HealthCheck.filter_too_much]
)

samples = st.lists(
    st.floats(min_value=-1e6, max_value=1e6, allow_nan=False, allow_infinity=False),
    min_size=5,
    max_size=60,
).filter(lambda xs: len(set(xs)) >= 3)
# Quarter-integers below 2**32 shifted by integers below 2**30 are exact in float64, so the
# shifted sample is exactly the shifted data and every difference of order statistics is unchanged.
grid_samples = st.lists(st.integers(min_value=-(2**30), max_value=2**30), min_size=5, max_size=60).filter(
    lambda xs: len(set(xs)) >= 3
)


def describe_values(x: np.ndarray, options: DescribeOptions | None = None):
    return describe(from_array(np.asarray(x, dtype=np.float64)), options or DescribeOptions(), kind="samples")


def values_of(x: np.ndarray) -> dict[str, float | None]:
    return {name: d.value for name, d in describe_values(x).descriptors.items()}


def close(a, b, scale: float, rel: float = 1e-9) -> bool:
    if a is None or b is None:
        return a is None and b is None
    return math.isclose(a, b, rel_tol=rel, abs_tol=rel * scale)


def test_every_scalar_descriptor_has_a_law():
    assert set(LAWS) == set(SCALAR_DESCRIPTORS)
    assert all(law.why for law in LAWS.values() if None in (law.shift, law.power, law.negation))


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


@PROPERTY_SETTINGS
@given(grid_samples, st.integers(min_value=-(2**30), max_value=2**30))
def test_shift_moves_location_and_leaves_the_rest(quarters, shift):
    x = np.array(quarters, dtype=np.float64) / 4.0
    before, after = values_of(x), values_of(x + shift)
    magnitude = float(np.max(np.abs(x))) + abs(shift)
    for name, law in LAWS.items():
        if law.shift == "moves":
            if before[name] is not None:
                assert math.isclose(after[name], before[name] + shift, rel_tol=1e-12, abs_tol=1e-12 * magnitude), name
        elif law.shift == "fixed":
            # Sums about the mean carry rounding of size eps * magnitude; relative to the spread that
            # is at most eps * 2**32, so 1e-6 is a safe bound for moment-based spread and shape.
            scale = float(np.ptp(x)) if law.power else 1.0
            assert close(after[name], before[name], scale, rel=1e-6), name


@PROPERTY_SETTINGS
@given(grid_samples, st.integers(min_value=-60, max_value=60))
def test_power_of_two_scaling_is_exact_for_every_descriptor(quarters, power):
    x = np.array(quarters, dtype=np.float64) / 4.0  # normal doubles: scaling by 2**power is exact
    factor = 2.0**power
    before, after = values_of(x), values_of(x * factor)
    for name, law in LAWS.items():
        expected = None if before[name] is None else before[name] * factor**law.power
        assert close(after[name], expected, 1e-300, rel=1e-12), (name, after[name], expected)


@PROPERTY_SETTINGS
@given(grid_samples, st.floats(min_value=1e-3, max_value=1e3))
def test_any_positive_scale_multiplies_by_its_power(quarters, factor):
    x = np.array(quarters, dtype=np.float64) / 4.0
    before, after = values_of(x), values_of(x * factor)
    for name, law in LAWS.items():
        expected = None if before[name] is None else before[name] * factor**law.power
        # c x rounds each value by eps relative: order statistics and sums move by a few eps of
        # the magnitude; ratios of differences (shape) by eps * magnitude / spread, at most
        # eps * 2**30 here (spread at least 1/2, data below 2**28), so 1e-6.
        magnitude = (float(np.max(np.abs(x))) * factor) ** law.power if law.power else 1.0
        rel = 1e-6 if law.power == 0 else 1e-9
        assert close(after[name], expected, magnitude, rel=rel), (name, after[name], expected)


@PROPERTY_SETTINGS
@given(samples)
def test_negation_flips_odd_shape_and_reflects_location(xs):
    x = np.array(xs)
    before, after = values_of(x), values_of(-x)
    magnitude = float(np.max(np.abs(x)))
    for name, law in LAWS.items():
        if law.negation == "flips":
            expected = None if before[name] is None else -before[name]
        elif law.negation == "fixed":
            expected = before[name]
        elif law.negation in LAWS:
            expected = -before[law.negation]
        else:
            continue
        scale = magnitude if law.power else 1.0
        assert close(after[name], expected, scale, rel=1e-9), (name, after[name], expected)


def _no_tied_windows(xs: list[float]) -> bool:
    x = np.sort(np.array(xs))
    gaps = (x[None, :] - x[:, None])[np.triu_indices(x.size, 1)]
    return np.unique(gaps).size == gaps.size


@SMALL_SETTINGS
@given(st.lists(st.floats(min_value=-1e6, max_value=1e6), min_size=4, max_size=40, unique=True).filter(_no_tied_windows))
def test_negation_reflects_the_half_sample_mode(xs):
    """Every difference of two values distinct, so no two windows of any size tie (and -x has the same differences)."""
    x = np.array(xs)
    assert values_of(-x)["half_sample_mode"] == -values_of(x)["half_sample_mode"]


@SMALL_SETTINGS
@given(st.lists(st.floats(min_value=1e-6, max_value=1e6), min_size=2, max_size=40).filter(lambda xs: len(set(xs)) > 1))
def test_negation_leaves_the_ratio_scale_so_the_coefficient_of_variation_is_null(xs):
    x = np.array(xs)
    assert values_of(x)["coefficient_of_variation"] is not None
    negated = describe_values(-x)
    assert negated.descriptors["coefficient_of_variation"].value is None
    assert any(
        w.code == "coefficient_of_variation_undefined" and "coefficient_of_variation" in w.descriptors
        for w in negated.warnings
    )


def test_the_property_checks_have_teeth():
    """A skewed sample really has a non-zero skewness whose sign negation flips (so the checks bite)."""
    x = np.array([1.0, 2.0, 2.0, 3.0, 10.0])
    before, after = values_of(x), values_of(-x)
    assert before["skewness"] > 0.5 and after["skewness"] == -before["skewness"]
    assert before["half_sample_mode"] == 2.0 and after["half_sample_mode"] == -2.0
    shifted, scaled = values_of(x + 1.0), values_of(3.0 * x)
    assert shifted["mean"] == before["mean"] + 1.0 and scaled["variance"] == pytest.approx(9.0 * before["variance"])


# ---- count table == repeated sample ----------------------------------------------------------

table_rows = st.lists(
    st.tuples(st.integers(min_value=-40, max_value=40).map(lambda i: i / 8.0), st.integers(min_value=1, max_value=6)),
    min_size=1,
    max_size=25,
)


def _quantile_view(description):
    return [(q.probability, q.value) for q in description.quantiles]


@PROPERTY_SETTINGS
@given(table_rows, st.sampled_from([None, 1, 2, 3, 4, 5, 6, 7, 8, 9]))
def test_a_table_of_counts_is_the_repeated_sample(rows, quantile_type):
    values = np.array([v for v, _ in rows])
    counts = np.array([c for _, c in rows], dtype=np.float64)
    repeated = np.repeat(values, counts.astype(np.int64))
    options = DescribeOptions(quantile_type=quantile_type, moment_order=6)
    table = describe(from_table(values, counts, probabilities=False, normalise=False), options, kind="table")
    sample = describe(from_samples(repeated.tolist(), omit_missing=False), options, kind="samples")
    spread = float(np.ptp(repeated)) + float(np.max(np.abs(repeated))) + 1.0
    for name in SCALAR_DESCRIPTORS:
        if name == "lag1_autocorrelation":
            # A table has no observation order: null with no_observation_order (checked below).
            continue
        got, expected = table.descriptors[name], sample.descriptors[name]
        rel = 1e-9 if name in FROM_SUMS else 1e-12
        assert close(got.value, expected.value, spread if LAWS[name].power else 1.0, rel=rel), (name, got.value, expected.value)
        assert close(got.standard_error_under_normality, expected.standard_error_under_normality, 1.0), name
    for (p, a), (_, b) in zip(_quantile_view(table), _quantile_view(sample)):
        assert close(a, b, spread, rel=1e-12), (p, a, b)
    for kind in ("raw", "central", "standardized"):
        for a, b in zip(getattr(table.moments, kind), getattr(sample.moments, kind)):
            assert close(a, b, spread**6, rel=1e-9), (kind, a, b)
    assert table.modes.values == sample.modes.values and table.modes.count == sample.modes.count
    for a, b in zip(table.normality, sample.normality):
        assert (a.test, a.reason) == (b.test, b.reason)
        assert close(a.statistic, b.statistic, 1.0) and close(a.p_value, b.p_value, 1.0), (a, b)
    assert table.descriptors["lag1_autocorrelation"].value is None
    codes = {w.code for w in table.warnings}
    assert codes - {"no_observation_order"} == {w.code for w in sample.warnings} - {"no_observation_order"}
    if sample.descriptors["lag1_autocorrelation"].value is not None:
        assert "no_observation_order" in codes


# ---- merging partial states ------------------------------------------------------------------

merge_parts = st.lists(
    st.lists(st.integers(min_value=-(2**20), max_value=2**20).map(lambda i: i / 64.0), min_size=1, max_size=15),
    min_size=3,
    max_size=6,
).filter(lambda parts: len({v for p in parts for v in p}) >= 3)
MERGED_DESCRIPTORS = ("mean", "variance", "standard_deviation", "skewness", "kurtosis", "excess_kurtosis",
                      "minimum", "maximum", "range")


@SMALL_SETTINGS
@given(merge_parts, st.data())
def test_descriptors_of_a_merge_do_not_depend_on_the_grouping(parts, data):
    states = [partial_state(p) for p in parts]
    cut = data.draw(st.integers(min_value=1, max_value=len(states) - 1))
    left_first = merge_states([merge_states(states[:cut]), merge_states(states[cut:])])
    one_by_one = states[0]
    for state in states[1:]:
        one_by_one = merge(one_by_one, state)
    reversed_pairs = merge_states(list(reversed(states)))
    concatenation = np.concatenate([np.asarray(p, dtype=np.float64) for p in parts])
    direct = describe_values(concatenation)
    spread = float(np.ptp(concatenation)) + float(np.max(np.abs(concatenation)))
    for state in (left_first, one_by_one, reversed_pairs):
        merged = describe_state(state, DescribeOptions())
        for name in MERGED_DESCRIPTORS:
            a, b = merged.descriptors[name].value, direct.descriptors[name].value
            assert close(a, b, spread ** (LAWS[name].power or 0), rel=1e-9), (name, a, b)


# ---- finite answers at extreme magnitudes ----------------------------------------------------


def _encoded(description, kind: str):
    """The answer as the service sends it in MessagePack (which, unlike JSON, can carry NaN)."""
    message_type = MergedDescriptionResponse if kind == "states" else DescriptionResponse
    message = msgspec.convert(description, message_type, from_attributes=True)
    return msgspec.msgpack.decode(msgspec.msgpack.encode(message))


def _non_finite(value, path="$"):
    if isinstance(value, float):
        return [] if math.isfinite(value) else [path]
    if isinstance(value, dict):
        return [p for k, v in value.items() for p in _non_finite(v, f"{path}.{k}")]
    if isinstance(value, list):
        return [p for i, v in enumerate(value) for p in _non_finite(v, f"{path}[{i}]")]
    return []


def assert_finite_with_reasons(description, kind: str) -> None:
    answer = _encoded(description, kind)
    assert _non_finite(answer) == []
    named = {name for w in description.warnings for name in w.descriptors}
    silent = [name for name, d in description.descriptors.items() if d.value is None and name not in named]
    assert silent == [], silent


magnitudes = st.integers(min_value=-150, max_value=150).map(lambda e: 10.0**e)
small_integers = st.lists(st.integers(min_value=-1000, max_value=1000), min_size=2, max_size=40)


@PROPERTY_SETTINGS
@given(small_integers, magnitudes, st.floats(min_value=-1.0, max_value=1.0))
def test_samples_at_any_magnitude_give_finite_answers(integers, magnitude, offset):
    """Values m (offset + k / 1000) for m from 1e-150 to 1e150: spread and location both scale."""
    x = magnitude * (offset + np.array(integers, dtype=np.float64) / 1000.0)
    assert_finite_with_reasons(describe_values(x, DescribeOptions(moment_order=12)), "samples")


@PROPERTY_SETTINGS
@given(small_integers, st.integers(min_value=1, max_value=2**20), st.sampled_from([0.0, 1e-300, -1e-310, 2.0**-1022]))
def test_subnormal_spreads_give_finite_answers(integers, step, centre):
    """Spreads of a few multiples of the smallest subnormal (5e-324) around 0, a tiny normal and
    the smallest normal: deviations, their powers and every ratio must stay representable or be
    null with a reason."""
    x = centre + np.array(integers, dtype=np.float64) * step * 5e-324
    assume(np.all(np.isfinite(x)))
    assert_finite_with_reasons(describe_values(x, DescribeOptions(moment_order=12)), "samples")


@SMALL_SETTINGS
@given(small_integers, magnitudes, st.sampled_from(["bca", "percentile", "basic"]), st.booleans())
def test_intervals_at_any_magnitude_and_subnormal_spread_are_finite(integers, magnitude, method, subnormal):
    """Bootstrap and classical intervals too: every end, standard error and replicate summary."""
    k = np.array(integers, dtype=np.float64)
    x = k * 5e-324 * 4096 if subnormal else magnitude * (0.5 + k / 1000.0)
    options = DescribeOptions(interval=IntervalOptions(method=method, level=0.9, resamples=200, seed=3))
    assert_finite_with_reasons(describe_values(x, options), "samples")


@SMALL_SETTINGS
@given(table_rows, magnitudes)
def test_tables_and_bins_at_any_magnitude_give_finite_answers(rows, magnitude):
    values = magnitude * np.array([v for v, _ in rows])
    counts = np.array([c for _, c in rows], dtype=np.float64)
    table = describe(from_table(values, counts, probabilities=False, normalise=False), DescribeOptions(), kind="table")
    assert_finite_with_reasons(table, "table")
    edges = magnitude * np.arange(len(rows) + 1, dtype=np.float64)
    bins = describe(from_bins(edges.tolist(), counts.tolist()), DescribeOptions(sheppard_correction=True), kind="bins")
    assert_finite_with_reasons(bins, "bins")


@SMALL_SETTINGS
@given(merge_parts, st.integers(min_value=-70, max_value=70).map(lambda e: 10.0**e))
def test_merged_states_at_any_magnitude_they_hold_give_finite_answers(parts, magnitude):
    """A state holds plain sums up to M4, so its values must keep |x|**4 * n inside float64
    (|x| up to about 1e70 here; beyond, partial_state refuses, see tests/core/test_partial.py)."""
    states = [partial_state(magnitude * np.asarray(p, dtype=np.float64)) for p in parts]
    assert_finite_with_reasons(describe_state(merge_states(states), DescribeOptions()), "states")


# ---- constant data ---------------------------------------------------------------------------

constants = st.one_of(
    st.floats(allow_nan=False, allow_infinity=False),
    st.sampled_from([0.0, 5e-324, -2.0**-1022, 1.7976931348623157e308, -1e150, 1e-150]),
)


def assert_shape_null_because_constant(description) -> None:
    reasons = {name for w in description.warnings if w.code == "constant_data" for name in w.descriptors}
    for name in SHAPE_NULL_WHEN_CONSTANT:
        if name == "lag1_autocorrelation" and description.kind != "samples":
            continue  # tables have no observation order: null for that reason first
        assert description.descriptors[name].value is None, name
        assert name in reasons, name
    for name in ("variance", "standard_deviation", "range", "interquartile_range", "median_absolute_deviation",
                 "l_scale"):
        value = description.descriptors[name].value
        assert value is None or value == 0.0, (name, value)  # zero spread, never a made-up non-zero
    assert all(m is None for m in description.moments.standardized[1:])
    assert description.tail_contributions is None
    assert_finite_with_reasons(description, description.kind)


@PROPERTY_SETTINGS
@given(constants, st.integers(min_value=2, max_value=50))
def test_constant_samples_have_null_shape_with_a_reason(value, n):
    assert_shape_null_because_constant(describe_values(np.full(n, value)))


@PROPERTY_SETTINGS
@given(constants, st.lists(st.integers(min_value=1, max_value=10**6), min_size=1, max_size=5))
def test_constant_tables_and_weighted_samples_have_null_shape_with_a_reason(value, counts):
    assume(sum(counts) >= 2)
    weights = np.array(counts, dtype=np.float64)
    table = from_table(np.full(len(counts), value), weights, probabilities=False, normalise=False)
    assert_shape_null_because_constant(describe(table, DescribeOptions(), kind="table"))
    weighted = from_samples([value] * len(counts), omit_missing=False, weights=(weights / 7.0).tolist())
    assert_shape_null_because_constant(describe(weighted, DescribeOptions(convention="population"), kind="samples"))


def test_all_counts_in_one_bin_say_so_instead_of_constant():
    """Not constant data: the values within the bin are unknown (warning single_bin)."""
    description = describe(from_bins([0.0, 1.0, 2.0], [0.0, 12.0]), DescribeOptions(), kind="bins")
    named = {name for w in description.warnings if w.code == "single_bin" for name in w.descriptors}
    for name in SHAPE_DESCRIPTORS + ("quartile_skewness", "l_skewness"):
        assert description.descriptors[name].value is None and name in named, name
