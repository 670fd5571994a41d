"""Validate a case document and build what the engine and the service need from it.

:func:`validate_case` loads the document with :class:`schemas.case.CaseSchema`, adds the
cross-field rules, and on success returns a :class:`ValidatedCase`: the solver's SI ``Problem``,
the normalised document (every dimensional value as ``{"value": <SI>, "unit": "<SI unit>"}``,
defaults filled in) and the basis. On failure it raises :class:`schemas.errors.CaseError` with
every error found.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from types import MappingProxyType
from typing import Any

from marshmallow import ValidationError

from schemas.case import CaseSchema, SIValue, case_basis, case_rule_errors
from schemas.errors import CaseError, flatten_messages
from worker.engine import model
from worker.engine.boundaries import BOUNDARIES
from worker.engine.model import Problem
from worker.engine.reactions import REACTIONS
from worker.engine.units import si_unit

_CASE_SCHEMA = CaseSchema()

#: Parameters of each reaction and boundary kind, in the order the normalised document lists them.
_REACTION_PARAMETERS = {
    name: tuple(p.name for p in kind.parameters) for name, kind in REACTIONS.items()
}
_BOUNDARY_PARAMETERS = {
    name: tuple(p.name for p in kind.parameters) for name, kind in BOUNDARIES.items()
}


@dataclass(frozen=True)
class ValidatedCase:
    """A case that passed every rule.

    Attributes
    ----------
    problem : worker.engine.model.Problem
        The case in SI, as the solvers take it.
    normalised : dict
        The case document with SI values and defaults filled in (what ``POST /v1/validate``
        returns); it is itself a valid case document.
    original : dict
        A copy of the document as submitted.
    basis : str
        ``"molar"`` or ``"mass"``.
    """

    problem: Problem
    normalised: dict
    original: dict
    basis: str


#: JSON leaves, shared by a copy (immutable); told apart before the abstract Mapping check.
_JSON_LEAVES = frozenset({str, float, int, bool, type(None)})


def _copy_json(value: Any) -> Any:
    """Copy of a JSON-like value (dicts and lists rebuilt, leaves shared: they are immutable)."""
    if type(value) in _JSON_LEAVES:
        return value
    if isinstance(value, Mapping):
        return {key: _copy_json(item) for key, item in value.items()}
    if isinstance(value, list | tuple):
        return [_copy_json(item) for item in value]
    return value


def _si(item: SIValue, basis: str) -> dict:
    return {"value": item.value, "unit": si_unit(item.kind, basis)}


def _zero(kind: str, basis: str) -> dict:
    return {"value": 0.0, "unit": si_unit(kind, basis)}


def _normalise_kind_object(obj: Mapping, parameters: tuple[str, ...], basis: str) -> dict:
    out: dict[str, Any] = {"kind": obj["kind"]}
    for key in parameters:
        if key in obj:
            item = obj[key]
            out[key] = _si(item, basis) if isinstance(item, SIValue) else item
    return out


def _normalise(data: Mapping, basis: str) -> dict:
    out: dict[str, Any] = {"schema_version": data["schema_version"], "title": data["title"]}
    if "reference" in data:
        out["reference"] = data["reference"]
    out["tags"] = list(data.get("tags", []))
    out["geometry"] = data["geometry"]
    out["inner"] = _si(data["inner"], basis)
    for key in ("length", "area"):
        if key in data:
            out[key] = _si(data[key], basis)
    layers = []
    for index, layer in enumerate(data["layers"]):
        reaction = layer.get("reaction", {"kind": "none"})
        layers.append(
            {
                "name": layer.get("name", f"layer {index + 1}"),
                "thickness": _si(layer["thickness"], basis),
                "diffusivity": _si(layer["diffusivity"], basis),
                "partition": float(layer.get("partition", 1.0)),
                "reaction": _normalise_kind_object(
                    reaction, _REACTION_PARAMETERS[reaction["kind"]], basis
                ),
                "initial": (
                    _si(layer["initial"], basis)
                    if "initial" in layer
                    else _zero("concentration", basis)
                ),
            }
        )
    out["layers"] = layers
    for side in ("inner_boundary", "outer_boundary"):
        face = data[side]
        out[side] = _normalise_kind_object(face, _BOUNDARY_PARAMETERS[face["kind"]], basis)
    regime = data["regime"]
    out["regime"] = {"kind": regime["kind"]}
    if regime["kind"] == "transient":
        out["regime"]["duration"] = _si(regime["duration"], basis)
        out["regime"]["times"] = [_si(t, basis) for t in regime["times"]]
    out["probes"] = [_si(p, basis) for p in data.get("probes", [])]
    out["tolerances"] = dict(data.get("tolerances", {}))
    return out


def _number(obj: Mapping, key: str, default: float = 0.0) -> float:
    item = obj.get(key)
    return item.value if isinstance(item, SIValue) else default


def _optional_number(obj: Mapping, key: str) -> float | None:
    item = obj.get(key)
    return item.value if isinstance(item, SIValue) else None


def _problem(data: Mapping, basis: str) -> Problem:
    layers = []
    for index, layer in enumerate(data["layers"]):
        reaction = layer.get("reaction", {"kind": "none"})
        parameters = _REACTION_PARAMETERS[reaction["kind"]]
        layers.append(
            model.Layer(
                name=layer.get("name", f"layer {index + 1}"),
                thickness=layer["thickness"].value,
                diffusivity=layer["diffusivity"].value,
                partition=float(layer.get("partition", 1.0)),
                reaction=model.Reaction(
                    kind=reaction["kind"],
                    **{key: _number(reaction, key) for key in parameters},
                ),
                initial=_number(layer, "initial"),
            )
        )

    def boundary(face: Mapping) -> model.Boundary:
        partition = face.get("partition")
        return model.Boundary(
            kind=face["kind"],
            value=_number(face, "value"),
            coefficient=_number(face, "coefficient"),
            bulk=_number(face, "bulk"),
            partition=None if partition is None else float(partition),
        )

    regime = data["regime"]
    if regime["kind"] == "transient":
        regime_model = model.Regime(
            kind="transient",
            duration=regime["duration"].value,
            times=tuple(t.value for t in regime["times"]),
        )
    else:
        regime_model = model.Regime(kind="steady")
    return model.Problem(
        geometry=data["geometry"],
        inner=data["inner"].value,
        layers=tuple(layers),
        inner_boundary=boundary(data["inner_boundary"]),
        outer_boundary=boundary(data["outer_boundary"]),
        regime=regime_model,
        probes=tuple(p.value for p in data.get("probes", [])),
        length=_optional_number(data, "length"),
        area=_optional_number(data, "area"),
        tolerances=MappingProxyType(dict(data.get("tolerances", {}))),
        basis=basis,
    )


def load_case(doc: Any) -> dict:
    """Load a case with every field and cross-field rule; the loaded data holds SIValues.

    Raises
    ------
    CaseError
        With every error found, field errors first, then cross-field ones.
    """
    if not isinstance(doc, Mapping):
        raise CaseError(
            [{"path": "", "message": f"a case document is a JSON object, got {type(doc).__name__}"}]
        )
    try:
        data = _CASE_SCHEMA.load(doc)
        errors: list[tuple[str, str]] = []
    except ValidationError as exc:
        data = exc.valid_data if isinstance(exc.valid_data, dict) else {}
        errors = list(flatten_messages(exc.messages))
    errors.extend(case_rule_errors(data))
    if errors:
        unique = list(dict.fromkeys(errors))  # first occurrence of each, in order
        raise CaseError({"path": p, "message": m} for p, m in unique)
    return data


def validate_case(doc: Any) -> ValidatedCase:
    """Validate a case document (schema_version 1) and build its SI problem.

    Parameters
    ----------
    doc : dict
        The case as parsed from JSON.

    Returns
    -------
    ValidatedCase

    Raises
    ------
    CaseError
        Listing every error with its path.
    """
    data = load_case(doc)
    basis = case_basis(data)
    return ValidatedCase(
        problem=_problem(data, basis),
        normalised=_normalise(data, basis),
        original=_copy_json(doc),
        basis=basis,
    )
