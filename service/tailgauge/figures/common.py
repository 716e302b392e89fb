"""Pieces every figure shares: axes dressed the same way, legends, and reading a description's values."""

from __future__ import annotations

import math
import textwrap

from matplotlib.axes import Axes

from tailgauge.figures import environment
from tailgauge.figures.style import INK, LABEL_POINTS, LEGEND_POINTS, TICK_POINTS, FigureOptions


def value(description, name: str) -> float | None:
    """A finite descriptor value of ``description`` (a core Description), or None when undefined or absent."""
    found = description.descriptors.get(name)
    if found is None or found.value is None or not math.isfinite(found.value):
        return None
    return float(found.value)


def quantile(description, probability: float):
    """The description's quantile entry at ``probability`` (None when it has none or it is undefined)."""
    for entry in description.quantiles:
        if entry.probability == probability and entry.value is not None and math.isfinite(entry.value):
            return entry
    return None


def dress(axes: Axes, *, xlabel: str | None, ylabel: str) -> None:
    """Labels in the package's DejaVu Sans; only the left and bottom spines (the ones that carry scales)."""
    if xlabel is not None:
        axes.set_xlabel(xlabel, fontproperties=environment.font(LABEL_POINTS), color=INK, parse_math=False)
    axes.set_ylabel(ylabel, fontproperties=environment.font(LABEL_POINTS), color=INK, parse_math=False)
    axes.tick_params(labelsize=TICK_POINTS, colors=INK, length=3)
    for side in ("top", "right"):
        axes.spines[side].set_visible(False)
    for side in ("left", "bottom"):
        axes.spines[side].set_color(INK)
        axes.spines[side].set_linewidth(0.8)


def title(figure, options: FigureOptions) -> None:
    if options.title:
        figure.suptitle(options.title, fontproperties=environment.font(LABEL_POINTS + 2, bold=True), color=INK,
                        parse_math=False)


def legend(axes: Axes, *, title: str | None = None) -> None:
    """The axes' labelled artists, outside on the right: the plotting area stays for data."""
    handles, labels = axes.get_legend_handles_labels()
    if not handles:
        return
    box = axes.legend(
        handles, labels, loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False,
        prop=environment.font(LEGEND_POINTS), title=title, title_fontproperties=environment.font(LEGEND_POINTS, bold=True),
    )
    for text in box.get_texts():
        text.set_parse_math(False)
    box.get_title().set_parse_math(False)


def note(axes: Axes, text: str) -> None:
    """A sentence in place of a panel whose numbers are undefined (it says why)."""
    axes.text(0.5, 0.5, textwrap.fill(text, 70), transform=axes.transAxes, ha="center", va="center",
              fontproperties=environment.font(LABEL_POINTS), color=INK, parse_math=False)
    axes.set_yticks([])


__all__ = ["dress", "legend", "note", "quantile", "title", "value"]
