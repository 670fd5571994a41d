"""The problem the independent solvers work on, read from the case document a second way.

The primary solvers take the :class:`~worker.engine.model.Problem` that ``schemas.build`` makes
from values pint converted. The independent solvers take an :class:`IndependentProblem`, built
here from the document as submitted (already validated, so its structure is trusted) with
values converted by :mod:`worker.engine.unit_table`, and whose interpretive members (face
partitions, edges, outer radius, thickness, exponent, measure factor, solid centre, geometric
weight) are this module's own code. A slip in either reading of the case then shows as a
disagreement between the methods, and field by field in the ``inputs.interpretation`` check.

Defaults applied here, as the case format states them (README "The case"): a layer's name
``layer <i+1>``, partition 1, initial concentration 0 (``loading`` stands in for ``initial``),
no solubility limit, reaction ``none``; a boundary's partition falls back to that of the layer at
its face; a compartment's starting concentration and clearance are 0.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from fractions import Fraction
from functools import cached_property
from types import MappingProxyType
from typing import Any

import numpy as np

from worker.engine.design.paths import field_dimension, resolve
from worker.engine.design.targets import quantities
from worker.engine.model import Boundary, Layer, Problem, Reaction, Regime
from worker.engine.unit_table import (
    AMOUNT,
    LENGTH,
    MASS,
    TIME,
    Dimension,
    UnitTableError,
    table_quantity,
)

#: Shell-balance exponent n of each geometry: area grows as r^n.
_SHELL_EXPONENT = {"slab": 0, "cylinder": 1, "sphere": 2}
#: r^n-weighted amounts times this give per-area (slab), per-length (cylinder: the full
#: circumference 2 pi r) and total (sphere: the full surface 4 pi r^2) amounts.
_MEASURE = {"slab": 1.0, "cylinder": math.tau, "sphere": 2.0 * math.tau}
#: Gauss-Legendre nodes and weights on [-1, 1] (three points: exact for polynomials of degree
#: up to five, so for r^n C with n <= 2 and C constant in a layer; Abramowitz & Stegun 1964,
#: Table 25.4).
_GAUSS_NODES, _GAUSS_WEIGHTS = np.polynomial.legendre.leggauss(3)


def _times(a: Dimension, b: Dimension) -> Dimension:
    return tuple(x + y for x, y in zip(a, b, strict=True))  # type: ignore[return-value]


def _power(a: Dimension, k: int) -> Dimension:
    return tuple(k * x for x in a)  # type: ignore[return-value]


_PER_TIME = _power(TIME, -1)
_AREA = _power(LENGTH, 2)


def _quantity_dimensions(per: Dimension) -> tuple[Dimension, Dimension]:
    """(molar, mass) dimensions of an amount-like quantity times ``per``."""
    return _times(AMOUNT, per), _times(MASS, per)


#: Each dimensional field kind: the dimensions it may take (two for amount-like kinds).
_EXPECTED: Mapping[str, tuple[Dimension, ...]] = {
    "length": (LENGTH,),
    "area": (_AREA,),
    "time": (TIME,),
    "diffusivity": (_times(_AREA, _PER_TIME),),
    "rate_constant": (_PER_TIME,),
    "velocity": (_times(LENGTH, _PER_TIME),),
    "concentration": _quantity_dimensions(_power(LENGTH, -3)),
    "volumetric_rate": _quantity_dimensions(_times(_power(LENGTH, -3), _PER_TIME)),
    "flux": _quantity_dimensions(_times(_power(LENGTH, -2), _PER_TIME)),
    "amount": _quantity_dimensions(_power(LENGTH, 0)),
    "amount_per_area": _quantity_dimensions(_power(LENGTH, -2)),
    "amount_per_length": _quantity_dimensions(_power(LENGTH, -1)),
    "amount_rate": _quantity_dimensions(_PER_TIME),
    "amount_rate_per_length": _quantity_dimensions(_times(_power(LENGTH, -1), _PER_TIME)),
    "volume": (_power(LENGTH, 3),),
    "volume_flow_rate": (_times(_power(LENGTH, 3), _PER_TIME),),
}
#: The dimensional parameters of each reaction and boundary kind, by field name. Written out
#: here rather than read from the kinds' registries; a test holds the two lists together.
REACTION_FIELDS: Mapping[str, Mapping[str, str]] = {
    "none": {},
    "zero_order": {"rate": "volumetric_rate"},
    "first_order": {"rate_constant": "rate_constant"},
    "michaelis_menten": {"vmax": "volumetric_rate", "km": "concentration"},
}
BOUNDARY_FIELDS: Mapping[str, Mapping[str, str]] = {
    "concentration": {"value": "concentration"},
    "flux": {"value": "flux"},
    "mass_transfer": {"coefficient": "velocity", "bulk": "concentration"},
    "symmetry": {},
    "compartment": {"volume": "volume", "initial": "concentration", "clearance": "rate_constant"},
    "flow": {"flow_rate": "volume_flow_rate", "inlet": "concentration",
             "diffusivity": "diffusivity"},
}


class IndependentInputError(ValueError):
    """A case value the independent reading cannot take (a unit outside the table, a
    dimension other than the field's). ``path`` names the field (``layers[1].thickness``)."""

    def __init__(self, path: str, message: str) -> None:
        super().__init__(f"{path}: {message}")
        self.path = path
        self.message = message


@dataclass(frozen=True)
class TableValue:
    """One dimensional field as the table route read it: SI value and dimension vector."""

    value: float
    dimension: Dimension


@dataclass(frozen=True)
class IndependentProblem(Problem):
    """A :class:`Problem` whose interpretive members are computed here.

    ``table_values`` maps the path of every dimensional field the document gives
    (``layers[0].thickness``, ``regime.times[2]``) to its :class:`TableValue`.
    """

    table_values: Mapping[str, TableValue] = field(default_factory=dict)

    @property
    def exponent(self) -> int:
        return _SHELL_EXPONENT[self.geometry]

    @cached_property
    def edges(self) -> np.ndarray:
        """Inner face, interfaces, outer face (m): exact running sums, each rounded once."""
        running = Fraction(self.inner)
        positions = [float(running)]
        for layer in self.layers:
            running += Fraction(layer.thickness)
            positions.append(float(running))
        edges = np.array(positions)
        edges.flags.writeable = False
        return edges

    @cached_property
    def outer(self) -> float:
        return float(Fraction(self.inner) + sum(Fraction(ly.thickness) for ly in self.layers))

    @property
    def total_thickness(self) -> float:
        return float(sum(Fraction(ly.thickness) for ly in self.layers))

    @property
    def solid_centre(self) -> bool:
        return self.geometry in ("cylinder", "sphere") and self.inner == 0.0

    def face_partition(self, side: str) -> float:
        """The boundary's own partition coefficient where the case gives one, else that of the
        layer the face belongs to (inner face: first layer; outer face: last layer)."""
        if side == "inner":
            boundary, layer = self.inner_boundary, self.layers[0]
        elif side == "outer":
            boundary, layer = self.outer_boundary, self.layers[-1]
        else:
            raise ValueError(f"side: expected 'inner' or 'outer', got {side!r}")
        if boundary.partition is not None:
            return float(boundary.partition)
        return float(layer.partition)

    def geometric_weight(self, r: np.ndarray) -> np.ndarray:
        return np.power(np.asarray(r, dtype=float), _SHELL_EXPONENT[self.geometry])

    @property
    def measure_factor(self) -> float:
        return _MEASURE[self.geometry]


def initial_load(problem: IndependentProblem) -> float:
    """Initial amount per measure (per m^2 slab, per m cylinder, total sphere), in the amount
    unit of the basis: the measure factor times the sum over layers of the layer's initial
    concentration times the integral of r^n over the layer, by Gauss-Legendre quadrature."""
    n = problem.exponent
    total = 0.0
    edges = problem.edges
    for layer, a, b in zip(problem.layers, edges[:-1], edges[1:], strict=True):
        half = 0.5 * (b - a)
        nodes = 0.5 * (a + b) + half * _GAUSS_NODES
        total += layer.initial * half * float(np.dot(_GAUSS_WEIGHTS, nodes**n))
    return problem.measure_factor * total


class _Reader:
    """Reads dimensional fields by the table route and remembers each by its path."""

    def __init__(self) -> None:
        self.values: dict[str, TableValue] = {}

    def read(self, raw: Any, kind: str, path: str) -> float:
        try:
            value, dimension = table_quantity(raw)
        except UnitTableError as exc:
            raise IndependentInputError(path, f"the unit table cannot read {raw!r}: {exc}"
                                        ) from None
        if dimension not in _EXPECTED[kind]:
            raise IndependentInputError(
                path, f"expected dimension {_EXPECTED[kind]} (length, mass, time, amount), "
                      f"the table reads {raw!r} as {dimension}")
        self.values[path] = TableValue(value, dimension)
        return value

    def optional(self, obj: Mapping, key: str, kind: str, path: str) -> float | None:
        return self.read(obj[key], kind, f"{path}{key}") if key in obj else None


def _plain(obj: Mapping, key: str, default: float | None) -> float | None:
    value = obj.get(key)
    return default if value is None else float(value)


def _partition(spec: Mapping) -> float:
    value = spec.get("partition")
    return 1.0 if value is None else float(value)


def _reaction(reader: _Reader, spec: Mapping, path: str) -> Reaction:
    kind = spec["kind"]
    values = {name: reader.read(spec[name], dimension, f"{path}.{name}")
              for name, dimension in REACTION_FIELDS[kind].items() if name in spec}
    return Reaction(kind=kind, **values)


def _boundary(reader: _Reader, spec: Mapping, path: str) -> Boundary:
    kind = spec["kind"]
    values = {name: reader.read(spec[name], dimension, f"{path}.{name}")
              for name, dimension in BOUNDARY_FIELDS[kind].items() if name in spec}
    return Boundary(kind=kind, partition=_plain(spec, "partition", None), **values)


def _basis(values: Mapping[str, TableValue]) -> str:
    """``mass`` when any amount-like value carries a mass, else ``molar``."""
    return "mass" if any(v.dimension[1] == 1 for v in values.values()) else "molar"


def build_independent_problem(document: Mapping[str, Any]) -> IndependentProblem:
    """The independent solvers' problem from a validated case document (schema_version 1).

    Parameters
    ----------
    document : mapping
        The case as submitted (JSON-like), already validated.

    Raises
    ------
    IndependentInputError
        A dimensional value the unit table cannot read, naming its field.
    """
    reader = _Reader()
    inner = reader.read(document["inner"], "length", "inner")
    layers = []
    for index, spec in enumerate(document["layers"]):
        path = f"layers[{index}]"
        # ``loading`` and ``initial`` are alternatives (the case rules refuse both): either is
        # the layer's content at t = 0, dissolved and undissolved together.
        initial = reader.optional(spec, "initial", "concentration", f"{path}.")
        loading = reader.optional(spec, "loading", "concentration", f"{path}.")
        layers.append(Layer(
            name=str(spec.get("name", f"layer {index + 1}")),
            thickness=reader.read(spec["thickness"], "length", f"{path}.thickness"),
            diffusivity=reader.read(spec["diffusivity"], "diffusivity", f"{path}.diffusivity"),
            partition=_partition(spec),
            reaction=_reaction(reader, spec.get("reaction", {"kind": "none"}),
                               f"{path}.reaction"),
            initial=loading if loading is not None else (0.0 if initial is None else initial),
            solubility=reader.optional(spec, "solubility", "concentration", f"{path}."),
        ))
    inner_boundary = _boundary(reader, document["inner_boundary"], "inner_boundary")
    outer_boundary = _boundary(reader, document["outer_boundary"], "outer_boundary")
    regime_spec = document["regime"]
    if regime_spec["kind"] == "transient":
        stated = [reader.read(t, "time", f"regime.times[{i}]")
                  for i, t in enumerate(regime_spec["times"])]
        required = [reader.read(item["at"], "time", f"requirements[{i}].at")
                    for i, item in enumerate(document.get("requirements", [])) if "at" in item]
        required += [reader.read(t, "time", f"measurements[{i}].times[{j}]")
                     for i, item in enumerate(document.get("measurements", []))
                     for j, t in enumerate(item["times"])]
        regime = Regime(
            kind="transient",
            duration=reader.read(regime_spec["duration"], "time", "regime.duration"),
            times=tuple(sorted(set(stated) | set(required))),
        )
    else:
        regime = Regime(kind="steady")
    probes = tuple(reader.read(p, "length", f"probes[{i}]")
                   for i, p in enumerate(document.get("probes", [])))
    length = reader.optional(document, "length", "length", "")
    area = reader.optional(document, "area", "area", "")
    problem = IndependentProblem(
        geometry=str(document["geometry"]),
        inner=inner,
        layers=tuple(layers),
        inner_boundary=inner_boundary,
        outer_boundary=outer_boundary,
        regime=regime,
        probes=probes,
        length=length,
        area=area,
        tolerances=MappingProxyType({str(k): float(v)
                                     for k, v in document.get("tolerances", {}).items()}),
        basis=_basis(reader.values),
    )
    _read_design_values(reader, document, problem)
    return dataclasses.replace(problem, table_values=MappingProxyType(dict(reader.values)))


def _read_design_values(reader: _Reader, document: Mapping[str, Any], problem: Problem) -> None:
    """Read the dimensional values of the design fields (requirement bounds in the dimension
    of the quantity they bound, uncertainty parameters, limit range and sweep values in that of
    the input they vary), so that ``inputs.units`` compares them too. Plain numbers need no
    unit route."""

    def read(raw: Any, kind: str | None, path: str) -> None:
        if kind is not None and kind != "dimensionless" and not isinstance(raw, int | float):
            reader.read(raw, kind, path)

    offered = quantities(problem)
    for i, item in enumerate(document.get("requirements", [])):
        kind = offered[item["quantity"]].dimension
        for key in ("at_least", "at_most"):
            if key in item:
                read(item[key], kind, f"requirements[{i}].{key}")
        for j, raw in enumerate(item.get("between", [])):
            read(raw, kind, f"requirements[{i}].between[{j}]")

    def dimension(path: str) -> str | None:
        return field_dimension(problem, resolve(problem, path))

    block = document.get("uncertainty")
    for i, item in enumerate(block["inputs"] if block else []):
        varied = dimension(item["field"])
        for key in ("sd", "low", "mode", "high"):
            if key in item:
                read(item[key], varied, f"uncertainty.inputs[{i}].{key}")
    for name, key in (("design_limit", "range"), ("sweep", "values")):
        if name in document:
            varied = dimension(document[name]["vary"])
            for j, raw in enumerate(document[name][key]):
                read(raw, varied, f"{name}.{key}[{j}]")
    for i, item in enumerate((document.get("calibration") or {}).get("parameters", [])):
        varied = dimension(item["field"])
        for j, raw in enumerate(item["bounds"]):
            read(raw, varied, f"calibration.parameters[{i}].bounds[{j}]")
    for i, item in enumerate(document.get("measurements", [])):
        kind = offered[item["quantity"]].dimension
        if kind == "dimensionless":
            continue
        for key in ("values", "standard_uncertainty"):
            for j, number in enumerate(item.get(key, [])):
                read(f"{number!r} {item['unit']}", kind, f"measurements[{i}].{key}[{j}]")
