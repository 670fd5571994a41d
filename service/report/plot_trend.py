"""The trend of a case's key figures across its runs (first run, re-verifications, ...).

Each line is one quantity's relative change from its value in the case's first succeeded run;
the shaded band is the drift tolerance. Approved runs are drawn as filled markers. Element ids:
``trend-<quantity>``, ``tolerance-band``.
"""

from __future__ import annotations

from typing import Any

from schemas.result import Decision, RunStatus
from service.report.numbers import plain_number
from service.report.plot_common import LINE_COLOURS, MUTED, drawing, figure_svg, new_figure

#: Quantities tried first for the trend, in order; up to MAX_LINES are drawn.
KEY_QUANTITIES = ("flux_outer", "flux_inner", "consumption", "depletion_front", "t50", "t90",
                  "time_depleted",
                  "time_lag", "rate_outer", "surface_inner", "surface_outer",
                  "concentration_min")
MAX_LINES = 5


def scalar(quantity: Any) -> float | None:
    value = quantity.get("value") if isinstance(quantity, dict) else quantity
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return float(value)
    return None


def trend_names(runs: list[dict[str, Any]]) -> list[str]:
    """The quantities worth a line: non-zero scalars in the first succeeded run."""
    first = next((r for r in runs if r["status"] == RunStatus.SUCCEEDED), None)
    if first is None:
        return []
    present = {name for name, q in first["quantities"].items() if scalar(q) not in (None, 0.0)}
    ordered = [n for n in KEY_QUANTITIES if n in present]
    ordered += sorted(present - set(ordered))
    return ordered[:MAX_LINES]


def relative_changes(runs: list[dict[str, Any]], name: str) -> list[tuple[int, float]]:
    """(run number from 1, relative change from the first succeeded run) for one quantity."""
    succeeded = [(i, r) for i, r in enumerate(runs, start=1) if r["status"] == RunStatus.SUCCEEDED]
    if not succeeded:
        return []
    baseline = scalar(succeeded[0][1]["quantities"].get(name))
    if not baseline:
        return []
    points = []
    for index, run in succeeded:
        value = scalar(run["quantities"].get(name))
        if value is not None:
            points.append((index, (value - baseline) / abs(baseline)))
    return points


def trend_svg(runs: list[dict[str, Any]], tolerance: float) -> str | None:
    """SVG of the trend, or None with fewer than two succeeded runs."""
    if sum(1 for r in runs if r["status"] == RunStatus.SUCCEEDED) < 2:
        return None
    names = trend_names(runs)
    series = {name: relative_changes(runs, name) for name in names}
    largest = max([abs(c) for points in series.values() for _, c in points] + [tolerance])
    scale, label = (1e6, "ppm") if largest < 1e-3 else (1e2, "%")
    approved = {i for i, r in enumerate(runs, start=1) if r.get("decision") == Decision.APPROVED}
    with drawing():
        figure = new_figure(height_in=3.0)
        axes = figure.add_subplot()
        axes.patch.set_gid("plot-area")
        band = axes.axhspan(-tolerance * scale, tolerance * scale, color="#e6e6e6", linewidth=0,
                            label=f"drift tolerance ±{plain_number(tolerance)}")
        band.set_gid("tolerance-band")
        axes.axhline(0.0, color=MUTED, linewidth=0.6)
        for colour, name in zip(LINE_COLOURS, names, strict=False):
            points = series[name]
            if not points:
                continue
            xs = [p[0] for p in points]
            ys = [p[1] * scale for p in points]
            (line,) = axes.plot(xs, ys, color=colour, linewidth=1.3, label=name)
            line.set_gid(f"trend-{name}")
            faces = [colour if x in approved else "white" for x in xs]
            axes.scatter(xs, ys, s=26, facecolors=faces, edgecolors=colour, zorder=3)
        axes.set_xlim(0.5, len(runs) + 0.5)
        axes.set_xticks(range(1, len(runs) + 1))
        axes.set_xlabel("run of this case (1 = first; filled marker = approved)")
        axes.set_ylabel(f"change from run 1 / {label}")
        figure.legend(loc="outside lower center", ncols=3, fontsize=8)
        return figure_svg(figure, title=f"Relative change of {', '.join(names)} across "
                                        f"{len(runs)} runs, against the first succeeded run")
