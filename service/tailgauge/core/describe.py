"""The full descriptor set of one weighted form, with the conventions used and every warning.

This is the only place where undefined results become ``None``: each ``None`` is paired with
a warning that names the descriptor and says why, and no NaN or infinity leaves this module.
Nothing here knows which endpoint the data came from: the weighted form says what the weights
mean (unit, frequency, reliability, probability) and whether the support is bins.
"""

from __future__ import annotations

import dataclasses
import math
import time
from dataclasses import dataclass, field

import numpy as np
from scipy import stats

from tailgauge.core import classical, cost, grouped, lmoments, normality, order_statistics, resample, robust, shape, tail
from tailgauge.core.errors import LimitExceeded, Location, UncomputableInput
from tailgauge.core.moments import CentralSums, central_sums, scale_by_power_of_two
from tailgauge.core.serial import lag1_autocorrelation
from tailgauge.core.weighted import WeightedData, WeightMeaning

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
    "quartile_skewness",
    "octile_kurtosis",
    "octile_excess_kurtosis",
    "medcouple",
    "half_sample_mode",
    "mean_median_gap",
    "l_location",
    "l_scale",
    "l_skewness",
    "l_kurtosis",
)
ROBUST_SHAPE_DESCRIPTORS = (
    "quartile_skewness",
    "octile_kurtosis",
    "octile_excess_kurtosis",
    "medcouple",
    "mean_median_gap",
    "l_scale",
    "l_skewness",
    "l_kurtosis",
)
# Probabilities behind quartile skewness (Q1, Q2, Q3) and octile kurtosis (E1 .. E7).
_ROBUST_PROBABILITIES = np.array([0.25, 0.5, 0.75, 1 / 8, 2 / 8, 3 / 8, 5 / 8, 6 / 8, 7 / 8])


def _normal_octile_kurtosis() -> float:
    e = stats.norm.ppf(np.arange(1, 8) / 8.0)
    return float(((e[6] - e[4]) + (e[2] - e[0])) / (e[5] - e[1]))


# Moors (1988): the octile kurtosis of any normal distribution, 1.2330951...
NORMAL_OCTILE_KURTOSIS = _normal_octile_kurtosis()
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
MOMENT_DESCRIPTORS = (
    "mean",
    "variance",
    "standard_deviation",
    "coefficient_of_variation",
    "skewness",
    "kurtosis",
    "excess_kurtosis",
)
# Largest contributors listed for raw samples (tables and bins list every outcome up to the limit).
SAMPLE_CONTRIBUTORS = 10
# Rule of thumb for populations (no sampling error): "near zero" and "visibly asymmetric".
POPULATION_SYMMETRY_THRESHOLD = 0.05


@dataclass(frozen=True)
class DescribeOptions:
    """What to compute and by which convention (validated by the caller's schema).

    ``None`` means "the default for these data": the sample convention except for a
    probability table (population); quantile type 7 for whole counts, type 2 for other
    weights, type 1 (the distribution function's inverse) for probabilities.
    """

    convention: str | None = None
    skewness_estimator: str | None = None
    kurtosis_estimator: str | None = None
    probabilities: tuple[float, ...] = DEFAULT_PROBABILITIES
    quantile_type: int | None = None
    moment_order: int = 4
    modes_limit: int = 100
    sheppard_correction: bool = False
    contributions_limit: int = 1000
    interval: resample.IntervalOptions | None = None
    max_resample_work: float = 1e9
    deadline: float | None = None
    subset_rows: int = 100_000
    resample_threads: int = 2
    # Peak memory one request may plan (cost.admit); inf: no limit.
    max_memory_bytes: float = math.inf
    # Already admitted by the caller (a comparison admits both inputs together).
    admitted: bool = False


@dataclass
class Descriptor:
    value: float | None
    estimator: str
    standard_error_under_normality: float | None = None
    interval: resample.Interval | None = None
    standard_error: float | None = None
    classical_interval: classical.ClassicalInterval | None = None


@dataclass
class Note:
    code: str
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
    warnings: list[Note]
    resampling: Resampling | None = None
    sketches: QuantileSketches | None = None


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


@dataclass(frozen=True)
class _Basis:
    """How the weights translate into estimator formulas."""

    population: bool
    reliability: bool
    sample_size: float | None  # n in bias corrections and normal-theory standard errors
    variance_factor: float  # sample variance = plug-in variance * variance_factor
    variance_label: str
    divisor_label: str
    bias_correctable: bool
    single: bool
    quantile_type: int | None
    quantile_definition: str
    median_rule: str
    skewness_family: str
    kurtosis_family: str


def _reject(path: str, message: str) -> UncomputableInput:
    return UncomputableInput(detail=f"{path}: {message}", locations=[Location(path, message)])


def _basis(data: WeightedData, options: DescribeOptions) -> _Basis:
    return _basis_of(
        data.meaning,
        total=data.total_weight,
        effective=data.effective_size,
        entries=data.count,
        integer=data.integer_weights,
        binned=data.binned,
        options=options,
    )


def _basis_of(
    meaning: WeightMeaning,
    *,
    total: float,
    effective: float,
    entries: int,
    integer: bool,
    binned: bool,
    options: DescribeOptions,
) -> _Basis:
    """The estimator basis from what the weights mean, the total and effective sizes and the support."""
    probability = meaning is WeightMeaning.PROBABILITY
    reliability = meaning is WeightMeaning.RELIABILITY
    if probability:
        if options.convention == "sample":
            raise _reject(
                "options.convention",
                "a probability table is a whole distribution: its descriptors are population values",
            )
        for path, family, allowed in (
            ("options.skewness_estimator", options.skewness_estimator, "g1"),
            ("options.kurtosis_estimator", options.kurtosis_estimator, "g2"),
        ):
            if family not in (None, allowed):
                raise _reject(path, f"only {allowed} (the population value) applies to a probability table")
        if options.quantile_type not in (None, 1, 2):
            raise _reject(
                "options.quantile_type",
                "population quantiles come from the distribution function: use type 1 or 2",
            )
    population = probability or options.convention == "population"

    if population:
        factor, divisor = 1.0, "total weight (population)"
        variance_label = "population (divisor n)" if not probability else "population (exact)"
    elif reliability:
        factor = 1.0 / (1.0 - 1.0 / effective) if effective > 1.0 else math.inf
        divisor = "V1 - V2 / V1 (reliability weights)"
        variance_label = "sample, reliability weights (divisor V1 - V2/V1)"
    else:
        factor = total / (total - 1.0) if total > 1.0 else math.inf
        divisor = "n - 1"
        variance_label = "sample (divisor n - 1)"

    # A population of one point has zero spread; a sample of one says nothing about spread.
    if population:
        single = False
    elif reliability:
        single = entries <= 1 or effective <= 1.0
    else:
        single = total <= 1.0

    if binned:
        quantile_type = None
        definition = "grouped: linear interpolation within the bin holding p N (values spread evenly in bins)"
        median_rule = "grouped: interpolated within the bin holding N / 2"
    elif probability:
        quantile_type = options.quantile_type or 1
        definition = (
            "population: smallest x with F(x) >= p"
            if quantile_type == 1
            else "population: smallest x with F(x) >= p, averaged with the next value where F(x) = p"
        )
        median_rule = "population: smallest x with F(x) >= 1/2"
    else:
        quantile_type = options.quantile_type or (7 if integer else 2)
        definition = f"Hyndman & Fan (1996) type {quantile_type}: {order_statistics.QUANTILE_TYPE_NAMES[quantile_type]}"
        if not integer:
            definition += " (from the weighted distribution function)"
        median_rule = (
            "average of the two middle order statistics"
            if integer
            else "weighted: smallest x with F(x) >= 1/2, averaged with the next value where F(x) = 1/2"
        )

    # Bias corrections need a sample size in whole observations: raw samples and counts.
    bias_correctable = meaning in (WeightMeaning.UNIT, WeightMeaning.FREQUENCY)
    sample_defaults = bias_correctable and not population
    skewness_family = options.skewness_estimator or ("G1" if sample_defaults else "g1")
    kurtosis_family = options.kurtosis_estimator or ("G2" if sample_defaults else "g2")
    return _Basis(
        population=population,
        reliability=reliability,
        sample_size=None if probability else (effective if reliability else total),
        variance_factor=factor,
        variance_label=variance_label,
        divisor_label=divisor,
        bias_correctable=bias_correctable,
        single=single,
        quantile_type=quantile_type,
        quantile_definition=definition,
        median_rule=median_rule,
        skewness_family=skewness_family,
        kurtosis_family=kurtosis_family,
    )


def admit(inputs: list[WeightedData], options: DescribeOptions) -> cost.Estimate:
    """Plan the memory and time of describing (or comparing) ``inputs`` by ``options``, or raise
    :class:`LimitExceeded` with what would fit (see :mod:`tailgauge.core.cost`)."""
    interval = options.interval
    if interval is not None and any(d.meaning is WeightMeaning.PROBABILITY for d in inputs):
        interval = None  # refused with its own reason in _intervals
    left = math.inf if options.deadline is None else options.deadline - time.monotonic()
    return cost.admit(
        [cost.shape_of(d, options.subset_rows) for d in inputs],
        probabilities=len(options.probabilities),
        resamples=0 if interval is None else interval.resamples,
        method=None if interval is None else interval.method,
        threads=options.resample_threads,
        max_bytes=options.max_memory_bytes,
        seconds=left,
        max_work=options.max_resample_work,
    )


def _on_time(options: DescribeOptions) -> None:
    """The wall-clock check between the descriptor families (each is at most O(n log n))."""
    if options.deadline is not None and time.monotonic() > options.deadline:
        raise LimitExceeded(
            detail="the descriptors did not finish within this server's time limit; send fewer values",
            locations=[Location("", "too many values to describe in time")],
        )


def describe(data: WeightedData, options: DescribeOptions, *, kind: str) -> Description:
    """Compute every descriptor of ``data``.

    Degenerate input is a documented outcome, never NaN:

    * one observation: location descriptors only; spread and shape are ``None``
      (``single_observation``);
    * constant data: zero spread; shape and standardized moments are ``None``
      (``constant_data``);
    * too few observations for an estimator (G1 needs n >= 3, G2 n >= 4): ``None``
      (``too_few_observations``);
    * an open-ended bin holding data: every moment descriptor is ``None``
      (``open_bin_holds_data``), while quantiles in closed bins are still given;
    * a moment beyond float64's range: ``None`` (``not_representable``).
    """
    notes = _Notes()
    basis = _basis(data, options)
    if not options.admitted:
        admit([data], options)
    _note_input(data, notes)

    moments_defined = data.open_bin_weight == 0.0
    sums = midpoint_sums = None
    sheppard_applied = False
    if moments_defined:
        sums = midpoint_sums = central_sums(data.values, data.weights, max(options.moment_order, 4))
        if data.binned and options.sheppard_correction:
            sums, sheppard_applied = _sheppard(data, sums, notes)
    else:
        notes.add(
            "open_bin_holds_data",
            f"open-ended bins hold {data.open_bin_weight:g} of the {data.total_weight:g} counts, so their "
            "values are unknown and no moment can be computed; quantiles in closed bins are still given",
            MOMENT_DESCRIPTORS + ("moments", "shape_estimators", "tail_contributions"),
        )
    constant = sums is not None and sums.scaled_central_moment(2) == 0.0
    if data.binned and int(np.count_nonzero(data.weights)) == 1:
        # All counts in one bin: the midpoint would report zero spread, but the spread within
        # the bin is unknown, so spread and shape are undefined rather than zero.
        basis = dataclasses.replace(basis, single=True)
        constant = False
        notes.add(
            "single_bin",
            "every count lies in one bin, so the spread and shape within it are unknown",
            SPREAD_DESCRIPTORS + SHAPE_DESCRIPTORS + ROBUST_SHAPE_DESCRIPTORS + ("lag1_autocorrelation",),
        )
    else:
        _note_degenerate(basis, constant, notes)

    descriptors: dict[str, Descriptor] = {}
    weighted = data.weights is not None
    _moment_descriptors(
        descriptors,
        sums,
        basis,
        constant,
        notes,
        mean_label=(
            "mean of bin midpoints" if data.binned else "weighted arithmetic mean" if weighted else "arithmetic mean"
        ),
        lowest=_lowest_value(data),
    )
    _on_time(options)
    quantile_values, robust_quantiles = _order_descriptors(descriptors, data, basis, options, notes)
    _on_time(options)
    _robust_descriptors(descriptors, data, sums, basis, robust_quantiles, constant, notes)
    _on_time(options)
    descriptors["lag1_autocorrelation"] = Descriptor(
        _lag1(data, sums, basis.single, constant, notes),
        "r(1) = sum (x_i - mean)(x_i+1 - mean) / sum (x_i - mean)^2",
    )
    _check_symmetry(descriptors, data, basis, notes)

    probabilities = np.array(options.probabilities, dtype=np.float64)
    quantile_list = [
        Quantile(probability=float(p), value=_finite_or_none(float(v)))
        for p, v in zip(probabilities, quantile_values)
    ]
    if any(q.value is None for q in quantile_list) and quantile_list:
        missing = [f"{q.probability:g}" for q in quantile_list if q.value is None]
        if data.binned:
            notes.add(
                "quantile_in_open_bin",
                f"quantiles at p = {', '.join(missing)} fall inside an open-ended bin, where values are unknown",
                ["quantiles"],
            )

    resampling = None
    if options.interval is not None:
        resampling = _intervals(
            data, sums, midpoint_sums, sheppard_applied, basis, options, descriptors, quantile_list, probabilities, notes
        )

    modes, modal = _modes(data, options.modes_limit, notes)
    _explain_remaining_nulls(descriptors, notes)
    return Description(
        kind=kind,
        size=Size(
            n=None if data.meaning is WeightMeaning.PROBABILITY else _count_value(data),
            total_weight=data.total_weight,
            omitted=data.omitted,
            distinct_values=int(data.values.size if data.binned else data.support.values.size),
            zero_weight=data.zero_weight,
            effective_n=data.effective_size if data.meaning is WeightMeaning.RELIABILITY else None,
        ),
        descriptors=descriptors,
        moments=None if sums is None else _moments(sums, options.moment_order, basis.single, constant, notes),
        quantiles=quantile_list,
        modes=modes,
        shape_estimators=_shape_estimators(sums, basis, constant),
        tail_contributions=_tail(data, midpoint_sums, basis.single or constant, options, kind, notes),
        grouping=_grouping(data, modal, sheppard_applied) if data.binned else None,
        normality=_normality(data, midpoint_sums, basis, constant, notes),
        conventions=Conventions(
            convention="population" if basis.population else "sample",
            variance_divisor=basis.divisor_label,
            skewness=basis.skewness_family,
            kurtosis=basis.kurtosis_family,
            quantile_type=basis.quantile_type,
            quantile_definition=basis.quantile_definition,
            median=basis.median_rule,
            central_moments="plug-in: sum of w (x - mean)^k divided by the total weight"
            + ("; bins at their midpoints" if data.binned else "")
            + ("; orders 2 and 4 Sheppard-corrected" if sheppard_applied else ""),
            normal_mad_factor=order_statistics.NORMAL_MAD_FACTOR,
            weights=data.meaning.value,
        ),
        warnings=notes.items,
        resampling=resampling,
    )


def _note_degenerate(basis: _Basis, constant: bool, notes: _Notes) -> None:
    """Say why spread or shape is undefined: one observation, or no spread at all."""
    if basis.single:
        notes.add(
            "single_observation",
            "a single observation carries no information on spread or shape",
            SPREAD_DESCRIPTORS + SHAPE_DESCRIPTORS + ROBUST_SHAPE_DESCRIPTORS + ("lag1_autocorrelation",),
        )
    elif constant:
        notes.add(
            "constant_data",
            "all values are equal: the spread is zero, so shape (skewness, kurtosis), "
            "standardized moments and autocorrelation are undefined",
            SHAPE_DESCRIPTORS
            + ("quartile_skewness", "octile_kurtosis", "octile_excess_kurtosis", "medcouple")
            + ("mean_median_gap", "l_skewness", "l_kurtosis", "lag1_autocorrelation", "tail_contributions"),
        )


def _explain_remaining_nulls(descriptors: dict[str, Descriptor], notes: _Notes) -> None:
    """Safety net of the contract "every null has a reason": name any null no warning covers."""
    covered = {name for note in notes.items for name in note.descriptors}
    silent = [name for name, d in descriptors.items() if d.value is None and name not in covered]
    if silent:
        notes.add(
            "undefined_for_these_data",
            "these descriptors cannot be computed for these data (a quantity they divide by is zero "
            "or outside float64's range)",
            silent,
        )


# Descriptors for which the ordinary bootstrap is known to fail, and why.
_NO_BOOTSTRAP = {
    "minimum": "the bootstrap is inconsistent for sample extremes (Bickel & Freedman 1981)",
    "maximum": "the bootstrap is inconsistent for sample extremes (Bickel & Freedman 1981)",
    "range": "the bootstrap is inconsistent for sample extremes (Bickel & Freedman 1981)",
    "lag1_autocorrelation": "resampling independent observations destroys the serial order it measures",
}


def _intervals(
    data: WeightedData,
    sums: CentralSums | None,
    midpoint_sums: CentralSums | None,
    sheppard_applied: bool,
    basis: _Basis,
    options: DescribeOptions,
    descriptors: dict[str, Descriptor],
    quantiles: list[Quantile],
    probabilities: np.ndarray,
    notes: _Notes,
) -> Resampling:
    """Bootstrap and classical intervals for every defined descriptor and quantile."""
    interval = options.interval
    assert interval is not None
    if data.meaning is WeightMeaning.PROBABILITY:
        raise _reject(
            "options.interval",
            "a probability table is a whole population: its descriptors are exact and have no sampling interval",
        )
    if basis.single:
        raise _reject(
            "options.interval", "the data have no spread to resample (a single observation, or every count in one bin)"
        )
    # Open bins leave the moments undefined; the plan still needs a finite scaling of the values.
    plan_sums = midpoint_sums if midpoint_sums is not None else central_sums(data.values, data.weights, 4)
    sheppard_width = None
    if sheppard_applied:
        width = grouped.equal_width(data)
        assert width is not None
        sheppard_width = math.ldexp(width, -plan_sums.scale_exponent)
    families = (
        (basis.skewness_family, basis.kurtosis_family) if basis.bias_correctable else ("g1", "g2")
    )
    factor_rule = "population" if basis.population else "reliability" if basis.reliability else "sample"
    outcome = resample.bootstrap(
        data,
        plan_sums,
        {name: d.value for name, d in descriptors.items()},
        [q.value for q in quantiles],
        probabilities,
        families=families,
        quantile_type=basis.quantile_type,
        factor_rule=factor_rule,
        options=interval,
        max_work=options.max_resample_work,
        deadline=options.deadline,
        threads=options.resample_threads,
        subset_rows=options.subset_rows,
        sheppard_width=sheppard_width,
    )
    fallbacks: dict[str, list[str]] = {}
    undefined: dict[str, list[str]] = {}
    for name, result in outcome.results.items():
        descriptors[name].interval = result.interval
        descriptors[name].standard_error = _finite_or_none(result.standard_error) if result.standard_error is not None else None
        if result.reason is not None:
            (fallbacks if result.interval is not None else undefined).setdefault(result.reason, []).append(name)
    extremes = []
    for i, result in enumerate(outcome.quantiles):
        if quantiles[i].probability in (0.0, 1.0) and quantiles[i].value is not None:
            extremes.append(f"quantiles[{i}]")  # the minimum or maximum again: see _NO_BOOTSTRAP
            continue
        quantiles[i].interval = result.interval
        quantiles[i].standard_error = result.standard_error
        if result.reason is not None and quantiles[i].value is not None:
            target = fallbacks if result.interval is not None else undefined
            target.setdefault(result.reason, []).append(f"quantiles[{i}]")
    for reason, names in fallbacks.items():
        notes.add("bca_fallback", f"BCa could not be computed ({reason}); the percentile interval is given", names)
    for reason, names in undefined.items():
        notes.add("interval_undefined", f"no bootstrap interval: {reason}", names)
    skipped = [name for name in _NO_BOOTSTRAP if descriptors[name].value is not None]
    skipped += extremes

    def why(name: str) -> str:
        return _NO_BOOTSTRAP["minimum" if name in extremes else name]

    for reason in sorted({why(name) for name in skipped}):
        notes.add("interval_not_offered", f"no bootstrap interval: {reason}", [n for n in skipped if why(n) == reason])
    for text in outcome.notes:
        notes.add("resampling_scheme", text)
    n = basis.sample_size or 0.0
    if n < resample.SMALL_SAMPLE:
        notes.add(
            "bootstrap_small_sample",
            f"with n = {n:g} (< {resample.SMALL_SAMPLE}, common practice) bootstrap intervals may cover "
            "much less than their level",
        )
    distinct = data.values.size if data.binned else data.support.values.size
    if distinct < resample.FEW_DISTINCT:
        notes.add(
            "bootstrap_discrete",
            f"only {distinct} distinct values: the bootstrap distribution of order statistics (median, "
            "quantiles, IQR, MAD) is lumpy and their intervals are coarse",
            ["median", "interquartile_range", "median_absolute_deviation", "quantiles"],
        )
    _classical_intervals(data, sums, basis, interval.level, descriptors, quantiles, probabilities, notes)
    return Resampling(
        method=interval.method,
        level=interval.level,
        resamples=outcome.resamples,
        seed=interval.seed,
        scheme=outcome.scheme,
        replicates=outcome.replicates,
    )


def _classical_intervals(
    data: WeightedData,
    sums: CentralSums | None,
    basis: _Basis,
    level: float,
    descriptors: dict[str, Descriptor],
    quantiles: list[Quantile],
    probabilities: np.ndarray,
    notes: _Notes,
) -> None:
    counted = data.meaning in (WeightMeaning.UNIT, WeightMeaning.FREQUENCY)
    n = data.total_weight
    if sums is not None and counted and n >= 2 and descriptors["mean"].value is not None:
        sample_variance = sums.central_moment(2) * n / (n - 1.0)
        if math.isfinite(sample_variance) and sample_variance > 0.0:
            with np.errstate(all="ignore"):
                t = classical.mean_interval(descriptors["mean"].value, math.sqrt(sample_variance), n, level)
                chi = classical.variance_interval(sample_variance, n, level)
            # A level within rounding of 1 (or 0) puts a quantile of t or chi-square at infinity
            # or zero: no finite interval exists, so none is given (a warning says so).
            unbounded = []
            if math.isfinite(t.low) and math.isfinite(t.high):
                descriptors["mean"].classical_interval = t
            else:
                unbounded.append("mean")
            if all(math.isfinite(b) and b >= 0.0 for b in (chi.low, chi.high)):
                descriptors["variance"].classical_interval = chi
                descriptors["standard_deviation"].classical_interval = dataclasses.replace(
                    chi, low=math.sqrt(chi.low), high=math.sqrt(chi.high)
                )
            else:
                unbounded += ["variance", "standard_deviation"]
            if unbounded:
                notes.add("interval_undefined", f"no finite classical interval at level {level!r}", unbounded)
    if counted and data.integer_weights and not data.binned:
        if descriptors["median"].value is not None:
            descriptors["median"].classical_interval = classical.quantile_interval(data, 0.5, level)
        for quantile in quantiles:
            if quantile.value is not None:
                quantile.classical_interval = classical.quantile_interval(data, quantile.probability, level)


def _count_value(data: WeightedData) -> float:
    """Observations: the count for raw and reliability-weighted samples, the total for counts."""
    if data.meaning in (WeightMeaning.UNIT, WeightMeaning.RELIABILITY):
        return data.count
    total = data.total_weight
    return int(total) if data.integer_weights else total


def _note_input(data: WeightedData, notes: _Notes) -> None:
    if data.omitted:
        notes.add(
            "missing_values_omitted",
            f"{data.omitted} missing value(s) were omitted; n counts the values used",
        )
    if data.zero_weight:
        notes.add(
            "zero_weights_dropped",
            f"{data.zero_weight} entr{'y' if data.zero_weight == 1 else 'ies'} with weight zero "
            "contribute nothing and were left out",
        )
    if data.normalised_from is not None:
        notes.add(
            "probabilities_normalized",
            f"the probabilities summed to {data.normalised_from!r} and were divided by that sum, as requested",
        )


def _sheppard(data: WeightedData, sums: CentralSums, notes: _Notes) -> tuple[CentralSums, bool]:
    width = grouped.equal_width(data)
    if width is None:
        notes.add(
            "sheppard_not_applicable",
            "Sheppard's corrections assume bins of equal width; these widths differ, so no correction was applied",
            ["variance", "standard_deviation", "kurtosis", "excess_kurtosis", "moments"],
        )
        return sums, False
    # In the scaled units of the sums, so the correction is exact wherever float64 can hold it.
    scaled_width = math.ldexp(width, -sums.scale_exponent)
    m2, m4 = sums.scaled_central_moment(2), sums.scaled_central_moment(4)
    corrected2, corrected4 = grouped.sheppard_corrected(m2, m4, scaled_width)
    if not (corrected2 > 0.0 and corrected4 > 0.0 and math.isfinite(corrected4)):
        notes.add(
            "sheppard_not_applicable",
            f"the bins (width {width:g}) are too wide for the spread of the data: the corrected second or "
            "fourth moment would not be positive, so no correction was applied",
            ["variance", "standard_deviation", "kurtosis", "excess_kurtosis", "moments"],
        )
        return sums, False
    corrected = sums.sums.copy()
    corrected[2] = corrected2 * sums.total_weight
    corrected[4] = corrected4 * sums.total_weight
    return dataclasses.replace(sums, sums=corrected), True


def _moment_descriptors(
    descriptors: dict[str, Descriptor],
    sums: CentralSums | None,
    basis: _Basis,
    constant: bool,
    notes: _Notes,
    *,
    mean_label: str,
    lowest: float,
) -> None:
    """Mean, variance, standard deviation, coefficient of variation, skewness and kurtosis from ``sums``.

    ``lowest`` is the smallest value (for bins, the lower edge of the lowest occupied bin): the
    coefficient of variation is defined only on a ratio scale.
    """
    mean = None if sums is None else notes.finite(sums.mean, "mean")
    descriptors["mean"] = Descriptor(mean, mean_label)
    variance = sd = None
    if sums is not None and not basis.single:
        variance = notes.finite(sums.central_moment(2) * basis.variance_factor, "variance")
        # Square root taken in scaled units, so it is representable even when the variance is not.
        sd = notes.finite(sums.standard_deviation(basis.variance_factor), "standard_deviation")
    descriptors["variance"] = Descriptor(variance, basis.variance_label)
    descriptors["standard_deviation"] = Descriptor(sd, f"square root of the {basis.variance_label} variance")
    descriptors["coefficient_of_variation"] = Descriptor(
        _coefficient_of_variation(lowest, sums, sd, basis, notes),
        f"standard deviation ({basis.variance_label}) / mean",
    )
    _shape(descriptors, sums, basis, basis.single or constant, notes)


def _order_descriptors(
    descriptors: dict[str, Descriptor],
    data: WeightedData,
    basis: _Basis,
    options: DescribeOptions,
    notes: _Notes,
) -> tuple[np.ndarray, np.ndarray]:
    """Median, extremes, IQR, MAD and the requested quantiles, all from one sort of the data.

    Returns the requested quantiles and those behind the robust shape measures
    (``_ROBUST_PROBABILITIES``), computed by the same rule in the same call.
    """
    probabilities = np.array(options.probabilities, dtype=np.float64)
    quartiles_and_requested = np.concatenate(([0.25, 0.75], _ROBUST_PROBABILITIES, probabilities))
    if data.binned:
        values = grouped.quantiles(data, np.concatenate(([0.5], quartiles_and_requested)))
        median = _finite_or_none(float(values[0]))
        quartiles, requested = values[1:3], values[3:]
        robust_values, requested = requested[: _ROBUST_PROBABILITIES.size], requested[_ROBUST_PROBABILITIES.size :]
        if median is None:
            notes.add("quantile_in_open_bin", "the median falls inside an open-ended bin", ["median"])
        mad = None
        if median is not None and not basis.single:
            mad = _finite_or_none(grouped.median_absolute_deviation(data, median))
            if mad is None:
                notes.add(
                    "quantile_in_open_bin",
                    "the median absolute deviation reaches into an open-ended bin",
                    ["median_absolute_deviation", "median_absolute_deviation_normal"],
                )
        notes.add(
            "grouped_extremes",
            "bins record intervals, not values: the minimum and maximum are unknown (see grouping for the "
            "outermost edges holding data)",
            ["minimum", "maximum", "range"],
        )
        minimum = maximum = None
    else:
        median = order_statistics.median(data)
        quartiles, requested = _sample_quantiles(data, quartiles_and_requested, basis, notes)
        robust_values, requested = requested[: _ROBUST_PROBABILITIES.size], requested[_ROBUST_PROBABILITIES.size :]
        mad = None if basis.single else order_statistics.median_absolute_deviation(data, median)
        minimum = float(data.sorted_values[0])
        maximum = float(data.sorted_values[-1])

    descriptors["median"] = Descriptor(median, basis.median_rule)
    descriptors["minimum"] = Descriptor(minimum, "smallest value")
    descriptors["maximum"] = Descriptor(maximum, "largest value")
    spread_range = None
    if minimum is not None and maximum is not None and not basis.single:
        spread_range = notes.finite(maximum - minimum, "range")
    descriptors["range"] = Descriptor(spread_range, "maximum - minimum")
    iqr = None
    if not basis.single and quartiles.size and np.all(np.isfinite(quartiles)):
        iqr = notes.finite(float(quartiles[1] - quartiles[0]), "interquartile_range")
    elif not basis.single and data.binned:
        notes.add("quantile_in_open_bin", "a quartile falls inside an open-ended bin", ["interquartile_range"])
    method = "grouped" if data.binned else f"type {basis.quantile_type}"
    descriptors["interquartile_range"] = Descriptor(iqr, f"Q(0.75) - Q(0.25), quantiles {method}")
    descriptors["median_absolute_deviation"] = Descriptor(mad, f"median of |x - median| ({basis.median_rule})")
    descriptors["median_absolute_deviation_normal"] = Descriptor(
        None if mad is None else notes.finite(mad * order_statistics.NORMAL_MAD_FACTOR, "median_absolute_deviation_normal"),
        f"{order_statistics.NORMAL_MAD_FACTOR} x median of |x - median| (consistent for the normal sigma)",
    )
    return requested, robust_values


def _robust_descriptors(
    descriptors: dict[str, Descriptor],
    data: WeightedData,
    sums: CentralSums | None,
    basis: _Basis,
    quantiles: np.ndarray,
    constant: bool,
    notes: _Notes,
) -> None:
    """Quartile skewness, octile kurtosis, medcouple, half-sample mode, mean-median gap, L-moments."""
    method = "grouped quantiles" if data.binned else f"quantiles type {basis.quantile_type}"
    undefined = "single" if basis.single else "constant" if constant else None
    _quantile_shape(descriptors, quantiles, method, undefined, notes)

    mc = hsm = None
    if data.binned:
        notes.add(
            "needs_values",
            "the medcouple and the half-sample mode need observed values; bins give only intervals",
            ["medcouple", "half_sample_mode"],
        )
    else:
        if undefined is None:
            support = data.support
            median = descriptors["median"].value
            if data.weights is None and support.values.size == data.values.size:
                mc = robust.medcouple(data.sorted_values, None, median)
            else:
                # Tied observations: the same kernel values, counted by the support's weights
                # (about the cost of the distinct values, not of the observations).
                mc = robust.medcouple(support.values, support.weights, median)
            mc = _finite_or_none(mc)
        if data.meaning is WeightMeaning.UNIT:
            hsm = robust.half_sample_mode(data.sorted_values)
        elif data.integer_weights:
            hsm = robust.half_sample_mode(data.support.values, data.support.weights)
        else:
            notes.add(
                "needs_values",
                "the half-sample mode is defined for observations with whole counts; see modes",
                ["half_sample_mode"],
            )
    descriptors["medcouple"] = Descriptor(mc, "median of h(x_i, x_j) over x_i <= median <= x_j (Brys et al. 2004)")
    descriptors["half_sample_mode"] = Descriptor(hsm, "half-sample mode (Bickel & Fruhwirth 2006)")

    _mean_median_gap(descriptors)

    _l_moments(descriptors, data, sums, basis, undefined, notes)


def _quantile_shape(
    descriptors: dict[str, Descriptor],
    quantiles: np.ndarray,
    method: str,
    undefined: str | None,
    notes: _Notes,
) -> None:
    """Quartile skewness and octile kurtosis from the quantiles at ``_ROBUST_PROBABILITIES``."""
    q1, q2, q3, e1, e2, e3, e5, e6, e7 = np.asarray(quantiles, dtype=np.float64)  # numpy scalars: no ZeroDivisionError
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        # Halves first, so quantiles near +-1.8e308 do not overflow before the ratio.
        bowley = (0.5 * q3 + 0.5 * q1 - q2) / (0.5 * q3 - 0.5 * q1)
        moors = ((0.5 * e7 - 0.5 * e5) + (0.5 * e3 - 0.5 * e1)) / (0.5 * e6 - 0.5 * e2)
    defined_bowley = undefined is None and math.isfinite(bowley)
    defined_moors = undefined is None and math.isfinite(moors)
    descriptors["quartile_skewness"] = Descriptor(
        float(bowley) if defined_bowley else None, f"(Q3 + Q1 - 2 Q2) / (Q3 - Q1), {method} (Bowley)"
    )
    descriptors["octile_kurtosis"] = Descriptor(
        float(moors) if defined_moors else None, f"((E7 - E5) + (E3 - E1)) / (E6 - E2), {method} (Moors 1988)"
    )
    descriptors["octile_excess_kurtosis"] = Descriptor(
        float(moors - NORMAL_OCTILE_KURTOSIS) if defined_moors else None,
        f"octile kurtosis - {NORMAL_OCTILE_KURTOSIS!r} (its normal value)",
    )
    if undefined is None and not (defined_bowley and defined_moors):
        affected = [n for n, ok in (("quartile_skewness", defined_bowley), ("octile_kurtosis", defined_moors)) if not ok]
        if "octile_kurtosis" in affected:
            affected.append("octile_excess_kurtosis")
        notes.add(
            "quantile_spread_zero",
            "the quantiles in the denominator coincide (or fall in an open bin), so the ratio is undefined",
            affected,
        )


def _mean_median_gap(descriptors: dict[str, Descriptor]) -> None:
    mean, median, sd = descriptors["mean"].value, descriptors["median"].value, descriptors["standard_deviation"].value
    gap = None
    if mean is not None and median is not None and sd:
        gap = _finite_or_none((0.5 * mean - 0.5 * median) / (0.5 * sd))
    descriptors["mean_median_gap"] = Descriptor(gap, "(mean - median) / standard deviation")


def _l_moments(
    descriptors: dict[str, Descriptor],
    data: WeightedData,
    sums: CentralSums | None,
    basis: _Basis,
    undefined: str | None,
    notes: _Notes,
) -> None:
    # L-moments are linear in the data: compute them on data scaled by a power of two (exact),
    # so nothing overflows near float64's limit, and scale l1 and l2 back.
    if data.binned:
        points = data.edges[np.isfinite(data.edges)]
    else:
        ordered = data.sorted_values if data.unit_sorted else data.support.values
        points = ordered[[0, -1]]
    largest = float(np.max(np.abs(points)))
    exponent = -math.frexp(largest)[1] if largest > 0.0 else 0
    values = None
    if data.binned:
        if data.open_bin_weight == 0.0:
            assert data.edges is not None and data.weights is not None
            values = lmoments.binned_lmoments(np.ldexp(data.edges, exponent), data.weights)
            label = "population L-moments of even spread within bins (approximation)"
    elif data.meaning is WeightMeaning.PROBABILITY:
        support = data.support
        values = lmoments.population_lmoments(np.ldexp(support.values, exponent), support.weights)
        label = "population L-moments (Hosking 1990)"
    elif data.integer_weights and data.meaning is not WeightMeaning.RELIABILITY:
        if data.total_weight >= 4:
            if data.weights is None:
                values = lmoments.sample_lmoments(data.sorted_values, None, exponent)
            else:
                support = data.support
                values = lmoments.sample_lmoments(support.values, support.weights, exponent)
            label = "unbiased, from probability-weighted moments (Hosking 1990)"
        elif not basis.single:
            notes.add(
                "too_few_observations",
                f"the unbiased L-moments up to order 4 need at least 4 observations; n = {data.total_weight:g}",
                ["l_location", "l_scale", "l_skewness", "l_kurtosis"],
            )
    else:
        support = data.support
        values = lmoments.population_lmoments(np.ldexp(support.values, exponent), support.weights)
        label = "plug-in L-moments of the weighted distribution (no unbiased form for these weights)"
    if values is None:
        for name in ("l_location", "l_scale", "l_skewness", "l_kurtosis"):
            descriptors[name] = Descriptor(None, "L-moments (Hosking 1990)")
        return
    l1, l2, l3, l4 = values
    ratios_defined = l2 > 0.0 and undefined is None
    location = notes.finite(scale_by_power_of_two(l1, -exponent), "l_location")
    scale = None if undefined == "single" else notes.finite(scale_by_power_of_two(l2, -exponent), "l_scale")
    descriptors["l_location"] = Descriptor(location, f"l1, {label}")
    descriptors["l_scale"] = Descriptor(scale, f"l2, {label}")
    descriptors["l_skewness"] = Descriptor(_finite_or_none(l3 / l2) if ratios_defined else None, f"t3 = l3 / l2, {label}")
    descriptors["l_kurtosis"] = Descriptor(_finite_or_none(l4 / l2) if ratios_defined else None, f"t4 = l4 / l2, {label}")


def _normality(
    data: WeightedData, sums: CentralSums | None, basis: _Basis, constant: bool, notes: _Notes
) -> list[NormalityTest]:
    """The four tests; a p-value is evidence against normality, not a verdict."""
    reason = None
    if data.meaning is WeightMeaning.PROBABILITY:
        reason = "a probability table is a distribution, not a sample"
    elif data.binned:
        reason = "binned counts give only grouped values; the tests need observations"
    elif not data.integer_weights or data.meaning is WeightMeaning.RELIABILITY:
        reason = "the tests need observations with whole counts"
    return _normality_tests(reason, sums, basis, constant, data.total_weight, notes)


def _normality_tests(
    reason: str | None, sums: CentralSums | None, basis: _Basis, constant: bool, n: float, notes: _Notes
) -> list[NormalityTest]:
    """The tests from g1 and b2 of a sample of ``n`` whole observations, unless ``reason`` says why not."""
    if reason is None and (sums is None or basis.single or constant):
        reason = "the tests need data with spread (at least two distinct values)"
    results = {}
    if reason is None:
        assert sums is not None
        results = normality.tests(sums.standardized_moment(3), sums.standardized_moment(4), n)
        if n < normality.SMALL_SAMPLE_KURTOSIS:
            notes.add(
                "normality_small_sample",
                f"with n = {n:g} (< {normality.SMALL_SAMPLE_KURTOSIS}) the kurtosis test's normal "
                "approximation is poor, and so is the omnibus test built on it",
                ["normality"],
            )
    out = []
    for name, minimum in normality.MINIMUM_N.items():
        result = results.get(name, reason)
        if isinstance(result, normality.TestResult):
            out.append(
                NormalityTest(
                    name, _finite_or_none(result.statistic), _finite_or_none(result.p_value), minimum,
                    normality.REFERENCES[name], None,
                )
            )
        else:
            out.append(NormalityTest(name, None, None, minimum, normality.REFERENCES[name], result))
    return out


def _sample_quantiles(
    data: WeightedData, probabilities: np.ndarray, basis: _Basis, notes: _Notes
) -> tuple[np.ndarray, np.ndarray]:
    quantile_type = basis.quantile_type
    assert quantile_type is not None
    if data.integer_weights and data.meaning is not WeightMeaning.PROBABILITY:
        values = order_statistics.quantiles(data, probabilities, quantile_type)
    elif quantile_type in (1, 2):
        support = data.support
        values = order_statistics.cdf_quantiles(
            support.values, support.cumulative, probabilities, average_at_steps=quantile_type == 2
        )
    else:
        notes.add(
            "integer_counts_required",
            f"quantile type {quantile_type} is defined through the order statistics of whole observations; "
            "these weights are not whole counts, so use quantile_type 1 or 2",
            ["quantiles", "interquartile_range"],
        )
        values = np.full(probabilities.size, np.nan)
    return values[:2], values[2:]


def _lowest_value(data: WeightedData) -> float:
    """The smallest value; for bins the lower edge of the lowest bin holding data."""
    if data.binned:
        assert data.edges is not None and data.weights is not None
        return float(data.edges[int(np.flatnonzero(data.weights > 0)[0])])
    return float(data.sorted_values[0])


def _coefficient_of_variation(
    lowest: float, sums: CentralSums | None, sd: float | None, basis: _Basis, notes: _Notes
) -> float | None:
    """``sd / mean`` for data on a ratio scale (no negative values) with a non-zero mean.

    With no negative values the mean is zero only for all-zero data, and otherwise at least
    ``sd / sqrt(n)``, so "mean near zero relative to the spread" cannot occur on a ratio scale.
    """
    if sums is None or basis.single:
        return None
    reason = None
    if lowest < 0.0:
        reason = "the data include negative values, so they are not on a ratio scale"
    elif sums.mean == 0.0:
        reason = "the mean is zero"
    elif sd is None:
        reason = "the standard deviation is outside the range of float64"
    if reason is not None:
        notes.add(
            "coefficient_of_variation_undefined",
            f"the coefficient of variation is undefined: {reason}",
            ["coefficient_of_variation"],
        )
        return None
    return notes.finite(sd / sums.mean, "coefficient_of_variation")


def _family_estimate(
    family: str, sums: CentralSums, basis: _Basis, undefined: bool
) -> tuple[float | None, float | None, str | None]:
    """(value, normal-theory standard error, reason it is undefined) for one J&G family."""
    skewness = family in shape.SKEWNESS_FAMILIES
    plug_in = sums.standardized_moment(3) if skewness else sums.standardized_moment(4) - 3.0
    if undefined:
        return None, None, None
    if family in ("g1", "g2") and not basis.bias_correctable:
        # The plug-in value; no sampling distribution is claimed for probabilities or reliability weights.
        return _finite_or_none(plug_in), None, None
    if not basis.bias_correctable:
        return None, None, "bias-corrected"
    n = basis.sample_size
    assert n is not None
    minimum = shape.SKEWNESS_MIN_N[family] if skewness else shape.KURTOSIS_MIN_N[family]
    if n < minimum:
        if basis.population and family in ("g1", "g2"):
            # A population's own skewness needs only spread; its sampling error needs n.
            return _finite_or_none(plug_in), None, None
        return None, None, f"needs at least {minimum} observations; n = {n:g}"
    estimate = (shape.skewness if skewness else shape.excess_kurtosis)(plug_in, n, family)
    return _finite_or_none(float(estimate.value)), _finite_or_none(float(estimate.standard_error)), None


def _shape(
    descriptors: dict[str, Descriptor],
    sums: CentralSums | None,
    basis: _Basis,
    undefined: bool,
    notes: _Notes,
) -> None:
    for name, family, plug_in_family in (
        ("skewness", basis.skewness_family, "g1"),
        ("excess_kurtosis", basis.kurtosis_family, "g2"),
    ):
        affected = ["skewness"] if name == "skewness" else ["kurtosis", "excess_kurtosis"]
        value = error = None
        label = f"{family} (plug-in)" if basis.reliability and family == plug_in_family else family
        if sums is not None:
            value, error, reason = _family_estimate(family, sums, basis, undefined)
            if reason == "bias-corrected":
                # No published bias correction for these weights: the plug-in value, named as such.
                value, error, _ = _family_estimate(plug_in_family, sums, basis, undefined)
                label = f"{plug_in_family} (plug-in)"
                notes.add(
                    "plug_in_estimator",
                    f"{family} has no published form for reliability weights; "
                    f"the plug-in {plug_in_family} is reported instead",
                    affected,
                )
            elif reason is not None:
                notes.add("too_few_observations", f"{name.replace('_', ' ')} {family} {reason}", affected)
        if name == "skewness":
            descriptors["skewness"] = Descriptor(value, label, error)
        else:
            descriptors["kurtosis"] = Descriptor(
                None if value is None else value + 3.0, f"{label} + 3 (normal = 3)", error
            )
            descriptors["excess_kurtosis"] = Descriptor(value, f"{label} (normal = 0)", error)


def _shape_estimators(sums: CentralSums | None, basis: _Basis, constant: bool) -> ShapeEstimators:
    """Every Joanes & Gill family side by side; ``None`` where it does not apply or n is too small."""
    undefined = sums is None or basis.single or constant

    def row(family: str) -> ShapeEstimate:
        if undefined:
            return ShapeEstimate(family, None, None)
        value, error, _ = _family_estimate(family, sums, basis, False)
        return ShapeEstimate(family, value, error)

    return ShapeEstimators(
        skewness=[row(f) for f in shape.SKEWNESS_FAMILIES],
        excess_kurtosis=[row(f) for f in shape.KURTOSIS_FAMILIES],
    )


def _lag1(
    data: WeightedData, sums: CentralSums | None, single: bool, constant: bool, notes: _Notes
) -> float | None:
    if single or constant or sums is None:
        return None
    if not data.ordered or data.weights is not None:
        notes.add(
            "no_observation_order",
            "lag-1 autocorrelation needs unweighted observations in their original order",
            ["lag1_autocorrelation"],
        )
        return None
    return _finite_or_none(lag1_autocorrelation(data.values, sums))


# Normal-theory standard deviations (times sqrt(n)) of the quartile skewness and of
# (mean - median) / sigma, from the asymptotic covariance of sample quantiles
# Cov(Q_p, Q_q) = p (1 - q) / (n f(x_p) f(x_q)), p <= q (e.g. Serfling 1980, section 2.3.3),
# and Var(median - mean) = (pi / 2 - 1) sigma^2 / n for normal data.
def _quartile_skewness_sd() -> float:
    probabilities = np.array([0.25, 0.5, 0.75])
    density = stats.norm.pdf(stats.norm.ppf(probabilities))
    p, q = np.meshgrid(probabilities, probabilities, indexing="ij")
    covariance = np.minimum(p, q) * (1.0 - np.maximum(p, q)) / np.outer(density, density)
    gradient = np.array([1.0, -2.0, 1.0])
    spread = stats.norm.ppf(0.75) - stats.norm.ppf(0.25)
    return float(math.sqrt(gradient @ covariance @ gradient) / spread)


_QUARTILE_SKEWNESS_SD = _quartile_skewness_sd()
_MEAN_MEDIAN_GAP_SD = math.sqrt(math.pi / 2.0 - 1.0)


def _check_symmetry(
    descriptors: dict[str, Descriptor], data: WeightedData, basis: _Basis, notes: _Notes
) -> None:
    """Warn when skewness is near zero while quartiles or the mean-median gap show asymmetry."""
    if not _symmetry_checkable(descriptors):
        return
    probabilities = np.array([0.25, 0.5, 0.75])
    if data.binned:
        quartiles = grouped.quantiles(data, probabilities)
    else:
        support = data.support
        quartiles = order_statistics.cdf_quantiles(support.values, support.cumulative, probabilities, average_at_steps=True)
    _note_asymmetry(descriptors, quartiles, basis, notes)


def _symmetry_checkable(descriptors: dict[str, Descriptor]) -> bool:
    """Whether skewness, mean, median and a non-zero standard deviation are all defined."""
    values = [descriptors[name].value for name in ("skewness", "mean", "median")]
    return all(v is not None for v in values) and bool(descriptors["standard_deviation"].value)


def _note_asymmetry(
    descriptors: dict[str, Descriptor], quartiles: np.ndarray, basis: _Basis, notes: _Notes
) -> None:
    """The comparison behind ``_check_symmetry``, given Q1, Q2, Q3 by whatever rule the data allow."""
    if not _symmetry_checkable(descriptors):
        return
    skew = descriptors["skewness"].value
    mean, sd = descriptors["mean"].value, descriptors["standard_deviation"].value
    assert skew is not None and mean is not None and sd is not None
    q1, q2, q3 = np.asarray(quartiles, dtype=np.float64)  # numpy scalars: no ZeroDivisionError or OverflowError
    if not (math.isfinite(q1) and math.isfinite(q3)) or q3 == q1:
        return
    with np.errstate(over="ignore", invalid="ignore"):
        # Halves first: quartiles near +-1.8e308 must not overflow before the ratio.
        quartile_skewness = float((0.5 * q3 + 0.5 * q1 - q2) / (0.5 * q3 - 0.5 * q1))
        # The gap uses the same averaged median as the quartiles, so a symmetric table reads as such.
        gap = float((0.5 * mean - 0.5 * q2) / (0.5 * sd))
    if not (math.isfinite(quartile_skewness) and math.isfinite(gap)):
        return
    if basis.population or basis.sample_size is None:
        near_zero = abs(skew) <= POPULATION_SYMMETRY_THRESHOLD
        limit_quartile = limit_gap = POPULATION_SYMMETRY_THRESHOLD
        rule = f"rule of thumb for a population: |skewness| <= {POPULATION_SYMMETRY_THRESHOLD}, others beyond it"
    else:
        n = basis.sample_size
        error = descriptors["skewness"].standard_error_under_normality
        if error is None:
            error = math.sqrt(6.0 * (n - 2.0) / ((n + 1.0) * (n + 3.0))) if n > 2 else math.inf
        near_zero = abs(skew) <= 2.0 * error
        limit_quartile = 2.0 * _QUARTILE_SKEWNESS_SD / math.sqrt(n)
        limit_gap = 2.0 * _MEAN_MEDIAN_GAP_SD / math.sqrt(n)
        rule = "two normal-theory standard errors (common practice)"
    disagree = []
    if abs(quartile_skewness) > limit_quartile:
        disagree.append(f"quartile skewness {quartile_skewness:.3g}")
    if abs(gap) > limit_gap:
        disagree.append(f"(mean - median) / sd = {gap:.3g}")
    if near_zero and disagree:
        notes.add(
            "asymmetry_despite_small_skewness",
            f"skewness {skew:.3g} is near zero, yet {' and '.join(disagree)} show asymmetry "
            f"(threshold: {rule}); a zero third moment does not make a distribution symmetric",
            ["skewness"],
        )


def _moments(sums: CentralSums, top: int, single: bool, constant: bool, notes: _Notes) -> Moments:
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


def _tail(
    data: WeightedData,
    sums: CentralSums | None,
    undefined: bool,
    options: DescribeOptions,
    kind: str,
    notes: _Notes,
) -> TailContributions | None:
    if sums is None or undefined:
        return None
    if data.binned:
        values, weights = data.values, data.weights
    else:
        support = data.support
        values, weights = support.values, support.weights
    found = tail.contributions(
        values,
        weights,
        sums,
        limit=SAMPLE_CONTRIBUTORS if kind == "samples" else options.contributions_limit,
        largest_only=kind == "samples",
    )
    third, fourth = sums.standardized_moment(3), sums.standardized_moment(4)
    if not (math.isfinite(third) and math.isfinite(fourth) and np.all(np.isfinite(found.fourth))):
        notes.add("not_representable", "the tail contributions are outside float64's range", ["tail_contributions"])
        return None
    return TailContributions(
        standardized_third=float(third),
        standardized_fourth=float(fourth),
        complete=found.complete,
        outcomes=[
            Contribution(float(v), float(w), float(t), float(f))
            for v, w, t, f in zip(found.values, found.weights, found.third, found.fourth)
        ],
    )


def _modes(data: WeightedData, limit: int, notes: _Notes) -> tuple[Modes, list[grouped.ModalClass]]:
    if data.binned:
        classes = grouped.modal_classes(data)
        values = np.array([c.mode for c in classes if math.isfinite(c.mode)])
        if len(values) < len(classes):
            notes.add(
                "grouped_mode_undefined",
                "the interpolated mode of a modal class needs known neighbouring densities: a neighbour is an "
                "open bin holding data or ties with the class (see grouping.modal_classes)",
                ["modes"],
            )
        weight = classes[0].count if classes else 0.0
        tied, distinct = len(classes), int(data.values.size)
    else:
        found = order_statistics.modes(data)
        values, weight, tied, distinct = found.values, found.weight, found.tied, found.distinct_values
        counted = data.meaning in (WeightMeaning.UNIT, WeightMeaning.FREQUENCY)
        if counted and weight == 1.0 and distinct > 1:
            notes.add(
                "no_repeated_values",
                f"each of the {distinct} values occurs once, so the data have no mode",
                ["modes"],
            )
            values = values[:0]
        classes = []
    truncated = values.size > limit
    if truncated:
        notes.add("modes_truncated", f"{values.size} values tie for the mode; the first {limit} are listed", ["modes"])
        values = values[:limit]
    return (
        Modes(values=[float(v) for v in values], count=weight, distinct_values=distinct, tied=tied, truncated=truncated),
        classes,
    )


def _grouping(data: WeightedData, classes: list[grouped.ModalClass], sheppard_applied: bool) -> Grouping:
    edges = data.edges
    assert edges is not None and data.weights is not None
    occupied = np.flatnonzero(data.weights > 0)
    lowest = edges[occupied[0]]
    highest = edges[occupied[-1] + 1]
    width = grouped.equal_width(data)
    return Grouping(
        bins=int(data.weights.size),
        bin_width=width,
        equal_widths=width is not None,
        open_lower=bool(np.isinf(edges[0])),
        open_upper=bool(np.isinf(edges[-1])),
        open_bin_weight=data.open_bin_weight,
        lowest_edge=_finite_or_none(float(lowest)),
        highest_edge=_finite_or_none(float(highest)),
        sheppard_correction_applied=sheppard_applied,
        modal_classes=[ModalClass(c.lower, c.upper, c.count, _finite_or_none(c.mode)) for c in classes],
    )
