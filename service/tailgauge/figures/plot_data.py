"""What a picture of one input is drawn from, and what ``options.plot_data`` sends to dashboards.

Numbers only (numpy, no plotting library): the histogram, the outcomes drawn one bar each, and
the empirical distribution function, all read from the input's one internal form
(:class:`~tailgauge.core.weighted.WeightedData`) and its sorted support, which describing the
input has already built. The figure is drawn from exactly these numbers, so a dashboard that
draws ``plot_data`` itself draws the same picture.

Rules (documented in the README):

* **Histogram of values** (samples, and tables with more than :data:`MAX_BARS` outcomes): equal
  widths from the smallest to the largest value by the Freedman & Diaconis (1981) rule,
  width 2 IQR n^(-1/3), with the IQR read from the weighted distribution function (the smallest
  value whose cumulative share reaches 1/4 and 3/4) and n the total count (Kish's effective n
  for reliability weights or probabilities); Sturges' ceil(log2 n) + 1 bins when the IQR is
  zero; between 1 and :data:`MAX_HISTOGRAM_BINS` bins. Bins are half open, [a, b), the last
  closed, as ``numpy.histogram`` counts.
* **One bar per outcome** when a sample has at most :data:`FEW_DISTINCT` distinct values or a
  table at most :data:`MAX_BARS` outcomes: ``outcomes`` lists them, and the histogram has one
  bin per outcome, its edges halfway between neighbouring outcomes.
* **Bins** are drawn as sent (open ends as null edges); more than :data:`MAX_DRAWN_BINS` bins
  are regrouped, consecutive closed bins summed in equal numbers, open bins kept alone.
  ``density`` is true when the closed bins' widths differ: the figure then draws count / width.
* **Distribution function**: at every distinct value (every finite edge for bins) when there
  are at most :data:`MAX_POINTS`; otherwise thinned to the points where the function first
  reaches k / 511, k = 0 .. 511 (duplicates dropped): each kept point lies on the exact function,
  and between two kept points it rises by less than 1/511.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from tailgauge.core.weighted import WeightedData, WeightMeaning

# A sample with at most this many distinct values is drawn one bar per value.
FEW_DISTINCT = 30
# A table with at most this many outcomes is drawn one bar per outcome (more: a histogram).
MAX_BARS = 200
# The most bins the Freedman-Diaconis rule may give.
MAX_HISTOGRAM_BINS = 120
# Bins sent beyond this many are regrouped for drawing and plot_data.
MAX_DRAWN_BINS = 400
# The most points of the distribution function sent or drawn.
MAX_POINTS = 512

RULE_FREEDMAN_DIACONIS = "freedman_diaconis"
RULE_STURGES = "sturges"
RULE_OUTCOMES = "one_bin_per_outcome"
RULE_BINS = "bins_as_sent"
RULE_REGROUPED = "bins_regrouped"


@dataclass(frozen=True)
class Histogram:
    edges: list[float | None]  # k + 1 edges; None: an open end (bins only)
    counts: list[float]  # k weights (counts, weights or probabilities, as the input's weights mean)
    rule: str
    density: bool


@dataclass(frozen=True)
class Outcomes:
    values: list[float]
    weights: list[float]


@dataclass(frozen=True)
class DistributionFunction:
    values: list[float]
    probabilities: list[float]
    exact: bool  # every step (every finite edge) is listed
    grouped: bool  # bins: known at the edges only


@dataclass(frozen=True)
class PlotData:
    weights: str  # what a count is: count, weight or probability
    histogram: Histogram
    outcomes: Outcomes | None
    distribution_function: DistributionFunction


def weights_label(data: WeightedData) -> str:
    """What the heights of an unweighted bar mean, as a word for axes and plot_data."""
    if data.meaning is WeightMeaning.PROBABILITY:
        return "probability"
    if data.meaning is WeightMeaning.RELIABILITY:
        return "weight"
    return "count"


def plot_data(data: WeightedData, kind: str) -> PlotData:
    """The histogram, the outcomes drawn as bars (or None) and the distribution function of ``data``.

    ``kind``: the input kind (``samples``, ``table``, ``bins``), which decides when outcomes are
    drawn one bar each.
    """
    if data.binned:
        histogram = _bins_histogram(data)
        return PlotData(weights_label(data), histogram, None, _grouped_function(data))
    support = data.support
    limit = FEW_DISTINCT if kind == "samples" else MAX_BARS
    if support.values.size <= limit:
        histogram = _outcome_histogram(support.values, support.weights)
        outcomes = Outcomes(support.values.tolist(), support.weights.tolist())
    else:
        histogram = _value_histogram(data)
        outcomes = None
    probabilities = support.cumulative / support.cumulative[-1]
    values, probabilities, exact = _thinned(support.values, probabilities)
    return PlotData(
        weights_label(data), histogram, outcomes, DistributionFunction(values, probabilities, exact, grouped=False)
    )


def _size(data: WeightedData) -> float:
    if data.meaning in (WeightMeaning.RELIABILITY, WeightMeaning.PROBABILITY):
        return data.effective_size
    return data.total_weight


def _reaching(cumulative: np.ndarray, share: float) -> int:
    """Index of the first support value whose cumulative weight reaches ``share`` of the total."""
    return min(int(np.searchsorted(cumulative, share * cumulative[-1], side="left")), cumulative.size - 1)


def _value_histogram(data: WeightedData) -> Histogram:
    support = data.support
    values, cumulative = support.values, support.cumulative
    low, high = float(values[0]), float(values[-1])
    n = _size(data)
    # Halves throughout: a span or IQR between values near float64's largest would overflow.
    half_iqr = float(values[_reaching(cumulative, 0.75)]) / 2 - float(values[_reaching(cumulative, 0.25)]) / 2
    half_width = 2.0 * half_iqr * n ** (-1.0 / 3.0) if n > 0 else 0.0
    half_span = high / 2 - low / 2
    if half_width > 0.0 and math.isfinite(half_span / half_width):
        bins, rule = math.ceil(half_span / half_width), RULE_FREEDMAN_DIACONIS
    else:
        bins, rule = math.ceil(math.log2(max(n, 1.0))) + 1, RULE_STURGES
    bins = max(1, min(MAX_HISTOGRAM_BINS, bins))
    edges = _spaced(low, high, bins)
    return Histogram(edges.tolist(), _counts(values, cumulative, edges).tolist(), rule, density=False)


def _spaced(low: float, high: float, bins: int) -> np.ndarray:
    """``bins + 1`` equally spaced edges from ``low`` to ``high``, each finite (no span is formed),
    fewer where float64 has too few steps between them, two around a single value."""
    if high <= low:
        return np.array(_around(low))
    t = np.arange(bins + 1, dtype=np.float64) / bins
    edges = low * (1.0 - t) + high * t
    edges[0], edges[-1] = low, high
    return np.unique(edges)


def _around(x: float) -> list[float]:
    """Two edges around a single value: 5% of it (at least 0.5) to either side, within float64."""
    half = max(abs(x) * 0.05, 0.5)
    return [max(x - half, -_LARGEST), min(x + half, _LARGEST)]


_LARGEST = float(np.finfo(np.float64).max)


def _counts(values: np.ndarray, cumulative: np.ndarray, edges: np.ndarray) -> np.ndarray:
    """Weight in each bin [edges[i], edges[i+1]) (the last closed) of ascending support values.

    From the sorted support and its prefix sums: k binary searches instead of a pass over n values.
    """
    inner = np.searchsorted(values, edges[1:-1], side="left")
    below = np.concatenate(([0.0], np.where(inner > 0, cumulative[np.maximum(inner - 1, 0)], 0.0), [cumulative[-1]]))
    counts = np.diff(below)
    return np.maximum(counts, 0.0)


def _outcome_histogram(values: np.ndarray, weights: np.ndarray) -> Histogram:
    if values.size == 1:
        edges = _around(float(values[0]))
    else:
        middles = (0.5 * values[:-1] + 0.5 * values[1:]).tolist()
        first, last = float(values[0]), float(values[-1])
        # The outer edges mirror the inner ones; Python floats go to infinity, clipped to float64's range.
        edges = [max(first - (middles[0] - first), -_LARGEST), *middles, min(last + (last - middles[-1]), _LARGEST)]
    return Histogram(list(edges), weights.tolist(), RULE_OUTCOMES, density=False)


def _bins_histogram(data: WeightedData) -> Histogram:
    edges, counts = np.asarray(data.edges, dtype=np.float64), np.asarray(data.weights, dtype=np.float64)
    rule = RULE_BINS
    if counts.size > MAX_DRAWN_BINS:
        edges, counts = _regrouped(edges, counts)
        rule = RULE_REGROUPED
    finite = edges[np.isfinite(edges)]
    halves = finite[1:] / 2 - finite[:-1] / 2  # half widths of the closed bins: no overflow
    density = bool(halves.size > 1 and not np.all(halves == halves[0]))
    shown = [None if math.isinf(e) else float(e) for e in edges]
    return Histogram(shown, counts.tolist(), rule, density)


def _regrouped(edges: np.ndarray, counts: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Consecutive closed bins summed in groups of equal size (the last may be smaller); open bins alone."""
    first = 1 if math.isinf(edges[0]) else 0
    last = counts.size - 1 if math.isinf(edges[-1]) else counts.size
    closed = last - first
    room = MAX_DRAWN_BINS - first - (counts.size - last)
    group = -(-closed // room)
    starts = np.arange(first, last, group)
    sums = np.add.reduceat(counts[first:last], starts - first)
    new_edges = np.concatenate((edges[:first], edges[starts], [edges[last]], edges[last + 1:]))
    new_counts = np.concatenate((counts[:first], sums, counts[last:]))
    return new_edges, new_counts


def _grouped_function(data: WeightedData) -> DistributionFunction:
    edges, counts = np.asarray(data.edges), np.asarray(data.weights)
    cumulative = np.concatenate(([0.0], np.cumsum(counts)))
    probabilities = cumulative / cumulative[-1]
    finite = np.isfinite(edges)
    values, probabilities, exact = _thinned(edges[finite], probabilities[finite])
    return DistributionFunction(values, probabilities, exact, grouped=True)


def _thinned(values: np.ndarray, probabilities: np.ndarray) -> tuple[list[float], list[float], bool]:
    """Every point when there are at most MAX_POINTS; else where the function first reaches k / (MAX_POINTS - 1)."""
    if values.size <= MAX_POINTS:
        return values.tolist(), probabilities.tolist(), True
    # k = 0 .. MAX_POINTS - 2 by search, and the last point itself for k = MAX_POINTS - 1.
    targets = np.linspace(0.0, 1.0, MAX_POINTS)[:-1]
    chosen = np.minimum(np.searchsorted(probabilities, targets, side="left"), values.size - 1)
    chosen = np.unique(np.concatenate((chosen, [values.size - 1])))
    return values[chosen].tolist(), probabilities[chosen].tolist(), False


__all__ = [
    "FEW_DISTINCT",
    "MAX_BARS",
    "MAX_DRAWN_BINS",
    "MAX_HISTOGRAM_BINS",
    "MAX_POINTS",
    "DistributionFunction",
    "Histogram",
    "Outcomes",
    "PlotData",
    "plot_data",
    "weights_label",
]
