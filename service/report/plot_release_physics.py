"""The panels drawn beside the release curve of a record with dispersed drug or a finite
compartment, on the release curve's time axis (the same unit and range): the dissolution front
of each loaded layer over time, with the layer's edges marked and the time its undissolved drug
is gone, and each compartment's concentration over time.

Element ids in the SVG: ``front-<i>`` (column i of :func:`service.report.release_view.
front_columns`), ``layer-edges-<layer index>``, ``depleted-<i>`` (a layer's depletion time),
``compartment-<face>`` (``inner``, ``outer``), ``compartment-bound-<n>`` (a requirement bound).
"""

from __future__ import annotations

import math
from typing import Any

from service.report.numbers import plain_number, time_scale, unit_text
from service.report.plot_common import (
    DEPLETED,
    INK,
    LAYER_SHADES,
    LINE_COLOURS,
    MUTED,
    drawing,
    figure_svg,
    new_figure,
)
from service.report.plot_design import BOUND_COLOUR
from service.report.release_view import (
    compartment_columns,
    depletion_times,
    front_columns,
    layer_edges,
    requested_times,
)


def _gap(value: float | None) -> float:
    """None (the layer's undissolved drug is gone) as a gap in the line."""
    return math.nan if value is None else value


def front_svg(record: dict[str, Any]) -> str | None:
    """SVG of each loaded layer's dissolution front against time (``series.front_position``
    and ``front_position_inner``), each layer shaded between its edges (from the record's
    inputs) and its depletion time marked; None without a front series."""
    columns = front_columns(record)
    times = requested_times(record)
    if not columns or not times:
        return None
    unit_name, unit_size = time_scale(max(times))
    xs = [t / unit_size for t in times]
    length_name = columns[0].shown_unit
    length_size = columns[0].readable[1] if columns[0].readable else 1.0
    edges = layer_edges(record.get("inputs"))
    loaded = list(dict.fromkeys(c.layer for c in columns if c.layer is not None))
    depleted = {d.layer: d.seconds for d in depletion_times(record) if d.layer is not None}

    with drawing():
        figure = new_figure(height_in=3.0)
        axes = figure.add_subplot()
        axes.patch.set_gid("plot-area")
        for index, layer in enumerate(loaded):
            if layer not in edges:
                continue
            low, high = (e / length_size for e in edges[layer])
            shade = axes.axhspan(low, high, color=LAYER_SHADES[index % len(LAYER_SHADES)],
                                 alpha=0.85, linewidth=0, zorder=0)
            shade.set_gid(f"layer-edges-{index}")
            for edge in (low, high):
                axes.axhline(edge, color=MUTED, linewidth=0.6, linestyle=(0, (2, 2)), zorder=1)
            axes.text(1.0, high, f" {layer}: {plain_number(low)} to {plain_number(high)} "
                                 f"{length_name}", transform=axes.get_yaxis_transform(),
                      ha="right", va="top", fontsize=8, color=MUTED)
        for i, column in enumerate(columns):
            inner = column.key.startswith("front_position_inner")
            (line,) = axes.plot(xs, [_gap(column.shown(k)[0]) for k in range(len(times))],
                                color=LINE_COLOURS[loaded.index(column.layer) % len(
                                    LINE_COLOURS)] if column.layer in loaded else INK,
                                linewidth=1.6, marker="o", markersize=3.5,
                                linestyle=(0, (4, 2)) if inner else "-", label=column.label)
            line.set_gid(f"front-{i}")
        for i, layer in enumerate(loaded):
            seconds = depleted.get(layer)
            if seconds is None:
                continue
            mark = axes.axvline(seconds / unit_size, color=DEPLETED, linewidth=1.0,
                                label=f"{layer}: undissolved drug gone at "
                                      f"{plain_number(seconds / unit_size)} {unit_name}")
            mark.set_gid(f"depleted-{i}")
        axes.set_xlim(0.0, xs[-1])
        axes.set_xlabel(f"t / {unit_name}")
        axes.set_ylabel(f"front position / {unit_text(length_name) or '1'}")
        figure.legend(loc="outside lower center", ncols=2, fontsize=8)
        gone = "; ".join(f"{layer} gone at {plain_number(s / unit_size)} {unit_name}"
                         for layer, s in depleted.items() if s is not None)
        return figure_svg(figure, title=f"Dissolution front over {plain_number(xs[-1])} "
                                        f"{unit_name} in {', '.join(loaded)}"
                                        + (f"; {gone}" if gone else
                                           "; undissolved drug left at the last time"))


def _bounds(record: dict[str, Any], quantity: str) -> list[tuple[float, float]]:
    """(time in s, bound) of each requirement on ``quantity`` at a time in the record's
    ``design`` (a ``between`` gives two)."""
    found = []
    for entry in (record.get("design") or {}).get("requirements") or []:
        if not isinstance(entry, dict) or entry.get("quantity") != quantity:
            continue
        at = entry.get("at")
        at = at.get("value") if isinstance(at, dict) else at
        bound = entry.get("bound")
        bounds = bound if isinstance(bound, list) else [bound]
        if isinstance(at, (int, float)):
            found += [(float(at), float(b)) for b in bounds if isinstance(b, (int, float))]
    return found


def compartment_svg(record: dict[str, Any]) -> str | None:
    """SVG of each compartment's concentration against time (``series.compartment_inner``,
    ``compartment_outer``) in the unit that reads best, from its starting concentration at
    t = 0 (the case's ``initial``, else 0) where the requested times start later, with each
    requirement bound on it at its time; None without a compartment."""
    columns = compartment_columns(record)
    times = requested_times(record)
    if not columns or not times:
        return None
    unit_name, unit_size = time_scale(max(times))
    shown_unit = columns[0].shown_unit
    inputs = record.get("inputs") or {}

    with drawing():
        figure = new_figure(height_in=3.0)
        axes = figure.add_subplot()
        axes.patch.set_gid("plot-area")
        for i, column in enumerate(columns):
            face = column.key.removeprefix("compartment_")
            xs = [t / unit_size for t in times]
            ys = [_gap(column.shown(k)[0]) for k in range(len(times))]
            if times[0] > 0.0:
                start = _starting(inputs.get(f"{face}_boundary"))
                xs, ys = [0.0, *xs], [start / (column.readable[1] if column.readable
                                               else 1.0), *ys]
            (line,) = axes.plot(xs, ys, color=LINE_COLOURS[(i + 2) % len(LINE_COLOURS)],
                                linewidth=1.6, marker="o", markersize=3.5,
                                label=f"{column.label} (well-stirred fluid)")
            line.set_gid(f"compartment-{face}")
            size = column.readable[1] if column.readable else 1.0
            for n, (at, bound) in enumerate(_bounds(record, column.key)):
                (mark,) = axes.plot([at / unit_size], [bound / size], marker="_",
                                    markersize=14, markeredgewidth=2.0, color=BOUND_COLOUR,
                                    linestyle="none",
                                    label=f"required bound {plain_number(bound / size)} "
                                          f"{unit_text(shown_unit)} at "
                                          f"{plain_number(at / unit_size)} {unit_name}")
                mark.set_gid(f"compartment-bound-{n}")
        axes.axhline(0.0, color=MUTED, linewidth=0.6)
        axes.set_xlim(0.0, times[-1] / unit_size)
        axes.set_xlabel(f"t / {unit_name}")
        axes.set_ylabel(f"C in compartment / {unit_text(shown_unit) or '1'}")
        figure.legend(loc="outside lower center", ncols=2, fontsize=8)
        last = "; ".join(f"{c.label} {plain_number(c.shown(len(times) - 1)[0])} "
                         f"{unit_text(shown_unit)}" for c in columns)
        return figure_svg(figure, title=f"Compartment concentration over "
                                        f"{plain_number(times[-1] / unit_size)} {unit_name}; "
                                        f"at the last time: {last}")


def _starting(boundary: Any) -> float:
    """The compartment's concentration at t = 0 from the normalised boundary (0 unless given)."""
    initial = boundary.get("initial") if isinstance(boundary, dict) else None
    value = initial.get("value") if isinstance(initial, dict) else initial
    return float(value) if isinstance(value, (int, float)) and not isinstance(value, bool) \
        else 0.0
