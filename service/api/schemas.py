"""Wire messages: one msgspec Struct per request and response, which is also the published schema.

API-change rules: a new field always has a default; a field's type never changes; names are
snake_case plain statistical terms. Constraints are named aliases defined once below.
"""

from __future__ import annotations

from typing import Annotated, Literal

import msgspec
from msgspec import Meta

from service.core.describe import DEFAULT_PROBABILITIES

# Hard ceilings of the published schema; settings may only lower them.
SCHEMA_MAX_MOMENT_ORDER = 12
SCHEMA_MAX_PROBABILITIES = 1000

Probability = Annotated[float, Meta(ge=0.0, le=1.0, description="A probability in [0, 1].")]
Observation = Annotated[
    float | None,
    Meta(description="One observation; null marks a missing value (see options.missing)."),
]
MaybeNumber = Annotated[
    float | None, Meta(description="A number, or null when undefined (a warning says why).")
]


class Message(msgspec.Struct, forbid_unknown_fields=True, kw_only=True):
    """Base of every wire message: unknown fields are errors, never silently ignored."""


class SampleOptions(Message):
    convention: Annotated[
        Literal["sample", "population"],
        Meta(
            description=(
                "sample: variance with divisor n - 1 and skewness/kurtosis G1/G2 by default; "
                "population: divisor n and g1/g2."
            )
        ),
    ] = "sample"
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
    quantile_type: Annotated[
        int, Meta(ge=1, le=9, description="Hyndman & Fan (1996) sample quantile definition, 1-9.")
    ] = 7
    moment_order: Annotated[
        int,
        Meta(
            ge=1,
            le=SCHEMA_MAX_MOMENT_ORDER,
            description="Highest order of the raw, central and standardized moments reported.",
        ),
    ] = 4
    missing: Annotated[
        Literal["reject", "omit"],
        Meta(description="reject: a null value is an error (422); omit: nulls are dropped and counted."),
    ] = "reject"


class SamplesRequest(Message):
    values: Annotated[
        list[Observation],
        Meta(min_length=1, description="Raw observations in observation order."),
    ]
    options: SampleOptions = msgspec.field(default_factory=SampleOptions)


class DescriptorValue(Message):
    value: MaybeNumber
    estimator: Annotated[str, Meta(description="The exact estimator or definition used.")]
    standard_error_under_normality: Annotated[
        float | None,
        Meta(description="Standard error of the estimator for normal data, where one is defined."),
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


class Size(Message):
    n: Annotated[int | float, Meta(description="Number of observations used (after omissions).")]
    total_weight: float
    omitted: Annotated[int, Meta(description="Missing observations omitted.")]
    distinct_values: int


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


class Conventions(Message):
    convention: str
    variance_divisor: str
    skewness: str
    kurtosis: str
    quantile_type: int
    quantile_definition: str
    median: str
    central_moments: str
    normal_mad_factor: float
    weights: str


class ResultWarning(Message):
    code: Annotated[str, Meta(description="Stable machine-readable reason.")]
    message: str
    descriptors: Annotated[list[str], Meta(description="The results this warning concerns.")]


class DescriptionResponse(Message):
    kind: Literal["samples"]
    size: Size
    descriptors: Descriptors
    moments: Moments
    quantiles: list[Quantile]
    modes: Modes
    shape_estimators: ShapeEstimators
    conventions: Conventions
    warnings: list[ResultWarning]


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
