"""Case field paths (``layers[0].diffusivity``, ``outer_boundary.bulk``...) on the SI ``Problem``.

The requirements, the input uncertainty, the design limits and the sweeps of a case name the
numeric inputs they vary by their JSON path in the case document. The case's field names are
the model's attribute names (``schemas.build``), so a path reads and replaces one attribute of
``Problem``, one of its ``Layer``s, that layer's ``Reaction`` or a face's ``Boundary``:

* ``inner``, ``length``, ``area``;
* ``layers[i].thickness`` | ``diffusivity`` | ``partition`` | ``initial`` | ``loading`` (the
  same attribute, ``Layer.initial``) | ``solubility`` (where the case gives one);
* ``layers[i].reaction.<p>``, ``p`` a parameter the layer's reaction kind declares
  (``worker.engine.reactions``: ``rate``, ``rate_constant``, ``vmax``, ``km``);
* ``inner_boundary.<p>`` / ``outer_boundary.<p>``, ``p`` a parameter the face's boundary kind
  declares (``worker.engine.boundaries``: ``value``, ``coefficient``, ``bulk``, ``partition``).

Values are SI (m, m^2/s, amount/m^3, ...), as everywhere in the engine.
"""

from __future__ import annotations

import dataclasses
import math
import re
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

from worker.engine.model import Boundary, Layer, Problem
from worker.engine.parameters import Parameter

__all__ = [
    "FieldPathError",
    "FieldRef",
    "field_dimension",
    "field_domain",
    "parse_field",
    "replaced",
    "resolve",
    "value_of",
    "with_values",
]

#: Fields of a layer itself, with their dimension (``worker.engine.units.KINDS``) and sign.
LAYER_FIELDS: Mapping[str, Parameter] = {
    "thickness": Parameter("thickness", "length", "positive"),
    "diffusivity": Parameter("diffusivity", "diffusivity", "positive"),
    "partition": Parameter("partition", None, "positive"),
    "initial": Parameter("initial", "concentration", "non_negative"),
    "loading": Parameter("loading", "concentration", "non_negative"),
    "solubility": Parameter("solubility", "concentration", "positive"),
}
#: Layer fields whose model attribute has another name: the case's ``loading`` is the layer's
#: content at t = 0, ``Layer.initial``, as the case's ``initial`` is.
LAYER_ATTRIBUTES: Mapping[str, str] = {"loading": "initial"}
#: Fields of the problem itself. ``inner`` is a position: a slab's may be any number, a radius
#: is >= 0 (``worker.engine.exact_steady.validate_problem``).
PROBLEM_FIELDS: Mapping[str, Parameter] = {
    "inner": Parameter("inner", "length", "non_negative"),
    "length": Parameter("length", "length", "positive"),
    "area": Parameter("area", "area", "positive"),
}
BOUNDARY_SIDES = ("inner_boundary", "outer_boundary")

_LAYER_PATH = re.compile(r"layers\[(\d+)\]\.(\w+)(?:\.(\w+))?")


class FieldPathError(ValueError):
    """A field path that does not name a numeric input of the case; ``path`` and ``message``
    as the case errors give them (``{path, message}``)."""

    def __init__(self, path: str, message: str):
        super().__init__(f"{path}: {message}")
        self.path = path
        self.message = message


@dataclass(frozen=True)
class FieldRef:
    """One numeric input of a case, parsed from its path.

    ``part`` is ``"problem"`` (``name`` one of inner, length, area), ``"layer"`` (``layer`` its
    index, ``name`` a layer field), ``"reaction"`` (``layer`` its index, ``name`` the reaction
    parameter) or ``"inner_boundary"`` / ``"outer_boundary"`` (``name`` the boundary parameter).
    ``path`` is the case path it came from, written out canonically.
    """

    part: str
    name: str
    layer: int | None = None

    @property
    def path(self) -> str:
        if self.part == "problem":
            return self.name
        if self.part == "layer":
            return f"layers[{self.layer}].{self.name}"
        if self.part == "reaction":
            return f"layers[{self.layer}].reaction.{self.name}"
        return f"{self.part}.{self.name}"

    def __str__(self) -> str:
        return self.path


def _expected_paths() -> str:
    return ("inner, length, area, "
            "layers[i].<thickness|diffusivity|partition|initial|loading|solubility>, "
            "layers[i].reaction.<parameter>, inner_boundary.<parameter> or "
            "outer_boundary.<parameter>")


def parse_field(path: str) -> FieldRef:
    """The field a path names, by its form only (no case needed); FieldPathError otherwise."""
    if not isinstance(path, str) or not path:
        raise FieldPathError(str(path), f"expected a field path: {_expected_paths()}")
    if path in PROBLEM_FIELDS:
        return FieldRef("problem", path)
    side, dot, name = path.partition(".")
    if side in BOUNDARY_SIDES:
        if not dot or not re.fullmatch(r"\w+", name):
            raise FieldPathError(path, f"expected {side}.<parameter of its kind>")
        return FieldRef(side, name)
    match = _LAYER_PATH.fullmatch(path)
    if match is None:
        raise FieldPathError(path, f"expected a field path: {_expected_paths()}")
    index, field, sub = int(match.group(1)), match.group(2), match.group(3)
    if sub is not None:
        if field != "reaction":
            raise FieldPathError(path, f"layers[{index}].{field} has no fields; expected "
                                 f"layers[{index}].reaction.<parameter>")
        return FieldRef("reaction", sub, index)
    if field not in LAYER_FIELDS:
        raise FieldPathError(path, f"a layer has no numeric field {field!r}; expected one of: "
                             f"{', '.join(LAYER_FIELDS)} or reaction.<parameter>")
    return FieldRef("layer", field, index)


def _boundary(problem: Problem, side: str) -> Boundary:
    return problem.inner_boundary if side == "inner_boundary" else problem.outer_boundary


def _parameter(problem: Problem, ref: FieldRef) -> Parameter:
    """The declared parameter of ``ref`` in ``problem``; FieldPathError where there is none."""
    if ref.part == "problem":
        if ref.name == "length" and problem.geometry != "cylinder":
            raise FieldPathError(ref.path, f"length applies to a cylinder; the case is a "
                                 f"{problem.geometry}")
        if ref.name == "area" and problem.geometry != "slab":
            raise FieldPathError(ref.path, f"area applies to a slab; the case is a "
                                 f"{problem.geometry}")
        if getattr(problem, ref.name) is None:
            raise FieldPathError(ref.path, f"the case gives no {ref.name}")
        return PROBLEM_FIELDS[ref.name]
    if ref.part in BOUNDARY_SIDES:
        boundary = _boundary(problem, ref.part)
        kind = boundary.condition
        for parameter in kind.parameters:
            if parameter.name == ref.name:
                if parameter.name == "partition" and boundary.partition is None:
                    raise FieldPathError(
                        ref.path, f"the case gives no {ref.part}.partition (the layer's "
                        "partition applies there); vary the layer's partition instead")
                return parameter
        names = ", ".join(p.name for p in kind.parameters) or "no numeric parameters"
        raise FieldPathError(ref.path, f"{kind.noun} has no {ref.name}; it has: {names}")
    assert ref.layer is not None
    count = len(problem.layers)
    if ref.layer >= count:
        raise FieldPathError(ref.path, f"layers[{ref.layer}]: the case has {count} "
                             f"layer{'s' if count != 1 else ''}")
    if ref.part == "layer":
        if ref.name == "solubility" and problem.layers[ref.layer].solubility is None:
            raise FieldPathError(ref.path, f"layers[{ref.layer}] has no solubility (no limit): "
                                 "the case gives none to vary")
        return LAYER_FIELDS[ref.name]
    law = problem.layers[ref.layer].reaction.law
    for parameter in law.parameters:
        if parameter.name == ref.name:
            return parameter
    names = ", ".join(p.name for p in law.parameters)
    if not names:
        raise FieldPathError(ref.path, f"layers[{ref.layer}] has no reaction (kind "
                             f"{law.name!r}): no reaction parameters")
    raise FieldPathError(ref.path, f"{law.noun} has no {ref.name}; it has: {names}")


def resolve(problem: Problem, path: str | FieldRef) -> FieldRef:
    """The field ``path`` names, checked against ``problem`` (layer count, the kinds' declared
    parameters, the geometry); FieldPathError naming what was expected otherwise."""
    ref = parse_field(path) if isinstance(path, str) else path
    _parameter(problem, ref)
    return ref


def field_dimension(problem: Problem, ref: FieldRef) -> str | None:
    """The dimension of the field, a key of ``worker.engine.units.KINDS`` (``"length"``,
    ``"diffusivity"``, ``"concentration"``...), None for a plain number (a partition)."""
    return _parameter(problem, ref).dimension


def field_domain(problem: Problem, ref: FieldRef) -> tuple[float, bool]:
    """(lower bound, open) of the field's physical domain: ``(0, True)`` for a positive field
    (thickness, diffusivity, partition, km, ...), ``(0, False)`` for a non-negative one
    (concentrations, rates), ``(-inf, True)`` for any real (a face flux, a slab's ``inner``)."""
    parameter = _parameter(problem, ref)
    if ref.part == "problem" and ref.name == "inner" and problem.geometry == "slab":
        return -math.inf, True
    if parameter.sign == "positive":
        return 0.0, True
    if parameter.sign == "non_negative":
        return 0.0, False
    return -math.inf, True


def value_of(problem: Problem, ref: FieldRef) -> float:
    """The field's SI value in ``problem``."""
    _parameter(problem, ref)
    if ref.part == "problem":
        return float(getattr(problem, ref.name))
    if ref.part in BOUNDARY_SIDES:
        return float(getattr(_boundary(problem, ref.part), ref.name))
    assert ref.layer is not None
    layer = problem.layers[ref.layer]
    if ref.part == "layer":
        return float(getattr(layer, LAYER_ATTRIBUTES.get(ref.name, ref.name)))
    return float(getattr(layer.reaction, ref.name))


def with_values(problem: Problem, values: Mapping[FieldRef, float]) -> Problem:
    """A new ``Problem`` with the given fields replaced (SI values); the cached properties
    (``edges``, ``outer``) are those of the new problem. FieldPathError for a field the case
    does not have."""
    return replaced(problem, {ref: float(value) for ref, value in values.items()})


def replaced(problem: Problem, values: Mapping[FieldRef, Any]) -> Problem:
    """``with_values`` without turning the values into floats: with arrays over trials the
    result carries them in its fields (for batched solvers that read the fields by name and
    broadcast; its ``edges`` are then not meaningful)."""
    top: dict[str, Any] = {}
    layer_changes: dict[int, dict[str, Any]] = {}
    reaction_changes: dict[int, dict[str, Any]] = {}
    boundary_changes: dict[str, dict[str, Any]] = {}
    for ref, value in values.items():
        _parameter(problem, ref)
        if ref.part == "problem":
            top[ref.name] = value
        elif ref.part in BOUNDARY_SIDES:
            boundary_changes.setdefault(ref.part, {})[ref.name] = value
        else:
            assert ref.layer is not None
            if ref.part == "layer":
                name = LAYER_ATTRIBUTES.get(ref.name, ref.name)
                layer_changes.setdefault(ref.layer, {})[name] = value
            else:
                reaction_changes.setdefault(ref.layer, {})[ref.name] = value
    changes: dict[str, Any] = dict(top)
    if layer_changes or reaction_changes:
        layers: list[Layer] = list(problem.layers)
        for index in set(layer_changes) | set(reaction_changes):
            layer = layers[index]
            if index in reaction_changes:
                layer = dataclasses.replace(
                    layer, reaction=dataclasses.replace(layer.reaction,
                                                        **reaction_changes[index]))
            layers[index] = dataclasses.replace(layer, **layer_changes.get(index, {}))
        changes["layers"] = tuple(layers)
    for side, fields in boundary_changes.items():
        changes[side] = dataclasses.replace(_boundary(problem, side), **fields)
    # dataclasses.replace builds a new instance: its cached properties start empty.
    return dataclasses.replace(problem, **changes)
