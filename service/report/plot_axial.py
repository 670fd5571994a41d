"""The axial profiles of a case with flow along a lumen (``series.axial``): the mixing-cup and
wall concentrations of the flowing fluid and the lowest concentration of the body around it,
against the position along the lumen, inlet to outlet.

Element ids in the SVG: ``axial-mixing-cup``, ``axial-wall``, ``axial-minimum``; in the picture
of the body (:func:`axial_field_svg`) ``axial-field`` and ``axial-field-wall``.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from service.report.numbers import length_scale, plain_number, unit_text
from service.report.plot_common import (
    LINE_COLOURS,
    MUTED,
    drawing,
    figure_svg,
    new_figure,
    numbers,
)

#: The drawn series: key, label, element id, line style.
CURVES = (("mixing_cup", "mixing cup (flow-weighted mean in the lumen)", "axial-mixing-cup", "-"),
          ("wall", "fluid at the lumen wall", "axial-wall", (0, (4, 2))),
          ("concentration_min", "lowest in the body at that position", "axial-minimum",
           (0, (1, 1.5))))


def axial_svg(record: dict[str, Any]) -> str | None:
    """SVG of the axial series, or None when the record has none."""
    axial = (record.get("series") or {}).get("axial")
    if not isinstance(axial, dict):
        return None
    positions = numbers(axial.get("position"))
    if not positions or len(positions) < 2:
        return None
    units = axial.get("units") if isinstance(axial.get("units"), dict) else {}
    unit_name, unit_size = length_scale(max(positions))
    xs = [z / unit_size for z in positions]
    with drawing():
        figure = new_figure(height_in=3.0)
        axes = figure.add_subplot()
        axes.patch.set_gid("plot-area")
        drawn = 0
        for j, (key, label, gid, style) in enumerate(CURVES):
            values = numbers(axial.get(key))
            if values is None or len(values) != len(xs):
                continue
            (line,) = axes.plot(xs, values, color=LINE_COLOURS[j % len(LINE_COLOURS)],
                                linewidth=1.5, linestyle=style, label=label)
            line.set_gid(gid)
            drawn += 1
        if not drawn:
            return None
        axes.axhline(0.0, color=MUTED, linewidth=0.6)
        axes.set_xlim(0.0, xs[-1])
        axes.set_xlabel(f"position along the lumen z / {unit_name}")
        axes.set_ylabel(f"C / {unit_text(units.get('mixing_cup')) or '1'}")
        figure.legend(loc="outside lower center", ncols=min(3, drawn), fontsize=8)
        outlet = numbers(axial.get("mixing_cup"))
        words = (f": mixing cup {plain_number(outlet[-1])} "
                 f"{unit_text(units.get('mixing_cup'))} at the outlet" if outlet else "")
        return figure_svg(figure, title=f"Along the lumen, {plain_number(xs[-1])} "
                                        f"{unit_name}{words}")


def axial_field_svg(record: dict[str, Any]) -> str | None:
    """SVG of ``series.axial_field``: the concentration over the position along the lumen and
    the radius (the fluid, then the layers), with the lumen wall marked; None without it."""
    field = (record.get("series") or {}).get("axial_field")
    if not isinstance(field, dict):
        return None
    positions, radii = numbers(field.get("position")), numbers(field.get("radius"))
    rows = field.get("concentration")
    if not positions or not radii or not isinstance(rows, list) or len(rows) != len(positions):
        return None
    values = [numbers(row) for row in rows]
    if any(row is None or len(row) != len(radii) for row in values):
        return None
    cells = field.get("fluid_cells")
    units = field.get("units") if isinstance(field.get("units"), dict) else {}
    z_name, z_size = length_scale(max(positions))
    r_name, r_size = length_scale(max(radii))
    grid = np.array(values, dtype=float).T  # (radius, position)
    z, r = np.meshgrid(np.array(positions) / z_size, np.array(radii) / r_size)
    with drawing():
        figure = new_figure(height_in=3.2)
        axes = figure.add_subplot()
        axes.patch.set_gid("plot-area")
        mesh = axes.pcolormesh(z, r, grid, shading="gouraud", cmap="viridis", rasterized=True)
        mesh.set_gid("axial-field")
        if isinstance(cells, int) and 0 < cells < len(radii):
            wall = axes.axhline(radii[cells] / r_size, color="white", linewidth=1.0,
                                linestyle=(0, (4, 2)), label="lumen wall")
            wall.set_gid("axial-field-wall")
        bar = figure.colorbar(mesh, ax=axes)
        bar.set_label(f"C / {unit_text(units.get('concentration')) or '1'}")
        axes.set_xlabel(f"position along the lumen z / {z_name}")
        axes.set_ylabel(f"r / {r_name}")
        lowest = float(grid.min())
        return figure_svg(figure, title=(
            f"Concentration along the lumen and across the body: lowest "
            f"{plain_number(lowest)} {unit_text(units.get('concentration'))}"))
