"""The concentration profile of a record: layers shaded, partition jumps drawn as the vertical
steps they are, and a depleted zone hatched and named.

Element ids in the SVG (set with matplotlib's ``gid``) let tests and readers find the parts:
``plot-area``, ``profile-line``, ``layer-<i>``, ``depleted-zone``, ``depletion-front``,
``partition-jumps``.
"""

from __future__ import annotations

from typing import Any

from service.report.numbers import length_scale, plain_number, unit_text
from service.report.plot_common import (
    DEPLETED,
    INK,
    LAYER_SHADES,
    MUTED,
    drawing,
    figure_svg,
    new_figure,
)

#: A point counts as depleted when its concentration is at most this fraction of the maximum.
DEPLETED_FRACTION = 1e-9
#: Share of the axis width one character of a layer label needs (8.5 pt on a 7.6 in figure).
LABEL_FRACTION_PER_CHAR = 0.0125


def _value(quantity: Any) -> float | None:
    if isinstance(quantity, dict):
        quantity = quantity.get("value")
    if isinstance(quantity, (int, float)) and not isinstance(quantity, bool):
        return float(quantity)
    return None


def layer_spans(profile: dict[str, Any]) -> list[tuple[int, float, float]]:
    """(layer index, first position, last position) of each layer in the profile, in order."""
    spans: list[tuple[int, float, float]] = []
    for position, layer in zip(profile.get("position") or [], profile.get("layer") or [],
                               strict=False):
        if spans and spans[-1][0] == layer:
            spans[-1] = (layer, spans[-1][1], position)
        else:
            spans.append((layer, position, position))
    return spans


def depleted_zone(profile: dict[str, Any], front: float | None) -> tuple[float, float] | None:
    """The extent (m) of the run of depleted points that reaches the front, or None.

    The engine marks the front (``quantities.depletion_front``); the zone is the contiguous
    stretch of profile points at zero concentration that touches it.
    """
    if front is None:
        return None
    positions = list(profile.get("position") or [])
    values = list(profile.get("concentration") or [])
    if not positions or len(values) != len(positions):
        return None
    top = max(abs(v) for v in values) or 1.0
    depleted = [abs(v) <= DEPLETED_FRACTION * top for v in values]
    runs: list[tuple[int, int]] = []
    start = None
    for index, flag in enumerate(depleted + [False]):
        if flag and start is None:
            start = index
        elif not flag and start is not None:
            runs.append((start, index - 1))
            start = None
    if not runs:
        return None
    spacing = max((b - a for a, b in zip(positions, positions[1:], strict=False)), default=0.0)

    def distance(run: tuple[int, int]) -> float:
        lo, hi = positions[run[0]], positions[run[1]]
        return 0.0 if lo <= front <= hi else min(abs(front - lo), abs(front - hi))

    nearest = min(runs, key=distance)
    if distance(nearest) > spacing:
        return None
    lo, hi = positions[nearest[0]], positions[nearest[1]]
    # The zone ends at the front itself, not at the last sampled zero.
    if abs(front - hi) <= abs(front - lo):
        hi = max(hi, front)
    else:
        lo = min(lo, front)
    return lo, hi


def partition_jumps(profile: dict[str, Any]) -> list[tuple[float, float, float]]:
    """(position, concentration before, after) wherever two points share a position."""
    positions = profile.get("position") or []
    values = profile.get("concentration") or []
    jumps = []
    for index in range(1, min(len(positions), len(values))):
        if positions[index] == positions[index - 1] and values[index] != values[index - 1]:
            jumps.append((positions[index], values[index - 1], values[index]))
    return jumps


def profile_svg(record: dict[str, Any], layer_names: list[str] | None = None) -> str | None:
    """SVG of ``record["series"]["profile"]``, or None when the record has no profile."""
    profile = ((record.get("series") or {}).get("profile")) or {}
    positions = list(profile.get("position") or [])
    values = profile.get("concentration") or []
    if len(positions) < 2 or len(values) != len(positions) or not all(
            isinstance(v, (int, float)) for v in values):
        return None
    units = profile.get("units") or {}
    layer_names = layer_names or []
    low, high = positions[0], positions[-1]
    unit_name, unit_size = length_scale(high if low >= 0 else high - low)
    xs = [p / unit_size for p in positions]
    front = _value((record.get("quantities") or {}).get("depletion_front"))
    zone = depleted_zone(profile, front)
    spans = layer_spans(profile)
    jumps = partition_jumps(profile)
    axis_name = "x" if (record.get("inputs") or {}).get("geometry") == "slab" else "r"

    with drawing():
        figure = new_figure()
        axes = figure.add_subplot()
        axes.patch.set_gid("plot-area")
        for index, (layer, start, end) in enumerate(spans):
            shade = axes.axvspan(start / unit_size, end / unit_size, color=LAYER_SHADES[
                layer % len(LAYER_SHADES)], alpha=0.85, linewidth=0, zorder=0)
            shade.set_gid(f"layer-{index}")
            name = layer_names[layer] if layer < len(layer_names) else f"layer {layer + 1}"
            if (end - start) / ((high - low) or 1.0) < LABEL_FRACTION_PER_CHAR * len(name):
                name = str(layer + 1)  # too narrow for the name; the caption lists them
            axes.text((start + end) / 2 / unit_size, 1.0, name,
                      transform=axes.get_xaxis_transform(), ha="center", va="bottom",
                      fontsize=8.5, color=MUTED, clip_on=False)
        for _layer, start, _end in spans[1:]:
            axes.axvline(start / unit_size, color=MUTED, linewidth=0.6, linestyle=(0, (2, 2)),
                         zorder=1)
        if zone is not None:
            patch = axes.axvspan(zone[0] / unit_size, zone[1] / unit_size, facecolor="none",
                                 edgecolor=DEPLETED, hatch="///", linewidth=0, zorder=1,
                                 label="depleted zone (no solute reaches it)")
            patch.set_gid("depleted-zone")
        if front is not None:
            line = axes.axvline(front / unit_size, color=DEPLETED, linewidth=1.4, zorder=3,
                                label=f"depletion front, {axis_name} = "
                                      f"{plain_number(front / unit_size)} {unit_name}")
            line.set_gid("depletion-front")
        (curve,) = axes.plot(xs, values, color=INK, linewidth=1.6, zorder=4,
                             label="concentration in the material")
        curve.set_gid("profile-line")
        if jumps:
            marks = axes.scatter([j[0] / unit_size for j in jumps for _ in (0, 1)],
                                 [c for j in jumps for c in (j[1], j[2])], s=14, color=INK,
                                 zorder=5, label="partition jump at an interface")
            marks.set_gid("partition-jumps")
        axes.set_xlim(xs[0], xs[-1])
        axes.margins(x=0)
        top = max(values) if max(values) > 0 else 1.0
        axes.set_ylim(min(0.0, min(values)), top * 1.08)
        axes.set_xlabel(f"{axis_name} / {unit_name}")
        axes.set_ylabel(f"C / {unit_text(units.get('concentration')) or '1'}")
        figure.legend(loc="outside lower center", ncols=2, fontsize=8)
        when = profile.get("time")
        description = "Concentration profile across the layers"
        if isinstance(when, (int, float)):
            description += f" at t = {plain_number(when)} s"
        if zone is not None:
            description += (f"; depleted zone from {plain_number(zone[0] / unit_size)} to "
                            f"{plain_number(zone[1] / unit_size)} {unit_name}")
        if jumps:
            description += f"; {len(jumps)} partition jump(s) at interfaces"
        return figure_svg(figure, title=description)
