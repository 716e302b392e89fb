"""The palette stays apart in greyscale: CIE L* of each colour (sRGB, D65; the formulas of
IEC 61966-2-1 for linearising and CIE 1976 for L*, written here from the published definitions)."""

from __future__ import annotations

import itertools

from tailgauge.figures import style


def _lightness(hex_colour: str) -> float:
    channels = [int(hex_colour[i:i + 2], 16) / 255.0 for i in (1, 3, 5)]
    linear = [c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4 for c in channels]
    y = 0.2126 * linear[0] + 0.7152 * linear[1] + 0.0722 * linear[2]
    return 116.0 * y ** (1.0 / 3.0) - 16.0 if y > 216.0 / 24389.0 else 24389.0 / 27.0 * y


def test_lightness_formula_on_known_points():
    assert _lightness("#ffffff") == 100.0 or abs(_lightness("#ffffff") - 100.0) < 1e-9
    assert abs(_lightness("#000000")) < 1e-9
    assert abs(_lightness("#777777") - 50.0) < 0.5  # mid grey #777 is L* 50 (a value recalled, not looked up)


def test_palette_lightnesses_are_as_documented_and_far_apart():
    lightness = {name: _lightness(colour) for name, colour in style.PALETTE.items()}
    documented = {"ink": 17, "deep": 34, "bar_edge": 46, "accent": 59, "bar": 77, "band": 88}
    assert {name: round(value) for name, value in lightness.items()} == documented
    # Colours drawn over one another (lines over bars and band, the two series) differ by 10 L* or more.
    for a, b in itertools.combinations(lightness, 2):
        assert abs(lightness[a] - lightness[b]) >= 10.0, (a, b)


def test_series_differ_by_more_than_colour():
    assert style.DASHED != style.DOTTED != "solid"
