"""The figure of one described input: its distribution with the answer's markers, and which outcomes carry its tails.

Drawn from two things only: the :class:`~tailgauge.figures.plot_data.PlotData` of the input
(the same numbers ``options.plot_data`` sends) and the core's ``Description`` (the same object
the JSON answer is converted from). Nothing here computes a statistic.

Top panel: the histogram (or one bar per outcome, or the bins as sent, open bins drawn open),
the one-standard-deviation band around the mean, the mean (solid), median (dashed) and quartiles
(dotted), the requested quantiles as triangles along the top, and with ``options.interval`` the
bootstrap intervals of the mean, the median and the quantiles as whiskers. Bottom panel: each
outcome's (bin's, or for raw samples the largest contributors') signed share of the standardized
third moment and its share of the fourth, from ``tail_contributions``.

Artists carry ids (``gid``) that name what they show (``mean``, ``median``, ``quantiles``,
``interval-mean``, ``third``, ...): the SVG keeps them, so a reader or a test can find each one.
"""

from __future__ import annotations

import math

import numpy as np
from matplotlib.collections import LineCollection

from tailgauge.figures import environment
from tailgauge.figures.common import Units, dress, legend, note, quantile, span, title, units_for, value
from tailgauge.figures.plot_data import RULE_BINS, RULE_REGROUPED, PlotData
from tailgauge.figures.style import (
    ACCENT,
    BAND,
    BAR,
    BAR_EDGE,
    DASHED,
    DEEP,
    DOTTED,
    INK,
    FigureOptions,
    number,
)

# The most contributions drawn (the largest by their share of the fourth moment).
MAX_CONTRIBUTIONS_DRAWN = 1000
# Heights in the top panel are scaled so the tallest bar reaches 1 / HEADROOM of the axes: the
# band above holds the quantile triangles and the interval whiskers (in axes fractions).
HEADROOM = 1.35
QUANTILE_ROW, QUANTILE_INTERVAL_ROW, MEAN_INTERVAL_ROW, MEDIAN_INTERVAL_ROW = 0.985, 0.955, 0.92, 0.885


def draw(description, plot: PlotData, requested: tuple[float, ...], options: FigureOptions, media_type: str) -> bytes:
    """The figure of ``description`` as ``media_type`` bytes (SVG or PNG)."""
    return environment.encode(build(description, plot, requested, options), media_type, options.width, options.height)


def build(description, plot: PlotData, requested: tuple[float, ...], options: FigureOptions):
    """The matplotlib Figure (tests compare its data transforms with the encoded SVG)."""
    figure = environment.new_figure(options.width, options.height)
    grid = figure.add_gridspec(2, 1, height_ratios=(3, 2))
    top = figure.add_subplot(grid[0])
    bottom = figure.add_subplot(grid[1], sharex=top)
    top.set_gid("distribution")
    bottom.set_gid("contributions")
    title(figure, options)
    x = units_for(_values_drawn(description, plot, requested))
    low, high = _distribution(top, plot, options, x)
    low, high = _markers(top, description, requested, x, low, high)
    _contributions(bottom, description, options, x)
    top.set_xlim(*span(low, high))
    top.tick_params(labelbottom=False)
    legend(top)
    return figure


def _values_drawn(description, plot: PlotData, requested) -> list[float]:
    """Every x value the figure may draw, in data units (they choose the units it is drawn in)."""
    found = [e for e in plot.histogram.edges if e is not None]
    found += [value(description, name) for name in ("mean", "median", "standard_deviation")]
    found += [q.value for q in description.quantiles]
    found += [bound for d in description.descriptors.values() if d.interval is not None
              for bound in (d.interval.low, d.interval.high)]
    found += [bound for q in description.quantiles if q.interval is not None for bound in (q.interval.low, q.interval.high)]
    if description.tail_contributions is not None:
        found += [o.value for o in description.tail_contributions.outcomes]
    return found


def _distribution(axes, plot: PlotData, options: FigureOptions, x: Units) -> tuple[float, float]:
    """Bars of the histogram or of the outcomes; returns the x range they cover (drawn units)."""
    histogram = plot.histogram
    if histogram.rule in (RULE_BINS, RULE_REGROUPED):
        return _bins(axes, plot, options, x)
    if plot.outcomes is not None:
        values = np.array([x(v) for v in plot.outcomes.values])
        y = units_for(plot.outcomes.weights)
        heights = np.array([y(w) for w in plot.outcomes.weights])
        gaps = np.diff(values)
        low_edge, high_edge = x(histogram.edges[0]), x(histogram.edges[-1])
        width = 0.6 * float(gaps.min()) if gaps.size else 0.6 * (high_edge - low_edge)
        width = max(width, (float(values[-1] - values[0]) or 1.0) * 0.004)
        bars = axes.bar(values, heights, width=width, color=BAR, edgecolor=BAR_EDGE, linewidth=0.6, zorder=2)
        for index, bar in enumerate(bars):
            bar.set_gid(f"bar-{index}")
        low, high = float(values[0] - width), float(values[-1] + width)
    else:
        edges = np.array([x(e) for e in histogram.edges])
        y = units_for(histogram.counts)
        heights = np.array([y(c) for c in histogram.counts])
        bars = axes.bar(edges[:-1], heights, width=np.diff(edges), align="edge", color=BAR, edgecolor=BAR_EDGE,
                        linewidth=0.6, zorder=2)
        for index, bar in enumerate(bars):
            bar.set_gid(f"bin-{index}")
        low, high = float(edges[0]), float(edges[-1])
    dress(axes, xlabel=None, ylabel=y.label(plot.weights))
    axes.set_ylim(0.0, _top(heights))
    return low, high


def _top(heights) -> float:
    tallest = float(np.max(heights)) if np.size(heights) else 0.0
    return tallest * HEADROOM if tallest > 0 else 1.0


def _bins(axes, plot: PlotData, options: FigureOptions, x: Units) -> tuple[float, float]:
    """Closed bins as bars (count / width when widths differ); an open bin without its outer side."""
    histogram = plot.histogram
    edges = [math.nan if e is None else x(e) for e in histogram.edges]
    counts = histogram.counts
    closed = [i for i in range(len(counts)) if not (math.isnan(edges[i]) or math.isnan(edges[i + 1]))]
    lefts = np.array([edges[i] for i in closed])
    widths = np.array([edges[i + 1] - edges[i] for i in closed])
    raw = np.array([counts[i] for i in closed], dtype=float)
    density = histogram.density
    if density:
        with np.errstate(over="ignore", divide="ignore", invalid="ignore"):
            per = raw / widths
        density = bool(np.all(np.isfinite(per)))  # bins too narrow for a density: counts are drawn
    nominal_low = widths[0] if widths.size else 1.0
    nominal_high = widths[-1] if widths.size else 1.0
    open_bins = [i for i in range(len(counts)) if i not in closed]
    shown = [c / (nominal_low if i == 0 else nominal_high) if density else c for i, c in
             zip(open_bins, (counts[i] for i in open_bins))]
    y = units_for([*(per if density else raw), *shown])
    heights = np.array([y(h) for h in (per if density else raw)])
    bars = axes.bar(lefts, heights, width=widths, align="edge", color=BAR, edgecolor=BAR_EDGE, linewidth=0.6, zorder=2)
    for index, bar in zip(closed, bars):
        bar.set_gid(f"bin-{index}")
    finite = [e for e in edges if not math.isnan(e)]
    low, high = min(finite), max(finite)
    tallest = list(heights)
    for index, height in zip(open_bins, (y(h) for h in shown)):
        lower_end = index == 0
        edge = edges[index + 1] if lower_end else edges[index]
        far = edge - nominal_low if lower_end else edge + nominal_high
        tallest.append(height)
        axes.fill_between([min(edge, far), max(edge, far)], 0.0, height, facecolor="none", edgecolor=BAR_EDGE,
                          hatch="///", linewidth=0.0, zorder=1)
        # The finite edge and the top, no outer side; the arrow points to where the bin goes on.
        axes.plot([edge, edge, far], [0.0, height, height], color=BAR_EDGE, linewidth=0.9,
                  gid=f"open-{'lower' if lower_end else 'upper'}", zorder=2)
        axes.plot([far], [height], marker="<" if lower_end else ">", color=BAR_EDGE, markersize=5, zorder=2)
        where, at = ("below", histogram.edges[index + 1]) if lower_end else ("above", histogram.edges[index])
        axes.annotate(f"{number(counts[index])} {where} {number(at)}", (0.5 * (edge + far), height),
                      textcoords="offset points", xytext=(0, 3), ha="center", fontsize=7, color=INK,
                      annotation_clip=False).set_parse_math(False)
        low, high = min(low, far), max(high, far)
    word = plot.weights
    per_unit = f"{word} per {options.unit}" if options.unit else f"{word} per unit of value"
    dress(axes, xlabel=None, ylabel=y.label(per_unit if density else word))
    axes.set_ylim(0.0, _top(tallest))
    return low, high


def _markers(axes, description, requested: tuple[float, ...], x: Units, low: float, high: float) -> tuple[float, float]:
    """The answer's values over the bars; returns the x range (drawn units) widened to hold them."""
    xs = [low, high]
    mean, sd, median = value(description, "mean"), value(description, "standard_deviation"), value(description, "median")
    if mean is not None and sd is not None:
        band = (x(mean) - x(sd), x(mean) + x(sd))
        axes.axvspan(*band, color=BAND, linewidth=0, zorder=0, gid="sd-band", label=f"mean ± 1 sd ({number(sd)})")
        xs += list(band)
    if mean is not None:
        axes.axvline(x(mean), color=INK, linewidth=1.6, zorder=3, gid="mean", label=f"mean {number(mean)}")
        xs.append(x(mean))
    if median is not None:
        axes.axvline(x(median), color=ACCENT, linewidth=1.6, linestyle=DASHED, zorder=3, gid="median",
                     label=f"median {number(median)}")
        xs.append(x(median))
    lower, upper = quantile(description, 0.25), quantile(description, 0.75)
    if lower is not None and upper is not None:
        axes.axvline(x(lower.value), color=ACCENT, linewidth=1.2, linestyle=DOTTED, zorder=3, gid="quartile-lower",
                     label=f"quartiles {number(lower.value)}, {number(upper.value)}")
        axes.axvline(x(upper.value), color=ACCENT, linewidth=1.2, linestyle=DOTTED, zorder=3, gid="quartile-upper")
        xs += [x(lower.value), x(upper.value)]
    shown = [entry for entry in (quantile(description, p) for p in requested) if entry is not None]
    if shown:
        axes.plot([x(e.value) for e in shown], [QUANTILE_ROW] * len(shown), transform=axes.get_xaxis_transform(),
                  linestyle="none", marker="v", markersize=5, color=INK, clip_on=False, zorder=4, gid="quantiles",
                  label=f"quantiles at {len(shown)} probabilities")
        xs += [x(e.value) for e in shown]
    if description.resampling is not None:
        xs += _intervals(axes, description, shown, x)
    finite = [v for v in xs if math.isfinite(v)]
    return min(finite), max(finite)


def _intervals(axes, description, shown, x: Units) -> list[float]:
    """Bootstrap intervals as whiskers: the mean's, the median's, each shown quantile's (drawn units)."""
    ends: list[float] = []
    resampling = description.resampling
    label = f"{resampling.level:.0%} {resampling.method} intervals"
    transform = axes.get_xaxis_transform()
    for name, row, colour in (("mean", MEAN_INTERVAL_ROW, INK), ("median", MEDIAN_INTERVAL_ROW, ACCENT)):
        found = description.descriptors.get(name)
        interval = None if found is None else found.interval
        if interval is None or interval.low is None or interval.high is None:
            continue
        axes.plot([x(interval.low), x(interval.high)], [row, row], transform=transform, color=colour, linewidth=1.2,
                  marker="|", markersize=7, zorder=4, gid=f"interval-{name}", label=label)
        label = None
        ends += [x(interval.low), x(interval.high)]
    segments = [
        [(x(e.interval.low), QUANTILE_INTERVAL_ROW), (x(e.interval.high), QUANTILE_INTERVAL_ROW)]
        for e in shown
        if e.interval is not None and e.interval.low is not None and e.interval.high is not None
    ]
    if segments:
        axes.add_collection(LineCollection(segments, transform=transform, colors=INK, linewidths=1.0, zorder=4,
                                           gid="quantile-intervals"), autolim=False)
        ends += [v for segment in segments for v, _ in segment]
    return ends


def _contributions(axes, description, options: FigureOptions, x: Units) -> None:
    tail = description.tail_contributions
    dress(axes, xlabel=x.label(options.value_label()), ylabel="share of the moment")
    if tail is None or not tail.outcomes:
        reasons = [w.message for w in description.warnings if {"tail_contributions", "moments"} & set(w.descriptors)]
        note(axes, "Contributions to the third and fourth moments are undefined: " + (reasons[0] if reasons else
             "the moments are undefined for these data"))
        return
    outcomes = tail.outcomes
    if len(outcomes) > MAX_CONTRIBUTIONS_DRAWN:
        largest = sorted(range(len(outcomes)), key=lambda i: outcomes[i].fourth, reverse=True)
        outcomes = [outcomes[i] for i in sorted(largest[:MAX_CONTRIBUTIONS_DRAWN])]
    values = [x(o.value) for o in outcomes]
    y = units_for([o.third for o in outcomes] + [o.fourth for o in outcomes])
    third = [y(o.third) for o in outcomes]
    fourth = [y(o.fourth) for o in outcomes]
    if y.exponent:
        axes.set_ylabel(y.label("share of the moment"))
    axes.axhline(0.0, color=INK, linewidth=0.6, zorder=1)
    axes.vlines(values, 0.0, third, colors=DEEP, linewidth=1.4, zorder=2, gid="third-stems")
    axes.plot(values, third, linestyle="none", marker="o", markersize=3.5, color=DEEP, zorder=3, gid="third",
              label=f"third: sum g1 = {number(tail.standardized_third)}")
    axes.vlines(values, 0.0, fourth, colors=ACCENT, linewidth=1.2, linestyles=DASHED, zorder=2, gid="fourth-stems")
    axes.plot(values, fourth, linestyle="none", marker="s", markersize=3.5, markerfacecolor="white",
              markeredgecolor=ACCENT, zorder=3, gid="fourth", label=f"fourth: sum b2 = {number(tail.standardized_fourth)}")
    which = "each outcome" if tail.complete else f"the {len(outcomes)} largest"
    legend(axes, title=f"shares of {which}")


__all__ = ["MAX_CONTRIBUTIONS_DRAWN", "build", "draw"]
