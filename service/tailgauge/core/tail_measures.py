"""Tail questions of one input: exceedances of thresholds, tail means (expected shortfall) and
Hill's tail index, as point estimates of the data.

The tail means and Hill's estimator read the data as one row of the resampling engine's row
interface (:func:`one_row`) through :mod:`tailgauge.core.quantile_integrals`, so the point
estimate and every bootstrap replicate follow the same arithmetic.

References
----------
C. J. Clopper and E. S. Pearson, "The use of confidence or fiducial limits illustrated in the
case of the binomial", Biometrika 26(4), 404-413, 1934.
E. L. Korn and B. I. Graubard, "Confidence intervals for proportions with small expected number
of positive counts estimated from survey data", Survey Methodology 24(2), 193-201, 1998
(Clopper-Pearson on the effective sample size).
C. Acerbi and D. Tasche, "On the coherence of expected shortfall", J. Banking & Finance 26, 2002.
B. M. Hill, "A simple general approach to inference about the tail of a distribution", Annals
of Statistics 3(5), 1163-1174, 1975.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import special

from tailgauge.core import quantile_integrals as qi
from tailgauge.core.weighted import WeightedData, WeightMeaning

# Hill's estimator is given from this many observations on (fewer leave too few in the tail).
HILL_MIN_N = 50
CLOPPER_PEARSON = "clopper_pearson"
CLOPPER_PEARSON_EFFECTIVE_N = "clopper_pearson_effective_n"
CLOPPER_PEARSON_FRACTIONAL = "clopper_pearson_fractional_counts"
CLOPPER_PEARSON_INTERPOLATED = "clopper_pearson_interpolated_count"


@dataclass(frozen=True)
class OneRow:
    """The data as one row of the row interface, with its grid (values less ``centre``, scaled by
    2**-exponent, read only where a window needs them; bin edges for bins) and the raw values."""

    view: qi.SupportRow
    grid: qi.Grid
    centre: float
    values: np.ndarray
    whole: bool
    exponent: int = 0

    def unscaled(self, scaled: np.ndarray) -> np.ndarray:
        """A mean over the grid's values, back in the data's units."""
        return np.ldexp(scaled, self.exponent) + self.centre


def one_row(data: WeightedData) -> OneRow:
    """The data as one row (support values and weights; bins at their midpoints with edges),
    from the arrays the data already hold (the support's cumulative weights)."""
    if data.binned:
        assert data.weights is not None and data.edges is not None
        values, weights = data.values, data.weights
        cumulative = np.cumsum(weights)
    else:
        support = data.support
        values, cumulative = support.values, support.cumulative
        # A raw sample without ties: one observation per position (no weights array is read).
        weights = None if data.weights is None and values.size == data.values.size else support.weights
    whole = data.integer_weights and data.meaning is not WeightMeaning.PROBABILITY
    # Centred on a middle support value (sums of the deviations keep the digits a far offset would
    # take) and scaled by a power of two, exactly, so no deviation overflows near float64's limit.
    centre = float(values[values.size // 2])
    largest = max(abs(float(values[0])), abs(float(values[-1]))) if not data.binned else float(np.max(np.abs(values)))
    exponent = math.frexp(largest)[1] + 1 if largest > 0.0 else 0
    shift = math.ldexp(centre, -exponent)
    open_ends = (bool(np.isinf(data.edges[0])), bool(np.isinf(data.edges[-1]))) if data.binned else (False, False)
    grid = qi.Grid(values, data.edges, open_ends, transform=lambda x: np.ldexp(x, -exponent) - shift)
    return OneRow(qi.SupportRow(weights, cumulative), grid, centre, values, whole, exponent)


def tail_means(row: OneRow, levels: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Upper and lower tail means at each level (NaN where undefined)."""
    with np.errstate(over="ignore", invalid="ignore"):
        upper, lower = qi.tail_means(row.view, row.grid, levels)
        return row.unscaled(upper[0]), row.unscaled(lower[0])


def default_tail_count(n: float) -> int:
    """k = round(sqrt(n)): a common rule of thumb for Hill's estimator (not an optimal choice)."""
    return round(math.sqrt(n))


def hill_estimate(row: OneRow, k: int) -> float:
    """Hill's estimate over the k largest observations (NaN when undefined); logarithms are
    taken of the k + 1 largest only."""
    return float(qi.hill(row.view, row.values, qi.Grid(row.values, transform=np.log), k)[0])


def tail_threshold(row: OneRow, k: int) -> float:
    """X_(n-k), the largest observation below the k largest."""
    total = float(row.view.total[0])
    return float(row.values[row.view.first_reaching(np.array([[total - k]]))[0, 0]])


@dataclass(frozen=True)
class Exceeded:
    """The weight above one threshold, and whether it was interpolated within a bin."""

    above: float | None  # None: the threshold falls in an open bin holding data
    interpolated: bool


def weight_above(data: WeightedData, thresholds: np.ndarray) -> list[Exceeded]:
    """The weight of values strictly above each threshold; for bins, the weight of the bins above
    and, for a threshold inside a bin, the share of that bin above it (even spread within bins)."""
    if not data.binned:
        support = data.support
        index = np.searchsorted(support.values, thresholds, side="right")
        k = support.values.size
        if data.integer_weights:  # whole counts: the total less the count at or below, exactly
            below = np.where(index > 0, support.cumulative[np.maximum(index - 1, 0)], 0.0)
            return [Exceeded(float(support.total - b), False) for b in below]
        # Other weights: summed from the top over the part above the lowest threshold only (a
        # small share above is not the difference of two near totals).
        lowest = int(index.min())
        from_top = np.append(np.cumsum(support.weights[lowest:][::-1])[::-1], 0.0)
        return [Exceeded(float(from_top[min(i, k) - lowest]), False) for i in index]
    assert data.weights is not None and data.edges is not None
    edges, weights = data.edges, data.weights
    cumulative = np.cumsum(weights)
    total = float(cumulative[-1])
    found = []
    for t in thresholds:
        # Bin i spans (edges[i], edges[i + 1]]: i is the bin holding t (t at an edge: the bin below).
        i = int(np.searchsorted(edges, t, side="left")) - 1
        if i < 0:
            found.append(Exceeded(total, False))
            continue
        if i >= weights.size:
            found.append(Exceeded(0.0, False))
            continue
        above_bin = total - float(cumulative[i])
        low, high = float(edges[i]), float(edges[i + 1])
        if t == high:
            found.append(Exceeded(above_bin, False))
        elif weights[i] > 0.0 and not (math.isfinite(low) and math.isfinite(high)):
            found.append(Exceeded(None, False))
        elif weights[i] == 0.0:
            found.append(Exceeded(above_bin, False))
        else:
            found.append(Exceeded(above_bin + float(weights[i]) * (high - t) / (high - low), True))
    return found


def clopper_pearson(successes: float, trials: float, level: float) -> tuple[float, float] | None:
    """The Clopper-Pearson interval of a proportion (successes and trials may be fractional: the
    beta quantiles extend to them, as with an effective sample size).

    ``None`` where float64 cannot give it: the beta quantiles of counts near 1e16 and beyond
    come back NaN, or not around the proportion ``successes / trials`` itself (which every
    Clopper-Pearson interval contains), or with the bounds crossed."""
    alpha = 1.0 - level
    with np.errstate(all="ignore"):
        low = 0.0 if successes <= 0.0 else float(special.betaincinv(successes, trials - successes + 1.0, alpha / 2.0))
        high = 1.0 if successes >= trials else float(special.betaincinv(successes + 1.0, trials - successes, 1.0 - alpha / 2.0))
        proportion = min(max(successes / trials, 0.0), 1.0)
    if not (math.isfinite(low) and math.isfinite(high) and low <= proportion <= high):
        return None
    return low, high


def interval_method(data: WeightedData, interpolated: bool) -> tuple[str, float] | None:
    """How the interval of a proportion above is made for these data, and its number of trials
    (``None`` for a probability table, whose proportions are exact)."""
    if data.meaning is WeightMeaning.PROBABILITY:
        return None
    if data.meaning is WeightMeaning.RELIABILITY:
        return CLOPPER_PEARSON_EFFECTIVE_N, data.effective_size
    if not data.integer_weights:
        return CLOPPER_PEARSON_FRACTIONAL, data.total_weight
    return (CLOPPER_PEARSON_INTERPOLATED if interpolated else CLOPPER_PEARSON), data.total_weight
