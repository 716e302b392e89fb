"""The tail questions of a description: the location means beyond the arithmetic mean, Hill's
upper tail index, the exceedances of thresholds and the tail means, with their warnings.

The numerics are in :mod:`tailgauge.core.tail_measures`, :mod:`tailgauge.core.location_means`
and :mod:`tailgauge.core.quantile_integrals`; this module decides what is defined for which
data and says why where it is not.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from functools import cached_property

import numpy as np
from scipy import special

from tailgauge.core import location_means, tail_measures
from tailgauge.core import quantile_integrals as qi
from tailgauge.core.classical import ClassicalInterval
from tailgauge.core.describe.options import DescribeOptions
from tailgauge.core.describe.results import Descriptor, Exceedance, TailMean, TailMeanSide
from tailgauge.core.describe.warnings import Warnings, finite_or_none
from tailgauge.core.errors import UncomputableInput
from tailgauge.core.registry import WarningCode
from tailgauge.core.resample import Interval
from tailgauge.core.resample.tail_rows import LOWER, UPPER
from tailgauge.core.weighted import WeightedData, WeightMeaning

TRIMMED = ("trimmed_mean", "winsorized_mean")
POSITIVE_MEANS = ("geometric_mean", "harmonic_mean")
TAIL_INDEX = "upper_tail_index"
TAIL_DESCRIPTORS = TRIMMED + POSITIVE_MEANS + (TAIL_INDEX,)
# What reads the sorted support (the geometric and harmonic means of a raw sample read the values
# as they come).
READS_SORTED = TRIMMED + (TAIL_INDEX, "exceedances", "tail_means")
# Level of the exceedances' intervals without options.interval (common practice).
DEFAULT_LEVEL = 0.95


@dataclass
class TailPoint:
    """What the intervals need of the tail descriptors: the tail means' estimates by engine key,
    Hill's k (when the index is defined) and the tail means member to fill."""

    estimates: dict[str, float | None] = field(default_factory=dict)
    tail_count: int | None = None
    tail_means: list[TailMean] = field(default_factory=list)


class _Data:
    """The data seen as one row, built once on first use."""

    def __init__(self, data: WeightedData) -> None:
        self.data = data

    @cached_property
    def row(self) -> tail_measures.OneRow:
        return tail_measures.one_row(self.data)


def check_tail_options(data: WeightedData, options: DescribeOptions) -> None:
    """options.tail_count must leave an observation below the k largest (when the index applies)."""
    k = options.tail_count
    if k is None or not _hill_applies(data):
        return
    n = data.total_weight
    if n >= tail_measures.HILL_MIN_N and k >= n:
        raise UncomputableInput.at(
            "options.tail_count", f"must be below the number of observations ({n:g}): X_(n-k) must exist"
        )


def _hill_applies(data: WeightedData) -> bool:
    return not data.binned and data.integer_weights and data.meaning in (WeightMeaning.UNIT, WeightMeaning.FREQUENCY)


def tail_descriptors(
    descriptors: dict[str, Descriptor], data: WeightedData, options: DescribeOptions, notes: Warnings
) -> TailPoint:
    """The trimmed, winsorized, geometric and harmonic means, Hill's index, and the tail means."""
    point = TailPoint()
    selection = options.selection
    seen = _Data(data)
    with np.errstate(all="ignore"):  # every undefined value becomes None with its reason below
        if selection.computes_any(TRIMMED):
            _trimmed(descriptors, seen, options.trim_proportion, notes)
        if selection.computes_any(POSITIVE_MEANS):
            _positive_means(descriptors, data, notes)
        if selection.computes(TAIL_INDEX):
            point.tail_count = _tail_index(descriptors, seen, options, notes)
        if options.tail_levels and selection.computes("tail_means"):
            point.tail_means = _tail_means(seen, options.tail_levels, notes, point.estimates)
    value = descriptors.get(TAIL_INDEX)
    shown = [name for name in ("kurtosis", "excess_kurtosis") if name in descriptors and descriptors[name].value is not None]
    if value is not None and value.value is not None and value.value < 4.0 and shown:
        notes.add(
            WarningCode.KURTOSIS_MAY_NOT_EXIST,
            f"the estimated upper tail index is {value.value:.3g} (< 4): if the tail is that heavy the population "
            "kurtosis does not exist, and the sample kurtosis estimates nothing finite",
            shown,
        )
    return point


def _trimmed(descriptors: dict[str, Descriptor], seen: _Data, proportion: float, notes: Warnings) -> None:
    row = seen.row
    trimmed, winsorized = qi.trimmed_and_winsorized(row.view, row.grid, proportion, row.whole)
    total = float(row.view.total[0])
    cut = float(qi.trimmed_count(np.array(total), proportion, row.whole))
    how = (
        f"g = floor({proportion:g} x {total:g}) = {cut:g} observations cut from each end"
        if row.whole else f"{proportion:g} of the weight cut from each end"
    )
    if seen.data.binned:
        how += ", over the interpolated grouped quantile function"
    labels = {"trimmed_mean": f"trimmed mean: {how}", "winsorized_mean": f"winsorized mean: {how} and replaced by the "
              "nearest value kept"}
    undefined = []
    for name, value in zip(TRIMMED, (trimmed[0], winsorized[0])):
        result = finite_or_none(float(row.unscaled(value)))
        descriptors[name] = Descriptor(result, labels[name])
        if result is None:
            undefined.append(name)
    if undefined and seen.data.open_bin_weight > 0.0:
        notes.add(WarningCode.TAIL_IN_OPEN_BIN, "the window kept reaches an open-ended bin holding data", undefined)


def _positive_means(descriptors: dict[str, Descriptor], data: WeightedData, notes: Warnings) -> None:
    where = "of bin midpoints" if data.binned else "weighted" if data.weights is not None else ""
    labels = {"geometric_mean": f"geometric mean {where}".strip(), "harmonic_mean": f"harmonic mean {where}".strip()}
    reason = None if data.open_bin_weight > 0.0 else location_means.positive_reason(data)
    if data.open_bin_weight > 0.0 or reason is not None:
        for name in POSITIVE_MEANS:
            descriptors[name] = Descriptor(None, labels[name])
        if reason is not None:
            notes.add(WarningCode.POSITIVE_VALUES_REQUIRED, reason, POSITIVE_MEANS)
        return  # an open bin: the assembly's open_bin_holds_data names them
    # A raw sample as it comes (no sort); weighted data and bins by their weights.
    values = data.values if data.binned or data.weights is None else data.support.values
    weights = data.weights if data.binned or data.weights is None else data.support.weights
    logs, reciprocals = location_means.support_columns(values)
    if weights is None:
        total = float(values.size)
        geometric = float(np.exp(np.sum(logs) / total))
        harmonic = float(total / np.sum(reciprocals))
    else:
        total = float(np.sum(weights))
        geometric = float(np.exp(np.dot(weights, logs) / total))
        harmonic = float(total / np.dot(weights, reciprocals))
    descriptors["geometric_mean"] = Descriptor(notes.finite(geometric, "geometric_mean"), labels["geometric_mean"])
    descriptors["harmonic_mean"] = Descriptor(notes.finite(harmonic, "harmonic_mean"), labels["harmonic_mean"])


def _tail_index(descriptors: dict[str, Descriptor], seen: _Data, options: DescribeOptions, notes: Warnings) -> int | None:
    data = seen.data

    def undefined(reason: str) -> None:
        descriptors[TAIL_INDEX] = Descriptor(None, "Hill (1975)")
        notes.add(WarningCode.TAIL_INDEX_UNDEFINED, reason, [TAIL_INDEX])

    if not _hill_applies(data):
        undefined("Hill's estimator needs observed values with whole counts (not bins, probabilities, reliability "
                  "or fractional weights)")
        return None
    n = data.total_weight
    if n < tail_measures.HILL_MIN_N:
        undefined(f"n = {n:g} is below the {tail_measures.HILL_MIN_N} observations the tail index needs here")
        return None
    row = seen.row
    k = options.tail_count if options.tail_count is not None else tail_measures.default_tail_count(n)
    rule = "options.tail_count" if options.tail_count is not None else "round(sqrt(n)), a common rule of thumb"
    threshold = tail_measures.tail_threshold(row, k)
    if not threshold > 0.0:
        undefined(f"the tail threshold X_(n-k) = {threshold:g} is not positive (k = {k})")
        return None
    alpha = tail_measures.hill_estimate(row, k)
    if not math.isfinite(alpha):
        undefined(f"the k = {k} largest observations all equal X_(n-k) = {threshold:g}")
        return None
    descriptors[TAIL_INDEX] = Descriptor(
        alpha,
        f"Hill (1975) over the k = {k} largest of n = {n:g} ({rule}), X_(n-k) = {threshold:.6g}; asymptotic "
        f"standard error alpha / sqrt(k) = {alpha / math.sqrt(k):.4g}",
    )
    return k


def tail_index_interval(descriptor: Descriptor, k: int, level: float) -> ClassicalInterval | None:
    """alpha +- z alpha / sqrt(k): Hill's estimator is asymptotically normal with standard error
    alpha / sqrt(k) (Hall 1982), for k growing slower than n and a Pareto-type tail."""
    alpha = descriptor.value
    if alpha is None:
        return None
    half = float(special.ndtri(0.5 + level / 2.0)) * alpha / math.sqrt(k)
    if not math.isfinite(half):
        return None
    return ClassicalInterval(
        alpha - half, alpha + half, level, "asymptotic_normal", None,
        "a Pareto-type upper tail, k large and small beside n; the estimator's bias from the choice of k is not included",
    )


def _tail_means(seen: _Data, levels: tuple[float, ...], notes: Warnings, estimates: dict[str, float | None]) -> list[TailMean]:
    row = seen.row
    upper, lower = tail_measures.tail_means(row, np.array(levels, dtype=np.float64))
    found, undefined = [], []
    for i, level in enumerate(levels):
        high, low = finite_or_none(float(upper[i])), finite_or_none(float(lower[i]))
        estimates[f"{UPPER}{i}"], estimates[f"{LOWER}{i}"] = high, low
        if high is None or low is None:
            undefined.append(f"tail_means[{i}]")
        found.append(TailMean(level=float(level), upper=TailMeanSide(high), lower=TailMeanSide(low)))
    if undefined:
        if seen.data.open_bin_weight > 0.0:
            notes.add(WarningCode.TAIL_IN_OPEN_BIN, "the tail reaches an open-ended bin holding data", undefined)
        else:
            notes.add(
                WarningCode.UNDEFINED_FOR_THESE_DATA,
                "the tail holds no weight at this level (1 - level rounds to 0 against the total), or its mean is "
                "beyond float64's range",
                undefined,
            )
    return found


def exceedances(data: WeightedData, options: DescribeOptions, notes: Warnings) -> list[Exceedance]:
    """Each threshold's proportion above and at or below, the count above, and the interval."""
    if not options.thresholds or not options.selection.computes("exceedances"):
        return []
    level = options.interval.level if options.interval is not None else DEFAULT_LEVEL
    total = data.total_weight
    counted = data.meaning in (WeightMeaning.UNIT, WeightMeaning.FREQUENCY) and data.integer_weights
    found: list[Exceedance] = []
    interpolated, in_open, unresolved = [], [], []
    for i, (threshold, exceeded) in enumerate(zip(options.thresholds, tail_measures.weight_above(data, np.array(options.thresholds)))):
        if exceeded.above is None:
            in_open.append(f"exceedances[{i}]")
            found.append(Exceedance(float(threshold), None, None, None, False, None))
            continue
        above = float(min(max(exceeded.above, 0.0), total))
        share = above / total
        how = tail_measures.interval_method(data, exceeded.interpolated)
        interval = None
        if how is not None:
            method, trials = how
            successes = round(above) if counted and not exceeded.interpolated else share * trials
            bounds = tail_measures.clopper_pearson(successes, trials, level)
            if bounds is None:
                unresolved.append(f"exceedances[{i}]")
            else:
                interval = Interval(bounds[0], bounds[1], level, method)
        if exceeded.interpolated:
            interpolated.append(f"exceedances[{i}]")
        count = round(above) if counted and not exceeded.interpolated else None
        found.append(Exceedance(float(threshold), share, (total - above) / total, count, exceeded.interpolated, interval))
    if interpolated:
        notes.add(
            WarningCode.EXCEEDANCE_INTERPOLATED,
            "these thresholds fall inside a bin: the count above is interpolated linearly within it (even spread), "
            "and the interval treats that fractional count as observed",
            interpolated,
        )
    if in_open:
        notes.add(WarningCode.TAIL_IN_OPEN_BIN, "these thresholds fall in an open-ended bin holding data", in_open)
    if unresolved:
        notes.add(
            WarningCode.NOT_REPRESENTABLE,
            "no interval for these proportions: with weights this large (from about 1e16) float64 cannot "
            "resolve the Clopper-Pearson bounds around the proportion",
            unresolved,
        )
    if data.meaning is WeightMeaning.PROBABILITY:
        notes.add(
            WarningCode.INTERVAL_NOT_OFFERED,
            "a probability table is a whole population: its exceedance proportions are exact, so no interval",
            ["exceedances"],
        )
    return found
