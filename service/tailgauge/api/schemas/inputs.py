"""Request bodies: the three input kinds and the comparison of two inputs.

Each input kind's data fields are declared once, in a base Struct (:class:`SamplesData`,
:class:`TableData`, :class:`BinsData`). Its descriptor endpoint's request adds that endpoint's
options; a comparison input adds the ``kind`` tag and the options that belong to the data. So a
field means, checks and reads the same in both places.
"""

from __future__ import annotations

from typing import Annotated, Literal

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


class SamplesData(Message):
    """Raw observations, optionally weighted."""

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


class Outcome(Message):
    value: Annotated[Finite, Meta(description="An outcome; repeated outcomes are merged.")]
    weight: Annotated[NonNegative, Meta(description="Its count or probability (>= 0).")]


class TableData(Message):
    """A table of outcomes with counts or probabilities."""

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
    options: SampleOptions = msgspec.field(default_factory=SampleOptions)


class TableRequest(TableData):
    options: TableOptions = msgspec.field(default_factory=TableOptions)


class BinsRequest(BinsData):
    options: BinOptions = msgspec.field(default_factory=BinOptions)


# ---- Comparisons: two inputs of any kind, contrasted second against first ----


class SamplesInput(SamplesData, tag_field="kind", tag="samples"):
    options: SamplesInputOptions = msgspec.field(default_factory=SamplesInputOptions)


class TableInput(TableData, tag_field="kind", tag="table"):
    options: TableInputOptions = msgspec.field(default_factory=TableInputOptions)


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
        ComparisonOptions,
        Meta(description="score values are scored against the first input."),
    ] = msgspec.field(default_factory=ComparisonOptions)


__all__ = [
    "BinsData",
    "BinsInput",
    "BinsRequest",
    "ComparisonInput",
    "ComparisonRequest",
    "Outcome",
    "SamplesData",
    "SamplesInput",
    "SamplesRequest",
    "TableData",
    "TableInput",
    "TableRequest",
]
