"""Response body of POST /v1/comparisons: both descriptions and their contrasts."""

from __future__ import annotations

from enum import StrEnum
from typing import Annotated

from msgspec import UNSET, Meta, UnsetType

from tailgauge.core import registry
from tailgauge.api.schemas.common import Answer, MaybeNumber
from tailgauge.api.schemas.results import ClassicalInterval, DescriptionResponse, Interval, Resampling, Scores


class Contrast(Answer):
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


class QuantileShift(Answer):
    probability: float
    value: Annotated[MaybeNumber, Meta(description="Quantile of the second minus that of the first.")]
    interval: Interval | None = None
    standard_error: float | None = None


class StandardizedPair(Answer):
    first: MaybeNumber
    second: MaybeNumber
    difference: MaybeNumber
    interval: Annotated[Interval | None, Meta(description="Bootstrap interval of the difference.")] = None


class StandardizedQuantile(Answer):
    probability: float
    z: Annotated[StandardizedPair, Meta(description="(quantile - mean) / standard deviation, per input.")]
    robust_z: Annotated[
        StandardizedPair, Meta(description="(quantile - median) / normal-consistent MAD, per input.")
    ]


class StandardizedMeanDifference(Answer):
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


class DistributionTest(Answer):
    test: Annotated[str, Meta(description="kolmogorov_smirnov or chi_square_homogeneity.")]
    statistic: MaybeNumber
    p_value: Annotated[MaybeNumber, Meta(description="Evidence against equal distributions, not a verdict.")]
    method: str | None
    degrees_of_freedom: int | None
    reference: str
    reason: Annotated[str | None, Meta(description="Why the test could not be computed.")]
    cell_edges: Annotated[
        list[float] | None,
        Meta(
            description=(
                "Chi-square: the finite edges of the cells counted (the edges both binned inputs share, or "
                "the bins' own against observations); null for other tests."
            )
        ),
    ] = None


class WarningSide(StrEnum):
    """What a comparison warning is about: the first input, the second, or the comparison itself."""

    FIRST = "first"
    SECOND = "second"
    COMPARISON = "comparison"


class ComparisonWarning(Answer):
    side: WarningSide
    code: Annotated[str, Meta(description="Stable machine-readable reason (see GET /v1/catalog).")]
    message: str
    descriptors: list[str]


class ComparisonResponse(Answer, kw_only=True):
    first: DescriptionResponse
    second: DescriptionResponse
    differences: Annotated[
        dict[str, Contrast],
        Meta(description="Descriptor name (every member of descriptors) -> second minus first, with its interval."),
    ]
    ratios: Annotated[
        dict[str, Contrast],
        Meta(description=f"Scale descriptor name ({', '.join(registry.SCALE_DESCRIPTORS)}) -> second / first, "
             "with its interval."),
    ]
    standardized_mean_difference: StandardizedMeanDifference
    quantile_shifts: list[QuantileShift] | UnsetType = UNSET
    standardized_quantiles: list[StandardizedQuantile] | UnsetType = UNSET
    distribution_test: DistributionTest
    warnings: list[ComparisonWarning]
    resampling: Resampling | None = None
    scores: Annotated[
        Scores | None, Meta(description="options.score scored against the first input.")
    ] = None


__all__ = [
    "ComparisonResponse",
    "ComparisonWarning",
    "Contrast",
    "DistributionTest",
    "QuantileShift",
    "StandardizedMeanDifference",
    "StandardizedPair",
    "StandardizedQuantile",
    "WarningSide",
]
