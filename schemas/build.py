"""Validate a case document and build what the engine and the service need from it.

:func:`validate_case` loads the document with :class:`schemas.case.CaseSchema`, adds the
cross-field rules, and on success returns a :class:`ValidatedCase`: the solver's SI ``Problem``,
the normalised document (every dimensional value as ``{"value": <SI>, "unit": "<SI unit>"}``,
defaults filled in) and the basis. On failure it raises :class:`schemas.errors.CaseError` with
every error found.
"""

from __future__ import annotations

import dataclasses
import re
from collections.abc import Mapping
from dataclasses import dataclass
from itertools import islice
from types import MappingProxyType
from typing import Any

from marshmallow import ValidationError

from schemas.case import (
    MAX_LAYERS,
    MAX_PROBES,
    MAX_REQUIREMENTS,
    MAX_SWEEP_VALUES,
    MAX_TAGS,
    MAX_TIMES,
    MAX_UNCERTAIN_INPUTS,
    CaseSchema,
    SIValue,
    case_basis,
    case_rule_errors,
)
from schemas.design_rules import DesignRuleError, design_request
from schemas.errors import CaseError, flatten_messages
from schemas.text import hidden_character_errors
from worker.engine import model
from worker.engine.boundaries import BOUNDARIES
from worker.engine.cost import DEFAULT_BUDGETS, Budgets, estimate_cost, over_budget
from worker.engine.design.request import LAW_OF_PROPAGATION, DesignRequest
from worker.engine.model import Problem
from worker.engine.reactions import REACTIONS
from worker.engine.units import si_unit

_CASE_SCHEMA = CaseSchema()
#: Strings with refused characters listed at most (a hostile document may hold many).
MAX_HIDDEN_ERRORS = 50

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
    design : worker.engine.design.request.DesignRequest
        The requirements, uncertainty, design limit and sweep the case asks for (SI).
    """

    problem: Problem
    normalised: dict
    original: dict
    basis: str
    design: DesignRequest = DesignRequest()


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
            }
        )
        if "loading" in layer:
            layers[-1]["loading"] = _si(layer["loading"], basis)
        else:
            layers[-1]["initial"] = (_si(layer["initial"], basis) if "initial" in layer
                                     else _zero("concentration", basis))
        if "solubility" in layer:
            layers[-1]["solubility"] = _si(layer["solubility"], basis)
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
                initial=_number(layer, "loading" if "loading" in layer else "initial"),
                solubility=_optional_number(layer, "solubility"),
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
            volume=_number(face, "volume"),
            initial=_number(face, "initial"),
            clearance=_number(face, "clearance"),
            flow_rate=_number(face, "flow_rate"),
            inlet=_number(face, "inlet"),
            diffusivity=_number(face, "diffusivity"),
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


#: The case's lists and their longest accepted length, checked before any item is validated
#: (marshmallow validates every item first, so 100,000 bad layers would give 100,000 errors).
LIST_LIMITS: tuple[tuple[tuple[str, ...], int], ...] = (
    (("layers",), MAX_LAYERS),
    (("probes",), MAX_PROBES),
    (("tags",), MAX_TAGS),
    (("requirements",), MAX_REQUIREMENTS),
    (("regime", "times"), MAX_TIMES),
    (("uncertainty", "inputs"), MAX_UNCERTAIN_INPUTS),
    (("uncertainty", "correlations"), 100),
    (("sweep", "values"), MAX_SWEEP_VALUES),
)


def oversized_lists(doc: Mapping) -> list[dict[str, str]]:
    """``{path, message}`` for every list of ``doc`` longer than :data:`LIST_LIMITS` allows."""
    errors = []
    for keys, limit in LIST_LIMITS:
        value: Any = doc
        for key in keys:
            value = value.get(key) if isinstance(value, Mapping) else None
        if isinstance(value, list) and len(value) > limit:
            errors.append({"path": ".".join(keys),
                           "message": f"at most {limit} items; got {len(value)}"})
    return errors


_LONE_SURROGATE = re.compile("[\ud800-\udfff]")


def lone_surrogate_paths(value: Any, path: str = "") -> list[dict[str, str]]:
    """``{path, message}`` for every string (key or value) of ``value`` that holds a lone UTF-16
    surrogate: JSON's ``"\\ud800"`` escape parses into one, and it is no character (it cannot
    be stored, hashed or printed as UTF-8)."""
    found: list[dict[str, str]] = []
    if isinstance(value, str):
        lone = _LONE_SURROGATE.search(value)
        if lone:
            found.append({"path": path, "message": f"holds a lone UTF-16 surrogate "
                          f"U+{ord(lone.group()[0]):04X} (an unpaired \\ud800-\\udfff escape), "
                          "which is not a character"})
    elif isinstance(value, Mapping):
        for key, item in value.items():
            key_text = str(key)
            item_path = f"{path}.{key_text}" if path else key_text
            if _LONE_SURROGATE.search(key_text):
                item_path = f"{path}.{ascii(key_text)}" if path else ascii(key_text)
                found.append({"path": item_path, "message": "a key holds a lone UTF-16 "
                              "surrogate, which is not a character"})
            found.extend(lone_surrogate_paths(item, item_path))
    elif isinstance(value, list | tuple):
        for index, item in enumerate(value):
            found.extend(lone_surrogate_paths(item, f"{path}[{index}]"))
    return found


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
    refused = oversized_lists(doc) or lone_surrogate_paths(doc)
    if refused:
        raise CaseError(refused)
    hidden = list(islice(hidden_character_errors(doc), MAX_HIDDEN_ERRORS + 1))
    if hidden:
        if len(hidden) > MAX_HIDDEN_ERRORS:
            hidden[MAX_HIDDEN_ERRORS:] = [("", f"more strings hold refused characters; the "
                                               f"first {MAX_HIDDEN_ERRORS} are listed")]
        raise CaseError({"path": p, "message": m} for p, m in hidden)
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


def validate_case(doc: Any, budgets: Budgets | None = DEFAULT_BUDGETS) -> ValidatedCase:
    """Validate a case document (schema_version 1) and build its SI problem.

    Parameters
    ----------
    doc : dict
        The case as parsed from JSON.
    budgets : worker.engine.cost.Budgets or None
        What checking the case may cost (:func:`worker.engine.cost.estimate_cost`, before any
        solve); a case over budget is invalid, each overrun naming the field to change. None:
        not estimated (a Monte Carlo block of a case accepted already).

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
    problem = _problem(data, basis)
    try:
        design = design_request(data, problem, basis)
    except DesignRuleError as exc:
        raise CaseError({"path": p, "message": m} for p, m in exc.errors) from None
    if design.requirement_times:
        times = tuple(sorted(set(problem.regime.times) | set(design.requirement_times)))
        problem = dataclasses.replace(
            problem, regime=dataclasses.replace(problem.regime, times=times))
    if budgets is not None:
        overruns = over_budget(estimate_cost(problem, design), budgets, problem.regime.kind)
        if overruns:
            raise CaseError({"path": o.path, "message": f"over the cost budget: {o.message}"}
                            for o in overruns)
    normalised = _normalise(data, basis)
    normalised.update(_normalise_design(data, design))
    return ValidatedCase(
        problem=problem,
        normalised=normalised,
        original=_copy_json(doc),
        basis=basis,
        design=design,
    )


def _si_number(value: float, unit: str) -> dict | float:
    return value if unit == "1" else {"value": value, "unit": unit}


def _normalise_design(data: Mapping, design: DesignRequest) -> dict:
    """The design fields with every value in SI (``{"value", "unit"}``; plain numbers for
    dimensionless quantities), in the document's order."""
    out: dict[str, Any] = {}
    if "requirements" in data:
        items = []
        for item, requirement in zip(data["requirements"], design.requirements, strict=True):
            unit = requirement.unit
            entry: dict[str, Any] = {"id": requirement.id, "quantity": requirement.quantity}
            if requirement.layer_name is not None:
                entry["layer"] = requirement.layer_name
            if requirement.at is not None:
                entry["at"] = {"value": requirement.at, "unit": "s"}
            if "between" in item:
                entry["between"] = [_si_number(requirement.low, unit),  # type: ignore[arg-type]
                                    _si_number(requirement.high, unit)]  # type: ignore[arg-type]
            elif "at_least" in item:
                entry["at_least"] = _si_number(requirement.low, unit)  # type: ignore[arg-type]
            else:
                entry["at_most"] = _si_number(requirement.high, unit)  # type: ignore[arg-type]
            if requirement.source is not None:
                entry["source"] = requirement.source
            items.append(entry)
        out["requirements"] = items
    if design.uncertainty is not None:
        block = data["uncertainty"]
        inputs = []
        for spec, item in zip(design.uncertainty.inputs, block["inputs"], strict=True):
            unit = spec.unit
            entry = {"field": spec.field.path, "distribution": spec.distribution}
            for key in ("sd", "low", "mode", "high"):
                if key in item:
                    entry[key] = _si_number(getattr(spec, key), unit)
            if "relative_sd" in item:
                entry["relative_sd"] = float(item["relative_sd"])
            inputs.append(entry)
        out["uncertainty"] = {
            "inputs": inputs,
            "correlations": [{"fields": [design.uncertainty.inputs[i].field.path,
                                         design.uncertainty.inputs[j].field.path],
                              "coefficient": rho}
                             for i, j, rho in design.uncertainty.correlations],
            "coverage": design.uncertainty.coverage,
            "significant_digits": design.uncertainty.significant_digits,
        }
        if design.uncertainty.method == LAW_OF_PROPAGATION:
            out["uncertainty"]["method"] = LAW_OF_PROPAGATION
        else:
            out["uncertainty"]["max_trials"] = design.uncertainty.max_trials
        if design.uncertainty.seed is not None:
            out["uncertainty"]["seed"] = design.uncertainty.seed
    if design.limit is not None:
        unit = design.limit.unit
        out["design_limit"] = {"vary": design.limit.field.path,
                               "requirement": design.limit.requirement,
                               "range": [_si_number(design.limit.low, unit),
                                         _si_number(design.limit.high, unit)]}
    if design.sweep is not None:
        unit = design.sweep.unit
        out["sweep"] = {"vary": design.sweep.field.path,
                        "values": [_si_number(v, unit) for v in design.sweep.values]}
    if design.measurements:
        sets = []
        for item, found in zip(data["measurements"], design.measurements, strict=True):
            measured: dict[str, Any] = {"id": found.id, "quantity": found.quantity}
            if found.layer_name is not None:
                measured["layer"] = found.layer_name
            if found.probe is not None:
                measured["probe"] = found.probe
            measured["times"] = [{"value": t, "unit": "s"} for t in found.times]
            measured["values"] = list(found.values)
            if found.unit != "1":
                measured["unit"] = found.unit
            measured["standard_uncertainty"] = list(found.standard_uncertainty)
            measured["use"] = found.use
            if "source" in item:
                measured["source"] = item["source"]
            sets.append(measured)
        out["measurements"] = sets
    if design.calibration is not None:
        out["calibration"] = {"parameters": [
            {"field": p.field.path, "bounds": [_si_number(p.low, p.unit),
                                               _si_number(p.high, p.unit)],
             "scale": "log" if p.log else "linear"}
            for p in design.calibration.parameters]}
    return out
