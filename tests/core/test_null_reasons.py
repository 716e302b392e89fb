"""Every null descriptor names its own reason (issue 15).

The enumeration: every scalar descriptor of the registry x every input kind (raw samples;
frequency, reliability and fractional weights; count and probability tables; closed bins and
bins whose open bin holds data; merged partial states) x every degenerate case that applies
(a single observation, constant data, two and three points, coinciding quartiles, open bins,
quantile types that need whole counts) x both conventions. For each cell the expected reason
is derived below from the rules the registry states (its ``undefined_when`` texts and derived
lists), independently of how describe computes: a descriptor with an expected reason must be
null and named by a warning with that code; a descriptor with none must have a value. The
catch-all ``undefined_for_these_data`` must appear only in the listed cases where no specific
code applies.

References: the registry's catalog texts (what leaves each descriptor undefined); Joanes & Gill
1998 for the sizes G1 (n >= 3), G2 (n >= 4) and g1, b1, g2, b2 (n >= 2) need; Hosking 1990 for
the unbiased L-moments (n >= 4).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pytest

from tailgauge.core import (
    DescribeOptions,
    IntervalOptions,
    WeightMeaning,
    describe,
    describe_state,
    from_array,
    from_bins,
    from_samples,
    from_table,
    merge_states,
    partial_state,
)
from tailgauge.core.registry import (
    FROM_QUANTILES,
    NEEDS_VALUES,
    SCALAR_DESCRIPTORS,
    UNDEFINED_FOR_CONSTANT,
    UNDEFINED_FOR_ONE,
    UNDEFINED_FOR_OPEN_BIN,
    WarningCode as W,
)
from tests.core.warning_lookup import codes_by_descriptor

L_MOMENTS = ("l_location", "l_scale", "l_skewness", "l_kurtosis")
QUANTILE_SHAPE = ("quartile_skewness", "octile_kurtosis", "octile_excess_kurtosis")

# Degenerate cases of values (the bins and open-bin cases have their own data below).
VALUES = {
    "single observation": [3.0],
    "constant": [2.5, 2.5, 2.5],
    "two points": [1.0, 4.0],
    "three points": [1.0, 2.0, 4.0],
    "zero spread quartiles": [1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 5.0],
    "spread": [2.0, 3.5, 1.0, 7.0, 4.0, 5.5, 3.0, 9.0],
    "quantile type 5": [2.0, 3.5, 1.0, 7.0, 4.0, 5.5, 3.0, 9.0],
}
# Bins for the same cases: edges 0..5, counts per bin.
BIN_COUNTS = {
    "single observation": [0.0, 1.0, 0.0, 0.0, 0.0],
    "constant": [0.0, 4.0, 0.0, 0.0, 0.0],
    "two points": [1.0, 0.0, 1.0, 0.0, 0.0],
    "three points": [1.0, 1.0, 0.0, 1.0, 0.0],
    "spread": [2.0, 5.0, 9.0, 6.0, 3.0],
}
# Open bins holding data: a light open bin (every octile in closed bins) and a heavy one (the
# first octile inside it).
OPEN_BINS = {
    "open bin, light": ([None, 0.0, 1.0, 2.0, 3.0], [1.0, 20.0, 30.0, 20.0]),
    "open bin, octile inside": ([None, 0.0, 1.0, 2.0], [1.0, 2.0, 3.0]),
    "open bin, median inside": ([None, 0.0, 1.0, 2.0], [5.0, 1.0, 1.0]),
}

KINDS = (
    "samples",
    "frequency weights",
    "reliability weights",
    "fractional weights",
    "count table",
    "probability table",
    "bins",
    "open bins",
    "merged states",
)
# Kinds whose sample size counts whole observations for the bias corrections (G1, G2).
BIAS_CORRECTABLE = ("samples", "frequency weights", "fractional weights", "count table", "bins", "merged states")


@dataclass(frozen=True)
class Case:
    kind: str
    degenerate: str
    convention: str

    @property
    def population(self) -> bool:
        return self.convention == "population" or self.kind == "probability table"


def _weights(kind: str, size: int) -> list[float]:
    if kind == "frequency weights":
        return [1.0 + (i % 2) for i in range(size)]  # 1, 2, 1, 2, ...: whole counts
    if kind == "reliability weights":
        return [1.0 + 0.5 * (i % 3) for i in range(size)]
    return [0.75] * size  # fractional frequency weights


def _size(case: Case) -> float:
    """n of the bias corrections: observations, or the total frequency weight."""
    if case.kind == "bins":
        return sum(BIN_COUNTS[case.degenerate])
    values = VALUES[case.degenerate]
    if case.kind in ("frequency weights", "fractional weights"):
        return sum(_weights(case.kind, len(values)))
    return float(len(values))


def build(case: Case, interval: IntervalOptions | None = None):
    options = DescribeOptions(
        convention=None if case.kind == "probability table" else case.convention,
        quantile_type=5 if case.degenerate == "quantile type 5" else None,
        interval=interval,
    )
    if case.kind == "open bins":
        edges, counts = OPEN_BINS[case.degenerate]
        return describe(from_bins(edges, counts), options, kind="bins")
    if case.kind == "bins":
        return describe(from_bins([0.0, 1.0, 2.0, 3.0, 4.0, 5.0], BIN_COUNTS[case.degenerate]), options, kind="bins")
    values = VALUES[case.degenerate]
    if case.kind == "samples":
        return describe(from_array(np.array(values)), options, kind="samples")
    if case.kind == "merged states":
        parts = [partial_state(np.array(values[:1])), partial_state(np.array(values[1:]))]
        return describe_state(merge_states(parts), options)
    if case.kind in ("count table", "probability table"):
        probabilities = case.kind == "probability table"
        weights = np.full(len(values), 1.0 / len(values) if probabilities else 1.0)
        return describe(
            from_table(np.array(values), weights, probabilities=probabilities, normalise=probabilities),
            options,
            kind="table",
        )
    meaning = WeightMeaning.RELIABILITY if case.kind == "reliability weights" else WeightMeaning.FREQUENCY
    data = from_samples(values, omit_missing=False, weights=_weights(case.kind, len(values)), meaning=meaning)
    return describe(data, options, kind="samples")


def expected_reason(case: Case, name: str) -> W | None:
    """The code that must name ``name`` as null in ``case``, or ``None`` when it must have a value.

    The first rule that applies gives the code: what the input kind cannot give at all, then one
    observation, no spread, too few observations, and last what the quantiles leave undefined.
    """
    kind, degenerate = case.kind, case.degenerate
    binned = kind in ("bins", "open bins")
    if kind == "merged states" and name in NEEDS_VALUES + FROM_QUANTILES:
        return W.NOT_AVAILABLE_FROM_STATES
    # Hill's index needs 50 observations (core/tail_measures.py); every case here has fewer, or bins.
    if name == "upper_tail_index":
        return W.TAIL_INDEX_UNDEFINED
    if kind == "open bins" and name in ("trimmed_mean", "winsorized_mean"):
        # The window (g, W - g], g = floor(0.1 W), reaches the open lower bin of weight w0 when g < w0;
        # the winsorized mean reads every value (g of them set to a kept one), the open bin's too.
        edges, counts = OPEN_BINS[degenerate]
        if name == "winsorized_mean" or np.floor(0.1 * sum(counts)) < counts[0]:
            return W.TAIL_IN_OPEN_BIN
        return None
    if binned and name in ("minimum", "maximum", "range"):
        return W.GROUPED_EXTREMES
    if binned and name in ("medcouple", "half_sample_mode"):
        return W.NEEDS_VALUES
    if kind == "open bins" and name in UNDEFINED_FOR_OPEN_BIN:
        return W.OPEN_BIN_HOLDS_DATA
    if name == "lag1_autocorrelation" and kind not in ("samples", "merged states"):
        return W.NO_OBSERVATION_ORDER
    if name == "half_sample_mode" and kind in ("reliability weights", "fractional weights", "probability table"):
        return W.NEEDS_VALUES
    # Bins with every count in one bin: the spread within it is unknown, whatever the convention.
    one_bin = kind == "bins" and degenerate in ("single observation", "constant")
    single = one_bin or (degenerate == "single observation" and not case.population)
    if kind == "fractional weights" and degenerate == "single observation" and not case.population:
        single = True  # total weight 0.75 <= 1: no information on spread
    if single and name in UNDEFINED_FOR_ONE:
        return W.SINGLE_BIN if one_bin else W.SINGLE_OBSERVATION
    constant = degenerate == "constant" or (degenerate == "single observation" and not single)
    if constant and name in UNDEFINED_FOR_CONSTANT:
        return W.CONSTANT_DATA
    if not (single or constant) and kind in BIAS_CORRECTABLE:
        # The default families: G1 (n >= 3) and G2 (n >= 4) for a sample, g1 and g2 (n >= 2) for
        # a population (Joanes & Gill 1998).
        skew_min, kurt_min = (2, 2) if case.population else (3, 4)
        if name == "skewness" and _size(case) < skew_min:
            return W.TOO_FEW_OBSERVATIONS
        if name in ("kurtosis", "excess_kurtosis") and _size(case) < kurt_min:
            return W.TOO_FEW_OBSERVATIONS
    # The unbiased sample L-moments of whole counts need four observations (Hosking 1990).
    if name in L_MOMENTS and kind in ("samples", "frequency weights", "count table") and _size(case) < 4:
        return W.TOO_FEW_OBSERVATIONS
    if degenerate == "quantile type 5" and kind in ("fractional weights", "reliability weights"):
        if name in ("interquartile_range",) + QUANTILE_SHAPE:
            return W.INTEGER_COUNTS_REQUIRED
    if degenerate == "zero spread quartiles" and name in QUANTILE_SHAPE and kind != "merged states":
        return W.QUANTILE_SPREAD_ZERO
    if degenerate == "open bin, octile inside" and name in ("octile_kurtosis", "octile_excess_kurtosis"):
        return W.QUANTILE_IN_OPEN_BIN
    # The median (and so the MAD measured from it) and the first quartile inside the open bin.
    if degenerate == "open bin, median inside" and name in (
        "median", "median_absolute_deviation", "median_absolute_deviation_normal", "interquartile_range", *QUANTILE_SHAPE
    ):
        return W.QUANTILE_IN_OPEN_BIN
    return None


def _cases() -> list[Case]:
    cases = []
    for kind in KINDS:
        if kind == "open bins":
            degenerates = list(OPEN_BINS)
        elif kind == "bins":
            degenerates = list(BIN_COUNTS)
        else:
            degenerates = [d for d in VALUES if d != "quantile type 5" or kind in ("fractional weights", "reliability weights")]
        conventions = ("population",) if kind == "probability table" else ("sample", "population")
        cases += [Case(kind, degenerate, convention) for degenerate in degenerates for convention in conventions]
    return cases


CASES = _cases()
# Where no specific code applies, the catch-all is the true reason: a ratio whose denominator is
# beyond float64 (the mean-median gap over a standard deviation that overflows).
CATCH_ALL_CASES = {
    "a spread beyond float64": (
        lambda: describe(from_array(np.array([-1.7e308, 1.7e308])), DescribeOptions(), kind="samples"),
        {"mean_median_gap"},
    ),
}


@pytest.mark.parametrize("case", CASES, ids=lambda c: f"{c.kind}, {c.degenerate}, {c.convention}")
def test_every_null_descriptor_names_its_specific_reason(case):
    description = build(case)
    assert set(description.descriptors) == set(SCALAR_DESCRIPTORS)
    named = codes_by_descriptor(description)
    problems = []
    for name in SCALAR_DESCRIPTORS:
        value = description.descriptors[name].value
        reason = expected_reason(case, name)
        if reason is None and value is None:
            problems.append(f"{name}: null, expected a value (codes {sorted(named.get(name, ()))})")
        elif reason is not None and value is not None:
            problems.append(f"{name}: {value!r}, expected null ({reason.value})")
        elif reason is not None and reason not in named.get(name, set()):
            problems.append(f"{name}: named by {sorted(named.get(name, ()))}, expected {reason.value}")
    assert problems == []
    assert W.UNDEFINED_FOR_THESE_DATA not in {note.code for note in description.warnings}


# Whole counts, so every kind here can be resampled; not a single observation or every count in
# one bin, which have nothing to resample (options.interval is refused there, a located 422).
RESAMPLED = [
    c for c in CASES
    if c.kind in ("samples", "count table", "bins", "open bins") and c.convention == "sample"
    and c.degenerate != "single observation" and (c.kind, c.degenerate) != ("bins", "constant")
]


@pytest.mark.parametrize("case", RESAMPLED, ids=lambda c: f"{c.kind}, {c.degenerate}")
def test_asking_for_intervals_leaves_every_null_reason_in_place(case):
    # Reference: the enumeration's own expected reasons. Warnings about intervals (bootstrap_discrete,
    # bootstrap_small_sample, interval_undefined, ...) name descriptors too; they must neither stand
    # in for a null's reason nor hide it from the safety net.
    description = build(case, IntervalOptions(method="percentile", resamples=200, seed=3))
    about_values = {}
    for note in description.warnings:
        if note.code in INTERVAL_CODES:
            continue
        for name in note.descriptors:
            about_values.setdefault(name, set()).add(note.code)
    problems = []
    for name in SCALAR_DESCRIPTORS:
        value, reason = description.descriptors[name].value, expected_reason(case, name)
        if (reason is None) != (value is not None):
            problems.append(f"{name}: {value!r}, expected reason {reason}")
        elif reason is not None and reason not in about_values.get(name, set()):
            problems.append(f"{name}: named by {sorted(about_values.get(name, ()))}, expected {reason.value}")
    assert problems == []
    assert W.UNDEFINED_FOR_THESE_DATA not in {note.code for note in description.warnings}
    # A warning that the intervals of order statistics are coarse names only those with a value.
    for note in description.warnings:
        if note.code == W.BOOTSTRAP_DISCRETE:
            assert all(description.descriptors[name].value is not None for name in note.descriptors if name != "quantiles")


INTERVAL_CODES = {
    W.BCA_FALLBACK, W.INTERVAL_UNDEFINED, W.INTERVAL_NOT_OFFERED, W.RESAMPLING_SCHEME, W.SERIAL_DEPENDENCE,
    W.BOOTSTRAP_SMALL_SAMPLE, W.BOOTSTRAP_DISCRETE,
}


def test_the_enumeration_covers_every_kind_degenerate_case_and_code():
    kinds = {case.kind for case in CASES}
    assert kinds == set(KINDS)
    reasons = {expected_reason(case, name) for case in CASES for name in SCALAR_DESCRIPTORS} - {None}
    assert reasons == {
        W.NOT_AVAILABLE_FROM_STATES, W.GROUPED_EXTREMES, W.NEEDS_VALUES, W.OPEN_BIN_HOLDS_DATA,
        W.NO_OBSERVATION_ORDER, W.SINGLE_BIN, W.SINGLE_OBSERVATION, W.CONSTANT_DATA,
        W.TOO_FEW_OBSERVATIONS, W.INTEGER_COUNTS_REQUIRED, W.QUANTILE_SPREAD_ZERO, W.QUANTILE_IN_OPEN_BIN,
        W.TAIL_INDEX_UNDEFINED, W.TAIL_IN_OPEN_BIN,
    }


@pytest.mark.parametrize("label", list(CATCH_ALL_CASES))
def test_the_catch_all_names_only_what_no_specific_code_covers(label):
    make, expected = CATCH_ALL_CASES[label]
    description = make()
    (note,) = [n for n in description.warnings if n.code == W.UNDEFINED_FOR_THESE_DATA]
    assert set(note.descriptors) == expected
    assert all(description.descriptors[name].value is None for name in expected)


def test_reliability_weights_under_the_sample_convention_say_plug_in():
    """The default convention asks for a bias correction reliability weights lack (issue 15)."""
    values = VALUES["spread"]
    data = from_samples(values, omit_missing=False, weights=_weights("reliability weights", len(values)),
                        meaning=WeightMeaning.RELIABILITY)
    sample = describe(data, DescribeOptions(), kind="samples")
    named = codes_by_descriptor(sample)
    for name in ("skewness", "kurtosis", "excess_kurtosis"):
        assert sample.descriptors[name].value is not None
        assert W.PLUG_IN_ESTIMATOR in named[name]
    population = describe(data, DescribeOptions(convention="population"), kind="samples")
    assert W.PLUG_IN_ESTIMATOR not in {note.code for note in population.warnings}
