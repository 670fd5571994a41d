"""Records with design blocks for the report tests, built here (not by the engine): the
renderings must show what a record says, whatever the engine computed.

The figures are invented for these tests; they check the rendering, not the physics.
"""

from __future__ import annotations

import copy
from typing import Any

CASE: dict[str, Any] = {
    "schema_version": 1,
    "title": "Rendering test: a capsule with two oxygen requirements",
    "geometry": "sphere", "inner": "0 m",
    "layers": [{"name": "core", "thickness": "100 um", "diffusivity": "1e-9 m^2/s",
                "partition": 1.0},
               {"name": "shell", "thickness": "100 um", "diffusivity": "1e-9 m^2/s",
                "partition": 1.0}],
    "inner_boundary": {"kind": "symmetry"},
    "outer_boundary": {"kind": "concentration", "value": "0.1 mol/m^3"},
    "regime": {"kind": "steady"},
    "requirements": [
        {"id": "REQ-LOW", "quantity": "concentration_min", "layer": "core",
         "at_least": "0.005 mol/m^3", "source": "design input 7 rev A"},
        {"id": "REQ-HIGH", "quantity": "flux_outer", "at_most": "0 mol/m^2/s"},
    ],
}


def requirement(rid: str, quantity: str, value: float | None, bound: Any, margin: float | None,
                status: str, unit: str, **extra: Any) -> dict[str, Any]:
    entry = {"id": rid, "quantity": quantity, "value": value, "bound": bound, "margin": margin,
             "relative_margin": None if margin is None or not isinstance(bound, float) or not bound
             else margin / abs(bound),
             "numerical_uncertainty": 1e-9, "status": status, "unit": unit}
    entry.update(extra)
    return entry


def record(design_status: str = "not_met", verdict: str = "pass",
           status: str = "succeeded") -> dict[str, Any]:
    """A succeeded record whose design misses REQ-LOW (by default) and meets REQ-HIGH."""
    low_status = {"met": "met", "indeterminate": "indeterminate"}.get(design_status, "not_met")
    low_value = {"met": 0.009, "indeterminate": 0.005}.get(design_status, 0.002)
    requirements = [
        requirement("REQ-LOW", "concentration_min", low_value, 0.005, low_value - 0.005,
                    low_status, "mol/m^3", layer="core", source="design input 7 rev A"),
        requirement("REQ-HIGH", "flux_outer", -2e-7, 0.0, 2e-7, "met", "mol/(m^2*s)"),
    ]
    design = ({"status": "none_stated", "requirements": []} if design_status == "none_stated"
              else {"status": design_status, "requirements": requirements})
    return {
        "run_id": "run-under-test", "case_id": "case-under-test", "case_sha256": "0" * 64,
        "status": status, "verdict": verdict, "submitted_by": "erin.engineer", "signoffs": [],
        "quantities": {"flux_outer": {"value": -2e-7, "unit": "mol/(m^2*s)"},
                       "concentration_min": {"value": low_value, "unit": "mol/m^3"}},
        "series": {},
        "checks": [{"name": "mass_balance", "value": 1e-9, "limit": 1e-6,
                    "passed": verdict == "pass", "detail": "test"}],
        "methods": [], "warnings": [], "provenance": {},
        "design": design,
        "caution": "test caution: results support, but do not replace, design verification "
                   "testing and qualified review",
    }


def case(without_requirements: bool = False) -> dict[str, Any]:
    document = copy.deepcopy(CASE)
    if without_requirements:
        document.pop("requirements")
    return document


UNCERTAINTY: dict[str, Any] = {
    "trials": 4096, "seed": 20261204, "sampler": "latin_hypercube", "converged": True,
    "quantities": {"concentration_min[core]": {
        "mean": 0.004, "standard_uncertainty": 0.001, "interval": [0.002, 0.006],
        "coverage": 0.95,
        "histogram": {"edges": [0.001, 0.003, 0.005, 0.007], "counts": [1000, 2000, 1096]}}},
    "requirements": {"REQ-LOW": {"probability_met": 0.27, "standard_error": 0.007}},
    "sensitivity": {"concentration_min[core]": {
        "layers[0].diffusivity": {"elasticity": 0.8, "first_index": 0.61, "total_index": 0.66},
        "outer_boundary.value": {"elasticity": 1.1, "first_index": 0.3, "total_index": 0.35}}},
    "verification": {"trials_checked": 7, "all_passed": True,
                     "largest_numerical_uncertainty": 3e-9},
}

LIMIT: dict[str, Any] = {"vary": "layers[0].thickness", "value": 8.1e-5, "unit": "m",
                         "requirement": "REQ-LOW", "met_side": "below",
                         "bracket": [5e-5, 2e-3], "verdict": "pass"}

NO_LIMIT: dict[str, Any] = {"vary": "layers[0].thickness", "value": None, "unit": "m",
                            "requirement": "REQ-LOW", "met_side": None,
                            "bracket": [5e-5, 6e-5], "verdict": None,
                            "reason": "the requirement is met over the whole range"}

SWEEP: dict[str, Any] = {"vary": "layers[0].thickness", "unit": "m",
                         "values": [1e-4, 1.5e-4, 2e-4],
                         "quantities": {"concentration_min[core]": [0.006, 0.003, 0.0]},
                         "requirements": {"REQ-LOW": ["met", "not_met", "not_met"]},
                         "verdicts": ["pass", "pass", "fail"]}


def full_record() -> dict[str, Any]:
    """The default record with every design block."""
    full = record()
    full.update(uncertainty=copy.deepcopy(UNCERTAINTY), design_limit=dict(LIMIT),
                sweep=copy.deepcopy(SWEEP))
    return full
