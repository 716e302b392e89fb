"""Pieces every figure shares: axes dressed the same way, legends, and reading a description's values."""

from __future__ import annotations

import math
import textwrap
from dataclasses import dataclass

from matplotlib.axes import Axes

from tailgauge.figures import environment
from tailgauge.figures.style import INK, LABEL_POINTS, LEGEND_POINTS, TICK_POINTS, FigureOptions


# Beyond these magnitudes a figure is drawn in units of a power of ten (said in the axis label):
# the plotting library's transforms would overflow to infinity near float64's largest values
# (a span of 1e308 - (-1e308)) or lose their scale among subnormal ones.
LARGEST_DRAWN, SMALLEST_DRAWN = 1e100, 1e-100


@dataclass(frozen=True)
class Units:
    """Data values as drawn: multiplied by 10^-exponent (exponent 0 for every ordinary input)."""

    exponent: int = 0

    def __call__(self, x: float) -> float:
        if not self.exponent:
            return float(x)
        half = self.exponent // 2  # two steps: 10^-exponent alone may not be representable
        return float(x) * 10.0 ** (-half) * 10.0 ** (half - self.exponent)

    def label(self, text: str) -> str:
        return text if not self.exponent else f"{text}, in units of 1e{self.exponent}"


def units_for(values) -> Units:
    """The units that keep the largest magnitude among ``values`` (finite ones) drawable."""
    largest = max((abs(v) for v in values if v is not None and math.isfinite(v)), default=0.0)
    if largest > LARGEST_DRAWN or 0.0 < largest < SMALLEST_DRAWN:
        return Units(math.floor(math.log10(largest)))
    return Units()


def span(low: float, high: float) -> tuple[float, float]:
    """Axis limits around [low, high] (drawn units) with a margin of 3%, or of 5% of the value (at
    least 0.5) when low equals high."""
    width = high - low
    margin = 0.03 * width if width > 0 else max(abs(low) * 0.05, 0.5)
    return low - margin, high + margin


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


__all__ = ["Units", "dress", "legend", "note", "quantile", "span", "title", "units_for", "value"]
