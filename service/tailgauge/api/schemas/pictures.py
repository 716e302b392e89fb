"""Figures: what a caller may ask of one (options.figure) and the plot data a JSON answer may carry.

The numbers of ``plot_data`` are those the figure is drawn from (``tailgauge.figures.plot_data``),
so a dashboard that draws them draws the service's picture.
"""

from __future__ import annotations

from typing import Annotated

from msgspec import Meta

from tailgauge.api.schemas.common import Answer, Message
from tailgauge.figures import style

# Printable text only: a control character in a title is a located 400, not a broken picture.
_TEXT = r"^[^\x00-\x1f\x7f]*$"


class FigureRequest(Message):
    title: Annotated[
        Annotated[str, Meta(max_length=style.MAX_TITLE, pattern=_TEXT)] | None,
        Meta(description="Title above the figure (plain text, no markup); null: no title."),
    ] = None
    unit: Annotated[
        Annotated[str, Meta(max_length=style.MAX_UNIT, pattern=_TEXT)] | None,
        Meta(description="Unit of the values, shown in the axis labels, e.g. \"g\" or \"ms\"; null: none."),
    ] = None
    width: Annotated[
        int,
        Meta(ge=style.MIN_WIDTH, le=style.MAX_WIDTH, description="Width in pixels."),
    ] = style.DEFAULT_WIDTH
    height: Annotated[
        int,
        Meta(ge=style.MIN_HEIGHT, le=style.MAX_HEIGHT, description="Height in pixels."),
    ] = style.DEFAULT_HEIGHT


class Histogram(Answer):
    edges: Annotated[
        list[float | None],
        Meta(description="k + 1 bin edges; null: an open end (bins only)."),
    ]
    counts: Annotated[list[float], Meta(description="k bin weights, in the input's weights (see weights).")]
    rule: Annotated[
        str,
        Meta(
            description=(
                "freedman_diaconis (width 2 IQR n^(-1/3), at most 120 bins), sturges (ceil(log2 n) + 1 bins, "
                "when the IQR is 0), one_bin_per_outcome (edges halfway between outcomes), bins_as_sent, or "
                "bins_regrouped (more than 400 bins: consecutive closed bins summed in equal groups)."
            )
        ),
    ]
    density: Annotated[
        bool, Meta(description="True when the closed bins' widths differ: the figure draws count / width.")
    ]


class Outcomes(Answer):
    values: Annotated[list[float], Meta(description="Each distinct value, ascending.")]
    weights: Annotated[list[float], Meta(description="Its total weight (count, weight or probability).")]


class DistributionFunction(Answer):
    values: list[float]
    probabilities: Annotated[list[float], Meta(description="F(value): the share of the weight at or below it.")]
    exact: Annotated[
        bool,
        Meta(
            description=(
                "True: every distinct value (every finite edge) is listed. False: more than 512, thinned to "
                "where F first reaches k / 511, k = 0 .. 511; each point lies on F, and F rises by less than "
                "1/511 between two of them."
            )
        ),
    ]
    grouped: Annotated[
        bool, Meta(description="True for bins: F is known at the edges only (drawn as straight lines between).")
    ]


class PlotData(Answer):
    weights: Annotated[str, Meta(description="What a count is: count, weight (reliability weights) or probability.")]
    histogram: Histogram
    outcomes: Annotated[
        Outcomes | None,
        Meta(
            description=(
                "The outcomes drawn one bar each (a sample of at most 30 distinct values, a table of at most "
                "200 outcomes); null when a histogram is drawn."
            )
        ),
    ]
    distribution_function: Annotated[
        DistributionFunction, Meta(description="The empirical distribution function, at most 512 points.")
    ]


__all__ = ["DistributionFunction", "FigureRequest", "Histogram", "Outcomes", "PlotData"]
