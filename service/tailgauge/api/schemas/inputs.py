"""Request bodies: the four input kinds and the comparison of two inputs.

Each input kind's data fields are declared once, in a base Struct (:class:`SamplesData`,
:class:`TableData`, :class:`BinsData`, :class:`HistogramData`). Its descriptor endpoint's request adds that endpoint's
options; a comparison input adds the ``kind`` tag and the options that belong to the data. So a
field means, checks and reads the same in both places.
"""

from __future__ import annotations

from enum import StrEnum
from typing import Annotated

import msgspec
from msgspec import Meta

from tailgauge.api.schemas.common import Finite, Float64Bytes, Message, NonNegative, Observation
from tailgauge.api.schemas.options import (
    BinOptions,
    ComparisonOptions,
    SampleOptions,
    SamplesInputOptions,
    TableInputOptions,
    TableOptions,
)


class SampleWeightKind(StrEnum):
    """What the weights of a raw sample mean."""

    FREQUENCY = "frequency"
    RELIABILITY = "reliability"


class TableWeightKind(StrEnum):
    """What the weights of a table of outcomes are."""

    COUNTS = "counts"
    PROBABILITIES = "probabilities"


# An optional object of a request may also be sent as null, which means the same as leaving it
# out: every default (model-based clients send null for a member they were not given).
NULL_MEANS_DEFAULTS = "null or absent: every default."


# A raw sample's fields, declared once: its endpoint's, a comparison input's, a group's and the
# columnar groups form's.
SampleValues = Annotated[
    Annotated[list[Observation], Meta(min_length=1)] | Float64Bytes,
    Meta(
        description=(
            "Raw observations in observation order: a list, or float64 bytes (NaN marks a "
            "missing value there)."
        )
    ),
]
SampleWeights = Annotated[
    list[NonNegative] | Float64Bytes | None,
    Meta(description="Optional weight per value (same length as values), a list or float64 bytes; see weight_kind."),
]
SampleWeightMeaning = Annotated[
    SampleWeightKind,
    Meta(
        description=(
            "frequency: a weight w is the same as repeating the value w times; reliability: "
            "analytic weights (inverse-variance), effective size (sum w)^2 / sum w^2."
        )
    ),
]


class SamplesData(Message):
    """Raw observations, optionally weighted."""

    values: SampleValues
    weights: SampleWeights = None
    weight_kind: SampleWeightMeaning = SampleWeightKind.FREQUENCY


class Outcome(Message):
    value: Annotated[Finite, Meta(description="An outcome; repeated outcomes are merged.")]
    weight: Annotated[NonNegative, Meta(description="Its count or probability (>= 0).")]


class TableData(Message):
    """A table of outcomes with counts or probabilities."""

    outcomes: Annotated[list[Outcome], Meta(min_length=1, description="Outcomes in any order.")]
    weight_kind: Annotated[
        TableWeightKind,
        Meta(
            description=(
                "counts: a sample summarised as a frequency table (sample estimators, as if each "
                "value were repeated); probabilities: a whole discrete distribution (exact "
                "population descriptors), summing to 1 within 1e-9."
            )
        ),
    ]


class BinsData(Message):
    """Counts in bins between edges (a histogram)."""

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


class HistogramLayout(StrEnum):
    """How a histogram's buckets are laid out: cumulative (le bounds with cumulative counts),
    explicit (bounds with per-bucket counts) or exponential (base-2^(2^-scale) buckets)."""

    CUMULATIVE = "cumulative"
    EXPLICIT = "explicit"
    EXPONENTIAL = "exponential"


class ExponentialBuckets(Message):
    """One side of an exponential histogram."""

    offset: Annotated[
        int,
        Meta(
            ge=-(2**31),
            le=2**31 - 1,
            description=(
                "Index of the first bucket: bucket i covers (base^(offset+i), base^(offset+i+1)]; absent: 0 "
                "(as OTLP JSON leaves a zero out)."
            ),
        ),
    ] = 0
    bucket_counts: Annotated[
        list[NonNegative], Meta(description="Count in each bucket (>= 0), from index offset up; absent: none.")
    ] = msgspec.field(default_factory=list)


_BOUNDS_NOTE = "Every bucket includes its upper bound."


class HistogramData(Message):
    """A histogram as a metrics system exports it, tagged by layout; each layout has its own fields
    (HISTOGRAM_LAYOUT_FIELDS), and a field of another layout is an error."""

    layout: Annotated[HistogramLayout, Meta(description="Which fields follow: cumulative, explicit or exponential.")]
    upper_bounds: Annotated[
        Annotated[list[Finite | None], Meta(min_length=1)] | None,
        Meta(description="cumulative: the buckets' upper bounds (le), strictly increasing; the last may be null for +infinity. " + _BOUNDS_NOTE),
    ] = None
    cumulative_counts: Annotated[
        Annotated[list[NonNegative], Meta(min_length=1)] | None,
        Meta(description="cumulative: observations at or below each upper bound, never decreasing."),
    ] = None
    lower_bound: Annotated[
        Finite | None, Meta(description="cumulative: a bound below every observation; null or absent: the first bucket is open below.")
    ] = None
    count: Annotated[
        NonNegative | None, Meta(description="cumulative: the number of observations; must equal the last cumulative count.")
    ] = None
    explicit_bounds: Annotated[
        list[Finite] | None,
        Meta(description="explicit: m strictly increasing bounds; bucket i covers (bounds[i-1], bounds[i]], the outer two open. " + _BOUNDS_NOTE),
    ] = None
    bucket_counts: Annotated[
        Annotated[list[NonNegative], Meta(min_length=1)] | None,
        Meta(description="explicit: the count of each of the m + 1 buckets (>= 0)."),
    ] = None
    scale: Annotated[
        Annotated[int, Meta(ge=-10, le=20)] | None,
        Meta(description="exponential: the scale, -10..20; base = 2^(2^-scale)."),
    ] = None
    zero_count: Annotated[
        NonNegative | None, Meta(description="exponential: observations in the zero bucket [-zero_threshold, zero_threshold].")
    ] = None
    zero_threshold: Annotated[
        NonNegative | None, Meta(description="exponential: the zero bucket's half-width; null or absent: 0.")
    ] = None
    positive: Annotated[
        ExponentialBuckets | None, Meta(description="exponential: the buckets above zero; null or absent: none.")
    ] = None
    negative: Annotated[
        ExponentialBuckets | None,
        Meta(description="exponential: the buckets below zero, mirrored: bucket i covers [-base^(offset+i+1), -base^(offset+i)).")
    ] = None
    sum: Annotated[Finite | None, Meta(description="Every layout: the exact sum of the observations, if known.")] = None
    min: Annotated[Finite | None, Meta(description="explicit, exponential: the smallest observation, if known.")] = None
    max: Annotated[Finite | None, Meta(description="explicit, exponential: the largest observation, if known.")] = None


# Each layout's fields: those it requires, then those it may carry. A field of another layout is a 400.
HISTOGRAM_LAYOUT_FIELDS: dict[HistogramLayout, tuple[tuple[str, ...], tuple[str, ...]]] = {
    HistogramLayout.CUMULATIVE: (("upper_bounds", "cumulative_counts"), ("lower_bound", "sum", "count")),
    HistogramLayout.EXPLICIT: (("explicit_bounds", "bucket_counts"), ("sum", "min", "max")),
    HistogramLayout.EXPONENTIAL: (
        ("scale", "zero_count"), ("zero_threshold", "positive", "negative", "sum", "min", "max"),
    ),
}


class SamplesRequest(SamplesData):
    options: Annotated[SampleOptions | None, Meta(description=NULL_MEANS_DEFAULTS)] = msgspec.field(
        default_factory=SampleOptions
    )

    def __post_init__(self) -> None:
        if self.options is None:
            self.options = SampleOptions()


class TableRequest(TableData):
    options: Annotated[TableOptions | None, Meta(description=NULL_MEANS_DEFAULTS)] = msgspec.field(
        default_factory=TableOptions
    )

    def __post_init__(self) -> None:
        if self.options is None:
            self.options = TableOptions()


class BinsRequest(BinsData):
    options: Annotated[BinOptions | None, Meta(description=NULL_MEANS_DEFAULTS)] = msgspec.field(
        default_factory=BinOptions
    )

    def __post_init__(self) -> None:
        if self.options is None:
            self.options = BinOptions()


class HistogramRequest(HistogramData):
    options: Annotated[BinOptions | None, Meta(description=NULL_MEANS_DEFAULTS)] = msgspec.field(
        default_factory=BinOptions
    )

    def __post_init__(self) -> None:
        if self.options is None:
            self.options = BinOptions()


# ---- Comparisons: two inputs of any kind, contrasted second against first ----


class SamplesInput(SamplesData, tag_field="kind", tag="samples"):
    options: Annotated[SamplesInputOptions | None, Meta(description=NULL_MEANS_DEFAULTS)] = msgspec.field(
        default_factory=SamplesInputOptions
    )

    def __post_init__(self) -> None:
        if self.options is None:
            self.options = SamplesInputOptions()


class TableInput(TableData, tag_field="kind", tag="table"):
    options: Annotated[TableInputOptions | None, Meta(description=NULL_MEANS_DEFAULTS)] = msgspec.field(
        default_factory=TableInputOptions
    )

    def __post_init__(self) -> None:
        if self.options is None:
            self.options = TableInputOptions()


class BinsInput(BinsData, tag_field="kind", tag="bins"):
    pass


class HistogramInput(HistogramData, tag_field="kind", tag="histogram"):
    pass


ComparisonInput = Annotated[
    SamplesInput | TableInput | BinsInput | HistogramInput,
    Meta(description='One input, tagged by "kind", with the fields of its own descriptor endpoint.'),
]


class ComparisonRequest(Message):
    first: ComparisonInput
    second: ComparisonInput
    options: Annotated[
        ComparisonOptions | None,
        Meta(description="score values are scored against the first input; " + NULL_MEANS_DEFAULTS),
    ] = msgspec.field(default_factory=ComparisonOptions)

    def __post_init__(self) -> None:
        if self.options is None:
            self.options = ComparisonOptions()


__all__ = [
    "BinsData",
    "BinsInput",
    "BinsRequest",
    "ComparisonInput",
    "ComparisonRequest",
    "ExponentialBuckets",
    "HISTOGRAM_LAYOUT_FIELDS",
    "HistogramData",
    "HistogramInput",
    "HistogramLayout",
    "HistogramRequest",
    "Outcome",
    "SampleValues",
    "SampleWeightKind",
    "SampleWeightMeaning",
    "SampleWeights",
    "SamplesData",
    "SamplesInput",
    "SamplesRequest",
    "TableData",
    "TableWeightKind",
    "TableInput",
    "TableRequest",
]
