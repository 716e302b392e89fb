"""Response bodies of the descriptor endpoints: one Struct per result, the published schema too.

Each result mirrors a core result type field for field; ``tailgauge.api.conversion`` checks the
pairs and fails loudly when a field is missing on either side.
"""

from __future__ import annotations

from enum import StrEnum
from typing import Annotated

import msgspec
from msgspec import UNSET, Meta, UnsetType

from tailgauge.core import registry
from tailgauge.api.schemas.common import SCHEMA_MAX_MOMENT_ORDER, Answer, Finite, MaybeNumber, NonNegative
from tailgauge.api.schemas.pictures import PlotData


class InputKind(StrEnum):
    """The kind of input a description is of."""

    SAMPLES = "samples"
    TABLE = "table"
    BINS = "bins"
    HISTOGRAM = "histogram"


class NormalityTestName(StrEnum):
    """D'Agostino skewness z, Anscombe & Glynn kurtosis z, D'Agostino & Pearson K^2, Jarque & Bera."""

    SKEWNESS_TEST = "skewness_test"
    KURTOSIS_TEST = "kurtosis_test"
    OMNIBUS_K2 = "omnibus_k2"
    JARQUE_BERA = "jarque_bera"


class Interval(Answer):
    low: MaybeNumber
    high: MaybeNumber
    level: float
    method: Annotated[str, Meta(description="The method actually used (BCa may fall back to percentile).")]


class ClassicalInterval(Answer):
    low: float
    high: float
    level: float
    method: Annotated[str, Meta(description="student_t, chi_square, or order_statistics x(l), x(u).")]
    coverage: Annotated[float | None, Meta(description="Achieved coverage of an order-statistic interval.")]
    assumption: Annotated[str, Meta(description="What the interval assumes.")]


class DescriptorValue(Answer):
    value: MaybeNumber
    estimator: Annotated[str, Meta(description="The exact estimator or definition used.")]
    standard_error_under_normality: Annotated[
        float | None,
        Meta(description="Standard error of the estimator for normal data, where one is defined."),
    ] = None
    interval: Annotated[
        Interval | None, Meta(description="Bootstrap interval (when options.interval is given).")
    ] = None
    standard_error: Annotated[
        float | None, Meta(description="Bootstrap standard error (when options.interval is given).")
    ] = None
    classical_interval: Annotated[
        ClassicalInterval | None,
        Meta(description="Closed-form interval where one exists (t, chi-square, order statistics)."),
    ] = None


# One member per descriptor of the registry, in its order, each described by its definition there
# (the catalog's text): adding a descriptor to the registry adds it here. A member is absent
# (UNSET) only when options.descriptors leaves it out; describe.restricted checks that every
# shown descriptor is in the core's dict. Unlike the other answers it forbids unknown members in
# process: a key of the core's dict the Struct lacks must be an error, not a dropped result.
# The published schema still leaves it open (tailgauge.api.openapi opens every answer).
Descriptors = msgspec.defstruct(
    "Descriptors",
    [
        (facts.name, Annotated[DescriptorValue | UnsetType, Meta(description=facts.definition)], UNSET)
        for facts in registry.DESCRIPTORS
    ],
    bases=(Answer,),
    module=__name__,
    forbid_unknown_fields=True,
)


class Size(Answer):
    n: Annotated[
        int | float | None,
        Meta(description="Observations used (the total count for counts and bins; null for probabilities)."),
    ]
    total_weight: float
    omitted: Annotated[int, Meta(description="Missing observations omitted.")]
    distinct_values: Annotated[
        int | None,
        Meta(
            description=(
                "Distinct values (bins for binned counts); null for a raw sample when options.descriptors "
                "asks for nothing that sorts the data."
            )
        ),
    ]
    zero_weight: Annotated[int, Meta(description="Entries of weight zero left out.")]
    effective_n: Annotated[
        float | None,
        Meta(
            description=(
                "Kish effective sample size (sum w)^2 / sum w^2, for reliability weights; for a series sent "
                "with options.order as_sent, n / tau with tau = 1 + 2 sum of autocorrelations by Geyer's "
                "(1992) initial positive sequence, at most n log10 n (n for n <= 10); null otherwise."
            )
        ),
    ]


class Moments(Answer):
    order: Annotated[int, Meta(description="Highest order; element k - 1 of each list is order k.")]
    raw: Annotated[list[MaybeNumber], Meta(description="Plug-in raw moments E[x^k].")]
    central: Annotated[list[MaybeNumber], Meta(description="Plug-in central moments E[(x - mean)^k].")]
    standardized: Annotated[
        list[MaybeNumber], Meta(description="Central moments divided by sigma^k (plug-in sigma).")
    ]


class Quantile(Answer):
    probability: float
    value: MaybeNumber
    interval: Interval | None = None
    standard_error: float | None = None
    classical_interval: ClassicalInterval | None = None


class NormalityTest(Answer):
    test: Annotated[
        NormalityTestName,
        Meta(description="D'Agostino skewness z, Anscombe & Glynn kurtosis z, D'Agostino & Pearson K^2, Jarque & Bera."),
    ]
    statistic: MaybeNumber
    p_value: Annotated[
        float | None, Meta(description="Two-sided p-value: evidence against normality, not a verdict.")
    ]
    minimum_n: int
    reference: str
    reason: Annotated[str | None, Meta(description="Why the test could not be computed.")]


class Resampling(Answer):
    method: str
    level: float
    resamples: int
    seed: Annotated[int, Meta(description="Seed used; the same request with this seed reproduces every interval.")]
    scheme: Annotated[str, Meta(description="What was resampled and how.")]
    block_scheme: Annotated[
        str | None,
        Meta(description="stationary, circular or moving for a series sent with options.order as_sent; null otherwise."),
    ]
    block_length: Annotated[
        float | None,
        Meta(description="The expected (stationary) or fixed block length used; null when single values are resampled."),
    ]
    block_length_choice: Annotated[
        str | None,
        Meta(
            description=(
                "politis_white: chosen from the autocorrelations (Politis & White 2004, corrected by Patton, "
                "Politis & White 2009); given: options.block_length; null when single values are resampled."
            )
        ),
    ]


class Modes(Answer):
    values: Annotated[list[float], Meta(description="Every value attaining the largest count, ascending.")]
    count: Annotated[float, Meta(description="The count (weight) of each mode.")]
    distinct_values: int
    tied: Annotated[int, Meta(description="How many values share the largest count.")]
    truncated: Annotated[bool, Meta(description="True when more ties exist than are listed.")]


class ShapeEstimate(Answer):
    estimator: str
    value: MaybeNumber
    standard_error_under_normality: MaybeNumber


class ShapeEstimators(Answer):
    skewness: list[ShapeEstimate]
    excess_kurtosis: list[ShapeEstimate]


class Contribution(Answer):
    value: float
    weight: float
    third: Annotated[float, Meta(description="w (x - mean)^3 / (W sigma^3): signed share of the standardized third moment.")]
    fourth: Annotated[float, Meta(description="w (x - mean)^4 / (W sigma^4): share of the standardized fourth moment.")]


class TailContributions(Answer):
    standardized_third: Annotated[float, Meta(description="Plug-in g1; the sum of every outcome's third.")]
    standardized_fourth: Annotated[float, Meta(description="Plug-in b2 = g2 + 3; the sum of every fourth.")]
    complete: Annotated[bool, Meta(description="False when only the largest contributors are listed.")]
    outcomes: list[Contribution]


class ModalClass(Answer):
    lower: float
    upper: float
    count: float
    grouped_mode: MaybeNumber


class KnownSummary(Answer):
    """A histogram's own values as sent, and the descriptors they made exact."""

    count: Annotated[float, Meta(description="Observations: the total of the counts.")]
    sum: Annotated[float | None, Meta(description="The histogram's sum; null when not sent.")]
    minimum: Annotated[float | None, Meta(description="The histogram's min; null when not sent.")]
    maximum: Annotated[float | None, Meta(description="The histogram's max; null when not sent.")]
    exact: Annotated[
        list[str],
        Meta(description="Descriptors taken from them, exact: mean (sum / count), minimum, maximum, range."),
    ]


class Grouping(Answer):
    bins: int
    bin_width: Annotated[float | None, Meta(description="Common width of the closed bins; null when widths differ.")]
    equal_widths: bool
    open_lower: bool
    open_upper: bool
    open_bin_weight: float
    lowest_edge: Annotated[float | None, Meta(description="Lower edge of the lowest bin holding data (null if open).")]
    highest_edge: Annotated[float | None, Meta(description="Upper edge of the highest bin holding data (null if open).")]
    sheppard_correction_applied: bool
    modal_classes: list[ModalClass]
    known_summary: Annotated[
        KnownSummary | None,
        Meta(description="A histogram's own count, sum, min and max and what they made exact; null for bins."),
    ] = None


class Exceedance(Answer):
    threshold: float
    proportion_above: Annotated[MaybeNumber, Meta(description="Weight of values above the threshold / total weight.")]
    proportion_at_or_below: MaybeNumber
    count_above: Annotated[
        int | None, Meta(description="Observations above the threshold (whole counts only; null otherwise).")
    ]
    interpolated: Annotated[
        bool, Meta(description="The threshold falls inside a bin: the count above is interpolated within it.")
    ]
    interval: Annotated[
        Interval | None,
        Meta(
            description=(
                "Interval of proportion_above: clopper_pearson (whole counts), clopper_pearson_effective_n (Kish's "
                "effective n, reliability weights), clopper_pearson_fractional_counts, or "
                "clopper_pearson_interpolated_count (bins); level options.interval.level or 0.95. null for a "
                "probability table (exact)."
            )
        ),
    ]


class TailMeanSide(Answer):
    value: MaybeNumber
    interval: Annotated[Interval | None, Meta(description="Bootstrap interval (when options.interval is given).")] = None


class TailMean(Answer):
    level: float
    upper: Annotated[TailMeanSide, Meta(description="Mean of the upper 1 - level share (expected shortfall).")]
    lower: Annotated[TailMeanSide, Meta(description="Mean of the lower 1 - level share.")]


class Conventions(Answer):
    convention: str
    variance_divisor: str
    skewness: str
    kurtosis: str
    quantile_type: Annotated[int | None, Meta(description="Hyndman & Fan type used; null for grouped data.")]
    quantile_definition: str
    median: str
    central_moments: str
    normal_mad_factor: float
    weights: str


class Score(Answer):
    value: float
    z: Annotated[MaybeNumber, Meta(description="(value - mean) / standard deviation.")]
    robust_z: Annotated[MaybeNumber, Meta(description="(value - median) / normal-consistent MAD.")]


class Scores(Answer):
    mean: MaybeNumber
    standard_deviation: MaybeNumber
    median: MaybeNumber
    median_absolute_deviation_normal: MaybeNumber
    points: Annotated[list[Score], Meta(description="One entry per value of options.score, in order.")]


class PartialState(Answer):
    """A mergeable summary of one part of a sample (Pebay 2008): enough for every moment of the union."""

    count: Annotated[NonNegative, Meta(description="Observations (or total frequency weight); 0 for an empty part.")]
    mean: Finite
    central_sums: Annotated[
        list[Finite],
        Meta(
            min_length=3,
            max_length=SCHEMA_MAX_MOMENT_ORDER - 1,
            description="M2, M3, ..., Mp: sums of (x - mean)^j, j = 2..p, with 4 <= p <= 12.",
        ),
    ]
    minimum: Annotated[Finite | None, Meta(description="Smallest value; null for an empty part.")]
    maximum: Annotated[Finite | None, Meta(description="Largest value; null for an empty part.")]


class ResultWarning(Answer):
    code: Annotated[str, Meta(description="Stable machine-readable reason.")]
    message: str
    descriptors: Annotated[list[str], Meta(description="The results this warning concerns.")]


class DescriptionResponse(Answer, kw_only=True):
    kind: InputKind
    size: Size
    descriptors: Descriptors
    moments: Annotated[Moments | None | UnsetType, Meta(description="null when an open-ended bin holds data.")] = UNSET
    quantiles: list[Quantile] | UnsetType = UNSET
    modes: Modes | UnsetType = UNSET
    shape_estimators: ShapeEstimators | UnsetType = UNSET
    tail_contributions: Annotated[
        TailContributions | None | UnsetType,
        Meta(
            description=(
                "Each outcome's (bin's) share of the standardized third and fourth moments; for raw "
                "samples the largest contributors. null when the moments are undefined."
            )
        ),
    ] = UNSET
    grouping: Annotated[
        Grouping | None | UnsetType, Meta(description="Bin facts; null unless the input was bins or a histogram.")
    ] = UNSET
    normality: Annotated[
        list[NormalityTest] | UnsetType,
        Meta(description="Normality tests from skewness and kurtosis (samples and count tables)."),
    ] = UNSET
    exceedances: Annotated[
        list[Exceedance] | UnsetType, Meta(description="One entry per options.thresholds value, in order.")
    ] = UNSET
    tail_means: Annotated[
        list[TailMean] | UnsetType, Meta(description="One entry per options.tail_levels value, in order.")
    ] = UNSET
    conventions: Conventions
    warnings: list[ResultWarning]
    resampling: Annotated[
        Resampling | None, Meta(description="The resampling performed; null without options.interval.")
    ] = None
    scores: Annotated[
        Scores | None, Meta(description="Standard scores of options.score; null when none were asked for.")
    ] = None
    partial_state: Annotated[
        PartialState | None,
        Meta(description="The mergeable summary asked for by options.partial_state (samples only)."),
    ] = None
    plot_data: Annotated[
        PlotData | None,
        Meta(description="What the figure is drawn from, asked for by options.plot_data; null otherwise (and for merges)."),
    ] = None


__all__ = [
    "ClassicalInterval",
    "Contribution",
    "Conventions",
    "DescriptionResponse",
    "DescriptorValue",
    "Exceedance",
    "Descriptors",
    "Grouping",
    "KnownSummary",
    "InputKind",
    "Interval",
    "ModalClass",
    "Modes",
    "Moments",
    "NormalityTest",
    "NormalityTestName",
    "PartialState",
    "Quantile",
    "Resampling",
    "ResultWarning",
    "Score",
    "Scores",
    "ShapeEstimate",
    "ShapeEstimators",
    "Size",
    "TailContributions",
    "TailMean",
    "TailMeanSide",
]
