"""What a histogram's own sum, minimum and maximum make exact (see ``core.histograms``).

* ``sum``: the mean is sum / count, exact. With every bin closed the bins already stand at their
  midpoints moved to this mean (so its interval and every moment agree with it); while an open
  bin holds data it is the one moment descriptor given (the spread is unknown, so no interval).
* ``min`` and ``max``: the minimum and maximum are exact, and with both the range.

Each such descriptor's estimator says so, the warnings that called them unknown no longer name
them, and ``grouping.known_summary`` lists the histogram's values and the descriptors made exact.
"""

from __future__ import annotations

import dataclasses

from tailgauge.core.describe.results import Descriptor, Grouping, KnownSummary, Resampling
from tailgauge.core.describe.warnings import Warnings
from tailgauge.core.registry import WarningCode
from tailgauge.core.selection import Selection
from tailgauge.core.weighted import WeightedData

MEAN_LABEL = "sum / count: exact, from the histogram's sum"
MINIMUM_LABEL = "the histogram's min: exact"
MAXIMUM_LABEL = "the histogram's max: exact"
RANGE_LABEL = "max - min of the histogram: exact"


def exact_names(data: WeightedData, selection: Selection) -> list[str]:
    """The descriptors the histogram's own values make exact, in response order (the range not
    for one observation, where it is undefined as for any sample)."""
    known = data.known
    if known is None:
        return []
    names = []
    if known.sum is not None:
        names.append("mean")
    if known.minimum is not None:
        names.append("minimum")
    if known.maximum is not None:
        names.append("maximum")
    if known.minimum is not None and known.maximum is not None and known.count > 1:
        names.append("range")
    return [name for name in names if selection.computes(name)]


NO_MEAN_RESAMPLES = "the spread is unknown while an open-ended bin holds data, so the mean's resamples are not defined"


def apply(
    data: WeightedData, descriptors: dict[str, Descriptor], notes: Warnings, selection: Selection,
    resampling: Resampling | None,
) -> None:
    """Put the exact values in ``descriptors`` and withdraw them from the warnings that called them unknown.

    While an open bin holds data the resamples' means (bins at their placeholder values) are not
    the exact mean's: a comparison must not contrast them, so they are marked left out."""
    known = data.known
    if known is None:
        return
    exact = exact_names(data, selection)
    if "mean" in exact:
        label = MEAN_LABEL
        if data.open_bin_weight > 0.0:
            label += " (no interval: the spread is unknown while an open-ended bin holds data)"
            if resampling is not None and resampling.replicates is not None:
                resampling.replicates.left_out["mean"] = NO_MEAN_RESAMPLES
        else:
            label += "; interval and moments from the bin midpoints moved to this mean"
        descriptors["mean"] = dataclasses.replace(
            descriptors["mean"], value=notes.finite(known.sum / known.count, "mean"), estimator=label
        )
    if "minimum" in exact:
        descriptors["minimum"] = Descriptor(known.minimum, MINIMUM_LABEL)
    if "maximum" in exact:
        descriptors["maximum"] = Descriptor(known.maximum, MAXIMUM_LABEL)
    if "range" in exact:
        assert known.minimum is not None and known.maximum is not None
        descriptors["range"] = Descriptor(notes.finite(known.maximum - known.minimum, "range"), RANGE_LABEL)
    _withdraw(notes, frozenset(exact))


def _withdraw(notes: Warnings, names: frozenset[str]) -> None:
    """Take ``names`` out of the warnings that called them unknown (dropping a warning left naming nothing)."""
    kept = []
    for warning in notes.items:
        if warning.code in (WarningCode.OPEN_BIN_HOLDS_DATA, WarningCode.GROUPED_EXTREMES) and names & set(
            warning.descriptors
        ):
            remaining = [name for name in warning.descriptors if name not in names]
            if not remaining:
                continue
            message = warning.message
            if warning.code is WarningCode.GROUPED_EXTREMES:
                message = f"bins record intervals, not values, and the histogram did not send them: {', '.join(remaining)} unknown"
            elif "mean" in names:
                message += "; the mean is exact from the histogram's sum"
            warning = dataclasses.replace(warning, message=message, descriptors=remaining)
        kept.append(warning)
    notes.items[:] = kept


def with_summary(grouping: Grouping, data: WeightedData, selection: Selection) -> Grouping:
    """``grouping`` with the histogram's own values and what they made exact (unchanged for bins)."""
    known = data.known
    if known is None:
        return grouping
    summary = KnownSummary(
        count=known.count, sum=known.sum, minimum=known.minimum, maximum=known.maximum,
        exact=exact_names(data, selection),
    )
    return dataclasses.replace(grouping, known_summary=summary)
