"""compare() as a whole (tailgauge.core.compare.assembly): both inputs described, their warnings
kept by side, seeds spawned per input, one resampling budget for both, errors named by input.

The values of each contrast are checked against outside references in the test file of its
module: test_compare_contrasts.py, test_compare_effect_size.py, test_compare_two_sample.py,
test_compare_paired.py (and test_scoring.py for standardize). Every random generator is seeded;
nothing here depends on timing.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

from tailgauge.core import (
    DescribeOptions,
    IntervalOptions,
    LimitExceeded,
    UncomputableInput,
    admit,
    compare,
    describe,
    from_array,
)
from tailgauge.core import resample
from tailgauge.core.compare import side_seeds
from tests.core.comparison_cases import (  # noqa: F401 (two_samples is a fixture)
    SAMPLES,
    codes,
    interval,
    named,
    of_arrays,
    table,
    two_samples,
)


def test_each_warning_is_said_once_where_it_belongs(two_samples):
    """Issue 15: the comparison repeated both inputs' warnings (17 in all for two samples). Each
    input's warnings stay in its description; the comparison lists only its contrasts' own."""
    before, _ = two_samples
    result = of_arrays(before, [1.0, 2.0, 2.0])
    alone = [describe(from_array(np.asarray(x, dtype=np.float64)), DescribeOptions(), kind="samples")
             for x in (before, [1.0, 2.0, 2.0])]
    for description, own in zip((result.first, result.second), alone):
        assert [(n.code, n.descriptors) for n in description.warnings] == [(n.code, n.descriptors) for n in own.warnings]
    assert "too_few_observations" in codes(result, "second")  # G2 needs n >= 4 (Joanes & Gill 1998)
    assert "too_few_observations" not in codes(result, "first")
    assert "differences.excess_kurtosis" in named(result, "difference_undefined")
    assert {n.side for n in result.warnings} == {"comparison"}
    # Every warning of the comparison names comparison members, never an input's descriptor.
    contrasts = ("differences.", "ratios.", "quantile_shifts", "standardized_quantiles", "standardized_mean_difference",
                 "distribution_test")
    assert all(name.startswith(contrasts) for n in result.warnings for name in n.descriptors)


# ----------------------------------------------------------------------------------------------
# Seeds: each input resampled on its own
# ----------------------------------------------------------------------------------------------


def test_replicates_of_a_difference_are_the_resamples_of_each_input_drawn_independently(two_samples):
    """Each input is described with its own seed spawned from the comparison's seed; its intervals
    equal describe() on that input alone with that seed, bit for bit, and the difference's
    percentile interval is read from stat(second*_k) - stat(first*_k)."""
    before, after = two_samples
    options = interval("percentile", 1500, 99)
    result = compare(from_array(before), from_array(after), options, kinds=SAMPLES)
    seeds = side_seeds(99)
    assert seeds[0] != seeds[1] and all(0 <= s < 2**53 for s in seeds)
    for data, description, seed in ((before, result.first, seeds[0]), (after, result.second, seeds[1])):
        own = dataclasses.replace(options, interval=IntervalOptions("percentile", 0.95, 1500, seed))
        alone = describe(from_array(data), own, kind="samples")
        assert description.resampling.seed == seed
        for name in resample.INTERVAL_DESCRIPTORS:
            assert description.descriptors[name].interval == alone.descriptors[name].interval, name
    medians = [d.resampling.replicates.values["median"][0] for d in (result.first, result.second)]
    replicates = medians[1] - medians[0]
    low, high = np.quantile(replicates, [0.025, 0.975])
    assert result.differences["median"].interval.low == pytest.approx(low, rel=1e-13)
    assert result.differences["median"].interval.high == pytest.approx(high, rel=1e-13)
    # The two inputs' resamples are not the same stream: their replicate means are uncorrelated.
    a = result.first.resampling.replicates.values["mean"][0]
    b = result.second.resampling.replicates.values["mean"][0]
    assert abs(np.corrcoef(a, b)[0, 1]) < 4.0 / math.sqrt(a.size)
    assert result.resampling.seed == 99 and result.resampling.resamples == 1500


def test_same_seed_same_comparison_and_another_seed_another(two_samples):
    before, after = two_samples

    def bits(seed):
        r = compare(from_array(before), from_array(after), interval("bca", 800, seed), kinds=SAMPLES)
        out = [(n, d.interval.low.hex(), d.interval.high.hex()) for n, d in r.differences.items()
               if d.interval]
        out += [(s.probability, s.interval.low.hex()) for s in r.quantile_shifts if s.interval]
        return out + [r.standardized_mean_difference.interval.low.hex()]

    reference = bits(5)
    assert len(reference) > 15
    assert bits(5) == reference
    assert bits(6) != reference


# ----------------------------------------------------------------------------------------------
# One budget for both inputs; errors say which input
# ----------------------------------------------------------------------------------------------


def test_the_budget_covers_both_inputs():
    rng = np.random.default_rng(2)
    a, b = from_array(rng.normal(size=300)), from_array(rng.normal(size=200))
    options = dataclasses.replace(interval("percentile", 1000, 1), max_resample_work=400_000.0)
    describe(a, options, kind="samples")  # each input alone fits (300 000 and 200 000 rows)
    describe(b, options, kind="samples")
    with pytest.raises(LimitExceeded) as raised:
        compare(a, b, options, kinds=SAMPLES)
    assert raised.value.locations[0].path == "options.interval.resamples"  # the edge adds "$."
    assert "at most 800" in raised.value.locations[0].message  # 400 000 / (300 + 200)
    # The whole advice, word for word: it is the 422 problem's detail.
    assert raised.value.detail == (
        "resampling both inputs touches 5e+05 rows (3e+05 + 2e+05), beyond this server's resampling "
        "budget of 4e+05; lower options.interval.resamples to at most 800"
    )
    assert raised.value.locations[0].message == "at most 800 for these inputs"
    # Neither the memory and time plan (cost.admit) nor each input's own bootstrap refuses this
    # request: the joint budget is checked only by compare. The advice, resent, is admitted.
    admit([a, b], options)
    resent = dataclasses.replace(options, interval=IntervalOptions("percentile", 0.95, 800, 1))
    assert compare(a, b, resent, kinds=SAMPLES).resampling.resamples == 800
    with pytest.raises(LimitExceeded):
        compare(a, b, dataclasses.replace(options, interval=IntervalOptions("percentile", 0.95, 801, 1)),
                kinds=SAMPLES)


def test_an_input_that_cannot_be_resampled_is_named_in_the_error():
    population = table([1.0, 2.0], [0.5, 0.5], probabilities=True)
    with pytest.raises(UncomputableInput) as raised:
        compare(from_array(np.array([1.0, 2.0, 3.0])), population, interval(), kinds=("samples", "table"))
    assert raised.value.detail.startswith("second input:")
    assert raised.value.locations[0].path == "options.interval"  # the edge adds "$."


# ----------------------------------------------------------------------------------------------
# Degenerate inputs: null plus a reason, never NaN
# ----------------------------------------------------------------------------------------------


def test_nothing_in_a_comparison_is_nan(two_samples):
    before, _ = two_samples
    result = of_arrays(before, np.full(12, 250.0), interval("bca", 300, 2))

    def walk(value, path):
        if isinstance(value, float):
            assert math.isfinite(value), path
        elif isinstance(value, dict):
            for k, v in value.items():
                walk(v, f"{path}.{k}")
        elif isinstance(value, list | tuple):
            for i, v in enumerate(value):
                walk(v, f"{path}[{i}]")
        elif dataclasses.is_dataclass(value) and not isinstance(value, resample.Replicates):
            for f in dataclasses.fields(value):
                walk(getattr(value, f.name), f"{path}.{f.name}")

    walk(result, "comparison")
    assert result.standardized_mean_difference.value is not None  # one input with spread is enough
