"""How figures look: our palette, line styles and sizes, and what a figure may be asked to be.

The palette is our own: a dark slate for text and the mean, a deep blue and a burnt orange for
the two series that must be told apart (blue against orange stays distinct under the common
red-green colour blindnesses, where red against green would not), and pale tints of each for
areas. Their lightnesses (CIE L*, checked in tests/figures/test_style.py) are far apart, so a
greyscale print keeps them apart too; and no series is told apart by colour alone: each also has
its own line style (solid, dashed, dotted) or marker shape (circle, square, triangle).
"""

from __future__ import annotations

from dataclasses import dataclass

# name -> hex colour; CIE L* (D65) in the comment, from tests/figures/test_style.py's formula.
# The figures' media types (what the operations table declares and the api negotiates).
SVG = "image/svg+xml"
PNG = "image/png"
FORMATS = (SVG, PNG)

INK = "#1f2a36"  # L* 17: text, axes, the mean
DEEP = "#24527a"  # L* 34: the first input, contributions to the third moment
ACCENT = "#d4762c"  # L* 59: the second input, the median and quartiles, contributions to the fourth
BAR_EDGE = "#4d6f91"  # L* 46: outlines of bars
BAR = "#a8c0d8"  # L* 77: bars
BAND = "#ecd9c2"  # L* 88: the one-standard-deviation band
PALETTE = {"ink": INK, "deep": DEEP, "accent": ACCENT, "bar_edge": BAR_EDGE, "bar": BAR, "band": BAND}

DASHED = (0, (6, 3))
DOTTED = (0, (1.5, 2))
LABEL_POINTS = 9.0
TICK_POINTS = 8.0
LEGEND_POINTS = 7.5

# Bounds of options.figure (also the schema's): pixels.
MIN_WIDTH, MAX_WIDTH, DEFAULT_WIDTH = 320, 2400, 800
MIN_HEIGHT, MAX_HEIGHT, DEFAULT_HEIGHT = 240, 1800, 600
MAX_TITLE = 120
MAX_UNIT = 40


@dataclass(frozen=True)
class FigureOptions:
    """What the caller chose about a figure (validated by the schema before it gets here)."""

    title: str | None = None
    unit: str | None = None
    width: int = DEFAULT_WIDTH
    height: int = DEFAULT_HEIGHT

    def value_label(self, word: str = "value") -> str:
        return f"{word} ({self.unit})" if self.unit else word


def number(value: float) -> str:
    """A number as figure text: six significant digits, the JSON answer's value rounded."""
    return f"{value:.6g}"


__all__ = [
    "ACCENT",
    "BAND",
    "BAR",
    "BAR_EDGE",
    "DASHED",
    "DEEP",
    "DOTTED",
    "INK",
    "PALETTE",
    "FigureOptions",
    "number",
]
