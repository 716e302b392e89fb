"""Benchmark section ``figures`` of run.py: a figure of 1e6 values (SVG and PNG) after describing them."""

from __future__ import annotations

import numpy as np
from timing import NA, best_of, record, traced_peak


def bench_figures(quick: bool, size: str = "") -> None:
    """A figure of 1e6 values (SVG and PNG), after describing them, and the largest PNG's memory."""
    try:
        from tailgauge import figures
        from tailgauge.figures import describing
    except ImportError:
        print(f"figures: {NA}")
        record("figures", "figure of 1e6 values", None, "s", "< 1 s", NA)
        return
    from tailgauge.core import DescribeOptions, describe, from_array

    n = int(float(size)) if size else (100_000 if quick else 1_000_000)
    repeats = 3 if quick else 5
    data = from_array(np.random.default_rng(20261205).lognormal(5.5, 0.4, n))
    options = DescribeOptions()
    description = describe(data, options, kind="samples")
    probabilities = options.probabilities

    def drawn(media: str, width: int = 800, height: int = 600) -> bytes:
        plot = figures.plot_data(data, "samples")  # the support is already sorted by describe, as in the service
        return describing.draw(description, plot, probabilities, figures.FigureOptions(width=width, height=height), media)

    described = best_of(lambda: describe(from_array(data.values), options, kind="samples"), repeats)
    svg = best_of(lambda: drawn(figures.SVG), repeats)
    png = best_of(lambda: drawn(figures.PNG), repeats)
    largest = best_of(lambda: drawn(figures.PNG, 2400, 1800), repeats)
    peak, _ = traced_peak(lambda: drawn(figures.PNG, 2400, 1800))
    canvas = 2400 * 1800 * 4
    print(f"figures: {n:.0e} lognormal values, best of {repeats}")
    print(f"  describe (every descriptor)          {described:8.3f} s")
    print(f"  plot data + SVG figure, 800 x 600     {svg:8.3f} s  ({len(drawn(figures.SVG)) / 1024:.0f} KiB)")
    print(f"  plot data + PNG figure, 800 x 600     {png:8.3f} s")
    print(f"  plot data + PNG figure, 2400 x 1800   {largest:8.3f} s; traced peak {peak:.1f} MiB + canvas "
          f"{canvas / 2**20:.1f} MiB (Agg's buffer, outside tracemalloc) vs RENDER_BYTES {figures.RENDER_BYTES / 2**20:.0f} MiB")
    record("figures", f"SVG figure of {n:.0e} values (after describing them)", svg, "s", "< 1 s")
    record("figures", f"PNG figure of {n:.0e} values, 800 x 600", png, "s", "< 1 s")
