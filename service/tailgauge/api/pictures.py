"""The edge's side of figures: options.figure as the figures' options, a figure or plot_data of a result.

Called by ``endpoints`` in the worker thread, after the core has described or compared the
inputs: the figure is drawn from the same ``Description`` or ``Comparison`` the JSON answer is
converted from, and from :func:`tailgauge.figures.plot_data`, whose numbers ``options.plot_data``
sends. Nothing here computes a statistic.
"""

from __future__ import annotations

from tailgauge.api import schemas
from tailgauge.api.conversion import to_message
from tailgauge.figures import FigureOptions, comparing, describing, plot_data


def figure_options(requested: schemas.FigureRequest | None) -> FigureOptions:
    if requested is None:
        return FigureOptions()
    return FigureOptions(title=requested.title, unit=requested.unit, width=requested.width, height=requested.height)


def description_figure(description, data, kind: str, options, media_type: str) -> bytes:
    """The figure of one described input; ``options``: the request's option set."""
    plot = plot_data(data, kind)
    return describing.draw(description, plot, tuple(options.probabilities), figure_options(options.figure), media_type)


def comparison_figure(comparison, first, second, kinds: tuple[str, str], options, media_type: str) -> bytes:
    plots = plot_data(first, kinds[0]), plot_data(second, kinds[1])
    return comparing.draw(comparison, *plots, figure_options(options.figure), media_type)


def plot_data_message(data, kind: str) -> schemas.PlotData:
    """``plot_data`` of an answer: the numbers its figure would be drawn from."""
    return to_message(plot_data(data, kind), schemas.PlotData)


__all__ = ["comparison_figure", "description_figure", "figure_options", "plot_data_message"]
