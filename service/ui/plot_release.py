"""The release curve of a transient record: the fraction of the initial load released against
time, with the times to 50 % and 90 % release marked where the record gives them.

Element ids in the SVG: ``release-curve``, ``t50-marker``, ``t90-marker``.
"""

from __future__ import annotations

from typing import Any

from service.ui.numbers import plain_number, time_scale
from service.ui.plot_common import INK, LINE_COLOURS, MUTED, drawing, figure_svg, new_figure


def _values(series: dict[str, Any], name: str) -> list[float] | None:
    entry = series.get(name)
    if isinstance(entry, dict) and isinstance(entry.get("values"), list):
        return [float(v) for v in entry["values"]]
    return None


def release_svg(record: dict[str, Any]) -> str | None:
    """SVG of ``series.release_fraction`` against ``series.time``, or None (not transient)."""
    series = record.get("series") or {}
    times = _values(series, "time")
    fraction = _values(series, "release_fraction")
    if not times or not fraction or len(times) != len(fraction):
        return None
    quantities = record.get("quantities") or {}
    marks = {}
    for name in ("t50", "t90"):
        quantity = quantities.get(name)
        value = quantity.get("value") if isinstance(quantity, dict) else None
        if isinstance(value, (int, float)) and not isinstance(value, bool):
            marks[name] = float(value)
    unit_name, unit_size = time_scale(max(times))
    # The release starts from nothing at t = 0; the record lists only the requested times.
    xs = [0.0] + [t / unit_size for t in times]
    ys = [0.0] + [100.0 * f for f in fraction]

    with drawing():
        figure = new_figure(height_in=3.0)
        axes = figure.add_subplot()
        axes.patch.set_gid("plot-area")
        (curve,) = axes.plot(xs, ys, color=LINE_COLOURS[0], linewidth=1.6, marker="o",
                             markersize=3.5, label="released, % of initial load")
        curve.set_gid("release-curve")
        for name, level in (("t50", 50.0), ("t90", 90.0)):
            axes.axhline(level, color=MUTED, linewidth=0.6, linestyle=(0, (2, 2)))
            if name in marks:
                x = marks[name] / unit_size
                (marker,) = axes.plot([x, x], [0.0, level], color=INK, linewidth=1.0,
                                      label=f"{name} = {plain_number(x)} {unit_name}")
                marker.set_gid(f"{name}-marker")
                axes.annotate(name, (x, level), xytext=(4, 4), textcoords="offset points",
                              fontsize=8.5, color=INK)
        axes.set_xlim(0.0, xs[-1])
        axes.set_ylim(0.0, 105.0)
        axes.set_xlabel(f"t / {unit_name}")
        axes.set_ylabel("released / %")
        figure.legend(loc="outside lower center", ncols=3, fontsize=8)
        words = ", ".join(f"{n} = {plain_number(v / unit_size)} {unit_name}"
                          for n, v in marks.items()) or "t50 and t90 not reached"
        return figure_svg(figure, title=f"Release curve over {plain_number(xs[-1])} "
                                        f"{unit_name}: {words}")
