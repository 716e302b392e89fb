"""options.descriptors in the core: a selection shows what it names, with the same numbers as the
full description, and leaves the costly rest uncomputed.

The reference for every value here is the full description of the same data by the same
options (no selection): asking for less must never change a number, an interval or a warning
about what is shown.
"""

from __future__ import annotations

import numpy as np
import pytest

from tailgauge.core import (
    DescribeOptions,
    IntervalOptions,
    choose,
    compare,
    describe,
    from_array,
    from_bins,
    from_table,
    restricted,
    restricted_comparison,
)
from tailgauge.core import half_sample, lmoments, robust
from tailgauge.core.registry import SCALAR_DESCRIPTORS, names
from tailgauge.core.selection import CHOICES, FAMILIES, MEMBERS, UnknownName, shown_warnings

RNG = np.random.default_rng(20261205)
SAMPLE = RNG.gamma(2.0, 3.0, 400)


def _inputs():
    """The same three inputs at every call (fresh objects: their sorts are cached per object)."""
    rng = np.random.default_rng(7)
    values = np.arange(1.0, 31.0)
    counts = rng.integers(1, 20, values.size).astype(float)
    edges = list(np.linspace(0.0, 60.0, 13))
    bins = list(rng.integers(0, 40, 12).astype(float))
    return {
        "samples": from_array(SAMPLE),
        "table": from_table(values, counts, probabilities=False, normalise=False),
        "bins": from_bins(edges, bins),
    }


def _shown(choice: str) -> set[str]:
    if choice in FAMILIES:
        return set(names(choice))
    return {choice}


@pytest.mark.parametrize("kind", ["samples", "table", "bins"])
@pytest.mark.parametrize("choice", CHOICES)
def test_each_choice_shows_what_it_names_with_the_full_numbers(kind, choice):
    data = _inputs()[kind]
    full = describe(data, DescribeOptions(), kind=kind)
    selection = choose([choice])
    options = DescribeOptions(descriptors=selection)
    part = restricted(describe(_inputs()[kind], options, kind=kind), selection)
    shown = _shown(choice)
    assert set(part.descriptors) == shown & set(SCALAR_DESCRIPTORS)
    assert list(part.descriptors) == [n for n in SCALAR_DESCRIPTORS if n in part.descriptors]  # registry order
    for name, descriptor in part.descriptors.items():
        assert descriptor.value == full.descriptors[name].value, name
        assert descriptor.estimator == full.descriptors[name].estimator, name
    assert set(part.absent) == (set(SCALAR_DESCRIPTORS) | set(MEMBERS)) - shown
    for member in set(MEMBERS) & shown:
        assert getattr(part, member) == getattr(full, member), member
    # The warnings about what is shown are the full description's, restricted the same way.
    assert part.warnings == shown_warnings(full.warnings, selection)
    for warning in part.warnings:
        for name in warning.descriptors:
            assert name.partition("[")[0] in shown, (warning.code, name)


def test_unknown_names_list_the_choices():
    with pytest.raises(UnknownName, match="choose from mean, median"):
        choose(["mean", "average"])
    assert choose(None) is None


def test_what_a_shown_descriptor_is_computed_from_is_computed_not_shown():
    selection = choose(["median_absolute_deviation_normal", "coefficient_of_variation"])
    assert {"median_absolute_deviation", "median", "mean", "standard_deviation", "variance"} <= selection.computed
    assert selection.shown == {"median_absolute_deviation_normal", "coefficient_of_variation"}
    assert "median" in selection.also(["median"]).computed and "median" not in selection.also(["median"]).shown


def test_costly_descriptors_are_not_computed_unless_asked(monkeypatch):
    def refuse(*args, **kwargs):
        raise AssertionError("computed although not asked for")

    monkeypatch.setattr(robust, "medcouple", refuse)
    monkeypatch.setattr(half_sample, "half_sample_mode", refuse)
    monkeypatch.setattr(lmoments, "sample_lmoments", refuse)
    data = from_array(SAMPLE)
    options = DescribeOptions(descriptors=choose(["mean", "quantiles", "median_absolute_deviation"]))
    out = restricted(describe(data, options, kind="samples"), options.descriptors)
    assert set(out.descriptors) == {"mean", "median_absolute_deviation"}
    # Moments alone need no sort of the data.
    data = from_array(SAMPLE)
    options = DescribeOptions(descriptors=choose(["mean", "variance", "skewness", "moments"]))
    describe(data, options, kind="samples")
    assert "sorted_values" not in data.__dict__ and "support" not in data.__dict__


@pytest.mark.parametrize("asked", [["median", "skewness", "l_scale", "quantiles"], ["mean", "skewness"], ["quantiles"]])
@pytest.mark.parametrize("kind", ["samples", "table", "bins"])
def test_intervals_of_a_selection_equal_the_full_run(kind, asked):
    """The engine resamples only what is asked (no order lookups for the moments alone), with
    the same draws: each interval equals the full run's."""
    interval = IntervalOptions(method="bca", resamples=999, seed=11)
    full = describe(_inputs()[kind], DescribeOptions(interval=interval), kind=kind)
    selection = choose(asked)
    part = restricted(
        describe(_inputs()[kind], DescribeOptions(interval=interval, descriptors=selection), kind=kind), selection
    )
    assert set(part.descriptors) == set(asked) - {"quantiles"}
    for name in part.descriptors:
        assert part.descriptors[name].interval == full.descriptors[name].interval, name
        assert part.descriptors[name].standard_error == full.descriptors[name].standard_error, name
    if "quantiles" in asked:
        assert [q.interval for q in part.quantiles] == [q.interval for q in full.quantiles]


def test_comparison_contrasts_follow_the_selection():
    first, second = from_array(SAMPLE), from_array(SAMPLE * 1.2 + 1.0)
    full = compare(first, second, DescribeOptions(), kinds=("samples", "samples"))
    selection = choose(["variance", "medcouple"])
    part = compare(
        from_array(SAMPLE), from_array(SAMPLE * 1.2 + 1.0), DescribeOptions(descriptors=selection),
        kinds=("samples", "samples"),
    )
    shown = restricted_comparison(part, selection)
    assert set(shown.differences) == {"variance", "medcouple"}
    assert set(shown.ratios) == {"variance"}
    assert shown.differences["medcouple"] == full.differences["medcouple"]
    assert shown.ratios["variance"] == full.ratios["variance"]
    # The effect size reads the means and standard deviations, shown or not.
    assert shown.standardized_mean_difference == full.standardized_mean_difference
    assert set(shown.absent) == {"quantile_shifts", "standardized_quantiles"}
    assert set(shown.first.descriptors) == {"variance", "medcouple"}
    with_quantiles = restricted_comparison(part, choose(["quantiles"]))
    assert with_quantiles.absent == ()


def test_a_selection_without_names_is_refused_by_the_edge_not_the_core():
    # The core accepts any subset; an empty one shows no descriptor and no member.
    selection = choose([])
    out = restricted(describe(from_array(SAMPLE), DescribeOptions(descriptors=selection), kind="samples"), selection)
    assert out.descriptors == {} and set(out.absent) == set(SCALAR_DESCRIPTORS) | set(MEMBERS)
    assert out.size.n == SAMPLE.size  # what the answer is about is always said


@pytest.mark.parametrize("n", [7, 3_000, 40_000])
@pytest.mark.parametrize(
    "asked",
    [["median"], ["median_absolute_deviation_normal", "interquartile_range"], ["quantiles", "range", "mean"],
     ["spread", "quantiles", "median"]],
)
def test_order_statistics_alone_are_selected_without_sorting_and_equal_the_sorted_path(n, asked):
    x = np.random.default_rng(n).standard_t(3, n).round(2)  # heavy tails and ties
    full = describe(from_array(x), DescribeOptions(probabilities=(0.001, 0.3, 0.999)), kind="samples")
    selection = choose(asked)
    data = from_array(x)
    part = restricted(
        describe(data, DescribeOptions(probabilities=(0.001, 0.3, 0.999), descriptors=selection), kind="samples"),
        selection,
    )
    assert "sorted_values" not in data.__dict__ and "support" not in data.__dict__
    assert part.size.distinct_values is None  # counting them would take the sort
    for name, descriptor in part.descriptors.items():
        assert descriptor.value == full.descriptors[name].value, name
    if "quantiles" in selection.shown:
        assert part.quantiles == full.quantiles
