"""The order-based family: median, extremes, range, IQR, MAD and the requested quantiles from one
sort of the data (or the grouped rules for bins), and the modes."""

from __future__ import annotations

import math

import numpy as np

from tailgauge.core import grouped, order_statistics
from tailgauge.core.deviation_rules import SMALLEST_NORMAL
from tailgauge.core.describe import tails
from tailgauge.core.describe.basis import Basis
from tailgauge.core.describe.warnings import Warnings, finite_or_none
from tailgauge.core.describe.options import DescribeOptions
from tailgauge.core.describe.results import Descriptor, Grouping, ModalClass, Modes
from tailgauge.core.registry import WarningCode, names
from tailgauge.core.weighted import WeightedData, WeightMeaning

NORMAL_MAD_LABEL = (
    f"{order_statistics.NORMAL_MAD_FACTOR} x median of |x - median| (consistent for the normal sigma)"
)


# The robust shape measures built on those quantiles.
QUANTILE_SHAPE_DESCRIPTORS = ("quartile_skewness", "octile_kurtosis", "octile_excess_kurtosis")
# Probabilities behind quartile skewness (Q1, Q2, Q3) and octile kurtosis (E1 .. E7).
ROBUST_PROBABILITIES = np.array([0.25, 0.5, 0.75, 1 / 8, 2 / 8, 3 / 8, 5 / 8, 6 / 8, 7 / 8])



def order_descriptors(
    descriptors: dict[str, Descriptor],
    data: WeightedData,
    basis: Basis,
    options: DescribeOptions,
    notes: Warnings,
    *,
    unsorted: bool = False,
) -> tuple[np.ndarray, np.ndarray]:
    """Median, extremes, IQR, MAD and the requested quantiles, all from one sort of the data.

    Returns the requested quantiles and those behind the robust shape measures
    (``ROBUST_PROBABILITIES``), computed by the same rule in the same call. ``unsorted``: a raw
    sample of which nothing else needs the sort (:func:`selects_without_sorting`) has its order
    statistics selected instead, and no quantile shape.
    """
    probabilities = np.array(options.probabilities, dtype=np.float64)
    wants_mad = options.selection.computes("median_absolute_deviation")
    quartiles_and_requested = np.concatenate(([0.25, 0.75], ROBUST_PROBABILITIES, probabilities))
    if data.binned:
        values = grouped.quantiles(data, np.concatenate(([0.5], quartiles_and_requested)))
        median = finite_or_none(float(values[0]))
        quartiles, requested = values[1:3], values[3:]
        robust_values, requested = requested[: ROBUST_PROBABILITIES.size], requested[ROBUST_PROBABILITIES.size :]
        mad_names = ["median_absolute_deviation", "median_absolute_deviation_normal"] if wants_mad else []
        if median is None and not basis.single:
            notes.add(
                WarningCode.QUANTILE_IN_OPEN_BIN,
                "the median falls inside an open-ended bin"
                + (" (the median absolute deviation is measured from it)" if mad_names else ""),
                ["median", *mad_names],
            )
        elif median is None:
            notes.add(WarningCode.QUANTILE_IN_OPEN_BIN, "the median falls inside an open-ended bin", ["median"])
        mad = None
        if median is not None and not basis.single and wants_mad:
            mad = finite_or_none(grouped.median_absolute_deviation(data, median))
            if mad is None:
                notes.add(
                    WarningCode.QUANTILE_IN_OPEN_BIN,
                    "the median absolute deviation reaches into an open-ended bin",
                    ["median_absolute_deviation", "median_absolute_deviation_normal"],
                )
            elif abs(mad) < SMALLEST_NORMAL:  # bins of subnormal widths (grouped.median_absolute_deviation)
                mad = None
                notes.add(
                    WarningCode.NOT_REPRESENTABLE,
                    "the median absolute deviation of bins this narrow falls below float64's normal range, "
                    "where it would keep few of its digits",
                    ["median_absolute_deviation", "median_absolute_deviation_normal"],
                )
        notes.add(
            WarningCode.GROUPED_EXTREMES,
            "bins record intervals, not values: the minimum and maximum are unknown (see grouping for the "
            "outermost edges holding data)",
            ["minimum", "maximum", "range"],
        )
        minimum = maximum = None
    elif unsorted:
        # Only order statistics are asked of a raw sample: select them without sorting the data
        # (order_statistics.summary_unsorted gives the sorted path's numbers; the quantile shape
        # is not computed, so its probabilities are not looked up).
        assert basis.quantile_type is not None
        found = order_statistics.summary_unsorted(
            data.values, np.concatenate(([0.25, 0.75], probabilities)), basis.quantile_type,
            median=True, mad=wants_mad and not basis.single, extremes=True,
        )
        assert found.quantiles is not None and found.median is not None
        median = found.median
        quartiles, requested = found.quantiles[:2], found.quantiles[2:]
        robust_values = np.full(ROBUST_PROBABILITIES.size, np.nan)
        mad = found.median_absolute_deviation
        minimum, maximum = found.minimum, found.maximum
    else:
        median = order_statistics.median(data)
        quartiles, requested = sample_quantiles(data, quartiles_and_requested, basis, notes)
        robust_values, requested = requested[: ROBUST_PROBABILITIES.size], requested[ROBUST_PROBABILITIES.size :]
        mad = None if basis.single or not wants_mad else order_statistics.median_absolute_deviation(data, median)
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
        with np.errstate(over="ignore"):  # quartiles of opposite sign near float64's limit
            spread = float(quartiles[1] - quartiles[0])
        iqr = notes.finite(spread, "interquartile_range")
    elif not basis.single and data.binned:
        notes.add(WarningCode.QUANTILE_IN_OPEN_BIN, "a quartile falls inside an open-ended bin", ["interquartile_range"])
    method = "grouped" if data.binned else f"type {basis.quantile_type}"
    descriptors["interquartile_range"] = Descriptor(iqr, f"Q(0.75) - Q(0.25), quantiles {method}")
    descriptors["median_absolute_deviation"] = Descriptor(mad, f"median of |x - median| ({basis.median_rule})")
    descriptors["median_absolute_deviation_normal"] = Descriptor(
        None if mad is None else notes.finite(mad * order_statistics.NORMAL_MAD_FACTOR, "median_absolute_deviation_normal"),
        NORMAL_MAD_LABEL,
    )
    return requested, robust_values



# Computed from the sorted data (or its support) beside the order statistics themselves.
_SORT_USERS = frozenset(
    QUANTILE_SHAPE_DESCRIPTORS + names("l_moment") + ("medcouple", "half_sample_mode", "modes") + tails.READS_SORTED
)


def selects_without_sorting(data: WeightedData, options: DescribeOptions) -> bool:
    """Whether a request's order statistics can be selected without sorting ``data``: a raw
    sample (no weights, no bins) without intervals, whose selection computes order statistics
    (median, quantiles, IQR, MAD, extremes) but nothing else that reads the sorted data, and
    does not show the skewness (whose asymmetry check reads the quartiles of the support)."""
    selection = options.selection
    return (
        options.descriptors is not None
        and data.weights is None
        and not data.binned
        and options.interval is None
        and selection.needs_sort
        and selection.computed.isdisjoint(_SORT_USERS)
        and not selection.shows("skewness")
    )


def sample_quantiles(
    data: WeightedData, probabilities: np.ndarray, basis: Basis, notes: Warnings
) -> tuple[np.ndarray, np.ndarray]:
    quantile_type = basis.quantile_type
    assert quantile_type is not None
    if data.integer_weights and data.meaning is not WeightMeaning.PROBABILITY:
        values = order_statistics.quantiles(data, probabilities, quantile_type)
    elif quantile_type in (1, 2):
        support = data.support
        values = order_statistics.cdf_quantiles(
            support.values,
            support.weights,
            probabilities,
            average_at_steps=quantile_type == 2,
            cumulative=support.cumulative,
        )
    else:
        notes.add(
            WarningCode.INTEGER_COUNTS_REQUIRED,
            f"quantile type {quantile_type} is defined through the order statistics of whole observations; "
            "these weights are not whole counts, so use quantile_type 1 or 2",
            ["quantiles", "interquartile_range", *QUANTILE_SHAPE_DESCRIPTORS],
        )
        values = np.full(probabilities.size, np.nan)
    return values[:2], values[2:]



def modes(data: WeightedData, limit: int, notes: Warnings) -> tuple[Modes, list[grouped.ModalClass]]:
    if data.binned:
        classes = grouped.modal_classes(data)
        values = np.array([c.mode for c in classes if math.isfinite(c.mode)])
        if len(values) < len(classes):
            notes.add(
                WarningCode.GROUPED_MODE_UNDEFINED,
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
                WarningCode.NO_REPEATED_VALUES,
                f"each of the {distinct} values occurs once, so the data have no mode",
                ["modes"],
            )
            values = values[:0]
        classes = []
    truncated = values.size > limit
    if truncated:
        notes.add(WarningCode.MODES_TRUNCATED, f"{values.size} values tie for the mode; the first {limit} are listed", ["modes"])
        values = values[:limit]
    return (
        Modes(values=[float(v) for v in values], count=weight, distinct_values=distinct, tied=tied, truncated=truncated),
        classes,
    )



def grouping(data: WeightedData, classes: list[grouped.ModalClass], sheppard_applied: bool) -> Grouping:
    edges = data.edges
    assert edges is not None and data.weights is not None
    occupied = np.flatnonzero(data.weights > 0)
    lowest = edges[occupied[0]]
    highest = edges[occupied[-1] + 1]
    width = grouped.equal_width(data)
    # The bins as sent: empty open-ended bins were left out of the data but are still reported.
    empty_lower, empty_upper = data.empty_open_ends
    return Grouping(
        bins=int(data.weights.size) + int(empty_lower) + int(empty_upper),
        bin_width=width,
        equal_widths=width is not None,
        open_lower=bool(np.isinf(edges[0])) or empty_lower,
        open_upper=bool(np.isinf(edges[-1])) or empty_upper,
        open_bin_weight=data.open_bin_weight,
        lowest_edge=finite_or_none(float(lowest)),
        highest_edge=finite_or_none(float(highest)),
        sheppard_correction_applied=sheppard_applied,
        modal_classes=[ModalClass(c.lower, c.upper, c.count, finite_or_none(c.mode)) for c in classes],
    )
