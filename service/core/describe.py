"""The full descriptor set of one weighted form, with the conventions used and every warning.

This is the only place where undefined results become ``None``: each ``None`` is paired with
a warning that names the descriptor and says why, and no NaN or infinity leaves this module.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from service.core import order, shape
from service.core.moments import CentralSums, central_sums
from service.core.serial import lag1_autocorrelation
from service.core.weighted import WeightedData, WeightMeaning

DEFAULT_PROBABILITIES = (0.01, 0.05, 0.1, 0.25, 0.5, 0.75, 0.9, 0.95, 0.99)
SCALAR_DESCRIPTORS = (
    "mean",
    "median",
    "variance",
    "standard_deviation",
    "coefficient_of_variation",
    "skewness",
    "kurtosis",
    "excess_kurtosis",
    "minimum",
    "maximum",
    "range",
    "interquartile_range",
    "median_absolute_deviation",
    "median_absolute_deviation_normal",
    "lag1_autocorrelation",
)
SPREAD_DESCRIPTORS = (
    "variance",
    "standard_deviation",
    "coefficient_of_variation",
    "range",
    "interquartile_range",
    "median_absolute_deviation",
    "median_absolute_deviation_normal",
)
SHAPE_DESCRIPTORS = ("skewness", "kurtosis", "excess_kurtosis")


@dataclass(frozen=True)
class DescribeOptions:
    """What to compute and by which convention (validated by the caller's schema)."""

    convention: str = "sample"
    skewness_estimator: str | None = None
    kurtosis_estimator: str | None = None
    probabilities: tuple[float, ...] = DEFAULT_PROBABILITIES
    quantile_type: int = 7
    moment_order: int = 4
    modes_limit: int = 100

    @property
    def skewness_family(self) -> str:
        if self.skewness_estimator is not None:
            return self.skewness_estimator
        return "G1" if self.convention == "sample" else "g1"

    @property
    def kurtosis_family(self) -> str:
        if self.kurtosis_estimator is not None:
            return self.kurtosis_estimator
        return "G2" if self.convention == "sample" else "g2"


@dataclass
class Descriptor:
    value: float | None
    estimator: str
    standard_error_under_normality: float | None = None


@dataclass
class Note:
    code: str
    message: str
    descriptors: list[str] = field(default_factory=list)


@dataclass
class Size:
    n: int
    total_weight: float
    omitted: int
    distinct_values: int


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
class Conventions:
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


@dataclass
class Description:
    kind: str
    size: Size
    descriptors: dict[str, Descriptor]
    moments: Moments
    quantiles: list[Quantile]
    modes: Modes
    shape_estimators: ShapeEstimators
    conventions: Conventions
    warnings: list[Note]


class _Notes:
    """Collects warnings; turns every non-finite number into ``None`` with a reason."""

    def __init__(self) -> None:
        self.items: list[Note] = []

    def add(self, code: str, message: str, descriptors: list[str] | tuple[str, ...] = ()) -> None:
        self.items.append(Note(code=code, message=message, descriptors=list(descriptors)))

    def finite(self, value: float | None, name: str) -> float | None:
        """``value`` if finite; otherwise ``None`` and a warning that float64 cannot hold it."""
        if value is None:
            return None
        if math.isfinite(value):
            return float(value)
        self.add(
            "not_representable",
            f"{name} is outside the range of float64 for these data (overflow or underflow)",
            [name],
        )
        return None


def _finite_or_none(value: float) -> float | None:
    return float(value) if math.isfinite(value) else None


def describe(data: WeightedData, options: DescribeOptions, *, kind: str) -> Description:
    """Compute every descriptor of ``data``.

    Degenerate input is a documented outcome, never NaN:

    * one observation: location descriptors only; spread and shape are ``None``
      (``single_observation``);
    * constant data: zero spread; shape and standardized moments are ``None``
      (``constant_data``);
    * too few observations for an estimator (G1 needs n >= 3, G2 n >= 4): ``None``
      (``too_few_observations``);
    * a moment beyond float64's range: ``None`` (``not_representable``).
    """
    notes = _Notes()
    n = data.total_weight
    top_order = max(options.moment_order, 4)
    sums = central_sums(data.values, data.weights, top_order)
    m2_scaled = sums.scaled_central_moment(2)
    single = n <= 1.0
    constant = m2_scaled == 0.0
    sample = options.convention == "sample"

    if data.omitted:
        notes.add(
            "missing_values_omitted",
            f"{data.omitted} missing value(s) were omitted; n counts the values used",
        )
    if single:
        notes.add(
            "single_observation",
            "a single observation carries no information on spread or shape",
            SPREAD_DESCRIPTORS + SHAPE_DESCRIPTORS + ("lag1_autocorrelation",),
        )
    elif constant:
        notes.add(
            "constant_data",
            "all values are equal: the spread is zero, so shape (skewness, kurtosis), "
            "standardized moments and autocorrelation are undefined",
            SHAPE_DESCRIPTORS + ("lag1_autocorrelation",),
        )

    descriptors: dict[str, Descriptor] = {}
    weighted = data.weights is not None
    descriptors["mean"] = Descriptor(
        notes.finite(sums.mean, "mean"), "weighted arithmetic mean" if weighted else "arithmetic mean"
    )
    median = order.median(data)
    descriptors["median"] = Descriptor(median, "average of the two middle order statistics")

    variance_label = "sample (divisor n - 1)" if sample else "population (divisor n)"
    variance = _variance(sums, n, sample, single)
    descriptors["variance"] = Descriptor(notes.finite(variance, "variance"), variance_label)
    sd = _standard_deviation(sums, n, sample, single)
    descriptors["standard_deviation"] = Descriptor(
        notes.finite(sd, "standard_deviation"), f"square root of the {variance_label} variance"
    )
    descriptors["coefficient_of_variation"] = Descriptor(
        _coefficient_of_variation(data, sums, sd, n, sample, single, notes),
        f"standard deviation ({variance_label}) / mean",
    )
    _shape(descriptors, sums, n, options, single, constant, notes)

    minimum = float(data.sorted_values[0])
    maximum = float(data.sorted_values[-1])
    descriptors["minimum"] = Descriptor(minimum, "smallest value")
    descriptors["maximum"] = Descriptor(maximum, "largest value")
    descriptors["range"] = Descriptor(
        None if single else notes.finite(maximum - minimum, "range"), "maximum - minimum"
    )
    quartiles = order.quantiles(data, np.array([0.25, 0.75]), options.quantile_type)
    descriptors["interquartile_range"] = Descriptor(
        None if single else notes.finite(float(quartiles[1] - quartiles[0]), "interquartile_range"),
        f"Q(0.75) - Q(0.25), Hyndman & Fan type {options.quantile_type}",
    )
    mad = None if single else order.median_absolute_deviation(data, median)
    descriptors["median_absolute_deviation"] = Descriptor(mad, "median of |x - median|")
    descriptors["median_absolute_deviation_normal"] = Descriptor(
        None if mad is None else notes.finite(mad * order.NORMAL_MAD_FACTOR, "median_absolute_deviation_normal"),
        f"{order.NORMAL_MAD_FACTOR} x median of |x - median| (consistent for the normal sigma)",
    )
    descriptors["lag1_autocorrelation"] = Descriptor(
        _lag1(data, sums, single, constant, notes), "r(1) = sum (x_i - mean)(x_i+1 - mean) / sum (x_i - mean)^2"
    )

    probabilities = np.array(options.probabilities, dtype=np.float64)
    quantile_values = (
        order.quantiles(data, probabilities, options.quantile_type) if probabilities.size else []
    )
    quantile_list = [
        Quantile(probability=float(p), value=_finite_or_none(float(v)))
        for p, v in zip(probabilities, quantile_values)
    ]

    return Description(
        kind=kind,
        size=Size(
            n=int(n) if data.meaning is WeightMeaning.UNIT else n,
            total_weight=n,
            omitted=data.omitted,
            distinct_values=int(data.support.values.size),
        ),
        descriptors=descriptors,
        moments=_moments(sums, options.moment_order, single, constant, notes),
        quantiles=quantile_list,
        modes=_modes(data, options.modes_limit, notes),
        shape_estimators=_shape_estimators(sums, n, single, constant),
        conventions=Conventions(
            convention=options.convention,
            variance_divisor="n - 1" if sample else "n",
            skewness=options.skewness_family,
            kurtosis=options.kurtosis_family,
            quantile_type=options.quantile_type,
            quantile_definition=(
                f"Hyndman & Fan (1996) type {options.quantile_type}: "
                f"{order.QUANTILE_TYPE_NAMES[options.quantile_type]}"
            ),
            median="average of the two middle order statistics",
            central_moments="plug-in: sum of w (x - mean)^k divided by the total weight",
            normal_mad_factor=order.NORMAL_MAD_FACTOR,
            weights=data.meaning.value,
        ),
        warnings=notes.items,
    )


def _variance(sums: CentralSums, n: float, sample: bool, single: bool) -> float | None:
    if single:
        return None
    divisor = n - 1.0 if sample else n
    # sums.central_moment(2) divides by n; rescale to the chosen divisor.
    return sums.central_moment(2) * (n / divisor)


def _standard_deviation(sums: CentralSums, n: float, sample: bool, single: bool) -> float | None:
    if single:
        return None
    divisor = n - 1.0 if sample else n
    # sqrt taken in scaled units so it is representable even when the variance is not.
    return math.sqrt(sums.scaled_central_moment(2) * (n / divisor)) * sums.scale


def _coefficient_of_variation(
    data: WeightedData,
    sums: CentralSums,
    sd: float | None,
    n: float,
    sample: bool,
    single: bool,
    notes: _Notes,
) -> float | None:
    if single or sd is None or not math.isfinite(sd):
        return None
    reason = None
    if data.sorted_values[0] < 0.0:
        reason = "the data include negative values, so they are not on a ratio scale"
    elif sums.mean == 0.0:
        reason = "the mean is zero"
    elif sample and abs(sums.mean) < sd / math.sqrt(n):
        reason = "the mean is within one standard error of zero, so the ratio is unstable"
    if reason is not None:
        notes.add(
            "coefficient_of_variation_undefined",
            f"the coefficient of variation is undefined: {reason}",
            ["coefficient_of_variation"],
        )
        return None
    return notes.finite(sd / sums.mean, "coefficient_of_variation")


def _shape(
    descriptors: dict[str, Descriptor],
    sums: CentralSums,
    n: float,
    options: DescribeOptions,
    single: bool,
    constant: bool,
    notes: _Notes,
) -> None:
    skew_family = options.skewness_family
    kurt_family = options.kurtosis_family
    skew = kurt = None
    if not (single or constant):
        if n < shape.SKEWNESS_MIN_N[skew_family]:
            notes.add(
                "too_few_observations",
                f"skewness {skew_family} needs at least {shape.SKEWNESS_MIN_N[skew_family]} "
                f"observations; n = {n:g}",
                ["skewness"],
            )
        else:
            skew = shape.skewness(sums.standardized_moment(3), n, skew_family)
        if n < shape.KURTOSIS_MIN_N[kurt_family]:
            notes.add(
                "too_few_observations",
                f"kurtosis {kurt_family} needs at least {shape.KURTOSIS_MIN_N[kurt_family]} "
                f"observations; n = {n:g}",
                ["kurtosis", "excess_kurtosis"],
            )
        else:
            kurt = shape.excess_kurtosis(sums.standardized_moment(4) - 3.0, n, kurt_family)
    descriptors["skewness"] = Descriptor(
        None if skew is None else skew.value,
        skew_family,
        None if skew is None else skew.standard_error,
    )
    descriptors["kurtosis"] = Descriptor(
        None if kurt is None else kurt.value + 3.0,
        f"{kurt_family} + 3 (normal = 3)",
        None if kurt is None else kurt.standard_error,
    )
    descriptors["excess_kurtosis"] = Descriptor(
        None if kurt is None else kurt.value,
        f"{kurt_family} (normal = 0)",
        None if kurt is None else kurt.standard_error,
    )


def _shape_estimators(sums: CentralSums, n: float, single: bool, constant: bool) -> ShapeEstimators:
    """Every Joanes & Gill family side by side; ``None`` where n is too small or spread is 0."""
    defined = not (single or constant)
    skewness = [
        _family_estimate(family, defined and n >= shape.SKEWNESS_MIN_N[family], shape.skewness, sums, 3, n)
        for family in shape.SKEWNESS_FAMILIES
    ]
    kurtosis = [
        _family_estimate(family, defined and n >= shape.KURTOSIS_MIN_N[family], shape.excess_kurtosis, sums, 4, n)
        for family in shape.KURTOSIS_FAMILIES
    ]
    return ShapeEstimators(skewness=skewness, excess_kurtosis=kurtosis)


def _family_estimate(family, defined, estimator, sums: CentralSums, order_k: int, n: float) -> ShapeEstimate:
    if not defined:
        return ShapeEstimate(family, None, None)
    plug_in = sums.standardized_moment(order_k) - (3.0 if order_k == 4 else 0.0)
    estimate = estimator(plug_in, n, family)
    return ShapeEstimate(family, _finite_or_none(estimate.value), _finite_or_none(estimate.standard_error))


def _lag1(
    data: WeightedData, sums: CentralSums, single: bool, constant: bool, notes: _Notes
) -> float | None:
    if single or constant:
        return None
    if not data.ordered or data.weights is not None:
        notes.add(
            "no_observation_order",
            "lag-1 autocorrelation needs unweighted observations in their original order",
            ["lag1_autocorrelation"],
        )
        return None
    return _finite_or_none(lag1_autocorrelation(data.values, sums))


def _moments(
    sums: CentralSums, top: int, single: bool, constant: bool, notes: _Notes
) -> Moments:
    raw, central, standardized = [], [], []
    for k in range(1, top + 1):
        raw.append(notes.finite(sums.raw_moment(k), f"moments.raw[{k - 1}] (order {k})"))
        central.append(
            0.0 if k == 1 else notes.finite(sums.central_moment(k), f"moments.central[{k - 1}] (order {k})")
        )
        if single or constant:
            standardized.append(None)
        else:
            standardized.append(_finite_or_none(sums.standardized_moment(k)))
    return Moments(order=top, raw=raw, central=central, standardized=standardized)


def _modes(data: WeightedData, limit: int, notes: _Notes) -> Modes:
    found = order.modes(data)
    values = found.values
    counted = data.meaning in (WeightMeaning.UNIT, WeightMeaning.FREQUENCY)
    if counted and found.weight == 1.0 and found.distinct_values > 1:
        notes.add(
            "no_repeated_values",
            f"each of the {found.distinct_values} values occurs once, so the data have no mode",
            ["modes"],
        )
        values = values[:0]
    truncated = values.size > limit
    if truncated:
        notes.add(
            "modes_truncated",
            f"{values.size} values tie for the mode; the first {limit} are listed",
            ["modes"],
        )
        values = values[:limit]
    return Modes(
        values=[float(v) for v in values],
        count=found.weight,
        distinct_values=found.distinct_values,
        tied=found.tied,
        truncated=truncated,
    )
