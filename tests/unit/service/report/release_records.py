"""Records of releases with dispersed drug and finite compartments for the report tests, built
here in the shapes of the record contract (not by the engine): the renderings must show what a
record says, whatever the engine computed.

The figures are invented for these tests; they check the rendering, not the physics.
"""

from __future__ import annotations

import copy
from typing import Any

DAY = 86400.0
TIMES = [0.5 * DAY, 1 * DAY, 3 * DAY, 7 * DAY, 14 * DAY, 21 * DAY]


def _si(value: float, unit: str) -> dict[str, Any]:
    return {"value": value, "unit": unit}


def _layer(name: str, thickness: float, loading: float | None = None) -> dict[str, Any]:
    layer: dict[str, Any] = {"name": name, "thickness": _si(thickness, "m"),
                             "diffusivity": _si(1e-15, "m^2/s"), "partition": 1.0,
                             "reaction": {"kind": "none"}}
    if loading is not None:
        layer["loading"] = _si(loading, "kg/m^3")
        layer["solubility"] = _si(1.0, "kg/m^3")
    return layer


def _base(layers: list[dict[str, Any]], inner: dict[str, Any], outer: dict[str, Any]
          ) -> dict[str, Any]:
    inputs = {"geometry": "slab", "inner": _si(0.0, "m"), "area": _si(1e-4, "m^2"),
              "layers": layers, "inner_boundary": inner, "outer_boundary": outer,
              "regime": {"kind": "transient", "duration": _si(21 * DAY, "s"),
                         "times": [_si(t, "s") for t in TIMES]}}
    n = len(TIMES)
    return {
        "run_id": "run-under-test", "case_id": "case-under-test", "case_sha256": "0" * 64,
        "status": "succeeded", "verdict": "pass", "submitted_by": "erin.engineer",
        "signoffs": [], "inputs": inputs,
        "quantities": {},
        "series": {"time": {"values": list(TIMES), "unit": "s"},
                   "released_inner": {"values": [0.0] * n, "unit": "kg"},
                   "released_outer": {"values": [1e-7 * (k + 1) for k in range(n)],
                                      "unit": "kg"},
                   "remaining": {"values": [1e-6 - 1e-7 * (k + 1) for k in range(n)],
                                 "unit": "kg"}},
        "checks": [{"name": "mass_balance", "value": 1e-10, "limit": 1e-8, "passed": True,
                    "detail": "test"}],
        "methods": [], "warnings": [], "provenance": {"engine_version": "test"},
        "design": {"status": "none_stated", "requirements": []},
        "caution": "",
    }


def coating_record() -> dict[str, Any]:
    """A 20 µm loaded matrix on an inert 5 µm primer, into a finite outer medium: the front
    recedes from the outer edge and the matrix is depleted at 10 d."""
    record = _base([_layer("primer", 5e-6), _layer("drug matrix", 20e-6, loading=100.0)],
                   {"kind": "symmetry"},
                   {"kind": "compartment", "volume": _si(2e-6, "m^3"),
                    "initial": _si(0.0, "kg/m^3"), "clearance": _si(1e-6, "1/s")})
    series = record["series"]
    series["release_fraction"] = {"values": [0.08, 0.12, 0.3, 0.55, 0.9, 0.97], "unit": "1"}
    series["front_position"] = {
        "values": [[24e-6], [23e-6], [18.5e-6], [11e-6], [None], [None]], "unit": "m",
        "layers": ["drug matrix"],
        "uncertainty": [[1e-9], [1e-9], [2e-9], [2e-9], [None], [None]]}
    series["compartment_outer"] = {
        "values": [0.004, 0.006, 0.015, 0.027, 0.044, 0.047], "unit": "kg/m^3",
        "uncertainty": [1e-7] * len(TIMES)}
    record["quantities"] = {
        "release_fraction_final": _si(0.97, "1"), "t50": _si(6.2 * DAY, "s"),
        "t90": _si(14 * DAY, "s"), "time_depleted": _si(10 * DAY, "s"),
        "time_depleted_layers": {"value": [10 * DAY], "unit": "s", "layers": ["drug matrix"]}}
    return record


def two_front_record() -> dict[str, Any]:
    """Two loaded layers, releasing through both faces of the middle one: the middle layer has
    an outer and an inner front; the inner layer is still loaded at the last time."""
    record = coating_record()
    record["inputs"]["layers"] = [_layer("core", 10e-6, loading=50.0),
                                  _layer("drug matrix", 20e-6, loading=100.0)]
    del record["series"]["compartment_outer"]
    record["inputs"]["outer_boundary"] = {"kind": "concentration", "value": _si(0.0, "kg/m^3")}
    record["series"]["front_position"] = {
        "values": [[10e-6, 29e-6], [10e-6, 28e-6], [9.5e-6, 25e-6], [9e-6, 21e-6],
                   [8.5e-6, None], [8e-6, None]],
        "unit": "m", "layers": ["core", "drug matrix"]}
    record["series"]["front_position_inner"] = {
        "values": [[None, 11e-6], [None, 12e-6], [None, 14e-6], [None, 17e-6], [None, None],
                   [None, None]],
        "unit": "m", "layers": ["core", "drug matrix"]}
    record["quantities"].pop("time_depleted")
    record["quantities"]["time_depleted_layers"] = {
        "value": [None, 10 * DAY], "unit": "s", "layers": ["core", "drug matrix"]}
    record["warnings"] = ["time_depleted: undissolved drug is left at the end of the duration"]
    return record


def permeation_record(receptor_status: str = "met") -> dict[str, Any]:
    """A 50 µm membrane between a donor compartment (inner face, 1 g/L at t = 0) and a
    receptor (outer face, empty at t = 0), with a requirement on the receptor at 7 d."""
    record = _base([_layer("membrane", 50e-6)],
                   {"kind": "compartment", "volume": _si(5e-6, "m^3"),
                    "initial": _si(1.0, "kg/m^3")},
                   {"kind": "compartment", "volume": _si(5e-6, "m^3")})
    series = record["series"]
    series["uptake"] = {"values": [-v for v in series["released_outer"]["values"]],
                        "unit": "kg"}
    series["compartment_inner"] = {"values": [0.99, 0.98, 0.93, 0.85, 0.74, 0.66],
                                   "unit": "kg/m^3", "uncertainty": [1e-6] * len(TIMES)}
    series["compartment_outer"] = {"values": [0.0002, 0.01, 0.07, 0.15, 0.26, 0.34],
                                   "unit": "kg/m^3", "uncertainty": [1e-6] * len(TIMES)}
    value = 0.15
    bound = 0.1 if receptor_status == "met" else 0.2
    record["design"] = {"status": receptor_status, "requirements": [
        {"id": "REC-7D", "quantity": "compartment_outer", "at": _si(7 * DAY, "s"),
         "value": value, "bound": bound, "margin": value - bound,
         "relative_margin": (value - bound) / bound, "numerical_uncertainty": 1e-6,
         "status": receptor_status, "unit": "kg/m^3", "source": "test bound"}]}
    record["quantities"] = {"time_lag": _si(0.4 * DAY, "s")}
    return record


def case_of(record: dict[str, Any], requirements: list[dict[str, Any]] | None = None
            ) -> dict[str, Any]:
    """A case document that goes with ``record`` (its inputs as given; only what the
    renderings read)."""
    case = copy.deepcopy(record["inputs"])
    case.update({"schema_version": 1, "title": "Rendering test: release physics"})
    if requirements:
        case["requirements"] = requirements
    return case


def plain_release_record() -> dict[str, Any]:
    """A release with neither dispersed drug nor compartments (today's records)."""
    record = _base([_layer("matrix", 20e-6)], {"kind": "symmetry"},
                   {"kind": "concentration", "value": _si(0.0, "kg/m^3")})
    record["series"]["release_fraction"] = {"values": [0.1, 0.2, 0.4, 0.6, 0.8, 0.9],
                                            "unit": "1"}
    record["quantities"] = {"t50": _si(5 * DAY, "s"), "t90": _si(21 * DAY, "s")}
    return record
