"""Contrasts (tailgauge.core.compare.contrasts): differences, ratios, quantile shifts and
standardized quantiles, exactly second minus first (or over first) of the two descriptions, and
their intervals read from the two inputs' own replicates (kept by describe).

Every random generator is seeded; nothing here depends on timing.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from tailgauge.core import DescribeOptions, compare, from_array, from_table
from tailgauge.core.compare import SCALE_DESCRIPTORS
from tailgauge.core.describe import SCALAR_DESCRIPTORS
from tests.core.comparison_cases import (  # noqa: F401 (two_samples is a fixture)
    SAMPLES,
    interval,
    named,
    two_samples,
    warned,
)


def test_differences_equal_second_minus_first_of_the_two_descriptions_exactly(two_samples):
    before, after = two_samples
    counts = np.unique(np.round(after), return_counts=True)
    second = from_table(counts[0], counts[1].astype(np.float64), probabilities=False, normalise=False)
    result = compare(from_array(before), second, DescribeOptions(), kinds=("samples", "table"))
    assert set(result.differences) == set(SCALAR_DESCRIPTORS)
    checked = 0
    for name in SCALAR_DESCRIPTORS:
        a, b = result.first.descriptors[name].value, result.second.descriptors[name].value
        got = result.differences[name].value
        if a is None or b is None:
            assert got is None, name
            assert f"differences.{name}" in named(result, "difference_undefined"), name
        else:
            assert got == b - a, name  # exact: the same float operation
            checked += 1
    assert checked >= 20
    # The table has no observation order: its lag-1 autocorrelation (and so the difference) is undefined.
    assert result.differences["lag1_autocorrelation"].value is None
    assert set(result.ratios) == set(SCALE_DESCRIPTORS)
    for name in SCALE_DESCRIPTORS:
        a, b = result.first.descriptors[name].value, result.second.descriptors[name].value
        assert result.ratios[name].value == b / a, name
    for i, shift in enumerate(result.quantile_shifts):
        assert shift.probability == result.first.quantiles[i].probability
        assert shift.value == result.second.quantiles[i].value - result.first.quantiles[i].value


def test_intervals_of_shifts_and_standardized_quantiles_and_what_gets_none(two_samples):
    before, after = two_samples
    options = dataclasses.replace(interval("percentile", 1000, 8), probabilities=(0.0, 0.1, 0.5, 0.9, 1.0))
    result = compare(from_array(before), from_array(after), options, kinds=SAMPLES)
    rep_a = result.first.resampling.replicates.values
    rep_b = result.second.resampling.replicates.values
    for i, shift in enumerate(result.quantile_shifts):
        if shift.probability in (0.0, 1.0):
            assert shift.interval is None  # the extremes again: not offered
            assert f"quantile_shifts[{i}]" in named(result, "interval_not_offered")
            continue
        low, high = np.quantile(rep_b[f"quantile:{i}"][0] - rep_a[f"quantile:{i}"][0], [0.025, 0.975])
        assert (shift.interval.low, shift.interval.high) == pytest.approx((low, high), rel=1e-12)
    middle = result.standardized_quantiles[3]  # p = 0.9
    z = lambda r: (r["quantile:3"][0] - r["mean"][0]) / r["standard_deviation"][0]  # noqa: E731
    low, high = np.quantile(z(rep_b) - z(rep_a), [0.025, 0.975])
    assert (middle.z.interval.low, middle.z.interval.high) == pytest.approx((low, high), rel=1e-9)
    # Extremes, serial order and the half-sample mode (bootstrap not known to be consistent): null
    # intervals, said why.
    not_offered = named(result, "interval_not_offered")
    for name in ("minimum", "maximum", "range", "lag1_autocorrelation", "half_sample_mode"):
        assert result.differences[name].interval is None
        assert f"differences.{name}" in not_offered
    # The quantile-based shape, the mean-median gap and the L-moments: intervals of the differences
    # of the two inputs' replicates, resample by resample.
    for name in ("quartile_skewness", "octile_kurtosis", "octile_excess_kurtosis", "mean_median_gap",
                 "l_location", "l_scale", "l_skewness", "l_kurtosis"):
        low, high = np.quantile(rep_b[name][0] - rep_a[name][0], [0.025, 0.975])
        got = result.differences[name].interval
        assert (got.low, got.high) == pytest.approx((low, high), rel=1e-12), name
        assert f"differences.{name}" not in not_offered
    effect = result.standardized_mean_difference
    assert effect.interval.low < effect.value < effect.interval.high


# ----------------------------------------------------------------------------------------------
# Degenerate inputs: null plus a reason
# ----------------------------------------------------------------------------------------------


def test_ratios_and_standardized_quantiles_of_constant_data_are_null_with_a_reason():
    constant = from_array(np.full(10, 5.0))
    varied = from_array(np.array([1.0, 2.0, 4.0, 4.0, 5.0, 7.0, 9.0, 9.5, 10.0, 12.0]))
    result = compare(constant, varied, DescribeOptions(), kinds=SAMPLES)
    for name in ("variance", "standard_deviation", "interquartile_range", "median_absolute_deviation"):
        assert result.ratios[name].value is None
        assert f"ratios.{name}" in named(result, "ratio_undefined")
    # The reverse ratio (first varied, second constant) is a legitimate zero.
    reverse = compare(varied, constant, DescribeOptions(), kinds=SAMPLES)
    assert reverse.ratios["standard_deviation"].value == 0.0
    for i, quantile in enumerate(result.standardized_quantiles):
        assert quantile.z.first is None and quantile.z.second is not None and quantile.z.difference is None
        assert f"standardized_quantiles[{i}].z.first" in named(result, "difference_undefined")
    # The differences of constant data are still defined where the descriptor is.
    assert result.differences["mean"].value == varied.values.mean() - 5.0
    assert result.differences["skewness"].value is None
    assert "differences.skewness" in named(result, "difference_undefined")


def test_contrasts_beyond_float64_are_null_with_not_representable():
    """1.7e308 - (-1.7e308) overflows: the difference is None and named, never inf; the same
    values' ratio (-1) is representable."""
    first = from_array(np.array([-1.7e308, -1.7e308, -1.6e308]))
    second = from_array(np.array([1.7e308, 1.7e308, 1.6e308]))
    result = compare(first, second, DescribeOptions(), kinds=SAMPLES)
    for name in ("minimum", "maximum", "median"):
        assert result.differences[name].value is None, name
        assert f"differences.{name}" in named(result, "not_representable"), name
    # The median's shift overflows too (p = 0.5 is among the default probabilities).
    middle = [i for i, s in enumerate(result.quantile_shifts) if s.probability == 0.5]
    assert middle and result.quantile_shifts[middle[0]].value is None
    assert f"quantile_shifts[{middle[0]}]" in named(result, "not_representable")


def test_a_statistic_left_out_for_one_input_leaves_its_contrast_not_offered_with_that_reason():
    """The medcouple of 300 distinct values is too costly to resample within the budget (the
    engine leaves it out and says so); the comparison's difference of medcouples then gets no
    interval, with interval_not_offered and the same reason, not interval_undefined."""
    from tailgauge.core.registry import TOO_COSTLY

    rng = np.random.default_rng(8)
    first, second = from_array(rng.gamma(2.0, 3.0, 300)), from_array(rng.gamma(2.0, 3.0, 40))
    result = compare(first, second, interval("percentile", 400, 5), kinds=("samples", "samples"))
    assert result.first.descriptors["medcouple"].interval is None
    assert result.differences["medcouple"].value is not None
    assert result.differences["medcouple"].interval is None
    offered_not = [n for n in warned(result, "interval_not_offered") if "differences.medcouple" in n.descriptors]
    assert len(offered_not) == 1 and TOO_COSTLY in offered_not[0].message, result.warnings
    assert "differences.medcouple" not in named(result, "interval_undefined")
    # Every other difference the engine resamples still has its interval.
    assert result.differences["mean"].interval is not None
