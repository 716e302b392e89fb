"""The plotting library, set up once per process for a server: no display, no global style, no network.

matplotlib keeps a configuration and font cache directory (``MPLCONFIGDIR``). In the container the
home directory is read-only, so before matplotlib is imported this module points it at a directory
of our own under the temporary directory (``/tmp/tailgauge-matplotlib-<uid>``, mode 0700, created
if missing and used only when it is a real directory owned by this user and closed to others;
otherwise a fresh private one), unless the environment already names one. Nothing is fetched:
the fonts are the DejaVu files shipped inside matplotlib (:data:`FONT_FILE`).

Only the object-oriented API is used: a :class:`matplotlib.figure.Figure` per request, drawn by
an explicit canvas (``backend_svg`` or ``backend_agg``). pyplot is never imported, so there is no
figure registry, no current figure and no GUI backend; the font objects matplotlib caches are
kept per thread by matplotlib itself, so requests rendering in several worker threads share
nothing mutable and take no lock of ours.
"""

from __future__ import annotations

import io
import os
import stat
import tempfile
from pathlib import Path


def _private_directory() -> str:
    """A configuration directory only this user can write, under the temporary directory."""
    candidate = Path(tempfile.gettempdir()) / f"tailgauge-matplotlib-{os.getuid()}"
    try:
        candidate.mkdir(mode=0o700, exist_ok=True)
        found = os.lstat(candidate)
        if stat.S_ISDIR(found.st_mode) and found.st_uid == os.getuid() and not found.st_mode & 0o077:
            return str(candidate)
    except OSError:
        pass
    return tempfile.mkdtemp(prefix="tailgauge-matplotlib-")


if not os.environ.get("MPLCONFIGDIR"):
    os.environ["MPLCONFIGDIR"] = _private_directory()

import matplotlib  # noqa: E402  (after MPLCONFIGDIR)
from matplotlib.backends.backend_agg import FigureCanvasAgg  # noqa: E402
from matplotlib.backends.backend_svg import FigureCanvasSVG  # noqa: E402
from matplotlib.figure import Figure  # noqa: E402
from matplotlib.font_manager import FontProperties  # noqa: E402

from tailgauge.figures.style import FORMATS, PNG, SVG  # noqa: E402,F401  (the media types, declared without matplotlib)
# Pixels per inch of the figure: a PNG is exactly width x height pixels; an SVG says the same
# width and height (in CSS pixels) over a viewBox in points.
DPI = 100
# SVG ids (clip paths, markers, hatches) from a fixed salt instead of a random one per figure: the
# same request draws the same bytes (set once, before any figure; nothing else reads it).
matplotlib.rcParams["svg.hashsalt"] = "tailgauge"
FONT_FILE = Path(matplotlib.get_data_path()) / "fonts" / "ttf" / "DejaVuSans.ttf"


def font(size: float, *, bold: bool = False) -> FontProperties:
    """DejaVu Sans from matplotlib's own files (never a system font), at ``size`` points."""
    name = "DejaVuSans-Bold.ttf" if bold else "DejaVuSans.ttf"
    return FontProperties(fname=FONT_FILE.parent / name, size=size)


def new_figure(width: int, height: int) -> Figure:
    """An empty figure of ``width`` x ``height`` pixels, owned by the caller alone."""
    return Figure(figsize=(width / DPI, height / DPI), dpi=DPI, layout="constrained")


def encode(figure: Figure, media_type: str, width: int, height: int) -> bytes:
    """The figure as SVG or PNG bytes (``media_type`` one of :data:`FORMATS`)."""
    out = io.BytesIO()
    if media_type == SVG:
        FigureCanvasSVG(figure).print_svg(out, metadata={"Date": None, "Creator": None})
        return _pixel_size(out.getvalue(), width, height)
    if media_type == PNG:
        FigureCanvasAgg(figure).print_png(out, metadata={"Software": None})
        return out.getvalue()
    raise ValueError(f"not a figure format: {media_type}")


def _pixel_size(svg: bytes, width: int, height: int) -> bytes:
    """Say the SVG's size in pixels (matplotlib writes points) over its unchanged viewBox."""
    head, sep, rest = svg.partition(b"<svg ")
    tag, close, tail = rest.partition(b">")
    attributes = tag.split(b" ")
    for index, attribute in enumerate(attributes):
        if attribute.startswith(b'width="'):
            attributes[index] = b'width="%d"' % width
        elif attribute.startswith(b'height="'):
            attributes[index] = b'height="%d"' % height
    return head + sep + b" ".join(attributes) + close + tail


__all__ = ["DPI", "FONT_FILE", "FORMATS", "PNG", "SVG", "Figure", "encode", "font", "new_figure"]
