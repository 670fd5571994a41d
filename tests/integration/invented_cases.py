"""Invented transport cases for the integration tests and the service benchmarks.

These are scenarios of our own (a planar membrane, a membrane with a coating), varied only so
that each case is distinct; they are inputs, never check values. What the tests check about
them is what the service and the queue do with them.
"""

from __future__ import annotations

from typing import Any


def single_layer_case(thickness_um: float, diffusivity: float, *,
                      tags: list[str]) -> dict[str, Any]:
    """A one-layer planar membrane between a fixed inner and a zero outer concentration."""
    return {
        "schema_version": 1,
        "title": f"Integration: membrane {thickness_um:g} um, D {diffusivity:.4g} m^2/s",
        "reference": "invented integration scenario",
        "tags": list(tags),
        "geometry": "slab",
        "inner": "0 m",
        "area": "1.5 cm^2",
        "layers": [{"name": "membrane", "thickness": f"{thickness_um:g} um",
                    "diffusivity": f"{diffusivity:.6g} m^2/s", "partition": 0.9}],
        "inner_boundary": {"kind": "concentration", "value": "2 mol/m^3"},
        "outer_boundary": {"kind": "concentration", "value": "0 mol/m^3"},
        "regime": {"kind": "steady"},
    }


def two_layer_case(thickness_um: float, diffusivity: float, *,
                   tags: list[str]) -> dict[str, Any]:
    """A coated planar membrane (coating outside) between two fixed concentrations."""
    return {
        "schema_version": 1,
        "title": f"Integration: coated membrane {thickness_um:g} um, D {diffusivity:.4g} m^2/s",
        "reference": "invented integration scenario",
        "tags": list(tags),
        "geometry": "slab",
        "inner": "0 m",
        "layers": [
            {"name": "membrane", "thickness": f"{thickness_um:g} um",
             "diffusivity": f"{diffusivity:.6g} m^2/s", "partition": 1.0},
            {"name": "coating", "thickness": "12 um", "diffusivity": "3e-11 m^2/s",
             "partition": 0.6},
        ],
        "inner_boundary": {"kind": "concentration", "value": "0.5 mol/m^3"},
        "outer_boundary": {"kind": "concentration", "value": "0.05 mol/m^3"},
        "regime": {"kind": "steady"},
    }


def distinct_steady_cases(count: int, *, tags: list[str]) -> list[dict[str, Any]]:
    """``count`` distinct steady cases, alternating single- and two-layer, with thickness and
    diffusivity stepped so that no two are the same document."""
    cases = []
    for index in range(count):
        thickness = 20.0 + 0.5 * (index // 2)
        diffusivity = 1.0e-10 * (1.0 + 0.001 * index)
        builder = single_layer_case if index % 2 == 0 else two_layer_case
        cases.append(builder(thickness, diffusivity, tags=tags))
    return cases


def uncertain_uptake_case(max_trials: int, *, tags: list[str]) -> dict[str, Any]:
    """A membrane with zero-order uptake whose diffusivity and partition coefficient are
    uncertain: its Monte Carlo runs to ``max_trials`` (three significant digits are not
    reached sooner) in blocks of 10,000 trials of about a quarter of a second each here."""
    case = single_layer_case(50.0, 1.0e-10, tags=tags)
    case["layers"][0]["partition"] = 1.0
    case["layers"][0]["reaction"] = {"kind": "zero_order", "rate": "0.05 mol/(m^3*s)"}
    case["inner_boundary"]["value"] = "1 mol/m^3"
    case["uncertainty"] = {
        "inputs": [{"field": "layers[0].diffusivity", "distribution": "lognormal",
                    "relative_sd": 0.3},
                   {"field": "layers[0].partition", "distribution": "normal",
                    "relative_sd": 0.1}],
        "significant_digits": 3, "max_trials": max_trials, "seed": 7}
    return case
