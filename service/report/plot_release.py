"""The release curve of a transient record: the fraction of the initial load released against
time, with the times to 50 % and 90 % release marked where the record gives them.

Element ids in the SVG: ``release-curve``, ``t50-marker``, ``t90-marker``.
"""

from __future__ import annotations

from typing import Any

from service.report.numbers import plain_number, time_scale, unit_text
from service.report.plot_common import INK, LINE_COLOURS, MUTED, drawing, figure_svg, new_figure


def _values(series: dict[str, Any], name: str) -> list[float | None] | None:
    entry = series.get(name)
    if isinstance(entry, dict) and isinstance(entry.get("values"), list):
        return [float(v) if isinstance(v, (int, float)) and not isinstance(v, bool) else None
                for v in entry["values"]]
    return None


def _marks(record: dict[str, Any], names: tuple[str, ...]) -> dict[str, float]:
    quantities = record.get("quantities") or {}
    marks = {}
    for name in names:
        quantity = quantities.get(name)
        value = quantity.get("value") if isinstance(quantity, dict) else None
        if isinstance(value, (int, float)) and not isinstance(value, bool):
            marks[name] = float(value)
    return marks


def _known(times: list[float | None], values: list[float | None]) -> list[tuple[float, float]]:
    return [(t, v) for t, v in zip(times, values, strict=True) if t is not None and v is not None]


def release_svg(record: dict[str, Any]) -> str | None:
    """SVG of the release of a transient record, or None (not transient).

    With an initial load: ``series.release_fraction`` in % against ``series.time``, t50 and
    t90 marked. Without one (no fraction, e.g. an initially empty membrane): the cumulative
    amount out of the outer face, with the late-time line down to ``time_lag``, where some
    leaves through it (a body that only takes up gets :func:`minimum_svg` instead).
    """
    series = record.get("series") or {}
    times = _values(series, "time")
    if not times:
        return None
    fraction = _values(series, "release_fraction")
    pairs = _known(times, fraction) if fraction and len(fraction) == len(times) else []
    if pairs:
        return _fraction_svg(record, pairs)
    released = _values(series, "released_outer")
    known = _known(times, released) if released and len(released) == len(times) else []
    if known and max(v for _, v in known) > 0.0:
        unit = (series.get("released_outer") or {}).get("unit", "")
        return _amount_svg(record, _known(times, released), unit)
    return None


def _fraction_svg(record: dict[str, Any], pairs: list[tuple[float, float]]) -> str:
    marks = _marks(record, ("t50", "t90"))
    unit_name, unit_size = time_scale(max(t for t, _ in pairs))
    # The release starts from nothing at t = 0; the record lists only the requested times.
    xs = [0.0] + [t / unit_size for t, _ in pairs]
    ys = [0.0] + [100.0 * f for _, f in pairs]

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


def _amount_svg(record: dict[str, Any], pairs: list[tuple[float, float]], unit: str) -> str:
    lag = _marks(record, ("time_lag",)).get("time_lag")
    unit_name, unit_size = time_scale(max(t for t, _ in pairs))
    xs = [0.0] + [t / unit_size for t, _ in pairs]
    ys = [0.0] + [v for _, v in pairs]

    with drawing():
        figure = new_figure(height_in=3.0)
        axes = figure.add_subplot()
        axes.patch.set_gid("plot-area")
        (curve,) = axes.plot(xs, ys, color=LINE_COLOURS[0], linewidth=1.6, marker="o",
                             markersize=3.5, label="cumulative amount out of the outer face")
        curve.set_gid("release-curve")
        if lag is not None and lag > 0:
            (line,) = axes.plot([lag / unit_size, xs[-1]], [0.0, ys[-1]], color=INK,
                                linewidth=1.0, linestyle=(0, (4, 2)),
                                label=f"late-time line, time lag = {plain_number(lag / unit_size)}"
                                      f" {unit_name}")
            line.set_gid("time-lag-marker")
        axes.set_xlim(0.0, xs[-1])
        axes.set_ylim(0.0, max(ys) * 1.08 or 1.0)
        axes.set_xlabel(f"t / {unit_name}")
        axes.set_ylabel(f"released / {unit_text(unit) or '1'}")
        figure.legend(loc="outside lower center", ncols=2, fontsize=8)
        words = (f"time lag {plain_number(lag / unit_size)} {unit_name}" if lag is not None
                 else "no time lag reported")
        return figure_svg(figure, title=f"Cumulative release through the outer face over "
                                        f"{plain_number(xs[-1])} {unit_name}: {words}")
