"""POST /v1/descriptors/groups: many raw samples in one request, each described as the samples
endpoint describes it alone, by the samples endpoint's own options."""

from __future__ import annotations

from enum import StrEnum
from typing import Annotated

import msgspec
from msgspec import Meta

from tailgauge.api.schemas.common import MAX_SEED, Answer, Message
from tailgauge.api.schemas.comparisons import (
    ComparisonWarning,
    Contrast,
    QuantileShift,
    StandardizedMeanDifference,
)
from tailgauge.api.schemas.inputs import (
    NULL_MEANS_DEFAULTS,
    SamplesData,
    SampleValues,
    SampleWeightMeaning,
    SampleWeights,
)
from tailgauge.api.schemas.options import SampleOptions
from tailgauge.api.schemas.results import DescriptionResponse, ResultWarning

GroupKey = Annotated[
    Annotated[str, Meta(min_length=1, max_length=256)] | Annotated[int, Meta(ge=-MAX_SEED, le=MAX_SEED)],
    Meta(
        description=(
            "A group's key: a string (1 to 256 characters) or an integer (|k| < 2^53); 7 and \"7\" are "
            "different keys."
        )
    ),
]


class GroupOrder(StrEnum):
    """The order of the groups in the answer."""

    AS_SENT = "as_sent"
    BY_KEY = "by_key"


class GroupOptions(SampleOptions):
    """Every option of /v1/descriptors/samples, applied to each group, and the groups' own."""

    group_order: Annotated[
        GroupOrder,
        Meta(
            description=(
                "as_sent: the groups in the order sent (for values with keys, of each key's first "
                "appearance); by_key: integer keys ascending, then string keys by code point."
            )
        ),
    ] = GroupOrder.AS_SENT
    baseline: Annotated[
        GroupKey | None,
        Meta(
            description=(
                "The key of a group every group is contrasted with (member contrasts: the "
                "comparison's differences, ratios, quantile shifts and Hedges' g, this group "
                "against the baseline). null: no contrasts."
            )
        ),
    ] = None


class Group(SamplesData, kw_only=True):
    key: GroupKey


class GroupsRequest(Message):
    """Either groups (each with its key, values and optional weights), or the columnar form:
    values with one key per value (and optional weights)."""

    groups: Annotated[
        Annotated[list[Group], Meta(min_length=1)] | None,
        Meta(description="The groups, each a raw sample with its key (keys unique). null: the columnar form."),
    ] = None
    values: Annotated[
        SampleValues | None, Meta(description="Columnar form: every group's values, in any order of keys.")
    ] = None
    keys: Annotated[
        Annotated[list[GroupKey], Meta(min_length=1)] | None,
        Meta(description="Columnar form: the key of each value (same length as values)."),
    ] = None
    weights: Annotated[SampleWeights, Meta(description="Columnar form: optional weight per value.")] = None
    weight_kind: Annotated[
        SampleWeightMeaning | None,
        Meta(description="Columnar form: what the weights mean (null: frequency). Listed groups give their own."),
    ] = None
    options: Annotated[
        GroupOptions | None,
        Meta(description="Every option of /v1/descriptors/samples, for each group; " + NULL_MEANS_DEFAULTS),
    ] = msgspec.field(default_factory=GroupOptions)

    def __post_init__(self) -> None:
        if self.options is None:
            self.options = GroupOptions()


class BaselineContrasts(Answer):
    """This group against the baseline group, as /v1/comparisons contrasts its second input with
    its first (the baseline's own contrasts are zero differences and unit ratios)."""

    differences: Annotated[dict[str, Contrast], Meta(description="Descriptor name -> this group minus the baseline.")]
    ratios: Annotated[dict[str, Contrast], Meta(description="Scale descriptor name -> this group / the baseline.")]
    standardized_mean_difference: StandardizedMeanDifference
    quantile_shifts: Annotated[
        list[QuantileShift], Meta(description="Quantile of this group minus the baseline's (empty without quantiles).")
    ]
    warnings: list[ComparisonWarning]


class GroupDescription(DescriptionResponse, kw_only=True):
    """One group's answer: every member of the samples endpoint's answer for the group alone,
    with its key (and its contrasts with the baseline group)."""

    key: GroupKey
    contrasts: Annotated[
        BaselineContrasts | None, Meta(description="Against options.baseline; null without one.")
    ] = None


class GroupsResponse(Answer):
    groups: Annotated[list[GroupDescription], Meta(description="One answer per group, in options.group_order.")]
    seed: Annotated[
        int | None,
        Meta(
            description=(
                "The seed every group's own seed (its resampling.seed) was derived from with its key: "
                "options.interval.seed, or the one drawn; sent back, it reproduces every group. null "
                "without options.interval."
            )
        ),
    ]
    warnings: Annotated[
        list[ResultWarning],
        Meta(description="Warnings about the request as a whole; each group's own are in its answer."),
    ]


__all__ = [
    "BaselineContrasts",
    "Group",
    "GroupDescription",
    "GroupKey",
    "GroupOptions",
    "GroupOrder",
    "GroupsRequest",
    "GroupsResponse",
]
