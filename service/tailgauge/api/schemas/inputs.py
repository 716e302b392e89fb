"""Request bodies: the three input kinds and the comparison of two inputs.

Each input kind's data fields are declared once, in a base Struct (:class:`SamplesData`,
:class:`TableData`, :class:`BinsData`). Its descriptor endpoint's request adds that endpoint's
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


ComparisonInput = Annotated[
    SamplesInput | TableInput | BinsInput,
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
