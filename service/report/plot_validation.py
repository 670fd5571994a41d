"""The validation figure of one set of measured points (ASME V&V 20-2009 comparison): the
simulation at the measured times with its band ± k·u_S, u_S = √(u_num² + u_input²) (the
simulation's own standard uncertainty), and the data with error bars ± k·u_D; the points whose
comparison error exceeds k·u_val are drawn apart (hollow, in the fail colour).

Element ids in the SVG: ``validation-simulation``, ``validation-band``, ``validation-data``,
``validation-flagged``. :func:`validation_png` gives the same figure as PNG for the PDF record.
"""

from __future__ import annotations

import io
import math

from matplotlib.figure import Figure

from service.report.measured_view import PointRow, ValidationSetView
from service.report.numbers import plain_number, time_scale, unit_text
from service.report.plot_common import INK, LINE_COLOURS, MUTED, drawing, figure_svg, new_figure

#: The fail colour of the stylesheet, as the design figures use it for a missed bound.
FLAGGED_COLOUR = "#9b1c13"


def _usable(points: list[PointRow]) -> list[PointRow]:
    return [p for p in points if p.time is not None and p.simulated is not None
            and p.measured is not None]


def _u_sim(point: PointRow) -> float:
    return math.sqrt((point.u_num or 0.0) ** 2 + (point.u_input or 0.0) ** 2)


def _draw(view: ValidationSetView, points: list[PointRow]) -> tuple[Figure, str]:
    k = view.coverage_factor
    unit_name, unit_size = time_scale(max(p.time or 0.0 for p in points) or 1.0)
    xs = [(p.time or 0.0) / unit_size for p in points]
    simulated = [p.simulated or 0.0 for p in points]
    figure = new_figure(height_in=3.0)
    axes = figure.add_subplot()
    axes.patch.set_gid("plot-area")
    band = axes.fill_between(xs, [s - k * _u_sim(p) for s, p in zip(simulated, points,
                                                                     strict=True)],
                             [s + k * _u_sim(p) for s, p in zip(simulated, points, strict=True)],
                             color=LINE_COLOURS[0], alpha=0.18, linewidth=0,
                             label=f"simulation ± {plain_number(k)}·u_S")
    band.set_gid("validation-band")
    if view.curve is not None:
        curve_t, curve_v = view.curve
        (line,) = axes.plot([t / unit_size for t in curve_t], curve_v, color=LINE_COLOURS[0],
                            linewidth=1.2, label="simulation (record's series)")
        axes.plot(xs, simulated, "x", color=LINE_COLOURS[0], markersize=5)
    else:
        (line,) = axes.plot(xs, simulated, "x--", color=LINE_COLOURS[0], linewidth=1.0,
                            markersize=5, label="simulation at the measured times")
    line.set_gid("validation-simulation")
    for gid, chosen, style in (
            ("validation-data", [p for p in points if not p.flagged],
             {"color": INK, "fmt": "o", "markersize": 4.5, "label": "measured ± "
              f"{plain_number(k)}·u_D"}),
            ("validation-flagged", [p for p in points if p.flagged],
             {"color": FLAGGED_COLOUR, "fmt": "o", "markersize": 6, "mfc": "white",
              "label": f"measured, |E| > {plain_number(k)}·u_val"})):
        if not chosen:
            continue
        bars = axes.errorbar([(p.time or 0.0) / unit_size for p in chosen],
                             [p.measured or 0.0 for p in chosen],
                             yerr=[k * (p.u_d or 0.0) for p in chosen], capsize=2.5,
                             elinewidth=1.0, **style)
        bars.lines[0].set_gid(gid)
    unit = unit_text(view.unit)
    axes.set_xlabel(f"t / {unit_name}")
    axes.set_ylabel(f"{view.quantity} / {unit or '1'}")
    axes.tick_params(colors=INK)
    axes.grid(color=MUTED, alpha=0.15, linewidth=0.5)
    figure.legend(loc="outside lower center", ncols=3, fontsize=8)
    title = (f"Validation set {view.id}: {view.quantity} simulated and measured at "
             f"{len(points)} times; {view.flagged} point(s) beyond {plain_number(k)}·u_val")
    return figure, title


def validation_svg(view: ValidationSetView) -> str | None:
    """The figure as inline SVG, or None when fewer than one point can be drawn."""
    points = _usable(view.points)
    if not points:
        return None
    with drawing():
        figure, title = _draw(view, points)
        return figure_svg(figure, title=title)


def validation_png(view: ValidationSetView, dpi: int = 150) -> bytes | None:
    """The figure as PNG bytes (for the PDF record), or None as :func:`validation_svg`."""
    points = _usable(view.points)
    if not points:
        return None
    with drawing():
        figure, _ = _draw(view, points)
        buffer = io.BytesIO()
        figure.savefig(buffer, format="png", dpi=dpi, metadata={"Software": None})
        return buffer.getvalue()
