"""The axial profiles of a case with flow along a lumen (the record's ``series.axial``) as a
table of the text report: position along the lumen, mixing-cup and wall concentrations, the
wall flux and the lowest concentration of the body at that position, each column in the unit
the series states (SI)."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from service.report.numbers import plain_number
from service.report.text_design import table_head

__all__ = ["axial_lines"]

#: The series' columns, in order, with their headings.
COLUMNS = (("position", "z"), ("mixing_cup", "mixing cup"), ("wall", "wall"),
           ("wall_flux", "wall flux"), ("concentration_min", "lowest in body"))


def axial_lines(record: Mapping[str, Any]) -> list[str]:
    """The table, or nothing where the record holds no axial series."""
    axial = (record.get("series") or {}).get("axial")
    if not isinstance(axial, Mapping) or not isinstance(axial.get("position"), list):
        return []
    units = axial.get("units") if isinstance(axial.get("units"), Mapping) else {}
    shown = [(key, title) for key, title in COLUMNS if isinstance(axial.get(key), list)]
    heads = [f"{title} [{units.get(key, '?')}]" for key, title in shown]
    width = max(14, *(len(h) for h in heads))
    lines = ["Along the lumen (inlet to outlet)",
             *table_head("  " + " ".join(f"{h:>{width}}" for h in heads))]
    for row in zip(*(axial[key] for key, _ in shown), strict=False):
        lines.append("  " + " ".join(f"{plain_number(v):>{width}}" for v in row))
    return lines
