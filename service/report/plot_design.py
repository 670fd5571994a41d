"""Figures of the design blocks: the distribution of a required quantity with its bound drawn,
the sensitivity indices per input field, and a sweep's quantity against the varied input.

Element ids in the SVG: ``histogram-bar-<i>``, ``bound-<n>`` (each bound line),
``first-index-<i>``, ``total-index-<i>`` (the bars of field i), ``sweep-curve``,
``sweep-bound-<n>``.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

from service.report.design_view import SensitivityRow, UncertaintyRow
from service.report.numbers import plain_number, unit_text
from service.report.plot_common import INK, LINE_COLOURS, MUTED, drawing, figure_svg, new_figure
from service.report.readable import readable_unit

#: The colour of a requirement's bound in every figure (the fail colour of the stylesheet).
BOUND_COLOUR = "#9b1c13"


def _numbers(values: Any) -> list[float] | None:
    if not isinstance(values, list):
        return None
    out = []
    for v in values:
        if not isinstance(v, (int, float)) or isinstance(v, bool) or not math.isfinite(v):
            return None
        out.append(float(v))
    return out


def histogram_svg(row: UncertaintyRow) -> str | None:
    """The Monte Carlo distribution of ``row`` (its ``histogram``: ``edges``, one more than
    ``counts``) as bars, with each requirement bound on it drawn as a vertical line; None when
    the record carries no usable histogram."""
    histogram = row.histogram or {}
    edges, counts = _numbers(histogram.get("edges")), _numbers(histogram.get("counts"))
    if not edges or not counts or len(edges) != len(counts) + 1:
        return None
    total = sum(counts) or 1.0
    widths = [b - a for a, b in zip(edges[:-1], edges[1:], strict=True)]
    unit = unit_text(row.unit)
    with drawing():
        figure = new_figure(height_in=2.8)
        axes = figure.add_subplot()
        axes.patch.set_gid("plot-area")
        bars = axes.bar(edges[:-1], [c / total for c in counts], width=widths, align="edge",
                        color=LINE_COLOURS[0], alpha=0.75, edgecolor="white", linewidth=0.4,
                        label="share of trials")
        for i, bar in enumerate(bars):
            bar.set_gid(f"histogram-bar-{i}")
        for n, bound in enumerate(row.bounds):
            line = axes.axvline(bound, color=BOUND_COLOUR, linewidth=1.6, linestyle=(0, (5, 2)),
                                label=f"required bound {plain_number(bound)} {unit}".rstrip())
            line.set_gid(f"bound-{n}")
        low, high = (row.interval + [None, None])[:2]
        if low is not None and high is not None:
            axes.axvspan(low, high, color=MUTED, alpha=0.12, label="coverage interval")
        axes.set_xlabel(f"{row.key} / {unit or '1'}")
        axes.set_ylabel("share of trials")
        figure.legend(loc="outside lower center", ncols=3, fontsize=8)
        bounds = ", ".join(plain_number(b) for b in row.bounds) or "none"
        return figure_svg(figure, title=f"Distribution of {row.key} over the Monte Carlo trials; "
                                        f"required bound {bounds} {unit}".rstrip())


def sensitivity_svg(rows: Sequence[SensitivityRow], quantity: str) -> str | None:
    """First and total Sobol' indices of ``quantity`` per input field as paired horizontal
    bars; None when no index of it is recorded."""
    mine = [r for r in rows if r.quantity == quantity
            and (r.first_index is not None or r.total_index is not None)]
    if not mine:
        return None
    fields = [r.field for r in mine]
    positions = list(range(len(mine)))
    with drawing():
        figure = new_figure(height_in=max(1.6, 0.45 * len(mine) + 1.0))
        axes = figure.add_subplot()
        axes.patch.set_gid("plot-area")
        total = axes.barh([p + 0.2 for p in positions], [r.total_index or 0.0 for r in mine],
                          height=0.38, color=LINE_COLOURS[1], label="total index")
        for i, bar in enumerate(total):
            bar.set_gid(f"total-index-{i}")
        first = axes.barh([p - 0.2 for p in positions], [r.first_index or 0.0 for r in mine],
                          height=0.38, color=LINE_COLOURS[0], label="first-order index")
        for i, bar in enumerate(first):
            bar.set_gid(f"first-index-{i}")
        axes.set_yticks(positions, fields)
        axes.invert_yaxis()
        axes.set_xlim(0.0, max(1.0, *[(r.total_index or 0.0) for r in mine]))
        axes.set_xlabel(f"Sobol' index of {quantity}")
        figure.legend(loc="outside lower center", ncols=2, fontsize=8)
        words = "; ".join(f"{r.field}: first {plain_number(r.first_index, 2)}, total "
                          f"{plain_number(r.total_index, 2)}" for r in mine)
        return figure_svg(figure, title=f"Sensitivity of {quantity}: {words}")


def sweep_svg(vary: str, vary_unit: str, values: Sequence[float | None], quantity: str,
              quantity_unit: str, column: Sequence[float | None],
              bounds: Sequence[float]) -> str | None:
    """``quantity`` against the varied input over a sweep, each bound on it drawn as a
    horizontal line; None when fewer than two points are known."""
    pairs = [(x, y) for x, y in zip(values, column, strict=False)
             if x is not None and y is not None]
    if len(pairs) < 2:
        return None
    x_unit, x_size = readable_unit(vary_unit, [x for x, _ in pairs]) or (unit_text(vary_unit), 1.0)
    pairs = [(x / x_size, y) for x, y in pairs]
    with drawing():
        figure = new_figure(height_in=2.8)
        axes = figure.add_subplot()
        axes.patch.set_gid("plot-area")
        (curve,) = axes.plot([x for x, _ in pairs], [y for _, y in pairs], color=LINE_COLOURS[0],
                             linewidth=1.6, marker="o", markersize=3.5, label=quantity)
        curve.set_gid("sweep-curve")
        for n, bound in enumerate(bounds):
            line = axes.axhline(bound, color=BOUND_COLOUR, linewidth=1.6, linestyle=(0, (5, 2)),
                                label=f"required bound {plain_number(bound)} "
                                      f"{unit_text(quantity_unit)}".rstrip())
            line.set_gid(f"sweep-bound-{n}")
        axes.set_xlabel(f"{vary} / {x_unit or '1'}")
        axes.set_ylabel(f"{quantity} / {unit_text(quantity_unit) or '1'}")
        axes.tick_params(colors=INK)
        figure.legend(loc="outside lower center", ncols=2, fontsize=8)
        return figure_svg(figure, title=f"{quantity} against {vary} over the sweep")

