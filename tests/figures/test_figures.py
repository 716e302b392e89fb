"""Figures drawn from a description or a comparison: valid SVG and PNG, the expected axes, and
every marker at the value of the result it is drawn from.

Positions are checked two ways: against the axes' data transform of the figure object itself
(the display position of each value, scaled to the SVG's points), and in tests/api from the SVG
alone (its tick labels). The PNG is read back with Pillow (installed with matplotlib).
"""

from __future__ import annotations

import io
import sys
import threading
import xml.etree.ElementTree as ET
from concurrent.futures import ThreadPoolExecutor

import numpy as np
import pytest
from PIL import Image

from tailgauge.core import DescribeOptions, compare, describe, from_bins, from_samples, from_table
from tailgauge.core.resample import IntervalOptions
from tailgauge.figures import PNG, SVG, FigureOptions, comparing, describing, environment, plot_data
from tests.figures.svg_reading import by_id, marker_points, parse, path_points

BAGS = [251.2, 249.8, 250.4, 252.9, 250.1, 249.5, 250.7, 251.0, 248.9, 250.3, 250.3]
# The SVG's height in its own units (points): 600 pixels at the figures' resolution.
HEIGHT_POINTS = 600 * 72.0 / environment.DPI


def _described(data, kind, **options):
    chosen = DescribeOptions(**options)
    return describe(data, chosen, kind=kind), plot_data(data, kind), chosen.probabilities


def _svg(axes, x: float, y: float = 0.0) -> tuple[float, float]:
    """Where the data point (x, y) of ``axes`` lands in the SVG: display units scaled to points
    (72 per inch; after encoding as SVG the figure's own resolution is 72), y measured down."""
    scale = 72.0 / axes.figure.dpi
    shown = axes.transData.transform((x, y)) * scale
    return float(shown[0]), HEIGHT_POINTS - float(shown[1])


def _svg_x(axes, x: float) -> float:
    return _svg(axes, x)[0]


def _built(description, plot, probabilities, options=FigureOptions()):
    figure = describing.build(description, plot, probabilities, options)
    svg = environment.encode(figure, SVG, options.width, options.height)  # lays the figure out
    return figure, parse(svg)


def test_samples_figure_has_both_panels_and_its_markers_at_the_descriptions_values():
    data = from_samples(np.random.default_rng(11).gamma(2.0, 3.0, 500).tolist(), omit_missing=False)
    description, plot, probabilities = _described(data, "samples", probabilities=(0.05, 0.25, 0.5, 0.75, 0.95))
    figure, root = _built(description, plot, probabilities)
    top, bottom = figure.axes[:2]
    assert root.tag.endswith("svg") and root.get("width") == "800" and root.get("height") == "600"
    assert by_id(root, "distribution") is not None and by_id(root, "contributions") is not None
    for name in ("mean", "median"):
        xs = {round(x, 3) for x, _ in path_points(by_id(root, name))}
        assert xs == {round(_svg_x(top, description.descriptors[name].value), 3)}, name
    quantiles = {q.probability: q.value for q in description.quantiles}
    for gid, p in (("quartile-lower", 0.25), ("quartile-upper", 0.75)):
        assert {round(x, 3) for x, _ in path_points(by_id(root, gid))} == {round(_svg_x(top, quantiles[p]), 3)}
    marked = [x for x, _ in marker_points(by_id(root, "quantiles"))]
    assert marked == pytest.approx([_svg_x(top, quantiles[p]) for p in probabilities], abs=1e-3)
    band = path_points(by_id(root, "sd-band"))
    mean, sd = description.descriptors["mean"].value, description.descriptors["standard_deviation"].value
    assert min(x for x, _ in band) == pytest.approx(_svg_x(top, mean - sd), abs=1e-3)
    assert max(x for x, _ in band) == pytest.approx(_svg_x(top, mean + sd), abs=1e-3)
    # The second panel: one stem per listed contributor, at its value (the ten largest of a sample).
    third = marker_points(by_id(root, "third"))
    outcomes = description.tail_contributions.outcomes
    assert [x for x, _ in third] == pytest.approx([_svg_x(bottom, o.value) for o in outcomes], abs=1e-3)
    assert [y for _, y in third] == pytest.approx([_svg(bottom, o.value, o.third)[1] for o in outcomes], abs=1e-3)
    assert len(marker_points(by_id(root, "fourth"))) == len(outcomes) == 10
    assert by_id(root, "interval-mean") is None  # no intervals asked for


def test_intervals_are_drawn_as_whiskers_at_their_ends():
    data = from_samples(np.random.default_rng(12).normal(250.0, 1.0, 60).tolist(), omit_missing=False)
    interval = IntervalOptions(method="percentile", level=0.9, resamples=400, seed=5)
    description, plot, probabilities = _described(data, "samples", probabilities=(0.1, 0.5, 0.9), interval=interval)
    figure, root = _built(description, plot, probabilities)
    top = figure.axes[0]
    for name in ("mean", "median"):
        found = description.descriptors[name].interval
        xs = sorted(x for x, _ in path_points(by_id(root, f"interval-{name}")))
        assert [xs[0], xs[-1]] == pytest.approx([_svg_x(top, found.low), _svg_x(top, found.high)], abs=1e-3)
    segments = path_points(by_id(root, "quantile-intervals"))
    expected = [_svg_x(top, x) for q in description.quantiles[:3] for x in (q.interval.low, q.interval.high)]
    assert [x for x, _ in segments] == pytest.approx(expected, abs=1e-3)


def test_bins_are_drawn_as_sent_with_the_open_bin_open():
    data = from_bins([0, 15, 30, 45, 60, 90, None], [12, 58, 41, 17, 9, 3])
    description, plot, probabilities = _described(data, "bins")
    figure, root = _built(description, plot, probabilities, FigureOptions(unit="min"))
    top = figure.axes[0]
    # The open bin: its finite edge and its top only (three points), starting at the edge 90.
    opened = path_points(by_id(root, "open-upper"))
    assert len(opened) == 3 and opened[0][0] == pytest.approx(_svg_x(top, 90.0), abs=1e-3)
    assert opened[2][0] > opened[0][0]
    # Closed bins as bars, heights count / width (widths differ): bin 1 holds 58 over 15.
    bar = path_points(by_id(root, "bin-1"))
    xs = sorted({round(x, 3) for x, _ in bar})
    assert xs == [round(_svg_x(top, 15.0), 3), round(_svg_x(top, 30.0), 3)]
    assert top.get_ylabel() == "count per min"
    heights = [p.get_height() for p in top.patches if (p.get_gid() or "").startswith("bin-")]
    assert heights == pytest.approx([12 / 15, 58 / 15, 41 / 15, 17 / 15, 9 / 30])
    # Moments are undefined while the open bin holds data: no mean, no contributions.
    assert by_id(root, "mean") is None and by_id(root, "third") is None
    assert description.descriptors["mean"].value is None


def test_a_probability_table_is_one_bar_per_outcome():
    data = from_table(np.array([0.0, 1000.0, 5000.0, 40000.0]), np.array([0.55, 0.30, 0.12, 0.03]),
                      probabilities=True, normalise=False)
    description, plot, probabilities = _described(data, "table")
    figure, root = _built(description, plot, probabilities)
    assert [by_id(root, f"bar-{i}") is not None for i in range(5)] == [True] * 4 + [False]
    assert figure.axes[0].get_ylabel() == "probability"
    # Every outcome is listed in the contributions, the largest fourth at 40,000 (README: 28.15).
    fourth = {o.value: o.fourth for o in description.tail_contributions.outcomes}
    assert len(marker_points(by_id(root, "fourth"))) == 4 and max(fourth, key=fourth.get) == 40000.0


def test_png_is_a_png_of_the_asked_size():
    data = from_samples(BAGS, omit_missing=False)
    description, plot, probabilities = _described(data, "samples")
    png = describing.draw(description, plot, probabilities, FigureOptions(width=640, height=480), PNG)
    assert png[:8] == b"\x89PNG\r\n\x1a\n"
    image = Image.open(io.BytesIO(png))
    assert image.size == (640, 480)
    extrema = image.convert("L").getextrema()
    assert extrema[0] < 60 and extrema[1] == 255  # dark ink on a white ground


def test_comparison_figure_draws_both_functions_and_the_shifts():
    first = from_samples([34, 41, 38, 45, 52, 39, 36, 48, 61, 40, 37, 44], omit_missing=False)
    second = from_samples([31, 35, 33, 40, 58, 30, 34, 36, 29, 38, 33, 71], omit_missing=False)
    options = DescribeOptions(probabilities=(0.25, 0.5, 0.9),
                              interval=IntervalOptions(method="percentile", level=0.95, resamples=300, seed=7))
    comparison = compare(first, second, options, kinds=("samples", "samples"))
    plots = plot_data(first, "samples"), plot_data(second, "samples")
    figure = comparing.build(comparison, *plots, FigureOptions(unit="min"))
    root = parse(environment.encode(figure, SVG, 800, 600))
    top, bottom = figure.axes[:2]
    steps = path_points(by_id(root, "ecdf-first"))
    # Steps: every distinct value of the first input is a corner of its line.
    corners = {round(x, 3) for x, _ in steps}
    assert {round(_svg_x(top, v), 3) for v in plots[0].distribution_function.values} <= corners
    assert by_id(root, "ecdf-second") is not None
    shifts = marker_points(by_id(root, "shifts"))
    expected = [_svg(bottom, s.probability, s.value) for s in comparison.quantile_shifts]
    assert shifts == [pytest.approx(point, abs=1e-3) for point in expected]
    assert len(path_points(by_id(root, "shift-intervals"))) == 2 * len(comparison.quantile_shifts)


def test_text_from_the_caller_is_never_read_as_markup():
    data = from_samples(BAGS, omit_missing=False)
    description, plot, probabilities = _described(data, "samples")
    title = r"$\frac{1}{0}$ and $x^{$ in ms"
    figure, root = _built(description, plot, probabilities, FigureOptions(title=title, unit="$"))
    assert figure.get_suptitle() == title
    # Drawn as the characters sent (matplotlib keeps each text as a comment beside its glyph paths).
    comments = {c.text.strip() for c in root.iter() if c.tag is ET.Comment and c.text}
    assert title in comments and "value ($)" in comments


def test_figures_use_the_packaged_fonts_and_never_pyplot():
    from matplotlib import font_manager

    assert str(font_manager.findfont("DejaVu Sans")).startswith(str(environment.FONT_FILE.parent))
    assert environment.font(9).get_file() == str(environment.FONT_FILE)
    data = from_samples(BAGS, omit_missing=False)
    description, plot, probabilities = _described(data, "samples")
    describing.draw(description, plot, probabilities, FigureOptions(), SVG)
    assert "matplotlib.pyplot" not in sys.modules


def test_figures_drawn_in_several_threads_at_once_are_each_whole():
    data = from_samples(np.random.default_rng(13).normal(size=3000).tolist(), omit_missing=False)
    description, plot, probabilities = _described(data, "samples")
    seen_threads = set()

    def draw(media):
        seen_threads.add(threading.get_ident())
        return describing.draw(description, plot, probabilities, FigureOptions(), media)

    with ThreadPoolExecutor(4) as pool:
        drawn = list(pool.map(draw, [SVG, PNG] * 6))
    for media, picture in zip([SVG, PNG] * 6, drawn):
        if media == PNG:
            assert Image.open(io.BytesIO(picture)).size == (800, 600)
        else:
            assert by_id(parse(picture), "mean") is not None
    svgs = [marker_points(by_id(parse(p), "quantiles")) for m, p in zip([SVG, PNG] * 6, drawn) if m == SVG]
    assert all(points == svgs[0] for points in svgs)
    assert len(seen_threads) > 1
