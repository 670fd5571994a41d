"""The two checks of a case's inputs: each unit converted by two routes, and each field as the
primary and the independent problem read it.

``inputs.units``
    Every dimensional value the case gives, as pint converted it (the normalised document's
    ``{"value", "unit"}``) against the table route (:mod:`worker.engine.unit_table`): the
    worst relative difference, naming its field. A value whose SI unit has another dimension
    than the table's reading counts as a difference of 1.
``inputs.interpretation``
    The primary :class:`~worker.engine.model.Problem` against the
    :class:`~worker.engine.independent_problem.IndependentProblem`, field by field: geometry,
    inner, every layer (thickness, diffusivity, partition, reaction, initial), each face's
    partition by each problem's own ``face_partition``, the boundary values, probes, times,
    length and area, edges, outer radius, thickness, exponent, measure factor, and the initial
    load per measure (the primary's by the finite-volume mesh of the method of lines, the
    independent one's by Gauss-Legendre quadrature).

Both compare numbers relative to the larger magnitude (0 when equal, 1 when one is zero or a
categorical field differs, 2 for opposite signs), so their limit is a few units of round-off.
"""

from __future__ import annotations

import math
import re
from collections.abc import Iterator, Mapping
from typing import Any

import numpy as np

from worker.engine.fv_mesh import build_mesh
from worker.engine.independent_problem import (
    IndependentInputError,
    IndependentProblem,
    TableValue,
    initial_load,
)
from worker.engine.limits import check_limit
from worker.engine.model import Boundary, Problem
from worker.engine.outcome import Check
from worker.engine.unit_table import UnitTableError, table_unit

__all__ = [
    "interpretation_check",
    "interpretation_differences",
    "primary_initial_load",
    "relative_difference",
    "unit_route_differences",
    "unit_routes_check",
    "unread_inputs_checks",
]

_INDEX_RE = re.compile(r"\[(\d+)\]")
#: The reaction parameters compared (every field of ``model.Reaction`` but its kind).
_REACTION_PARAMETERS = ("rate", "rate_constant", "vmax", "km")
_BOUNDARY_PARAMETERS = ("value", "coefficient", "bulk", "volume", "initial", "clearance",
                        "flow_rate", "inlet", "diffusivity")


def relative_difference(a: Any, b: Any) -> float:
    """|a - b| / max(|a|, |b|) for numbers (0 when equal, NaN when either is NaN); 0 or 1 for
    anything else (strings, None, booleans), by equality."""
    numeric = (int, float, np.floating, np.integer)
    if (isinstance(a, numeric) and isinstance(b, numeric)
            and not isinstance(a, bool) and not isinstance(b, bool)):
        a, b = float(a), float(b)
        if a == b:
            return 0.0
        if math.isnan(a) or math.isnan(b):
            return math.nan
        return abs(a - b) / max(abs(a), abs(b))
    return 0.0 if a == b else 1.0


def _worst(items: list[tuple[str, float]]) -> tuple[str, float]:
    if not items:
        return "none", 0.0
    return max(items, key=lambda kv: (math.isnan(kv[1]), kv[1]))


# --------------------------------------------------------------------------------- inputs.units


#: Lists of numbers in a measurement set that share the set's ``unit``.
_SHARED_UNIT_LISTS = ("values", "standard_uncertainty")


def _si_leaves(node: Any, path: str = "") -> Iterator[tuple[str, Mapping]]:
    """``(path, {"value", "unit"})`` of every SI value in a normalised document: each
    ``{"value", "unit"}`` and each number of a measurement set's ``values`` and
    ``standard_uncertainty`` lists, which share the set's SI ``unit``."""
    if isinstance(node, Mapping):
        if set(node) == {"value", "unit"}:
            yield path, node
            return
        shared = node.get("unit") if isinstance(node.get("values"), list) else None
        for key, item in node.items():
            where = f"{path}.{key}" if path else str(key)
            if isinstance(shared, str) and key in _SHARED_UNIT_LISTS and isinstance(item, list):
                for index, number in enumerate(item):
                    yield f"{where}[{index}]", {"value": number, "unit": shared}
                continue
            yield from _si_leaves(item, where)
    elif isinstance(node, list):
        for index, item in enumerate(node):
            yield from _si_leaves(item, f"{path}[{index}]")


def _has_path(document: Mapping, path: str) -> bool:
    node: Any = document
    for part in path.split("."):
        key = _INDEX_RE.split(part)
        name, indices = key[0], [int(k) for k in key[1::2]]
        if name:
            if not isinstance(node, Mapping) or name not in node:
                return False
            node = node[name]
        for index in indices:
            if not isinstance(node, list) or index >= len(node):
                return False
            node = node[index]
    return True


def unit_route_differences(table_values: Mapping[str, TableValue], normalised: Mapping,
                           original: Mapping) -> list[tuple[str, float, str]]:
    """``(path, relative difference, note)`` for every SI value of the normalised document
    that the original document gives; a value given but not read by the table route counts
    as a difference of 1 (a field the second route missed)."""
    out = []
    for path, si in _si_leaves(normalised):
        if not _has_path(original, path):
            continue  # a default filled in, not a converted value
        read = table_values.get(path)
        if read is None:
            out.append((path, 1.0, "not read by the table route"))
            continue
        try:
            si_unit = table_unit(str(si["unit"]))
        except UnitTableError as exc:
            out.append((path, 1.0, f"SI unit {si['unit']!r} unreadable: {exc}"))
            continue
        if si_unit.dimension != read.dimension:
            out.append((path, 1.0, f"dimension {read.dimension} by the table, "
                                   f"{si_unit.dimension} by pint's SI unit {si['unit']!r}"))
            continue
        pint_value = float(si["value"]) * float(si_unit.factor)
        out.append((path, relative_difference(pint_value, read.value),
                    f"pint {pint_value!r} vs table {read.value!r} {si['unit']}"))
    return out


def unit_routes_check(problem: Problem, independent: IndependentProblem, normalised: Mapping,
                      original: Mapping) -> Check:
    """``inputs.units``: the worst relative difference between the two unit routes."""
    rows = unit_route_differences(independent.table_values, normalised, original)
    limit = check_limit(problem, "inputs.units")
    if not rows:
        return Check("inputs.units", 0.0, limit, True, "no dimensional values to convert")
    path, value, note = max(rows, key=lambda row: (math.isnan(row[1]), row[1]))
    worst = f"worst: {path}: {note}" if value != 0.0 else "every value identical"
    return Check("inputs.units", value, limit, bool(value <= limit),
                 f"{len(rows)} dimensional values converted by pint and by the unit table "
                 f"(SI Brochure 2019, NIST SP 811); {worst}")


def unread_inputs_checks(problem: Problem, error: IndependentInputError) -> list[Check]:
    """Both inputs checks, failed, when the independent reading could not be built."""
    detail = (f"the second unit route cannot read {error.path}: {error.message}; the "
              "independent methods used the primary's inputs")
    return [Check(name, None, check_limit(problem, name), False, detail)
            for name in ("inputs.units", "inputs.interpretation")]


# ----------------------------------------------------------------------- inputs.interpretation


def primary_initial_load(problem: Problem) -> float:
    """Initial amount per measure by the primary's own code: two finite-volume cells per layer
    (its r^n-weighted volume from the mesh) times the layer's initial concentration, times
    the measure factor, as the method of lines starts."""
    mesh = build_mesh(problem, 2)
    initial = np.array([problem.layers[j].initial for j in mesh.layer_index])
    return problem.measure_factor * float(initial @ mesh.volumes)


def _boundary_rows(name: str, a: Boundary, b: Boundary) -> list[tuple[str, Any, Any]]:
    rows: list[tuple[str, Any, Any]] = [(f"{name}.kind", a.kind, b.kind),
                                        (f"{name}.partition", a.partition, b.partition)]
    rows += [(f"{name}.{key}", getattr(a, key), getattr(b, key))
             for key in _BOUNDARY_PARAMETERS]
    return rows


def interpretation_differences(primary: Problem, independent: Problem
                               ) -> list[tuple[str, float]]:
    """``(field, relative difference)`` of every field the two problems should agree on."""
    return [(name, relative_difference(a, b)) for name, a, b in _field_pairs(primary, independent)]


def _field_pairs(primary: Problem, independent: Problem) -> list[tuple[str, Any, Any]]:
    """``(field, primary's value, independent value)`` of every field compared."""
    rows: list[tuple[str, Any, Any]] = [
        ("geometry", primary.geometry, independent.geometry),
        ("basis", primary.basis, independent.basis),
        ("inner", primary.inner, independent.inner),
        ("length", primary.length, independent.length),
        ("area", primary.area, independent.area),
        ("layers (count)", len(primary.layers), len(independent.layers)),
        ("regime.kind", primary.regime.kind, independent.regime.kind),
        ("regime.duration", primary.regime.duration, independent.regime.duration),
        ("regime.times (count)", len(primary.regime.times), len(independent.regime.times)),
        ("probes (count)", len(primary.probes), len(independent.probes)),
        ("tolerances", dict(primary.tolerances), dict(independent.tolerances)),
    ]
    for i, (a, b) in enumerate(zip(primary.layers, independent.layers, strict=False)):
        rows += [(f"layers[{i}].thickness", a.thickness, b.thickness),
                 (f"layers[{i}].diffusivity", a.diffusivity, b.diffusivity),
                 (f"layers[{i}].partition", a.partition, b.partition),
                 (f"layers[{i}].initial", a.initial, b.initial),
                 (f"layers[{i}].solubility", a.solubility, b.solubility),
                 (f"layers[{i}].reaction.kind", a.reaction.kind, b.reaction.kind)]
        rows += [(f"layers[{i}].reaction.{key}", getattr(a.reaction, key),
                  getattr(b.reaction, key)) for key in _REACTION_PARAMETERS]
    for side in ("inner", "outer"):
        rows.append((f"face_partition({side})", primary.face_partition(side),
                     independent.face_partition(side)))
    rows += _boundary_rows("inner_boundary", primary.inner_boundary, independent.inner_boundary)
    rows += _boundary_rows("outer_boundary", primary.outer_boundary, independent.outer_boundary)
    rows += [(f"regime.times[{i}]", a, b) for i, (a, b) in
             enumerate(zip(primary.regime.times, independent.regime.times, strict=False))]
    rows += [(f"probes[{i}]", a, b) for i, (a, b) in
             enumerate(zip(primary.probes, independent.probes, strict=False))]
    # what each problem derives from those fields by its own code (after them: on a tie the
    # worst row named is the field itself)
    rows += [
        ("exponent", primary.exponent, independent.exponent),
        ("solid_centre", primary.solid_centre, independent.solid_centre),
        ("measure_factor", primary.measure_factor, independent.measure_factor),
        ("outer", primary.outer, independent.outer),
        ("total_thickness", primary.total_thickness, independent.total_thickness),
    ]
    rows.append(("edges (count)", primary.edges.size, independent.edges.size))
    rows += [(f"edges[{i}]", float(a), float(b)) for i, (a, b) in
             enumerate(zip(primary.edges, independent.edges, strict=False))]
    weights = zip(primary.geometric_weight(primary.edges),
                  independent.geometric_weight(independent.edges), strict=False)
    rows += [(f"geometric_weight(edges[{i}])", float(a), float(b))
             for i, (a, b) in enumerate(weights)]
    if primary.regime.kind == "transient" and isinstance(independent, IndependentProblem) \
            and len(primary.layers) == len(independent.layers):  # a steady case holds no load
        rows.append(("initial load per measure", primary_initial_load(primary),
                     initial_load(independent)))
    return rows


def interpretation_check(primary: Problem, independent: Problem) -> Check:
    """``inputs.interpretation``: the worst relative difference between the two problems."""
    pairs = _field_pairs(primary, independent)
    rows = [(name, relative_difference(a, b)) for name, a, b in pairs]
    name, value = _worst(rows)
    limit = check_limit(primary, "inputs.interpretation")
    shown = next((f"{a!r} vs {b!r}" for row, a, b in pairs if row == name), "")
    worst = f"worst: {name}: {shown}" if value != 0.0 else "every field identical"
    return Check("inputs.interpretation", value, limit, bool(value <= limit),
                 f"{len(rows)} fields of the primary and the independent problem (each "
                 f"reading the case by its own code); {worst}")
