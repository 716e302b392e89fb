"""The figure of a comparison: both empirical distribution functions on one axis, and the quantile shifts.

Drawn from the two inputs' :class:`~tailgauge.figures.plot_data.PlotData` (their distribution
functions, exactly as ``options.plot_data`` sends them under ``first`` and ``second``) and the
core's ``Comparison`` (the object the JSON answer is converted from): its quantile shifts, their
bootstrap intervals with ``options.interval``, and its two-sample test.

Top panel: the first input's function solid (deep blue), the second's dashed (orange); steps for
values and outcomes, straight lines between the edges for bins (known at the edges only; even
spread within a bin, as the grouped quantiles assume). Bottom panel: second minus first at each
requested probability (circles), with interval whiskers, and the zero line of "no shift".
Artist ids: ``ecdf-first``, ``ecdf-second``, ``shifts``, ``shift-intervals``.
"""

from __future__ import annotations

import math

from matplotlib.collections import LineCollection

from tailgauge.figures import environment
from tailgauge.figures.common import Units, dress, legend, note, span, title, units_for
from tailgauge.figures.plot_data import PlotData
from tailgauge.figures.style import ACCENT, DASHED, DEEP, INK, FigureOptions, number


def draw(comparison, first: PlotData, second: PlotData, options: FigureOptions, media_type: str) -> bytes:
    return environment.encode(build(comparison, first, second, options), media_type, options.width, options.height)


def build(comparison, first: PlotData, second: PlotData, options: FigureOptions):
    figure = environment.new_figure(options.width, options.height)
    top, bottom = figure.subplots(2, 1, height_ratios=(3, 2))
    top.set_gid("distribution-functions")
    bottom.set_gid("quantile-shifts")
    title(figure, options)
    x = units_for([*first.distribution_function.values, *second.distribution_function.values])
    low = x(min(first.distribution_function.values[0], second.distribution_function.values[0]))
    high = x(max(first.distribution_function.values[-1], second.distribution_function.values[-1]))
    left, right = span(low, high)
    for plot, description, side, colour, style in (
        (first, comparison.first, "first", DEEP, "solid"),
        (second, comparison.second, "second", ACCENT, DASHED),
    ):
        _function(top, plot, description, side, colour, style, x, left, right)
    top.set_xlim(left, right)
    top.set_ylim(0.0, 1.02)
    dress(top, xlabel=x.label(options.value_label()), ylabel="cumulative share")
    legend(top, title=_test(comparison.distribution_test))
    _shifts(bottom, comparison, options)
    return figure


def _size(description) -> str:
    n = description.size.n
    return "" if n is None else f" (n = {number(n)})"


def _function(axes, plot: PlotData, description, side: str, colour: str, style, x: Units, left: float,
              right: float) -> None:
    function = plot.distribution_function
    if function.grouped:
        xs, ys = [x(v) for v in function.values], list(function.probabilities)
        drawstyle = "default"
    else:
        # F is 0 left of the smallest value and 1 right of the largest: steps from the left edge to the right.
        xs = [left, *(x(v) for v in function.values), right]
        ys = [0.0, *function.probabilities, function.probabilities[-1]]
        drawstyle = "steps-post"
    axes.plot(xs, ys, color=colour, linestyle=style, linewidth=1.5, drawstyle=drawstyle, gid=f"ecdf-{side}",
              label=f"{side}{_size(description)}", zorder=3 if side == "first" else 4)


def _test(test) -> str | None:
    if test is None or test.statistic is None:
        return None
    p = "" if test.p_value is None else f", p = {test.p_value:.3g}"
    name = "Kolmogorov-Smirnov D" if test.test == "kolmogorov_smirnov" else "chi-square"
    return f"{name} = {test.statistic:.4g}{p}"


def _shifts(axes, comparison, options: FigureOptions) -> None:
    shifts = [s for s in (comparison.quantile_shifts or []) if s.value is not None and math.isfinite(s.value)]
    bounds = [b for s in shifts if s.interval is not None for b in (s.interval.low, s.interval.high)]
    y = units_for([s.value for s in shifts] + bounds)
    dress(axes, xlabel="probability", ylabel=y.label(options.value_label("second - first")))
    if not shifts:
        note(axes, "No quantile shift is defined for these inputs at the probabilities asked for.")
        return
    axes.axhline(0.0, color=INK, linewidth=0.6, zorder=1)
    segments = [
        [(s.probability, y(s.interval.low)), (s.probability, y(s.interval.high))]
        for s in shifts
        if s.interval is not None and s.interval.low is not None and s.interval.high is not None
    ]
    if segments:
        resampling = comparison.resampling
        axes.add_collection(LineCollection(segments, colors=DEEP, linewidths=1.2, zorder=2, gid="shift-intervals",
                                           label=f"{resampling.level:.0%} {resampling.method} intervals"))
    axes.plot([s.probability for s in shifts], [y(s.value) for s in shifts], linestyle="none", marker="o",
              markersize=4.5, color=DEEP, zorder=3, gid="shifts", label="quantile shift")
    ys = [y(s.value) for s in shifts] + [v for segment in segments for _, v in segment] + [0.0]
    axes.set_ylim(*span(min(ys), max(ys)))
    axes.set_xlim(-0.02, 1.02)
    legend(axes)


__all__ = ["build", "draw"]
