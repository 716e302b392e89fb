"""Descriptors of binned counts under the usual grouped-data assumption: values spread evenly within each bin.

Quantiles and the median interpolate linearly within the bin that holds them; the grouped mode
interpolates within the modal class from its neighbours; the median absolute deviation solves
``F(m + d) - F(m - d) = 1/2`` on the piecewise-linear distribution function. A result that would
need the inside of an open-ended bin is ``NaN`` (the caller turns it into ``null`` with a reason).

References
----------
M. G. Kendall and A. Stuart, *The Advanced Theory of Statistics*, vol. 1, ch. 2-3 (grouped
median and mode; Sheppard's corrections, W. F. Sheppard, Proc. London Math. Soc. 29, 1898).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from tailgauge.core import deviation_rules, order_rules
from tailgauge.core.weighted import WeightedData


def _parts(data: WeightedData) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    assert data.edges is not None and data.weights is not None
    return data.edges[:-1], data.edges[1:], data.weights


def rows_of(data: WeightedData, total: float | None = None) -> order_rules.CumulativeRow:
    """The bins as one row of the order-statistic rules (:mod:`tailgauge.core.order_rules`):
    one position per bin, empty bins included; ``total`` defaults to the last cumulative count."""
    assert data.weights is not None
    return order_rules.CumulativeRow(data.weights, np.cumsum(data.weights), total)


def quantiles(data: WeightedData, probabilities: np.ndarray) -> np.ndarray:
    """Interpolated grouped quantiles: ``L + (p N - C_before) / f * width`` in the bin holding ``p N``."""
    assert data.edges is not None
    return order_rules.grouped_quantiles(rows_of(data), data.edges, probabilities)[0]


def median_absolute_deviation(data: WeightedData, centre: float) -> float:
    """Smallest ``d`` with ``F(centre + d) - F(centre - d) >= N / 2`` under even spread in bins
    (see :func:`tailgauge.core.deviation_rules.grouped_median_absolute_deviations`); ``N`` is the
    data's total weight. NaN when it would lie inside an open bin; below float64's normal range
    (0 included) when the bins are that narrow, which the caller reports as not representable."""
    assert data.edges is not None
    row = rows_of(data, data.total_weight)
    found = deviation_rules.grouped_median_absolute_deviations(row, data.edges, np.array([centre]), below_normal=True)
    return float(found[0])


@dataclass(frozen=True)
class ModalClass:
    lower: float
    upper: float
    count: float
    mode: float  # interpolated grouped mode, NaN when the neighbours do not allow it


def modal_classes(data: WeightedData) -> list[ModalClass]:
    """Closed bins of largest count density, each with its interpolated grouped mode.

    ``mode = L + (d1 - d0) / ((d1 - d0) + (d1 - d2)) * h`` with ``d`` the count densities
    (count / width) of the class and its neighbours (0 beyond the outer bins); with equal
    widths this is the familiar formula in counts. The mode is NaN when a neighbour is an
    open bin holding data (its density is unknown) or when the neighbours tie with the class.
    """
    lower, upper, counts = _parts(data)
    closed = np.isfinite(lower) & np.isfinite(upper)
    widths = np.where(closed, upper - lower, np.inf)
    with np.errstate(over="ignore"):
        density = np.where(closed, counts / widths, 0.0)
    if not np.all(np.isfinite(density)) and np.any(closed):
        # Densities beyond float64's range (bins narrower than their count / 1.8e308, such as
        # subnormal widths): counts and widths scaled by exact powers of two, so the largest
        # count is below 1 and the narrowest width about 1. The comparisons and the mode read
        # only ratios of densities, which the scaling leaves unchanged (a density negligible
        # beside the largest may become 0).
        count_shift = math.frexp(float(np.max(counts)))[1]
        width_shift = math.frexp(float(np.min(widths[closed])))[1]
        with np.errstate(over="ignore", under="ignore"):
            density = np.where(closed, np.ldexp(counts, -count_shift) / np.ldexp(widths, -width_shift), 0.0)
    top = float(np.max(density))
    result = []
    for i in np.flatnonzero(closed & (density == top) & (counts > 0)):
        neighbours = []
        unknown = False
        for j in (i - 1, i + 1):
            if j < 0 or j >= counts.size:
                neighbours.append(0.0)
            elif not closed[j]:
                unknown = unknown or counts[j] > 0
                neighbours.append(0.0)
            else:
                neighbours.append(float(density[j]))
        rise, fall = top - neighbours[0], top - neighbours[1]
        if unknown or rise + fall == 0.0:
            mode = math.nan
        else:
            mode = float(lower[i] + rise / (rise + fall) * widths[i])
        result.append(ModalClass(float(lower[i]), float(upper[i]), float(counts[i]), mode))
    return result


def equal_width(data: WeightedData) -> float | None:
    """The common width of the closed bins, or ``None`` when widths differ (relative 1e-9)."""
    lower, upper, _ = _parts(data)
    closed = np.isfinite(lower) & np.isfinite(upper)
    widths = (upper - lower)[closed]
    if widths.size == 0:
        return None
    if np.max(widths) - np.min(widths) > 1e-9 * np.max(widths):
        return None
    with np.errstate(over="ignore"):
        mean = np.mean(widths)
    if not np.isfinite(mean):  # widths near float64's largest value: their sum overflows, their halves' does not
        mean = np.mean(widths * 0.5) * 2.0
    return float(mean)


def sheppard_corrected(m2: float, m4: float, width: float) -> tuple[float, float]:
    """Sheppard's corrections of the second and fourth central moments for bin width ``h``.

    ``mu2 = m2 - h^2 / 12`` and ``mu4 = m4 - h^2 m2 / 2 + 7 h^4 / 240`` (Sheppard 1898;
    Kendall & Stuart vol. 1, section 3.18), where ``m2``, ``m4`` are the moments of the midpoints.
    """
    h2 = width * width
    return m2 - h2 / 12.0, m4 - 0.5 * h2 * m2 + 7.0 * h2 * h2 / 240.0


def sheppard_variance(corrected_m2, width, factor):
    """The variance of grouped data with Sheppard's correction, from the corrected second moment
    ``m2 - h^2 / 12`` (:func:`sheppard_corrected`) and the variance factor (``moments.variance_factor``).

    The correction applies to the variance itself, whatever its divisor: ``m2 - h^2 / 12`` under
    the population convention (factor 1) and ``s^2 - h^2 / 12`` under the sample one (factor
    ``N / (N - 1)``), not ``(m2 - h^2 / 12) N / (N - 1)``: the grouping adds ``h^2 / 12`` to the
    expected variance of the midpoints, estimated without bias by ``s^2`` (Kendall & Stuart
    vol. 1, section 3.18). Written as ``(m2 - h^2/12) f + (f - 1) h^2 / 12``, the same value.
    Floats or arrays (the bootstrap's many rows).
    """
    return corrected_m2 * factor + (factor - 1.0) * (width * width / 12.0)

