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
from tailgauge.figures.common import dress, legend, note, quantile, title, value
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
    span = _distribution(top, plot, options)
    span = _markers(top, description, requested, span)
    _contributions(bottom, description, options)
    width = span[1] - span[0]
    margin = 0.03 * width if width > 0 else max(abs(span[0]) * 0.05, 0.5)
    top.set_xlim(span[0] - margin, span[1] + margin)
    top.tick_params(labelbottom=False)
    legend(top)
    return figure


def _distribution(axes, plot: PlotData, options: FigureOptions) -> tuple[float, float]:
    """Bars of the histogram or of the outcomes; returns the x range they cover."""
    histogram = plot.histogram
    word = plot.weights
    if plot.outcomes is not None:
        values = np.asarray(plot.outcomes.values)
        heights = np.asarray(plot.outcomes.weights)
        edges = np.asarray(histogram.edges, dtype=float)
        gaps = np.diff(values)
        width = 0.6 * float(gaps.min()) if gaps.size else 0.6 * float(edges[-1] - edges[0])
        width = max(width, (float(values[-1] - values[0]) or 1.0) * 0.004)
        bars = axes.bar(values, heights, width=width, color=BAR, edgecolor=BAR_EDGE, linewidth=0.6, zorder=2)
        for index, bar in enumerate(bars):
            bar.set_gid(f"bar-{index}")
        low, high = float(values[0] - width), float(values[-1] + width)
        ylabel = word
    elif histogram.rule in (RULE_BINS, RULE_REGROUPED):
        return _bins(axes, plot, options)
    else:
        edges = np.asarray(histogram.edges, dtype=float)
        heights = np.asarray(histogram.counts)
        bars = axes.bar(edges[:-1], heights, width=np.diff(edges), align="edge", color=BAR, edgecolor=BAR_EDGE,
                        linewidth=0.6, zorder=2)
        for index, bar in enumerate(bars):
            bar.set_gid(f"bin-{index}")
        low, high = float(edges[0]), float(edges[-1])
        ylabel = word
    dress(axes, xlabel=None, ylabel=ylabel)
    axes.set_ylim(0.0, _top(heights))
    return low, high


def _top(heights) -> float:
    tallest = float(np.max(heights)) if np.size(heights) else 0.0
    return tallest * HEADROOM if tallest > 0 else 1.0


def _bins(axes, plot: PlotData, options: FigureOptions) -> tuple[float, float]:
    """Closed bins as bars (count / width when widths differ); an open bin without its outer side."""
    histogram = plot.histogram
    edges = [math.nan if e is None else float(e) for e in histogram.edges]
    counts = histogram.counts
    closed = [i for i in range(len(counts)) if not (math.isnan(edges[i]) or math.isnan(edges[i + 1]))]
    lefts = np.array([edges[i] for i in closed])
    widths = np.array([edges[i + 1] - edges[i] for i in closed])
    heights = np.array([counts[i] for i in closed], dtype=float)
    if histogram.density:
        heights = heights / widths
    bars = axes.bar(lefts, heights, width=widths, align="edge", color=BAR, edgecolor=BAR_EDGE, linewidth=0.6, zorder=2)
    for index, bar in zip(closed, bars):
        bar.set_gid(f"bin-{index}")
    finite = [e for e in edges if not math.isnan(e)]
    low, high = min(finite), max(finite)
    open_heights = []
    for index in range(len(counts)):
        if index in closed:
            continue
        lower_end = math.isnan(edges[index])
        edge = edges[index + 1] if lower_end else edges[index]
        nominal = widths[0] if lower_end and widths.size else (widths[-1] if widths.size else 1.0)
        height = counts[index] / nominal if histogram.density else counts[index]
        open_heights.append(height)
        far = edge - nominal if lower_end else edge + nominal
        axes.fill_between([min(edge, far), max(edge, far)], 0.0, height, facecolor="none", edgecolor=BAR_EDGE,
                          hatch="///", linewidth=0.0, zorder=1)
        # The finite edge and the top, no outer side; the arrow points to where the bin goes on.
        axes.plot([edge, edge, far], [0.0, height, height], color=BAR_EDGE, linewidth=0.9,
                  gid=f"open-{'lower' if lower_end else 'upper'}", zorder=2)
        axes.plot([far], [height], marker="<" if lower_end else ">", color=BAR_EDGE, markersize=5, zorder=2)
        where = "below" if lower_end else "above"
        axes.annotate(f"{number(counts[index])} {where} {number(edge)}", (0.5 * (edge + far), height),
                      textcoords="offset points", xytext=(0, 3), ha="center", fontsize=7, color=INK,
                      annotation_clip=False).set_parse_math(False)
        low, high = min(low, far), max(high, far)
    word = plot.weights
    per = f"{word} per {options.unit}" if options.unit else f"{word} per unit of value"
    dress(axes, xlabel=None, ylabel=per if histogram.density else word)
    axes.set_ylim(0.0, _top(np.concatenate((heights, open_heights))))
    return low, high


def _markers(axes, description, requested: tuple[float, ...], span: tuple[float, float]) -> tuple[float, float]:
    """The answer's values over the bars; returns the x range widened to hold them."""
    xs = [span[0], span[1]]
    mean, sd, median = value(description, "mean"), value(description, "standard_deviation"), value(description, "median")
    if mean is not None and sd is not None:
        axes.axvspan(mean - sd, mean + sd, color=BAND, linewidth=0, zorder=0, gid="sd-band",
                     label=f"mean ± 1 sd ({number(sd)})")
        xs += [mean - sd, mean + sd]
    if mean is not None:
        axes.axvline(mean, color=INK, linewidth=1.6, zorder=3, gid="mean", label=f"mean {number(mean)}")
        xs.append(mean)
    if median is not None:
        axes.axvline(median, color=ACCENT, linewidth=1.6, linestyle=DASHED, zorder=3, gid="median",
                     label=f"median {number(median)}")
        xs.append(median)
    lower, upper = quantile(description, 0.25), quantile(description, 0.75)
    if lower is not None and upper is not None:
        axes.axvline(lower.value, color=ACCENT, linewidth=1.2, linestyle=DOTTED, zorder=3, gid="quartile-lower",
                     label=f"quartiles {number(lower.value)}, {number(upper.value)}")
        axes.axvline(upper.value, color=ACCENT, linewidth=1.2, linestyle=DOTTED, zorder=3, gid="quartile-upper")
        xs += [lower.value, upper.value]
    shown = [entry for entry in (quantile(description, p) for p in requested) if entry is not None]
    if shown:
        axes.plot([e.value for e in shown], [QUANTILE_ROW] * len(shown), transform=axes.get_xaxis_transform(),
                  linestyle="none", marker="v", markersize=5, color=INK, clip_on=False, zorder=4, gid="quantiles",
                  label=f"quantiles at {len(shown)} probabilities")
        xs += [e.value for e in shown]
    if description.resampling is not None:
        xs += _intervals(axes, description, shown)
    finite = [x for x in xs if math.isfinite(x)]
    return min(finite), max(finite)


def _intervals(axes, description, shown) -> list[float]:
    """Bootstrap intervals as whiskers: the mean's, the median's, each shown quantile's."""
    ends: list[float] = []
    resampling = description.resampling
    label = f"{resampling.level:.0%} {resampling.method} intervals"
    transform = axes.get_xaxis_transform()
    for name, row, colour in (("mean", MEAN_INTERVAL_ROW, INK), ("median", MEDIAN_INTERVAL_ROW, ACCENT)):
        found = description.descriptors.get(name)
        interval = None if found is None else found.interval
        if interval is None or interval.low is None or interval.high is None:
            continue
        axes.plot([interval.low, interval.high], [row, row], transform=transform, color=colour, linewidth=1.2,
                  marker="|", markersize=7, zorder=4, gid=f"interval-{name}", label=label)
        label = None
        ends += [interval.low, interval.high]
    segments = [
        [(e.interval.low, QUANTILE_INTERVAL_ROW), (e.interval.high, QUANTILE_INTERVAL_ROW)]
        for e in shown
        if e.interval is not None and e.interval.low is not None and e.interval.high is not None
    ]
    if segments:
        axes.add_collection(LineCollection(segments, transform=transform, colors=INK, linewidths=1.0, zorder=4,
                                           gid="quantile-intervals"), autolim=False)
        ends += [x for segment in segments for x, _ in segment]
    return ends


def _contributions(axes, description, options: FigureOptions) -> None:
    tail = description.tail_contributions
    dress(axes, xlabel=options.value_label(), ylabel="share of the moment")
    if tail is None or not tail.outcomes:
        reasons = [w.message for w in description.warnings if {"tail_contributions", "moments"} & set(w.descriptors)]
        note(axes, "Contributions to the third and fourth moments are undefined: " + (reasons[0] if reasons else
             "the moments are undefined for these data"))
        return
    outcomes = tail.outcomes
    if len(outcomes) > MAX_CONTRIBUTIONS_DRAWN:
        largest = sorted(range(len(outcomes)), key=lambda i: outcomes[i].fourth, reverse=True)
        outcomes = [outcomes[i] for i in sorted(largest[:MAX_CONTRIBUTIONS_DRAWN])]
    values = [o.value for o in outcomes]
    third = [o.third for o in outcomes]
    fourth = [o.fourth for o in outcomes]
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
