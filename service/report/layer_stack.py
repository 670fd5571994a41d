"""A to-scale drawing of a case's layer stack, as SVG built element by element.

The bar runs from the inner face to the outer face; each layer's width is its thickness on one
linear scale, and the axis below carries the real positions (x for a slab, r otherwise). Layers
too narrow for their name are labelled below the bar with a leader line.
"""

from __future__ import annotations

import xml.etree.ElementTree as ET
from typing import Any

from matplotlib.ticker import MaxNLocator

from service.report.numbers import length_scale, plain_number, unit_text
from worker.engine.boundaries import BOUNDARIES
from worker.engine.reactions import REACTIONS

WIDTH, LEFT, RIGHT = 760, 70, 70
BAR_TOP, BAR_HEIGHT = 58, 46
CHAR_WIDTH = 6.4  # px per character of the 11 px label font (a generous estimate)
LAYER_FILLS = ("#dfe7ee", "#ece6d8", "#e2ebe0", "#e9e1ea", "#e6e6e6")
INK, MUTED, EDGE = "#1f262d", "#4d5761", "#5d6a76"
SVG_NS = "http://www.w3.org/2000/svg"

def _si(value: Any) -> float:
    if isinstance(value, dict):
        value = value.get("value")
    return float(value or 0.0)


def boundary_words(boundary: dict[str, Any] | None) -> str:
    """A face's condition in a few words (its kind's ``wording``), e.g. ``fluid at 0.2 mol/m³``
    or ``sealed (no flux)``."""
    boundary = boundary or {}
    kind = boundary.get("kind")
    condition = BOUNDARIES.get(kind) if isinstance(kind, str) else None
    if condition is None:
        return str(kind or "not given")
    quantities = {p.name: boundary.get(p.name) or {} for p in condition.parameters
                  if p.dimension is not None}
    if condition.wording_at_zero is not None and all(
            _si(quantity) == 0 for quantity in quantities.values()):
        return condition.wording_at_zero
    texts = {name: f"{plain_number(_si(quantity))} {unit_text(quantity.get('unit'))}"
             for name, quantity in quantities.items()}
    return condition.wording.format(**texts).strip()


def _layer_caption(layer: dict[str, Any]) -> str:
    parts = [f"K = {plain_number(layer.get('partition', 1.0), 3)}"]
    reaction = (layer.get("reaction") or {}).get("kind")
    law = REACTIONS.get(reaction) if isinstance(reaction, str) else None
    if law is not None and law.label:
        parts.append(law.label)
    return ", ".join(parts)


def _text(parent: ET.Element, x: float, y: float, content: str, *, anchor: str = "middle",
          size: int = 11, fill: str = INK, weight: str | None = None) -> ET.Element:
    element = ET.SubElement(parent, "text", {"x": f"{x:.1f}", "y": f"{y:.1f}",
                                              "text-anchor": anchor, "font-size": str(size),
                                              "fill": fill})
    if weight:
        element.set("font-weight", weight)
    element.text = content
    return element


def layer_stack_svg(inputs: dict[str, Any]) -> str:
    """SVG markup (no XML declaration) of the layer stack of a normalised (SI) case.

    Parameters
    ----------
    inputs
        The normalised case: ``geometry``, ``inner`` and ``layers[*].thickness`` in metres,
        ``inner_boundary`` and ``outer_boundary``.
    """
    layers = list(inputs.get("layers") or [])
    geometry = str(inputs.get("geometry") or "slab")
    inner = _si(inputs.get("inner"))
    edges = [inner]
    for layer in layers:
        edges.append(edges[-1] + _si(layer.get("thickness")))
    extent = edges[-1] - edges[0] or 1.0
    unit_name, unit_size = length_scale(edges[-1] if geometry != "slab" else extent)
    span = WIDTH - LEFT - RIGHT

    def px(position: float) -> float:
        return LEFT + (position - edges[0]) / extent * span

    axis_name = "x" if geometry == "slab" else "r"
    description = (f"{geometry} of {len(layers)} layer(s) from {axis_name} = "
                   f"{plain_number(edges[0] / unit_size)} to {plain_number(edges[-1] / unit_size)}"
                   f" {unit_name}, drawn to scale: " + "; ".join(
                       f"{layer.get('name', f'layer {i + 1}')} "
                       f"{plain_number(_si(layer.get('thickness')) / unit_size)} {unit_name}"
                       for i, layer in enumerate(layers)))

    below_rows: list[float] = []  # right end (px) of the last label in each row below the bar
    label_rows: list[tuple[int, float, str, str]] = []
    svg = ET.Element("svg", {"xmlns": SVG_NS, "class": "layer-stack", "role": "img",
                             "viewBox": f"0 0 {WIDTH} 0", "aria-labelledby": "stack-title"})
    title = ET.SubElement(svg, "title", {"id": "stack-title"})
    title.text = "Layer stack to scale: " + description
    bar = ET.SubElement(svg, "g", {"id": "stack-layers"})
    for index, layer in enumerate(layers):
        x0, x1 = px(edges[index]), px(edges[index + 1])
        width = max(x1 - x0, 1.0)
        ET.SubElement(bar, "rect", {
            "x": f"{x0:.2f}", "y": str(BAR_TOP), "width": f"{width:.2f}",
            "height": str(BAR_HEIGHT), "fill": LAYER_FILLS[index % len(LAYER_FILLS)],
            "stroke": EDGE, "stroke-width": "1", "data-layer": str(index),
            "data-thickness-m": repr(_si(layer.get("thickness")))})
        name = str(layer.get("name") or f"layer {index + 1}")
        caption = _layer_caption(layer)
        needed = CHAR_WIDTH * max(len(name), len(caption)) + 8
        centre = (x0 + x1) / 2
        if width >= needed:
            _text(bar, centre, BAR_TOP + 19, name, weight="600")
            _text(bar, centre, BAR_TOP + 34, caption, size=10, fill=MUTED)
            continue
        label_width = CHAR_WIDTH * max(len(name), len(caption))
        left = min(max(centre - label_width / 2, 4), WIDTH - 4 - label_width)
        row = next((i for i, end in enumerate(below_rows) if left > end + 10), None)
        if row is None:
            below_rows.append(0.0)
            row = len(below_rows) - 1
        below_rows[row] = left + label_width
        label_rows.append((row, centre, name, caption))

    axis_y = BAR_TOP + BAR_HEIGHT
    axis = ET.SubElement(svg, "g", {"id": "stack-axis"})
    ET.SubElement(axis, "line", {"x1": str(LEFT), "x2": str(LEFT + span), "y1": str(axis_y + 6),
                                 "y2": str(axis_y + 6), "stroke": INK})
    for tick in MaxNLocator(nbins=6, steps=[1, 2, 2.5, 5, 10]).tick_values(
            edges[0] / unit_size, edges[-1] / unit_size):
        position = tick * unit_size
        if position < edges[0] - 1e-12 * extent or position > edges[-1] + 1e-12 * extent:
            continue
        x = px(position)
        ET.SubElement(axis, "line", {"x1": f"{x:.2f}", "x2": f"{x:.2f}", "y1": str(axis_y + 6),
                                     "y2": str(axis_y + 11), "stroke": INK})
        _text(axis, x, axis_y + 23, plain_number(tick, 4), size=10)
    _text(axis, LEFT + span, axis_y + 37, f"{axis_name} / {unit_name}", anchor="end", size=10,
          fill=MUTED)

    leaders = ET.SubElement(svg, "g", {"id": "stack-leaders"})
    first_row_y = axis_y + 52
    for row, centre, name, caption in label_rows:
        y = first_row_y + row * 30
        ET.SubElement(leaders, "line", {"x1": f"{centre:.2f}", "x2": f"{centre:.2f}",
                                        "y1": str(axis_y), "y2": f"{y - 11:.1f}",
                                        "stroke": MUTED, "stroke-dasharray": "2 2"})
        _text(leaders, centre, y, name, weight="600")
        _text(leaders, centre, y + 13, caption, size=10, fill=MUTED)

    faces = ET.SubElement(svg, "g", {"id": "stack-faces"})
    inner_label = "centre" if geometry != "slab" and inner == 0 else "inner face"
    _text(faces, LEFT, 22, inner_label, anchor="start", size=10, fill=MUTED)
    _text(faces, LEFT, 38, boundary_words(inputs.get("inner_boundary")), anchor="start")
    _text(faces, LEFT + span, 22, "outer face", anchor="end", size=10, fill=MUTED)
    _text(faces, LEFT + span, 38, boundary_words(inputs.get("outer_boundary")), anchor="end")
    for x in (LEFT, LEFT + span):
        ET.SubElement(faces, "line", {"x1": f"{x:.2f}", "x2": f"{x:.2f}", "y1": "43",
                                      "y2": str(BAR_TOP), "stroke": INK, "stroke-width": "2"})

    height = first_row_y + len(below_rows) * 30 if below_rows else axis_y + 44
    svg.set("viewBox", f"0 0 {WIDTH} {height:.0f}")
    return ET.tostring(svg, encoding="unicode")
