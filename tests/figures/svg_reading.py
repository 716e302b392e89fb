"""Reading an SVG figure back: the positions of the artists we named (gid) and the x scale from the ticks.

The data scale is recovered from the SVG alone: each x tick of an axes is a mark at an x position
with its label (kept as a comment beside the glyph paths, where text is drawn as paths). Two ticks
give the linear map from data to SVG units, so a marker's data value can be read back without the
figure object.
"""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET

SVG_NS = "{http://www.w3.org/2000/svg}"
XLINK = "{http://www.w3.org/1999/xlink}href"


def parse(svg: bytes) -> ET.Element:
    parser = ET.XMLParser(target=ET.TreeBuilder(insert_comments=True))
    parser.feed(svg)
    return parser.close()


def by_id(root: ET.Element, gid: str) -> ET.Element | None:
    for element in root.iter():
        if element.get("id") == gid:
            return element
    return None


def path_points(element: ET.Element) -> list[tuple[float, float]]:
    """The vertices of every path drawn in ``element`` (M/L commands, as matplotlib writes lines);
    marker shapes, defined once with an id and stamped by ``<use>``, are not vertices."""
    points = []
    for path in element.iter(f"{SVG_NS}path"):
        if path.get("id"):
            continue
        numbers = [float(x) for x in re.findall(r"-?\d+(?:\.\d+)?(?:e-?\d+)?", path.get("d", ""))]
        points += list(zip(numbers[0::2], numbers[1::2]))
    return points


def marker_points(element: ET.Element) -> list[tuple[float, float]]:
    """Where the markers of a markers-only line were stamped (``<use x= y=>``), in order."""
    return [(float(u.get("x")), float(u.get("y"))) for u in element.iter(f"{SVG_NS}use")]


def x_scale(root: ET.Element, axes_gid: str) -> tuple[float, float]:
    """(slope, intercept) with svg_x = slope * data_x + intercept, from the labelled x ticks of an axes."""
    axes = by_id(root, axes_gid)
    assert axes is not None, axes_gid
    ticks = []
    for group in axes.iter(f"{SVG_NS}g"):
        if not (group.get("id") or "").startswith("xtick_"):
            continue
        uses = list(group.iter(f"{SVG_NS}use"))
        labels = [c.text for c in group.iter() if c.tag is ET.Comment and c.text and c.text.strip()]
        if uses and labels:
            text = labels[0].strip().replace("\u2212", "-")
            try:
                ticks.append((float(text), float(uses[0].get("x"))))
            except ValueError:
                continue
    assert len(ticks) >= 2, f"fewer than two labelled x ticks in {axes_gid}"
    (d0, s0), (d1, s1) = ticks[0], ticks[-1]
    slope = (s1 - s0) / (d1 - d0)
    return slope, s0 - slope * d0
