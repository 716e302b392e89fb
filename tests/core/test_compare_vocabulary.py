"""What the comparison takes from the descriptor registry and what is its own
(tailgauge.core.compare.vocabulary), held equal to what describe, resample and the catalog do.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from tailgauge.core import DescribeOptions, compare, describe, from_array, resample
from tailgauge.core.catalog import WARNINGS
from tailgauge.core.compare import COMPARISON_WARNINGS
from tailgauge.core.compare.warnings import Warnings
from tailgauge.core.compare.vocabulary import (
    CONVENTION_MEMBERS,
    DIFFERENCE_DESCRIPTORS,
    SCALE_DESCRIPTORS,
    no_interval_reason,
    no_quantile_interval_reason,
)
from tailgauge.core.describe import SCALAR_DESCRIPTORS
from tailgauge.core.registry import NOT_RESAMPLED as NO_RULE
from tailgauge.core.registry import WarningCode, extremes_reason
from tailgauge.core.scoring import SCORE_WARNINGS
from tests.core.comparison_cases import SAMPLES, interval, named, table


def test_every_warning_code_of_comparisons_and_scores_is_catalogued():
    assert COMPARISON_WARNINGS and SCORE_WARNINGS
    assert (COMPARISON_WARNINGS | SCORE_WARNINGS) <= set(WARNINGS)


def test_the_collector_refuses_a_code_outside_the_vocabulary():
    notes = Warnings()
    notes.add(WarningCode.RATIO_UNDEFINED, "why", ["ratios.variance"])
    with pytest.raises(TypeError):
        notes.add("ratio_not_defined", "a misspelt code", ["ratios.variance"])
    with pytest.raises(TypeError):  # in the vocabulary, but not a comparison's own warning
        notes.add(WarningCode.SCORE_UNDEFINED, "not the comparison's", ["ratios.variance"])
    assert [(n.code, n.descriptors) for n in notes.items] == [("ratio_undefined", ["ratios.variance"])]


def test_contrasted_descriptors_are_the_described_ones():
    assert DIFFERENCE_DESCRIPTORS == SCALAR_DESCRIPTORS
    assert set(SCALE_DESCRIPTORS) <= set(DIFFERENCE_DESCRIPTORS)
    assert len(set(SCALE_DESCRIPTORS)) == len(SCALE_DESCRIPTORS)


def test_interval_reasons_equal_those_describe_gives_word_for_word():
    EXTREMES = extremes_reason()
    """describe on one input with intervals: each descriptor it names under interval_not_offered
    carries the reason the comparison gives its difference; descriptors the engine resamples get
    an interval from both; the rest get none from describe and NO_RULE here."""
    rng = np.random.default_rng(31)
    options = dataclasses.replace(interval("percentile", 200, 3), probabilities=(0.0, 0.5, 1.0))
    description = describe(from_array(rng.normal(5.0, 1.0, 60)), options, kind="samples")
    offered_not = [n for n in description.warnings if n.code == "interval_not_offered"]
    described_reasons = {name: n.message for n in offered_not for name in n.descriptors}
    assert {"minimum", "maximum", "range", "lag1_autocorrelation"} <= set(described_reasons)
    for name in SCALAR_DESCRIPTORS:
        reason = no_interval_reason(name)
        if name in resample.INTERVAL_DESCRIPTORS:
            assert reason is None, name
            assert description.descriptors[name].interval is not None, name
        elif name in described_reasons:
            assert described_reasons[name] == f"no bootstrap interval: {reason}", name
        else:
            assert reason == NO_RULE, name
            assert description.descriptors[name].interval is None, name
    # The quantiles at 0 and 1 are the extremes, for describe and here alike.
    assert described_reasons["quantiles[0]"] == f"no bootstrap interval: {EXTREMES}"
    assert described_reasons["quantiles[2]"] == f"no bootstrap interval: {EXTREMES}"
    assert no_quantile_interval_reason(0.0) == no_quantile_interval_reason(1.0) == EXTREMES
    assert no_quantile_interval_reason(0.5) is None


def test_conventions_table_names_description_fields_and_contrasted_members():
    rng = np.random.default_rng(2)
    description = describe(from_array(rng.normal(size=10)), interval(), kind="samples")
    fields = {f.name for f in dataclasses.fields(description.conventions)}
    for attribute, label, members in CONVENTION_MEMBERS:
        assert attribute in fields and label, attribute
        assert all(m == "quantile_shifts" or m in DIFFERENCE_DESCRIPTORS for m in members), attribute


def test_differing_conventions_name_the_tabled_members():
    """compare describes both inputs by the same options, so their conventions differ only where
    the input decides: a probability table is described by the population convention."""
    rng = np.random.default_rng(9)
    first, second = from_array(rng.normal(size=30)), from_array(rng.normal(size=25))
    population = table([0.0, 1.0], [0.5, 0.5], probabilities=True)
    result = compare(first, population, DescribeOptions(), kinds=("samples", "table"))
    assert {f"differences.{m}" for m in CONVENTION_MEMBERS[0][2]} <= named(result, "conventions_differ")
    same = compare(first, second, DescribeOptions(convention="population"), kinds=SAMPLES)
    assert not named(same, "conventions_differ")
