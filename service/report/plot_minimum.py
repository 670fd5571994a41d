"""The lowest concentration over time of a transient record that takes solute up (an oxygen
supply, a tissue fed from a face): the body's true minimum at each requested time and, for a
body of several layers, each layer's.

Element ids in the SVG: ``minimum-curve``, ``minimum-layer-<i>``.
"""

from __future__ import annotations

from typing import Any

from service.report.numbers import plain_number, time_scale, unit_text
from service.report.plot_common import (
    LINE_COLOURS,
    MUTED,
    drawing,
    figure_svg,
    new_figure,
    numbers,
)


def minimum_svg(record: dict[str, Any]) -> str | None:
    """SVG of ``series.concentration_min`` against ``series.time`` (and each layer's minimum
    from ``series.concentration_min_layers`` where there are several layers), or None when the
    record has no such series or is a release (its minimum sits at the sink)."""
    series = record.get("series") or {}
    if "release_fraction" in series:
        return None
    times = numbers((series.get("time") or {}).get("values"))
    lowest = series.get("concentration_min") or {}
    values = numbers(lowest.get("values"))
    if not times or not values or len(times) != len(values):
        return None
    unit_name, unit_size = time_scale(max(times))
    xs = [t / unit_size for t in times]
    layers = series.get("concentration_min_layers") or {}
    names = layers.get("layers") or []
    rows = layers.get("values") or []

    with drawing():
        figure = new_figure(height_in=3.0)
        axes = figure.add_subplot()
        axes.patch.set_gid("plot-area")
        if len(names) > 1 and len(rows) == len(times):
            for j, name in enumerate(names):
                (line,) = axes.plot(xs, [row[j] for row in rows], color=LINE_COLOURS[
                    (j + 1) % len(LINE_COLOURS)], linewidth=1.0, linestyle=(0, (3, 2)),
                    label=f"lowest in {name}")
                line.set_gid(f"minimum-layer-{j}")
        (curve,) = axes.plot(xs, values, color=LINE_COLOURS[0], linewidth=1.6, marker="o",
                             markersize=3.5, label="lowest in the body")
        curve.set_gid("minimum-curve")
        axes.axhline(0.0, color=MUTED, linewidth=0.6)
        axes.set_xlim(0.0, xs[-1])
        axes.set_xlabel(f"t / {unit_name}")
        axes.set_ylabel(f"lowest C / {unit_text(lowest.get('unit')) or '1'}")
        figure.legend(loc="outside lower center", ncols=min(3, 1 + len(names)), fontsize=8)
        return figure_svg(figure, title=f"Lowest concentration over {plain_number(xs[-1])} "
                                        f"{unit_name}: {plain_number(values[-1])} "
                                        f"{unit_text(lowest.get('unit'))} at the last time")
