"""The descriptor registry is the one source of every descriptor fact and warning code.

* the lists derived from it agree with what the code computes: a single observation, constant
  data and merged partial states leave exactly the descriptors the registry says undefined;
* the bootstrap engine resamples exactly the descriptors the registry marks, and every other
  descriptor has a reason;
* the warning codes are a closed vocabulary: the collector refuses anything else, and every
  code of the vocabulary is produced by some input (each named below).
"""

from __future__ import annotations

import re

import numpy as np
import pytest

from tailgauge.core import (
    DescribeOptions,
    IntervalOptions,
    WeightMeaning,
    compare,
    describe,
    describe_state,
    from_array,
    from_bins,
    from_samples,
    from_table,
    merge_states,
    partial_state,
    standardize,
)
from tailgauge.core import combine_sketches, kll_sketch_bytes, registry, resample
from tailgauge.core.describe.warnings import Warnings
from tailgauge.core.registry import WarningCode

INTERVAL = IntervalOptions(method="bca", resamples=200, seed=11, level=0.9)


def _values(n: int = 60) -> np.ndarray:
    return np.round(np.random.default_rng(20260101).gamma(2.0, 3.0, n), 2)


def test_every_descriptor_is_named_once_in_response_order():
    names = [facts.name for facts in registry.DESCRIPTORS]
    assert len(names) == len(set(names)) == 30
    assert registry.SCALAR_DESCRIPTORS == tuple(names)
    assert set(describe(from_array(_values()), DescribeOptions(), kind="samples").descriptors) == set(names)


def test_the_engine_resamples_exactly_what_the_registry_marks():
    assert registry.BOOTSTRAP_DESCRIPTORS == resample.INTERVAL_DESCRIPTORS
    result = describe(from_array(_values()), DescribeOptions(interval=INTERVAL), kind="samples")
    with_interval = {name for name, d in result.descriptors.items() if d.interval is not None}
    assert with_interval == set(registry.BOOTSTRAP_DESCRIPTORS)
    offered = {n: note.message for note in result.warnings if note.code == "interval_not_offered" for n in note.descriptors}
    # The ordinary bootstrap fails for these: each is named with the registry's reason.
    assert set(offered) == set(registry.BOOTSTRAP_FAILS)
    for name, reason in registry.BOOTSTRAP_FAILS.items():
        assert offered[name] == f"no bootstrap interval: {reason}"


def test_every_descriptor_without_an_interval_has_a_reason():
    for facts in registry.DESCRIPTORS:
        reason = registry.bootstrap_reason(facts.name)
        if facts.bootstrap:
            assert reason is None, facts.name
        else:
            assert reason and reason == (facts.bootstrap_fails or registry.NOT_RESAMPLED), facts.name
    assert registry.bootstrap_reason("range") == registry.extremes_reason()
    assert "serial order" in registry.bootstrap_reason("lag1_autocorrelation")


def test_classical_intervals_are_given_where_the_registry_says():
    result = describe(from_array(_values()), DescribeOptions(interval=INTERVAL), kind="samples")
    with_classical = {name for name, d in result.descriptors.items() if d.classical_interval is not None}
    assert with_classical == set(registry.CLASSICAL_DESCRIPTORS)


def test_a_single_observation_leaves_what_the_registry_says_undefined():
    result = describe(from_array(np.array([4.0])), DescribeOptions(), kind="samples")
    (note,) = [n for n in result.warnings if n.code == "single_observation"]
    assert tuple(note.descriptors) == registry.UNDEFINED_FOR_ONE
    assert all(result.descriptors[name].value is None for name in registry.UNDEFINED_FOR_ONE)
    assert result.descriptors["mean"].value == result.descriptors["median"].value == 4.0


def test_constant_data_leave_what_the_registry_says_undefined():
    result = describe(from_array(np.full(12, 2.5)), DescribeOptions(), kind="samples")
    (note,) = [n for n in result.warnings if n.code == "constant_data"]
    assert tuple(note.descriptors) == registry.UNDEFINED_FOR_CONSTANT + ("tail_contributions",)
    undefined = {name for name, d in result.descriptors.items() if d.value is None}
    assert undefined == set(registry.UNDEFINED_FOR_CONSTANT)


def test_merged_states_give_what_needs_only_sums_and_extremes():
    values = _values()
    state = merge_states([partial_state(values[:25]), partial_state(values[25:])])
    result = describe_state(state, DescribeOptions())
    defined = {name for name, d in result.descriptors.items() if d.value is not None}
    available = {f.name for f in registry.DESCRIPTORS if f.needs <= {"sums", "extremes"}}
    assert defined == available
    assert set(registry.MOMENT_DESCRIPTORS) <= available
    (note,) = [n for n in result.warnings if n.code == "not_available_from_states"]
    assert set(note.descriptors) == (set(registry.SCALAR_DESCRIPTORS) - available) | {
        "quantiles", "modes", "tail_contributions"
    }
    # With sketches of the same data, what needs only quantiles comes back.
    sketches = combine_sketches([kll_sketch_bytes(values[:25]), kll_sketch_bytes(values[25:])])
    approximated = describe_state(state, DescribeOptions(), sketches)
    defined = {name for name, d in approximated.descriptors.items() if d.value is not None}
    assert defined == available | set(registry.FROM_QUANTILES)


def test_scale_descriptors_are_spreads_in_the_data_units():
    values = _values()
    plain = describe(from_array(values), DescribeOptions(), kind="samples").descriptors
    scaled = describe(from_array(values * 4.0), DescribeOptions(), kind="samples").descriptors
    for name in registry.SCALE_DESCRIPTORS:
        power = 2 if name == "variance" else 1
        assert scaled[name].value == pytest.approx(4.0**power * plain[name].value, rel=1e-12), name
    assert scaled["coefficient_of_variation"].value == pytest.approx(plain["coefficient_of_variation"].value)


# --- the warning vocabulary ------------------------------------------------------------------


def test_codes_are_unique_snake_case_with_a_meaning():
    codes = [code.value for code in WarningCode]
    assert len(codes) == len(set(codes))
    for code in WarningCode:
        assert re.fullmatch(r"[a-z][a-z0-9_]*", code.value), code
        assert code == code.value and code.meaning.strip(), code
    assert registry.catalog_warnings() == {code.value: code.meaning for code in WarningCode}


def test_the_collector_accepts_only_the_vocabulary():
    notes = Warnings()
    notes.add(WarningCode.CONSTANT_DATA, "all equal", ["skewness"])
    assert notes.items[0].code == "constant_data"
    with pytest.raises(TypeError):
        notes.add("constant_data", "a free string is not a code")  # type: ignore[arg-type]
    with pytest.raises(TypeError):
        notes.add("no_such_code", "nor an unknown one")  # type: ignore[arg-type]


def _produced() -> dict[str, str]:
    """Every warning code mapped to the first input below that produces it."""
    values = _values()
    weights = np.random.default_rng(3).uniform(0.2, 3.0, values.size)
    counts = np.array([3.0, 7.0, 12.0, 9.0, 4.0, 2.0, 1.0, 1.0])
    outcomes = np.arange(1.0, 9.0)
    edges = [0.0, 1.0, 2.5, 4.0, 7.0, 10.0]
    zero_skew_values, zero_skew_p = _zero_third_moment_population()
    cases = {
        "samples with intervals": lambda: describe(from_array(values), DescribeOptions(interval=INTERVAL), kind="samples"),
        "four values": lambda: describe(from_array(np.array([1.0, 2.0, 2.0, 5.0])), DescribeOptions(), kind="samples"),
        "weighted with intervals": lambda: describe(
            from_samples(list(values), omit_missing=True, weights=list(weights)), DescribeOptions(interval=INTERVAL),
            kind="samples"),
        "reliability weights asked for G1": lambda: describe(
            from_samples(list(values), omit_missing=True, weights=list(weights), meaning=WeightMeaning.RELIABILITY),
            DescribeOptions(skewness_estimator="G1"), kind="samples"),
        "few reliability weights with intervals": lambda: describe(
            from_samples(list(values[:12]), omit_missing=True, weights=[1.0, 2.0] * 6,
                         meaning=WeightMeaning.RELIABILITY), DescribeOptions(interval=INTERVAL), kind="samples"),
        # Some resamples of three values repeat one value: their skewness is undefined.
        "three values with intervals": lambda: describe(
            from_array(np.array([1.0, 4.0, 4.5])), DescribeOptions(interval=INTERVAL), kind="samples"),
        "a missing value": lambda: describe(
            from_samples([1.0, None, 3.0, 4.0, 4.0, 9.0], omit_missing=True), DescribeOptions(), kind="samples"),
        "a zero weight": lambda: describe(
            from_samples([1.0, 3.0, 4.0, 4.0, 9.0], omit_missing=True, weights=[1.0, 0.0, 2.0, 1.0, 1.0]),
            DescribeOptions(interval=INTERVAL), kind="samples"),
        # A random walk in the order sent: r1 near 1, far beyond 2.58 / sqrt(n).
        "a trending series with intervals": lambda: describe(
            from_array(np.cumsum(values - values.mean())), DescribeOptions(interval=INTERVAL), kind="samples"),
        "one value": lambda: describe(from_array(np.array([3.0])), DescribeOptions(), kind="samples"),
        "constant": lambda: describe(from_array(np.full(10, 2.5)), DescribeOptions(), kind="samples"),
        "two values": lambda: describe(from_array(np.array([1.0, 4.0])), DescribeOptions(), kind="samples"),
        "type 5 of fractional weights": lambda: describe(
            from_samples(list(values), omit_missing=True, weights=list(weights)), DescribeOptions(quantile_type=5),
            kind="samples"),
        "values near float64's limit": lambda: describe(
            from_array(np.array([1e308, -1e308, 1.7e308, 3.0])), DescribeOptions(moment_order=8), kind="samples"),
        # The mean-median gap divides by a standard deviation beyond float64: no specific code.
        "a spread beyond float64": lambda: describe(
            from_array(np.array([-1.7e308, 1.7e308])), DescribeOptions(), kind="samples"),
        "unnormalized probabilities": lambda: describe(
            from_table(outcomes, counts / counts.sum() * 1.5, probabilities=True, normalise=True), DescribeOptions(),
            kind="table"),
        "population, zero third moment": lambda: describe(
            from_table(zero_skew_values, zero_skew_p, probabilities=True, normalise=False), DescribeOptions(),
            kind="table"),
        "bins, Sheppard on unequal widths": lambda: describe(
            from_bins(edges, [12.0, 30.0, 25.0, 9.0, 4.0]), DescribeOptions(sheppard_correction=True), kind="bins"),
        "open bins": lambda: describe(
            from_bins([None, 0.0, 1.0, 2.0, None], [3.0, 10.0, 14.0, 2.0]), DescribeOptions(), kind="bins"),
        "one bin": lambda: describe(from_bins(edges, [0.0, 0.0, 5.0, 0.0, 0.0]), DescribeOptions(), kind="bins"),
        "many tied modes": lambda: describe(
            from_array(np.arange(50.0).repeat(2)), DescribeOptions(modes_limit=5), kind="samples"),
        "states of order 4 asked for 6": lambda: describe_state(
            merge_states([partial_state(values[:30]), partial_state(values[30:])]), DescribeOptions(moment_order=6)),
        # Pareto tail of index 1.5 (core/tail_measures.py): Hill's index below 4 beside the kurtosis.
        "a heavy tail": lambda: describe(
            from_array(np.random.default_rng(5).pareto(1.5, 400) + 1.0), DescribeOptions(), kind="samples"),
        "thresholds inside bins": lambda: describe(
            from_bins(edges, [12.0, 30.0, 25.0, 9.0, 4.0]), DescribeOptions(thresholds=(2.0,)), kind="bins"),
        "a threshold in an open bin": lambda: describe(
            from_bins([None, 0.0, 1.0, 2.0, None], [3.0, 10.0, 14.0, 2.0]), DescribeOptions(thresholds=(2.5,)),
            kind="bins"),
        "states with sketches": lambda: describe_state(
            partial_state(values), DescribeOptions(), combine_sketches([kll_sketch_bytes(values)])),
    }
    comparisons = {
        "samples with ties compared": lambda: compare(
            from_array(values), from_array(values[:40] * 1.3), DescribeOptions(interval=INTERVAL),
            kinds=("samples", "samples")),
        "constant first compared": lambda: compare(
            from_array(np.full(10, 5.0)), from_array(values[:10]), DescribeOptions(), kinds=("samples", "samples")),
        "a sample against a population": lambda: compare(
            from_array(values), from_table(outcomes, counts / counts.sum(), probabilities=True, normalise=False),
            DescribeOptions(), kinds=("samples", "table")),
        "sparse bins compared": lambda: compare(
            from_bins(edges, [12.0, 30.0, 25.0, 9.0, 4.0]), from_bins(edges, [1.0, 2.0, 3.0, 4.0, 5.0]),
            DescribeOptions(), kinds=("bins", "bins")),
        "bins on different edges compared": lambda: compare(
            from_bins(edges, [12.0, 30.0, 25.0, 9.0, 4.0]),
            from_bins([edges[0], edges[2], edges[-1]], [20.0, 40.0]), DescribeOptions(), kinds=("bins", "bins")),
    }
    produced: dict[str, str] = {}
    for label, make in cases.items():
        for note in make().warnings:
            produced.setdefault(note.code, label)
    for label, make in comparisons.items():
        for note in make().warnings:
            produced.setdefault(note.code, label)
    constant = describe(from_array(np.full(5, 1.0)), DescribeOptions(), kind="samples")
    for note in standardize(constant, [1.0, 2.0]).warnings:
        produced.setdefault(note.code, "scores against constant data")
    return produced


def _zero_third_moment_population() -> tuple[np.ndarray, np.ndarray]:
    """Values 5, 9, 11, 14 with probabilities 1/8, 1/2, 1/8, 1/4: deviations from 10 are -5, -1, 1,
    4, so the mean is 10 and the third central moment (-125 - 4 + 1 + 128) / 8 = 0, while the
    quartiles 9, 9, 12.5 are plainly asymmetric."""
    values = np.array([5.0, 9.0, 11.0, 14.0])
    p = np.array([1.0, 4.0, 1.0, 2.0]) / 8.0
    assert float(p @ values) == 10.0 and float(p @ (values - 10.0) ** 3) == 0.0  # exact in float64
    return values, p


def test_every_code_of_the_vocabulary_is_produced_by_some_input():
    produced = _produced()
    assert set(produced) <= {code.value for code in WarningCode}
    missing = sorted(code.value for code in WarningCode if code.value not in produced)
    assert missing == [], f"codes no input here produces: {missing}"
