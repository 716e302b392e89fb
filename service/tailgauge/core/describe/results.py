"""The result types of describing one input: a ``Description`` and its members.

Field names are API: the edge converts these objects to response messages by attribute name.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from tailgauge.core import classical, resample
from tailgauge.core.registry import WarningCode


@dataclass
class Descriptor:
    value: float | None
    estimator: str
    standard_error_under_normality: float | None = None
    interval: resample.Interval | None = None
    standard_error: float | None = None
    classical_interval: classical.ClassicalInterval | None = None


@dataclass
class ResultWarning:
    code: WarningCode
    message: str
    descriptors: list[str] = field(default_factory=list)


@dataclass
class Size:
    n: float | None
    total_weight: float
    omitted: int
    distinct_values: int | None  # None only for merged partial states, which carry no values
    zero_weight: int
    effective_n: float | None


@dataclass
class Moments:
    order: int
    raw: list[float | None]
    central: list[float | None]
    standardized: list[float | None]


@dataclass
class Quantile:
    probability: float
    value: float | None
    interval: resample.Interval | None = None
    standard_error: float | None = None
    classical_interval: classical.ClassicalInterval | None = None


@dataclass
class NormalityTest:
    test: str
    statistic: float | None
    p_value: float | None
    minimum_n: int
    reference: str
    reason: str | None


@dataclass
class Resampling:
    method: str
    level: float
    resamples: int
    seed: int
    scheme: str
    # Ordered samples (options.order as_sent): the block scheme, the (expected) block length and
    # how it was chosen ("politis_white" or "given"); None when single values are resampled.
    block_scheme: str | None = None
    block_length: float | None = None
    block_length_choice: str | None = None
    # The resamples behind the intervals, for contrasting two inputs (compare.py); not a response member.
    replicates: resample.Replicates | None = field(default=None, repr=False, compare=False)


@dataclass
class Modes:
    values: list[float]
    count: float
    distinct_values: int
    tied: int
    truncated: bool


@dataclass
class ShapeEstimate:
    estimator: str
    value: float | None
    standard_error_under_normality: float | None


@dataclass
class ShapeEstimators:
    skewness: list[ShapeEstimate]
    excess_kurtosis: list[ShapeEstimate]


@dataclass
class Contribution:
    value: float
    weight: float
    third: float
    fourth: float


@dataclass
class TailContributions:
    standardized_third: float
    standardized_fourth: float
    complete: bool
    outcomes: list[Contribution]


@dataclass
class ModalClass:
    lower: float
    upper: float
    count: float
    grouped_mode: float | None


@dataclass
class KnownSummary:
    """A histogram's own count, sum, min and max as sent, and the descriptors they made exact."""

    count: float
    sum: float | None
    minimum: float | None
    maximum: float | None
    exact: list[str]


@dataclass
class Grouping:
    bins: int
    bin_width: float | None
    equal_widths: bool
    open_lower: bool
    open_upper: bool
    open_bin_weight: float
    lowest_edge: float | None
    highest_edge: float | None
    sheppard_correction_applied: bool
    modal_classes: list[ModalClass]
    # A histogram's own summary (None for bins sent as bins).
    known_summary: KnownSummary | None = None


@dataclass
class Exceedance:
    threshold: float
    proportion_above: float | None
    proportion_at_or_below: float | None
    count_above: int | None  # whole counts only
    interpolated: bool  # inside a bin: the count above is interpolated
    interval: resample.Interval | None  # of proportion_above (Clopper-Pearson)


@dataclass
class TailMeanSide:
    value: float | None
    interval: resample.Interval | None = None


@dataclass
class TailMean:
    level: float
    upper: TailMeanSide
    lower: TailMeanSide


@dataclass
class Conventions:
    convention: str
    variance_divisor: str
    skewness: str
    kurtosis: str
    quantile_type: int | None
    quantile_definition: str
    median: str
    central_moments: str
    normal_mad_factor: float
    weights: str


@dataclass
class QuantileSketches:
    """Where approximate quantiles came from: the union of caller-sent KLL sketches."""

    method: str
    sketches: int
    n: int
    k: int  # the smallest k among the sketches, which sets the error
    retained: int
    normalized_rank_error: float
    item_types: list[str]


@dataclass
class Description:
    kind: str
    size: Size
    descriptors: dict[str, Descriptor]
    moments: Moments | None
    quantiles: list[Quantile]
    modes: Modes | None  # None only for merged partial states
    shape_estimators: ShapeEstimators
    tail_contributions: TailContributions | None
    grouping: Grouping | None
    normality: list[NormalityTest]
    conventions: Conventions
    warnings: list[ResultWarning]
    resampling: Resampling | None = None
    sketches: QuantileSketches | None = None
    # Descriptors and members left out of the answer by options.descriptors (tailgauge.core.selection).
    absent: tuple[str, ...] = ()
    exceedances: list[Exceedance] = field(default_factory=list)
    tail_means: list[TailMean] = field(default_factory=list)
