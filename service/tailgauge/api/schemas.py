"""Wire messages: one msgspec Struct per request and response, which is also the published schema.

API-change rules: a new field always has a default; a field's type is only ever widened (a list
may also come as float64 bytes), never changed; names are
snake_case plain statistical terms. Constraints are named aliases defined once below.
"""

from __future__ import annotations

from typing import Annotated, Literal

import msgspec
from msgspec import Meta

from tailgauge.core.describe import DEFAULT_PROBABILITIES

# Hard ceilings of the published schema; settings may only lower them.
SCHEMA_MAX_MOMENT_ORDER = 12
SCHEMA_MAX_PROBABILITIES = 1000
SCHEMA_MAX_SCORES = 10_000

Probability = Annotated[float, Meta(ge=0.0, le=1.0, description="A probability in [0, 1].")]
# Every number a caller sends must be finite: JSON cannot carry NaN or Infinity, and the bounds
# below make MessagePack's native NaN and Infinity errors too (named by their path).
LARGEST = 1.7976931348623157e308
Finite = Annotated[float, Meta(ge=-LARGEST, le=LARGEST, description="A finite number.")]
Observation = Annotated[
    Finite | None,
    Meta(description="One observation; null marks a missing value (see options.missing)."),
]
Float64Bytes = Annotated[
    bytes,
    Meta(
        min_length=8,
        description=(
            "Fast path for large arrays: IEEE 754 float64 values, little-endian, packed end to end "
            "(8 bytes each) - a MessagePack bin, or a base64 string in JSON."
        ),
    ),
]
MaybeNumber = Annotated[
    float | None, Meta(description="A number, or null when undefined (a warning says why).")
]


class Message(msgspec.Struct, forbid_unknown_fields=True, kw_only=True):
    """Base of every wire message: unknown fields are errors, never silently ignored."""


NonNegative = Annotated[float, Meta(ge=0.0, le=LARGEST, description="A finite number >= 0.")]


MAX_SEED = 2**53 - 1


class IntervalRequest(Message):
    method: Annotated[
        Literal["percentile", "basic", "bca"],
        Meta(description="Bootstrap interval: percentile, basic, or bias-corrected and accelerated (BCa)."),
    ] = "bca"
    level: Annotated[float, Meta(gt=0.0, lt=1.0, description="Confidence level, e.g. 0.95.")] = 0.95
    resamples: Annotated[
        int, Meta(ge=100, le=1_000_000, description="Bootstrap resamples (the server's budget may allow fewer).")
    ] = 9999
    seed: Annotated[
        Annotated[int, Meta(ge=0, le=MAX_SEED)] | None,
        Meta(description="Seed of the resampling (0 to 2^53 - 1); null draws one, echoed in resampling.seed."),
    ] = None


class SummaryOptions(Message):
    """Options of every endpoint that reports descriptors, merged states included."""

    convention: Annotated[
        Literal["sample", "population"] | None,
        Meta(
            description=(
                "sample: variance with divisor n - 1 (V1 - V2/V1 for reliability weights) and "
                "skewness/kurtosis G1/G2; population: divisor n and g1/g2. null: sample, except "
                "a probability table, which is always a population."
            )
        ),
    ] = None
    skewness_estimator: Annotated[
        Literal["g1", "G1", "b1"] | None,
        Meta(description="Joanes & Gill (1998) skewness family; null follows the convention."),
    ] = None
    kurtosis_estimator: Annotated[
        Literal["g2", "G2", "b2"] | None,
        Meta(description="Joanes & Gill (1998) kurtosis family; null follows the convention."),
    ] = None
    probabilities: Annotated[
        list[Probability],
        Meta(
            max_length=SCHEMA_MAX_PROBABILITIES,
            description="Probabilities at which quantiles are reported, in the order given.",
        ),
    ] = msgspec.field(default_factory=lambda: list(DEFAULT_PROBABILITIES))
    moment_order: Annotated[
        int,
        Meta(
            ge=1,
            le=SCHEMA_MAX_MOMENT_ORDER,
            description="Highest order of the raw, central and standardized moments reported.",
        ),
    ] = 4
    score: Annotated[
        list[Finite],
        Meta(
            max_length=SCHEMA_MAX_SCORES,
            description=(
                "Values to score against the described distribution: z = (x - mean) / sd and "
                "robust_z = (x - median) / normal-consistent MAD, in member scores."
            ),
        ),
    ] = msgspec.field(default_factory=list)


class DescriptorOptions(SummaryOptions):
    """Options shared by every descriptor endpoint."""

    interval: Annotated[
        IntervalRequest | None,
        Meta(description="Ask for bootstrap and classical intervals of every descriptor; null: none."),
    ] = None


QuantileType = Annotated[
    Annotated[int, Meta(ge=1, le=9)] | None,
    Meta(
        description=(
            "Hyndman & Fan (1996) sample quantile definition, 1-9. null: 7 for raw samples and whole "
            "counts, 2 for other weights (types 3-9 need whole counts), 1 for probabilities."
        ),
    ),
]


class SampleOptions(DescriptorOptions):
    quantile_type: QuantileType = None
    missing: Annotated[
        Literal["reject", "omit"],
        Meta(description="reject: a null value is an error (422); omit: nulls are dropped and counted."),
    ] = "reject"
    partial_state: Annotated[
        bool,
        Meta(
            description=(
                "Add member partial_state: count, mean, central sums M2..Mp (p = max(4, moment_order)), "
                "minimum and maximum, which POST /v1/descriptors/merge combines exactly with others."
            )
        ),
    ] = False


class TableOptions(DescriptorOptions):
    quantile_type: QuantileType = None
    normalize: Annotated[
        bool,
        Meta(
            description=(
                "For probabilities that do not sum to 1 within 1e-9: false answers 422 saying by "
                "how much; true divides them by their sum and warns."
            )
        ),
    ] = False


class BinOptions(DescriptorOptions):
    sheppard_correction: Annotated[
        bool,
        Meta(
            description=(
                "Apply Sheppard's corrections to the second and fourth central moments; only for "
                "bins of equal width (otherwise a warning and no correction)."
            )
        ),
    ] = False


class SamplesRequest(Message):
    values: Annotated[
        Annotated[list[Observation], Meta(min_length=1)] | Float64Bytes,
        Meta(
            description=(
                "Raw observations in observation order: a list, or float64 bytes (NaN marks a "
                "missing value there)."
            )
        ),
    ]
    weights: Annotated[
        list[NonNegative] | Float64Bytes | None,
        Meta(description="Optional weight per value (same length as values), a list or float64 bytes; see weight_kind."),
    ] = None
    weight_kind: Annotated[
        Literal["frequency", "reliability"],
        Meta(
            description=(
                "frequency: a weight w is the same as repeating the value w times; reliability: "
                "analytic weights (inverse-variance), effective size (sum w)^2 / sum w^2."
            )
        ),
    ] = "frequency"
    options: SampleOptions = msgspec.field(default_factory=SampleOptions)


class Outcome(Message):
    value: Annotated[Finite, Meta(description="An outcome; repeated outcomes are merged.")]
    weight: Annotated[NonNegative, Meta(description="Its count or probability (>= 0).")]


class TableRequest(Message):
    outcomes: Annotated[list[Outcome], Meta(min_length=1, description="Outcomes in any order.")]
    weight_kind: Annotated[
        Literal["counts", "probabilities"],
        Meta(
            description=(
                "counts: a sample summarised as a frequency table (sample estimators, as if each "
                "value were repeated); probabilities: a whole discrete distribution (exact "
                "population descriptors), summing to 1 within 1e-9."
            )
        ),
    ]
    options: TableOptions = msgspec.field(default_factory=TableOptions)


class BinsRequest(Message):
    edges: Annotated[
        list[Finite | None],
        Meta(
            min_length=2,
            description=(
                "k + 1 strictly increasing bin edges for k counts; the first or last may be null "
                "for an open-ended bin."
            ),
        ),
    ]
    counts: Annotated[
        Annotated[list[NonNegative], Meta(min_length=1)] | Float64Bytes,
        Meta(description="Count in each bin (>= 0): a list, or float64 bytes."),
    ]
    options: BinOptions = msgspec.field(default_factory=BinOptions)


class Interval(Message):
    low: MaybeNumber
    high: MaybeNumber
    level: float
    method: Annotated[str, Meta(description="The method actually used (BCa may fall back to percentile).")]


class ClassicalInterval(Message):
    low: float
    high: float
    level: float
    method: Annotated[str, Meta(description="student_t, chi_square, or order_statistics x(l), x(u).")]
    coverage: Annotated[float | None, Meta(description="Achieved coverage of an order-statistic interval.")]
    assumption: Annotated[str, Meta(description="What the interval assumes.")]


class DescriptorValue(Message):
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


class Descriptors(Message):
    mean: DescriptorValue
    median: DescriptorValue
    variance: DescriptorValue
    standard_deviation: DescriptorValue
    coefficient_of_variation: DescriptorValue
    skewness: DescriptorValue
    kurtosis: DescriptorValue
    excess_kurtosis: DescriptorValue
    minimum: DescriptorValue
    maximum: DescriptorValue
    range: DescriptorValue
    interquartile_range: DescriptorValue
    median_absolute_deviation: DescriptorValue
    median_absolute_deviation_normal: DescriptorValue
    lag1_autocorrelation: DescriptorValue
    quartile_skewness: DescriptorValue
    octile_kurtosis: DescriptorValue
    octile_excess_kurtosis: DescriptorValue
    medcouple: DescriptorValue
    half_sample_mode: DescriptorValue
    mean_median_gap: DescriptorValue
    l_location: DescriptorValue
    l_scale: DescriptorValue
    l_skewness: DescriptorValue
    l_kurtosis: DescriptorValue


class Size(Message):
    n: Annotated[
        int | float | None,
        Meta(description="Observations used (the total count for counts and bins; null for probabilities)."),
    ]
    total_weight: float
    omitted: Annotated[int, Meta(description="Missing observations omitted.")]
    distinct_values: Annotated[int, Meta(description="Distinct values (bins for binned counts).")]
    zero_weight: Annotated[int, Meta(description="Entries of weight zero left out.")]
    effective_n: Annotated[
        float | None, Meta(description="Kish effective sample size (sum w)^2 / sum w^2, for reliability weights.")
    ]


class Moments(Message):
    order: Annotated[int, Meta(description="Highest order; element k - 1 of each list is order k.")]
    raw: Annotated[list[MaybeNumber], Meta(description="Plug-in raw moments E[x^k].")]
    central: Annotated[list[MaybeNumber], Meta(description="Plug-in central moments E[(x - mean)^k].")]
    standardized: Annotated[
        list[MaybeNumber], Meta(description="Central moments divided by sigma^k (plug-in sigma).")
    ]


class Quantile(Message):
    probability: float
    value: MaybeNumber
    interval: Interval | None = None
    standard_error: float | None = None
    classical_interval: ClassicalInterval | None = None


class NormalityTest(Message):
    test: Annotated[
        Literal["skewness_test", "kurtosis_test", "omnibus_k2", "jarque_bera"],
        Meta(description="D'Agostino skewness z, Anscombe & Glynn kurtosis z, D'Agostino & Pearson K^2, Jarque & Bera."),
    ]
    statistic: MaybeNumber
    p_value: Annotated[
        float | None, Meta(description="Two-sided p-value: evidence against normality, not a verdict.")
    ]
    minimum_n: int
    reference: str
    reason: Annotated[str | None, Meta(description="Why the test could not be computed.")]


class Resampling(Message):
    method: str
    level: float
    resamples: int
    seed: Annotated[int, Meta(description="Seed used; the same request with this seed reproduces every interval.")]
    scheme: Annotated[str, Meta(description="What was resampled and how.")]


class Modes(Message):
    values: Annotated[list[float], Meta(description="Every value attaining the largest count, ascending.")]
    count: Annotated[float, Meta(description="The count (weight) of each mode.")]
    distinct_values: int
    tied: Annotated[int, Meta(description="How many values share the largest count.")]
    truncated: Annotated[bool, Meta(description="True when more ties exist than are listed.")]


class ShapeEstimate(Message):
    estimator: str
    value: MaybeNumber
    standard_error_under_normality: MaybeNumber


class ShapeEstimators(Message):
    skewness: list[ShapeEstimate]
    excess_kurtosis: list[ShapeEstimate]


class Contribution(Message):
    value: float
    weight: float
    third: Annotated[float, Meta(description="w (x - mean)^3 / (W sigma^3): signed share of the standardized third moment.")]
    fourth: Annotated[float, Meta(description="w (x - mean)^4 / (W sigma^4): share of the standardized fourth moment.")]


class TailContributions(Message):
    standardized_third: Annotated[float, Meta(description="Plug-in g1; the sum of every outcome's third.")]
    standardized_fourth: Annotated[float, Meta(description="Plug-in b2 = g2 + 3; the sum of every fourth.")]
    complete: Annotated[bool, Meta(description="False when only the largest contributors are listed.")]
    outcomes: list[Contribution]


class ModalClass(Message):
    lower: float
    upper: float
    count: float
    grouped_mode: MaybeNumber


class Grouping(Message):
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


class Conventions(Message):
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


class Score(Message):
    value: float
    z: Annotated[MaybeNumber, Meta(description="(value - mean) / standard deviation.")]
    robust_z: Annotated[MaybeNumber, Meta(description="(value - median) / normal-consistent MAD.")]


class Scores(Message):
    mean: MaybeNumber
    standard_deviation: MaybeNumber
    median: MaybeNumber
    median_absolute_deviation_normal: MaybeNumber
    points: Annotated[list[Score], Meta(description="One entry per value of options.score, in order.")]


class PartialState(Message):
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


class ResultWarning(Message):
    code: Annotated[str, Meta(description="Stable machine-readable reason.")]
    message: str
    descriptors: Annotated[list[str], Meta(description="The results this warning concerns.")]


class DescriptionResponse(Message):
    kind: Literal["samples", "table", "bins"]
    size: Size
    descriptors: Descriptors
    moments: Annotated[Moments | None, Meta(description="null when an open-ended bin holds data.")]
    quantiles: list[Quantile]
    modes: Modes
    shape_estimators: ShapeEstimators
    tail_contributions: Annotated[
        TailContributions | None,
        Meta(
            description=(
                "Each outcome's (bin's) share of the standardized third and fourth moments; for raw "
                "samples the largest contributors. null when the moments are undefined."
            )
        ),
    ]
    grouping: Annotated[Grouping | None, Meta(description="Bin facts; null unless the input was bins.")]
    normality: Annotated[
        list[NormalityTest], Meta(description="Normality tests from skewness and kurtosis (samples and count tables).")
    ]
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


class ProblemLocation(Message):
    path: Annotated[str, Meta(description="JSON path of the offending input, e.g. $.values[3].")]
    message: str


class Problem(Message):
    """RFC 9457 problem details."""

    type: Annotated[str, Meta(description="Stable URI identifying the problem type.")]
    title: str
    status: int
    detail: str
    errors: list[ProblemLocation] = msgspec.field(default_factory=list)


class Health(Message):
    status: Literal["ok", "draining"]


class Readiness(Health):
    notes: Annotated[
        list[str],
        Meta(description="What works less well in this worker while it still serves (e.g. metrics not exported)."),
    ] = msgspec.field(default_factory=list)


class CatalogEntry(Message):
    name: Annotated[str, Meta(description="Response name (member.name for non-descriptor results).")]
    member: Annotated[str, Meta(description="Where it appears in a descriptor response.")]
    definition: Annotated[str, Meta(description="The formula in plain text.")]
    conventions: Annotated[list[str], Meta(description="Options that change it.")]
    undefined_when: Annotated[list[str], Meta(description="What makes it null (with a warning).")]
    reference: Annotated[str, Meta(description="Published source of the definition.")]


class WarningCode(Message):
    code: str
    meaning: str


class Catalog(Message):
    descriptors: list[CatalogEntry]
    members: list[CatalogEntry]
    warnings: list[WarningCode]
    note: str


# ---- Comparisons: two inputs of any kind, contrasted second against first ----


class SamplesInputOptions(Message):
    missing: Annotated[
        Literal["reject", "omit"],
        Meta(description="reject: a null value is an error (422); omit: nulls are dropped and counted."),
    ] = "reject"


class TableInputOptions(Message):
    normalize: Annotated[
        bool, Meta(description="Divide probabilities that do not sum to 1 by their sum (with a warning).")
    ] = False


class SamplesInput(Message, tag_field="kind", tag="samples"):
    values: Annotated[
        Annotated[list[Observation], Meta(min_length=1)] | Float64Bytes,
        Meta(description="Raw observations: a list, or float64 bytes."),
    ]
    weights: Annotated[
        list[NonNegative] | Float64Bytes | None, Meta(description="Optional weight per value.")
    ] = None
    weight_kind: Literal["frequency", "reliability"] = "frequency"
    options: SamplesInputOptions = msgspec.field(default_factory=SamplesInputOptions)


class TableInput(Message, tag_field="kind", tag="table"):
    outcomes: Annotated[list[Outcome], Meta(min_length=1)]
    weight_kind: Literal["counts", "probabilities"]
    options: TableInputOptions = msgspec.field(default_factory=TableInputOptions)


class BinsInput(Message, tag_field="kind", tag="bins"):
    edges: Annotated[list[Finite | None], Meta(min_length=2, description="k + 1 strictly increasing edges.")]
    counts: Annotated[
        Annotated[list[NonNegative], Meta(min_length=1)] | Float64Bytes,
        Meta(description="Count in each bin: a list, or float64 bytes."),
    ]


ComparisonInput = Annotated[
    SamplesInput | TableInput | BinsInput,
    Meta(description='One input, tagged by "kind", with the fields of its own descriptor endpoint.'),
]


class ComparisonOptions(DescriptorOptions):
    """Options for both inputs; the descriptors of each are computed exactly as by its endpoint."""

    quantile_type: QuantileType = None
    sheppard_correction: Annotated[
        bool, Meta(description="Sheppard's corrections for an input of bins of equal width.")
    ] = False


class ComparisonRequest(Message):
    first: ComparisonInput
    second: ComparisonInput
    options: Annotated[
        ComparisonOptions,
        Meta(description="score values are scored against the first input."),
    ] = msgspec.field(default_factory=ComparisonOptions)


class Contrast(Message):
    value: MaybeNumber
    interval: Annotated[
        Interval | None, Meta(description="Bootstrap interval from independent resampling of both inputs.")
    ] = None
    standard_error: Annotated[float | None, Meta(description="Bootstrap standard error.")] = None
    classical_interval: Annotated[
        ClassicalInterval | None, Meta(description="Welch's t interval (for the mean difference only).")
    ] = None
    classical_standard_error: Annotated[
        float | None, Meta(description="Welch's standard error (for the mean difference only).")
    ] = None


class QuantileShift(Message):
    probability: float
    value: Annotated[MaybeNumber, Meta(description="Quantile of the second minus that of the first.")]
    interval: Interval | None = None
    standard_error: float | None = None


class StandardizedPair(Message):
    first: MaybeNumber
    second: MaybeNumber
    difference: MaybeNumber
    interval: Annotated[Interval | None, Meta(description="Bootstrap interval of the difference.")] = None


class StandardizedQuantile(Message):
    probability: float
    z: Annotated[StandardizedPair, Meta(description="(quantile - mean) / standard deviation, per input.")]
    robust_z: Annotated[
        StandardizedPair, Meta(description="(quantile - median) / normal-consistent MAD, per input.")
    ]


class StandardizedMeanDifference(Message):
    value: Annotated[MaybeNumber, Meta(description="Hedges' g: J x Cohen's d.")]
    uncorrected: Annotated[MaybeNumber, Meta(description="Cohen's d with the pooled standard deviation.")]
    correction_factor: Annotated[
        MaybeNumber, Meta(description="J = Gamma(m/2) / (sqrt(m/2) Gamma((m-1)/2)), m = n1 + n2 - 2.")
    ]
    pooled_standard_deviation: MaybeNumber
    degrees_of_freedom: MaybeNumber
    first_n: MaybeNumber
    second_n: MaybeNumber
    standard_error_under_normality: MaybeNumber
    estimator: str
    interval: Interval | None = None
    standard_error: float | None = None


class DistributionTest(Message):
    test: Annotated[str, Meta(description="kolmogorov_smirnov or chi_square_homogeneity.")]
    statistic: MaybeNumber
    p_value: Annotated[MaybeNumber, Meta(description="Evidence against equal distributions, not a verdict.")]
    method: str | None
    degrees_of_freedom: int | None
    reference: str
    reason: Annotated[str | None, Meta(description="Why the test could not be computed.")]


class ComparisonWarning(Message):
    side: Literal["first", "second", "comparison"]
    code: Annotated[str, Meta(description="Stable machine-readable reason (see GET /v1/catalog).")]
    message: str
    descriptors: list[str]


class ComparisonResponse(Message):
    first: DescriptionResponse
    second: DescriptionResponse
    differences: Annotated[
        dict[str, Contrast], Meta(description="Descriptor name -> second minus first, with its interval.")
    ]
    ratios: Annotated[
        dict[str, Contrast], Meta(description="Scale descriptor name -> second / first, with its interval.")
    ]
    standardized_mean_difference: StandardizedMeanDifference
    quantile_shifts: list[QuantileShift]
    standardized_quantiles: list[StandardizedQuantile]
    distribution_test: DistributionTest
    warnings: list[ComparisonWarning]
    resampling: Resampling | None = None
    scores: Annotated[
        Scores | None, Meta(description="options.score scored against the first input.")
    ] = None


# ---- Merging partial states (and KLL sketches) computed where the data live ----

SCHEMA_MAX_STATES = 100_000
KllSketch = Annotated[
    bytes,
    Meta(
        min_length=8,
        max_length=16 * 1024 * 1024,
        description=(
            "A serialized Apache DataSketches KLL sketch (doubles or floats), as produced by the "
            "Python, Java or C++ libraries: a MessagePack bin, or base64 in JSON."
        ),
    ),
]


class MergeOptions(SummaryOptions):
    """The options of a descriptor endpoint that a merged state can honour (no resampling).

    Quantiles at options.probabilities come from sketches, when sent; moments stop at the
    states' order.
    """


class MergeRequest(Message):
    states: Annotated[
        list[PartialState],
        Meta(min_length=1, max_length=SCHEMA_MAX_STATES, description="Partial states of disjoint parts of one sample."),
    ]
    sketches: Annotated[
        Annotated[list[KllSketch], Meta(max_length=SCHEMA_MAX_STATES)] | None,
        Meta(
            description=(
                "Optional KLL sketches of the same parts (together: the same values as the states), "
                "for approximate quantiles with the sketches' rank error."
            ),
        ),
    ] = None
    options: MergeOptions = msgspec.field(default_factory=MergeOptions)


class MergedSize(Size):
    distinct_values: Annotated[int | None, Meta(description="null: partial states carry no values.")]


class QuantileSketches(Message):
    method: Annotated[str, Meta(description="How the quantiles were read from the pooled sketches.")]
    sketches: int
    n: int
    k: Annotated[int, Meta(description="The smallest k among the sketches, which sets the error.")]
    retained: Annotated[int, Meta(description="Items retained by all sketches together.")]
    normalized_rank_error: Annotated[
        float, Meta(description="Rank error of any quantile, as a fraction of n (datasketches' bound, 99% confidence).")
    ]
    item_types: list[str]


class MergedDescriptionResponse(DescriptionResponse):
    """A descriptor response for the union of merged partial states (same members, kind states)."""

    kind: Literal["states"]
    size: MergedSize
    modes: Annotated[Modes | None, Meta(description="null: partial states carry no values.")]
    sketches: Annotated[
        QuantileSketches | None, Meta(description="Where approximate quantiles came from; null without sketches.")
    ] = None
