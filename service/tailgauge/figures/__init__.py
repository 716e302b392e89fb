"""Pictures of what the service described: SVG or PNG figures, and the numbers they are drawn from.

A floor of its own between the core and the HTTP layer: it imports the core (results and the
internal form) and matplotlib; ``tailgauge.api`` imports it; the core never does.

    environment   matplotlib set up for a server (MPLCONFIGDIR, canvases, the packaged fonts)
    style         palette, line styles, sizes, FigureOptions
    plot_data     histogram, outcomes and distribution function (numpy only; also options.plot_data)
    common        axes dressing, legends, reading a description's values
    describing    the figure of one input (descriptor endpoints)
    comparing     the figure of two inputs (comparisons)
"""

import importlib

from tailgauge.figures.plot_data import PlotData, plot_data
from tailgauge.figures.style import FORMATS, PNG, SVG, FigureOptions

# What needs matplotlib loads on first use (PEP 562): the wire types (api/schemas/pictures.py read
# style's bounds) and the plot data import without it, so the base install (the client, no
# matplotlib) can import them (tests/deploy/test_install_profiles.py).
_DRAWING = ("comparing", "describing", "environment")


def __getattr__(name: str):
    if name not in _DRAWING:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    return importlib.import_module(f"{__name__}.{name}")


# Descriptors and members every figure of a description reads, computed even when
# options.descriptors does not show them (like the values scores read).
READS = ("mean", "standard_deviation", "median", "quantiles", "tail_contributions")
# Quantiles every figure of a description marks (the quartiles), added to the probabilities asked for.
QUARTILES = (0.25, 0.75)
# What drawing one figure may hold and take, whatever the input's size (the canvas is at most
# 2400 x 1800 pixels; bars, points and markers are capped): held in the worker's memory gate
# beside the plan of the computation. tests/benchmarks/run.py figures measured a 2400 x 1800 PNG
# of a million values at 7.7 MiB traced by tracemalloc plus Agg's 16.5 MiB canvas (outside it);
# the PNG's encoding and matplotlib's own objects come on top. Resident memory (VmHWM after
# clearing it) rose by 23 MiB over drawing a 2400 x 1800 PNG and SVG of a million values, after
# describing them, in December 2026.
RENDER_BYTES = 64 << 20
RENDER_SECONDS = 2.0

__all__ = ["FORMATS", "PNG", "QUARTILES", "READS", "RENDER_BYTES", "RENDER_SECONDS", "SVG", "FigureOptions", "PlotData", "comparing", "describing", "plot_data"]
