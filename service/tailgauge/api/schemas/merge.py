"""Merging partial states (and KLL sketches) computed where the data live: request and response."""

from __future__ import annotations

from typing import Annotated, Literal

import msgspec
from msgspec import UNSET, Meta, UnsetType

from tailgauge.api.schemas.common import SCHEMA_MAX_STATES, Answer, Message
from tailgauge.api.schemas.inputs import NULL_MEANS_DEFAULTS
from tailgauge.api.schemas.options import MergeOptions
from tailgauge.api.schemas.results import DescriptionResponse, Modes, PartialState, Size


class PartialStateInput(PartialState, forbid_unknown_fields=True):
    """A partial state as a request sends it: the members of an answer's partial_state, strictly.

    The answer's form (PartialState) is open to members added later, like every answer; a
    request is strict, so a misspelled member is an error, never ignored.
    """

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


class MergeRequest(Message):
    states: Annotated[
        list[PartialStateInput],
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
    options: Annotated[MergeOptions | None, Meta(description=NULL_MEANS_DEFAULTS)] = msgspec.field(
        default_factory=MergeOptions
    )

    def __post_init__(self) -> None:
        if self.options is None:
            self.options = MergeOptions()


class MergedSize(Size):
    distinct_values: Annotated[int | None, Meta(description="null: partial states carry no values.")]


class QuantileSketches(Answer):
    method: Annotated[str, Meta(description="How the quantiles were read from the pooled sketches.")]
    sketches: int
    n: int
    k: Annotated[int, Meta(description="The smallest k among the sketches, which sets the error.")]
    retained: Annotated[int, Meta(description="Items retained by all sketches together.")]
    normalized_rank_error: Annotated[
        float, Meta(description="Rank error of any quantile, as a fraction of n (datasketches' bound, 99% confidence).")
    ]
    item_types: list[str]


class MergedDescriptionResponse(DescriptionResponse, kw_only=True):
    """A descriptor response for the union of merged partial states (same members, kind states)."""

    kind: Literal["states"]
    size: MergedSize
    modes: Annotated[Modes | None | UnsetType, Meta(description="null: partial states carry no values.")] = UNSET
    sketches: Annotated[
        QuantileSketches | None, Meta(description="Where approximate quantiles came from; null without sketches.")
    ] = None


__all__ = ["KllSketch", "MergeRequest", "MergedDescriptionResponse", "MergedSize", "PartialStateInput", "QuantileSketches"]
