"""The comparison's warnings (tailgauge.core.compare.warnings): one warning per cause, naming every
member it concerns, worded once."""

from __future__ import annotations

from tailgauge.core.compare.warnings import IntervalWarnings, Warnings, finite_or_none, side_of, undefined_by_side
from tailgauge.core.resample import BootstrapResult, Interval


def test_interval_notes_group_members_by_reason_and_kind():
    pending = IntervalWarnings()
    percentile = Interval(0.0, 1.0, 0.95, "percentile")
    pending.record("differences.mean", BootstrapResult(percentile, 0.1, "the jackknife is constant"))
    pending.record("differences.median", BootstrapResult(percentile, 0.1, "the jackknife is constant"))
    pending.record("differences.skewness", BootstrapResult(None, None, "some resamples leave it undefined"))
    pending.record("differences.variance", BootstrapResult(percentile, 0.2, None))  # nothing to say
    pending.skip("differences.minimum", "extremes")
    pending.skip("differences.range", "extremes")
    notes = Warnings()
    pending.emit(notes)
    assert [(n.code, n.message, n.descriptors) for n in notes.items] == [
        ("bca_fallback", "BCa could not be computed (the jackknife is constant); the percentile interval "
         "is given", ["differences.mean", "differences.median"]),
        ("interval_undefined", "no bootstrap interval: some resamples leave it undefined",
         ["differences.skewness"]),
        ("interval_not_offered", "no bootstrap interval: extremes",
         ["differences.minimum", "differences.range"]),
    ]
    assert {n.side for n in notes.of_comparison()} == {"comparison"}


def test_undefined_contrasts_are_worded_by_the_side_that_leaves_them_undefined():
    assert side_of(None, 1.0) == "the first input"
    assert side_of(1.0, None) == "the second input"
    assert side_of(None, None) == "each input"
    notes = Warnings()
    undefined_by_side({"the first input": ["ratios.range"], "each input": []}, "ratios", notes)
    assert [(n.code, n.message, n.descriptors) for n in notes.items] == [
        ("difference_undefined", "these ratios are undefined because the first input leaves the descriptor "
         "undefined (see its warnings)", ["ratios.range"]),
    ]


def test_finite_or_none():
    assert finite_or_none(2.5) == 2.5 and type(finite_or_none(2.5)) is float
    assert finite_or_none(float("inf")) is None and finite_or_none(float("-inf")) is None
    assert finite_or_none(float("nan")) is None
