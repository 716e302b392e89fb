"""Describing one input: admission, the descriptor families in turn, and the one assembly of a
``Description`` that describing data and describing merged partial states share."""

from __future__ import annotations

import dataclasses
import math
import time
from collections.abc import Callable

import numpy as np

from tailgauge.core import cost, order_statistics
from tailgauge.core.describe import evidence, intervals, known, moment_based, order_based, ordered, robust_shape, tails
from tailgauge.core.describe.basis import Basis
from tailgauge.core.describe.warnings import Warnings, explain_remaining_nulls, finite_or_none, note_degenerate
from tailgauge.core.describe.options import DescribeOptions
from tailgauge.core.describe.results import (
    Conventions,
    Description,
    Descriptor,
    Exceedance,
    Grouping,
    Modes,
    Moments,
    NormalityTest,
    Quantile,
    QuantileSketches,
    Resampling,
    Size,
    TailContributions,
    TailMean,
)
from tailgauge.core.describe.validation import check_description
from tailgauge.core.errors import LimitExceeded, Location
from tailgauge.core.moments import CentralSums, central_sums
from tailgauge.core.selection import EVERYTHING, Selection, shown_warnings
from tailgauge.core.registry import SCALAR_DESCRIPTORS, UNDEFINED_FOR_OPEN_BIN, WarningCode, names
from tailgauge.core.weighted import WeightedData, WeightMeaning

# Computed by robust_shape.robust_descriptors (after the order statistics).
ROBUST_NAMES = names("robust_shape", "l_moment") + ("half_sample_mode",)
NOT_COMPUTED = "not computed: not asked for by options.descriptors"

PLUG_IN_CENTRAL_MOMENTS = "plug-in: sum of w (x - mean)^k divided by the total weight"


def admit(inputs: list[WeightedData], options: DescribeOptions) -> cost.Estimate:
    """Plan the memory and time of describing (or comparing) ``inputs`` by ``options``, or raise
    :class:`LimitExceeded` with what would fit (see :mod:`tailgauge.core.cost`)."""
    interval = options.interval
    if interval is not None and any(d.meaning is WeightMeaning.PROBABILITY for d in inputs):
        interval = None  # refused with its own reason by validation.check_description
    left = _left(options)  # (the time left when planning began, before the shapes are measured)
    return planned([input_shape(d, options) for d in inputs], options, interval, left=left)


def input_shape(data: WeightedData, options: DescribeOptions) -> cost.Shape:
    """What the cost model needs of one input described by ``options``."""
    return cost.shape_of(data, options.subset_rows, distinct=_sorts(data, options), ordered=options.order == "as_sent")


def planned(
    shapes: list[cost.Shape], options: DescribeOptions, interval, *, separately: bool = False, left: float | None = None
) -> cost.Estimate:
    """``cost.admit`` of ``shapes`` with every term ``options`` sets (``interval``: the one planned
    for, or None); ``separately``: the inputs are described one after another (groups); ``left``:
    the seconds left before the deadline, as measured when planning began (now, by default)."""
    left = _left(options) if left is None else left
    return cost.admit(
        shapes,
        probabilities=len(options.probabilities),
        resamples=0 if interval is None else interval.resamples,
        method=None if interval is None else interval.method,
        threads=options.resample_threads,
        max_bytes=options.max_memory_bytes,
        seconds=left,
        max_work=options.max_resample_work,
        tail_levels=len(options.tail_levels),
        separately=separately,
    )


def _left(options: DescribeOptions) -> float:
    return math.inf if options.deadline is None else options.deadline - time.monotonic()


def _sorts(data: WeightedData, options: DescribeOptions) -> bool:
    """Whether describing ``data`` by ``options`` sorts it (so the plan may count its distinct values)."""
    if options.interval is not None:
        return True
    return options.selection.needs_sort and not order_based.selects_without_sorting(data, options)


def _on_time(options: DescribeOptions) -> None:
    """The wall-clock check between the descriptor families (each is at most O(n log n))."""
    if options.deadline is not None and time.monotonic() > options.deadline:
        raise LimitExceeded(
            detail="the descriptors did not finish within this server's time limit; send fewer values",
            locations=[Location("", "too many values to describe in time")],
        )


def describe(data: WeightedData, options: DescribeOptions, *, kind: str) -> Description:
    """Compute every descriptor of ``data``.

    The options are checked against the data first (``validation.check_description``), then the
    request is admitted (unless the caller did), then the families are computed in turn.

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
    basis = check_description(data, options)
    if not options.admitted:
        admit([data], options)
    notes = Warnings()
    _note_input(data, notes)

    moments_defined = data.open_bin_weight == 0.0
    sums = midpoint_sums = None
    sheppard_applied = False
    sheppard_width = None
    if moments_defined:
        sums = midpoint_sums = central_sums(data.values, data.weights, max(options.moment_order, 4))
        if data.binned and options.sheppard_correction:
            sums, sheppard_width = moment_based.sheppard(data, sums, notes)
            sheppard_applied = sheppard_width is not None
    else:
        notes.add(
            WarningCode.OPEN_BIN_HOLDS_DATA,
            f"open-ended bins hold {data.open_bin_weight:g} of the {data.total_weight:g} counts, so their "
            "values are unknown and no moment can be computed; quantiles in closed bins are still given",
            UNDEFINED_FOR_OPEN_BIN + ("moments", "shape_estimators", "tail_contributions"),
        )
    # Every count in one bin: its midpoint would read as zero spread, but the spread is unknown.
    constant = sums is not None and sums.scaled_central_moment(2) == 0.0 and not basis.single_bin
    note_degenerate(basis, constant, notes)

    descriptors: dict[str, Descriptor] = {}
    weighted = data.weights is not None
    moment_based.moment_descriptors(
        descriptors,
        sums,
        basis,
        constant,
        notes,
        mean_label=(
            "mean of bin midpoints" if data.binned else "weighted arithmetic mean" if weighted else "arithmetic mean"
        ),
        lowest=moment_based.lowest_value(data),
        sheppard_width=sheppard_width,
    )
    _on_time(options)
    selection = options.selection
    probabilities = np.array(options.probabilities if selection.computes("quantiles") else (), dtype=np.float64)
    quantile_values = np.empty(0)
    unsorted = order_based.selects_without_sorting(data, options)
    if selection.needs_sort:
        quantile_values, robust_quantiles = order_based.order_descriptors(
            descriptors, data, basis, options, notes, unsorted=unsorted
        )
        quantile_values = quantile_values[: probabilities.size]
        _on_time(options)
        if selection.computes_any(ROBUST_NAMES):
            robust_shape.robust_descriptors(descriptors, data, sums, basis, robust_quantiles, constant, notes, selection)
            _on_time(options)
    if selection.computes("lag1_autocorrelation"):
        descriptors["lag1_autocorrelation"] = Descriptor(
            moment_based.lag1(data, sums, basis.single, constant, notes), moment_based.LAG1_LABEL
        )
    tail_point = tails.tail_descriptors(descriptors, data, options, notes)
    _on_time(options)
    # What the selection leaves uncomputed holds None here; restrict() takes it out of the answer.
    for name in SCALAR_DESCRIPTORS:
        descriptors.setdefault(name, Descriptor(None, NOT_COMPUTED))
    if selection.shows("skewness"):  # a warning about the skewness: only where it is shown
        evidence.check_symmetry(descriptors, data, basis, notes)

    quantile_list = quantiles_at(probabilities, quantile_values)
    if any(q.value is None for q in quantile_list) and quantile_list:
        missing = [f"{q.probability:g}" for q in quantile_list if q.value is None]
        if data.binned:
            notes.add(
                WarningCode.QUANTILE_IN_OPEN_BIN,
                f"quantiles at p = {', '.join(missing)} fall inside an open-ended bin, where values are unknown",
                ["quantiles"],
            )

    structure = None
    if options.order == "as_sent" and sums is not None and not basis.single and not constant:
        structure = ordered.serial_of(data, sums)
        if structure.effective_n is None:
            notes.add(
                WarningCode.UNDEFINED_FOR_THESE_DATA,
                "size.effective_n is null: the sum of the autocorrelations is not finite",
            )
    resampling = None
    if options.interval is not None:
        resampling = intervals.intervals(
            data, sums, midpoint_sums, sheppard_applied, basis, options, descriptors, quantile_list, probabilities,
            notes, structure, tail_point,
        )

    known.apply(data, descriptors, notes, selection, resampling)  # a histogram's own sum, min and max
    modes, modal = None, []
    if selection.computes("modes") or (data.binned and selection.computes("grouping")):  # grouping lists the modal classes
        modes, modal = order_based.modes(data, options.modes_limit, notes)
    single_or_constant = basis.single or constant
    return assemble(
        kind=kind,
        size=Size(
            n=None if data.meaning is WeightMeaning.PROBABILITY else _count_value(data),
            total_weight=data.total_weight,
            omitted=data.omitted,
            distinct_values=_distinct_values(data, _sorts(data, options)),
            zero_weight=data.zero_weight,
            effective_n=(
                data.effective_size if data.meaning is WeightMeaning.RELIABILITY
                else None if structure is None or structure.effective_n is None
                else finite_or_none(structure.effective_n)
            ),
        ),
        basis=basis,
        sums=sums,
        constant=constant,
        descriptors=descriptors,
        quantiles=quantile_list,
        notes=notes,
        moments=lambda: (
            None if sums is None or not selection.computes("moments")
            else moment_based.moments_member(sums, options.moment_order, basis.single, constant, notes)
        ),
        modes=modes,
        tail_contributions=lambda: (
            moment_based.tail_contributions(data, midpoint_sums, single_or_constant, options, kind, notes)
            if selection.computes("tail_contributions") else None
        ),
        grouping=(
            known.with_summary(order_based.grouping(data, modal, sheppard_applied), data, selection)
            if data.binned and selection.computes("grouping") else None
        ),
        normality=lambda: (
            evidence.normality_of(data, midpoint_sums, basis, constant, notes) if selection.computes("normality") else []
        ),
        central_moments=PLUG_IN_CENTRAL_MOMENTS
        + ("; bins at their midpoints" if data.binned else "")
        + ("; orders 2 and 4 Sheppard-corrected" if sheppard_applied else ""),
        weights=data.meaning,
        resampling=resampling,
        selection=selection,
        exceedances=tails.exceedances(data, options, notes),
        tail_means=tail_point.tail_means,
    )


def restricted(description: Description, selection: Selection | None) -> Description:
    """``description`` as its answer shows it: only the descriptors and members ``selection``
    shows (the others listed in ``absent``: absent from the answer, not null), and only the
    warnings about them. Applied last, after whatever reads the hidden values (scores,
    comparisons)."""
    if selection is None:
        return description
    shown = {name: description.descriptors[name] for name in SCALAR_DESCRIPTORS if selection.shows(name)}
    return dataclasses.replace(
        description,
        descriptors=shown,
        warnings=shown_warnings(description.warnings, selection),
        absent=selection.absent,
    )


def quantiles_at(probabilities: np.ndarray, values: np.ndarray) -> list[Quantile]:
    """The quantiles member: one entry per requested probability, ``None`` where not finite."""
    return [Quantile(probability=float(p), value=finite_or_none(float(v))) for p, v in zip(probabilities, values)]


def assemble(
    *,
    kind: str,
    size: Size,
    basis: Basis,
    sums: CentralSums | None,
    constant: bool,
    descriptors: dict[str, Descriptor],
    quantiles: list[Quantile],
    notes: Warnings,
    moments: Callable[[], Moments | None],
    modes: Modes | None,
    normality: Callable[[], list[NormalityTest]],
    central_moments: str,
    weights: WeightMeaning,
    tail_contributions: Callable[[], TailContributions | None] = lambda: None,
    grouping: Grouping | None = None,
    resampling: Resampling | None = None,
    sketches: QuantileSketches | None = None,
    selection: Selection = EVERYTHING,
    exceedances: list[Exceedance] | None = None,
    tail_means: list[TailMean] | None = None,
) -> Description:
    """The one assembly of a ``Description``, for data (``describe``) and merged partial states.

    First every null descriptor no warning covers gets one (``undefined_for_these_data``); then
    the members whose warnings follow it are computed, in response order (``moments``,
    ``tail_contributions``, ``normality``: callables for that reason). The conventions and
    estimator labels come from ``basis``; a caller with its own quantile rule (sketches) puts it
    in the basis.
    """
    explain_remaining_nulls(descriptors, notes)
    return Description(
        kind=kind,
        size=size,
        descriptors=descriptors,
        moments=moments(),
        quantiles=quantiles,
        modes=modes,
        shape_estimators=(
            moment_based.shape_estimators(sums, basis, constant) if selection.computes("shape_estimators") else None
        ),
        tail_contributions=tail_contributions(),
        grouping=grouping,
        normality=normality(),
        conventions=Conventions(
            convention=basis.convention,
            variance_divisor=basis.divisor_label,
            skewness=basis.skewness_family,
            kurtosis=basis.kurtosis_family,
            quantile_type=basis.quantile_type,
            quantile_definition=basis.quantile_definition,
            median=basis.median_rule,
            central_moments=central_moments,
            normal_mad_factor=order_statistics.NORMAL_MAD_FACTOR,
            weights=weights.value,
        ),
        warnings=notes.items,
        resampling=resampling,
        sketches=sketches,
        exceedances=exceedances or [],
        tail_means=tail_means or [],
    )


def _distinct_values(data: WeightedData, sorted_anyway: bool) -> int | None:
    """Distinct values (bins for binned data); ``None`` for a raw sample that nothing else asked
    to sort (options.descriptors without order statistics, or with only those that are selected
    without sorting): counting them would cost the sort."""
    if data.binned:
        return int(data.values.size)
    if sorted_anyway or data.weights is not None or "support" in data.__dict__:
        return int(data.support.values.size)
    return None


def _count_value(data: WeightedData) -> float:
    """Observations: the count for raw and reliability-weighted samples, the total for counts."""
    if data.meaning in (WeightMeaning.UNIT, WeightMeaning.RELIABILITY):
        return data.count
    total = data.total_weight
    return int(total) if data.integer_weights else total


def _note_input(data: WeightedData, notes: Warnings) -> None:
    if data.omitted:
        notes.add(
            WarningCode.MISSING_VALUES_OMITTED,
            f"{data.omitted} missing value(s) were omitted; n counts the values used",
        )
    if data.zero_weight:
        notes.add(
            WarningCode.ZERO_WEIGHTS_DROPPED,
            f"{data.zero_weight} entr{'y' if data.zero_weight == 1 else 'ies'} with weight zero "
            "contribute nothing and were left out",
        )
    if data.normalised_from is not None:
        notes.add(
            WarningCode.PROBABILITIES_NORMALIZED,
            f"the probabilities summed to {data.normalised_from!r} and were divided by that sum, as requested",
        )
