"""Option sets: what a caller may choose about how an input is described.

Every option set that reaches the core answers the same questions (:class:`CoreChoices`): an
option an endpoint does not offer is a read-only property holding the core's default, with the
reason beside it, so building the core's options never has to ask which set it was given.
Properties are not fields: they are neither decoded nor published, and sending one by name is
the same unknown-field error as any other misspelling.
"""

from __future__ import annotations

from enum import StrEnum
from typing import Annotated, Protocol

import msgspec
from msgspec import Meta

from tailgauge.api.schemas.common import (
    MAX_SEED,
    SCHEMA_MAX_MOMENT_ORDER,
    SCHEMA_MAX_PROBABILITIES,
    SCHEMA_MAX_SCORES,
    Finite,
    Message,
    Probability,
)
from tailgauge.api.schemas.pictures import FigureRequest
from tailgauge.core import DEFAULT_PROBABILITIES
from tailgauge.core import selection as core_selection


# Closed sets of option values are named enumerations (each becomes a named component of the
# published schema). The member names are what code generators call the values (the document's
# x-enum-varnames), so they must stay distinct even where two values differ only in case.


class IntervalMethod(StrEnum):
    """Bootstrap interval method."""

    PERCENTILE = "percentile"
    BASIC = "basic"
    BCA = "bca"


class Convention(StrEnum):
    """Estimator convention: sample (divisor n - 1, G1/G2) or population (divisor n, g1/g2)."""

    SAMPLE = "sample"
    POPULATION = "population"


class SkewnessEstimator(StrEnum):
    """Joanes & Gill (1998) skewness: g1 = m3 / m2^1.5 (plug-in), G1 = g1 sqrt(n(n-1))/(n-2)
    (adjusted Fisher-Pearson), b1 = g1 ((n-1)/n)^1.5 (standardized by the sample standard deviation)."""

    G1_PLUG_IN = "g1"
    G1_ADJUSTED = "G1"
    B1_SAMPLE_SD = "b1"


class KurtosisEstimator(StrEnum):
    """Joanes & Gill (1998) excess kurtosis: g2 = m4 / m2^2 - 3 (plug-in), G2 = (n-1)/((n-2)(n-3))
    ((n+1) g2 + 6) (adjusted), b2 = (g2 + 3)((n-1)/n)^2 - 3 (standardized by the sample standard deviation)."""

    G2_PLUG_IN = "g2"
    G2_ADJUSTED = "G2"
    B2_SAMPLE_SD = "b2"


class Order(StrEnum):
    """Whether the order of the values carries information: exchangeable (independent
    observations: single values are resampled) or as_sent (a series in the order observed: blocks
    of neighbours are resampled, and size.effective_n comes from the autocorrelations)."""

    EXCHANGEABLE = "exchangeable"
    AS_SENT = "as_sent"


class BlockScheme(StrEnum):
    """How blocks of a series are resampled: stationary (Politis & Romano 1994, geometric lengths),
    circular (fixed length, wrapping past the end) or moving (fixed length, within the series)."""

    STATIONARY = "stationary"
    CIRCULAR = "circular"
    MOVING = "moving"


class Missing(StrEnum):
    """What a null value means: reject (an error) or omit (dropped and counted)."""

    REJECT = "reject"
    OMIT = "omit"


# Every name options.descriptors accepts: the registry's descriptors, the selectable members and
# the descriptor families, in that order (tailgauge.core.selection.CHOICES).
DescriptorChoice = StrEnum(  # type: ignore[misc]
    "DescriptorChoice", [(name.upper(), name) for name in core_selection.CHOICES], module=__name__
)
DescriptorChoice.__doc__ = (
    "A descriptor, a response member or a family of descriptors to compute: "
    + "; ".join(
        f"{family}: {', '.join(core_selection.names(family))}" for family in core_selection.FAMILIES
    )
    + f"; members: {', '.join(core_selection.MEMBERS)}."
)


class IntervalRequest(Message):
    method: Annotated[
        IntervalMethod,
        Meta(description="Bootstrap interval: percentile, basic, or bias-corrected and accelerated (BCa)."),
    ] = IntervalMethod.BCA
    level: Annotated[float, Meta(gt=0.0, lt=1.0, description="Confidence level, e.g. 0.95.")] = 0.95
    resamples: Annotated[
        int, Meta(ge=100, le=1_000_000, description="Bootstrap resamples (the server's budget may allow fewer).")
    ] = 9999
    seed: Annotated[
        Annotated[int, Meta(ge=0, le=MAX_SEED)] | None,
        Meta(description="Seed of the resampling (0 to 2^53 - 1); null draws one, echoed in resampling.seed."),
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
# Per input kind, the option that belongs to the data themselves: declared once, used by the
# kind's own endpoint and by a comparison input of that kind.
MissingPolicy = Annotated[
    Missing,
    Meta(description="reject: a null value is an error (422); omit: nulls are dropped and counted."),
]
Normalize = Annotated[
    bool,
    Meta(
        description=(
            "For probabilities that do not sum to 1 within 1e-9: false answers 422 saying by "
            "how much; true divides them by their sum and warns."
        )
    ),
]


# Bounds of the tail options (the core's defaults beside them: core.location_means, core.tail_measures).
MAX_THRESHOLDS = 100
MAX_TAIL_LEVELS = 20
TailLevel = Annotated[float, Meta(gt=0.0, lt=1.0, description="A tail level alpha in (0, 1), e.g. 0.99.")]


class CoreChoices(Protocol):
    """What every option set tells the core (see :func:`tailgauge.api.endpoints.describe_options`)."""

    convention: str | None
    skewness_estimator: str | None
    kurtosis_estimator: str | None
    probabilities: list[float]
    moment_order: int
    score: list[float]
    thresholds: list[float]
    tail_levels: list[float]
    trim_proportion: float
    tail_count: int | None

    @property
    def interval(self) -> IntervalRequest | None: ...

    @property
    def quantile_type(self) -> int | None: ...

    @property
    def sheppard_correction(self) -> bool: ...

    @property
    def order(self) -> Order: ...

    @property
    def block_scheme(self) -> BlockScheme | None: ...

    @property
    def block_length(self) -> float | None: ...


class Unordered:
    """The series options of an option set whose inputs carry no observation order (tables, bins,
    merged states) or are resampled independently (comparisons): their values as properties."""

    __slots__ = ()

    @property
    def order(self) -> Order:
        """Outcomes, bins and states have no observation order; a comparison resamples each input
        independently."""
        return Order.EXCHANGEABLE

    @property
    def block_scheme(self) -> BlockScheme | None:
        return None

    @property
    def block_length(self) -> float | None:
        return None


class SummaryOptions(Message):
    """Options of every endpoint that reports descriptors, merged states included."""

    convention: Annotated[
        Convention | None,
        Meta(
            description=(
                "sample: variance with divisor n - 1 (V1 - V2/V1 for reliability weights) and "
                "skewness/kurtosis G1/G2; population: divisor n and g1/g2. null: sample, except "
                "a probability table, which is always a population."
            )
        ),
    ] = None
    skewness_estimator: Annotated[
        SkewnessEstimator | None,
        Meta(description="Joanes & Gill (1998) skewness family; null follows the convention."),
    ] = None
    kurtosis_estimator: Annotated[
        KurtosisEstimator | None,
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
    descriptors: Annotated[
        Annotated[list[DescriptorChoice], Meta(min_length=1, max_length=len(core_selection.CHOICES))] | None,
        Meta(
            description=(
                "Compute only these: descriptor names, member names (quantiles, moments, modes, "
                "shape_estimators, tail_contributions, grouping, normality) and family names (all "
                "descriptors of the family). Whatever is not named is absent from the answer, not "
                "null, and not computed (intervals and contrasts too). null: everything."
            ),
        ),
    ] = None
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
    thresholds: Annotated[
        list[Finite],
        Meta(
            max_length=MAX_THRESHOLDS,
            description=(
                "Thresholds t: member exceedances gives, for each, the proportion of the data above t and at or "
                "below it, the count above (whole counts) and a Clopper-Pearson interval of the proportion above."
            ),
        ),
    ] = msgspec.field(default_factory=list)
    tail_levels: Annotated[
        list[TailLevel],
        Meta(
            max_length=MAX_TAIL_LEVELS,
            description=(
                "Levels alpha, e.g. 0.95 and 0.99: member tail_means gives the mean of the upper 1 - alpha share "
                "(expected shortfall) and of the lower 1 - alpha share, with bootstrap intervals under options.interval."
            ),
        ),
    ] = msgspec.field(default_factory=list)
    trim_proportion: Annotated[
        float,
        Meta(
            ge=0.0,
            lt=0.5,
            description=(
                "Share cut from each end for trimmed_mean and winsorized_mean: floor(proportion x n) observations "
                "for whole counts, that share of the weight otherwise; 0.1 is common practice."
            ),
        ),
    ] = 0.1
    tail_count: Annotated[
        Annotated[int, Meta(ge=1, le=MAX_SEED)] | None,
        Meta(
            description=(
                "k, the number of largest observations upper_tail_index (Hill 1975) uses; null: round(sqrt(n)), "
                "a common rule of thumb. Must be below n."
            ),
        ),
    ] = None


class DescriptorOptions(SummaryOptions):
    """Options shared by every descriptor endpoint."""

    interval: Annotated[
        IntervalRequest | None,
        Meta(description="Ask for bootstrap and classical intervals of every descriptor; null: none."),
    ] = None
    figure: Annotated[
        FigureRequest | None,
        Meta(
            description=(
                "Title, unit and size of the figure answered to Accept: image/svg+xml or image/png; "
                "read only when a figure is asked for. null: every default."
            )
        ),
    ] = None
    plot_data: Annotated[
        bool,
        Meta(
            description=(
                "Add member plot_data to a JSON or MessagePack answer: the histogram and the empirical "
                "distribution function (at most 512 points) the figure is drawn from."
            )
        ),
    ] = False


class SampleOptions(DescriptorOptions):
    quantile_type: QuantileType = None
    missing: MissingPolicy = Missing.REJECT
    order: Annotated[
        Order,
        Meta(
            description=(
                "exchangeable: the values are independent observations (their order is ignored, except "
                "that intervals warn serial_dependence when the lag-1 autocorrelation is significant at "
                "1 %); as_sent: a series in the order observed: bootstrap intervals resample blocks of "
                "neighbours, size.effective_n comes from the autocorrelations and the mean's classical "
                "interval uses it. Needs values without weights."
            )
        ),
    ] = Order.EXCHANGEABLE
    block_scheme: Annotated[
        BlockScheme | None,
        Meta(description="With order as_sent: how blocks are resampled; null: stationary."),
    ] = None
    block_length: Annotated[
        Annotated[float, Meta(ge=1.0, le=1e9)] | None,
        Meta(
            description=(
                "With order as_sent: the expected block length (stationary) or the block length (circular, "
                "moving: a whole number), at most n; null: chosen by Politis & White (2004, corrected 2009)."
            )
        ),
    ] = None
    partial_state: Annotated[
        bool,
        Meta(
            description=(
                "Add member partial_state: count, mean, central sums M2..Mp (p = max(4, moment_order)), "
                "minimum and maximum, which POST /v1/descriptors/merge combines exactly with others."
            )
        ),
    ] = False

    @property
    def sheppard_correction(self) -> bool:
        """Raw samples are not grouped: there is nothing to correct."""
        return False


class TableOptions(DescriptorOptions, Unordered):
    quantile_type: QuantileType = None
    normalize: Normalize = False

    @property
    def sheppard_correction(self) -> bool:
        """A table's outcomes are exact values, not groups: there is nothing to correct."""
        return False


class BinOptions(DescriptorOptions, Unordered):
    sheppard_correction: Annotated[
        bool,
        Meta(
            description=(
                "Apply Sheppard's corrections to the second and fourth central moments; only for "
                "bins of equal width (otherwise a warning and no correction)."
            )
        ),
    ] = False

    @property
    def quantile_type(self) -> int | None:
        """Grouped quantiles interpolate within bins: no sample quantile definition applies."""
        return None


class ComparisonOptions(DescriptorOptions, Unordered):
    """Options for both inputs; the descriptors of each are computed exactly as by its endpoint."""

    quantile_type: QuantileType = None
    sheppard_correction: Annotated[
        bool, Meta(description="Sheppard's corrections for an input of bins of equal width.")
    ] = False


class MergeOptions(SummaryOptions, Unordered):
    """The options of a descriptor endpoint that a merged state can honour (no resampling).

    Quantiles at options.probabilities come from sketches, when sent; moments stop at the
    states' order. options.thresholds and options.tail_levels need the values: sending either is
    a 422 located at it; trim_proportion and tail_count are accepted, and the descriptors they
    tune are null (not_available_from_states), as every descriptor that needs the values.
    """

    @property
    def interval(self) -> IntervalRequest | None:
        """Partial states carry no values to resample."""
        return None

    @property
    def quantile_type(self) -> int | None:
        """Quantiles come from sketches (or not at all), never from a sample quantile definition."""
        return None

    @property
    def sheppard_correction(self) -> bool:
        """Partial states hold exact moments of values, not of bins."""
        return False


class SamplesInputOptions(Message):
    missing: MissingPolicy = Missing.REJECT


class TableInputOptions(Message):
    normalize: Normalize = False


__all__ = [
    "BinOptions",
    "BlockScheme",
    "Order",
    "Unordered",
    "DescriptorChoice",
    "Convention",
    "IntervalMethod",
    "KurtosisEstimator",
    "Missing",
    "SkewnessEstimator",
    "ComparisonOptions",
    "CoreChoices",
    "DescriptorOptions",
    "IntervalRequest",
    "MergeOptions",
    "MissingPolicy",
    "Normalize",
    "QuantileType",
    "SampleOptions",
    "SamplesInputOptions",
    "SummaryOptions",
    "TailLevel",
    "TableInputOptions",
    "TableOptions",
]
