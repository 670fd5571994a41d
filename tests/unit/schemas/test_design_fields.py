"""The design fields of a case: every rule names its path and what was expected; valid fields
normalise to SI; requirement times join the output times in both readings of the case."""

from __future__ import annotations

import copy

import pytest

from schemas.build import validate_case
from schemas.errors import CaseError
from worker.engine import check_case
from worker.engine.independent_problem import build_independent_problem

STEADY = {
    "schema_version": 1, "title": "two-layer sphere", "geometry": "sphere", "inner": "0 m",
    "layers": [
        {"name": "core", "thickness": "100 um", "diffusivity": "1e-9 m^2/s",
         "reaction": {"kind": "zero_order", "rate": "0.01 mol/m^3/s"}},
        {"name": "shell", "thickness": "50 um", "diffusivity": "2e-9 m^2/s"},
    ],
    "inner_boundary": {"kind": "symmetry"},
    "outer_boundary": {"kind": "concentration", "value": "0.2 mol/m^3"},
    "regime": {"kind": "steady"},
}
TRANSIENT = {
    "schema_version": 1, "title": "plane sheet release", "geometry": "slab", "inner": "0 m",
    "layers": [{"name": "film", "thickness": "100 um", "diffusivity": "1e-13 m^2/s",
                "initial": "1 mol/m^3"}],
    "inner_boundary": {"kind": "symmetry"},
    "outer_boundary": {"kind": "concentration", "value": "0 mol/m^3"},
    "regime": {"kind": "transient", "duration": "30 d", "times": ["1 d", "10 d", "30 d"]},
}


def _with(base: dict, **extra) -> dict:
    doc = copy.deepcopy(base)
    doc.update(extra)
    return doc


def _errors(doc: dict) -> list[tuple[str, str]]:
    with pytest.raises(CaseError) as caught:
        validate_case(doc)
    return [(e["path"], e["message"]) for e in caught.value.errors]


@pytest.mark.parametrize(("requirement", "path", "words"), [
    ({"id": "A", "quantity": "t90", "at_most": "1 d"}, "requirements[0].quantity",
     "not a quantity this steady case reports"),
    ({"id": "A", "quantity": "concentration_min", "at_least": "1 m"},
     "requirements[0].at_least", "expected a concentration"),
    ({"id": "A", "quantity": "concentration_min", "layer": "Core", "at_least": "1 mol/m^3"},
     "requirements[0].layer", "no layer is named 'Core'"),
    ({"id": "A", "quantity": "flux_outer", "layer": "core", "at_least": "1 mol/m^2/s"},
     "requirements[0].layer", "not reported per layer"),
    ({"id": "A", "quantity": "concentration_min"}, "requirements[0]",
     "exactly one of at_least, at_most, between"),
    ({"id": "A", "quantity": "concentration_min", "at_least": "1 mol/m^3",
      "at_most": "2 mol/m^3"}, "requirements[0]", "exactly one of"),
    ({"id": "A", "quantity": "concentration_min", "between": ["2 mol/m^3", "1 mol/m^3"]},
     "requirements[0].between", "below the second"),
    ({"id": "A", "quantity": "flux_outer", "at_most": 3}, "requirements[0].at_most",
     "the unit is missing"),
    ({"id": "A", "quantity": "concentration_min", "at_least": "1 mg/mL"},
     "requirements[0].at_least", "molar basis"),
    ({"id": "A", "quantity": "consumption_per_area", "at_most": "1 mol/m^2/s"},
     "requirements[0].quantity", "not a quantity this steady case reports"),
    ({"id": "A", "quantity": "concentration_min", "at": "1 d", "at_least": "1 mol/m^3"},
     "requirements[0].at", "not a series"),
])
def test_a_wrong_requirement_names_its_path(requirement, path, words):
    errors = _errors(_with(STEADY, requirements=[requirement]))
    assert any(p == path and words in m for p, m in errors), errors


def test_requirement_ids_are_unique():
    doc = _with(STEADY, requirements=[
        {"id": "A", "quantity": "concentration_min", "at_least": "0 mol/m^3"},
        {"id": "A", "quantity": "concentration_max", "at_most": "1 mol/m^3"}])
    assert ("requirements[1].id", "'A' is used by an earlier requirement: ids are unique in "
            "the case") in _errors(doc)


def test_a_series_requirement_needs_its_time_within_the_run():
    errors = _errors(_with(TRANSIENT, requirements=[
        {"id": "A", "quantity": "release_fraction", "at_least": 0.5}]))
    assert any(p == "requirements[0].at" and "give the time" in m for p, m in errors)
    errors = _errors(_with(TRANSIENT, requirements=[
        {"id": "A", "quantity": "release_fraction", "at": "31 d", "at_least": 0.5}]))
    assert any(p == "requirements[0].at" and "after the end of the run" in m for p, m in errors)


@pytest.mark.parametrize(("block", "path", "words"), [
    ({"inputs": [{"field": "layers[2].diffusivity", "distribution": "lognormal",
                  "relative_sd": 0.3}]}, "uncertainty.inputs[0].field", "the case has 2 layers"),
    ({"inputs": [{"field": "layers[0].reaction.vmax", "distribution": "lognormal",
                  "relative_sd": 0.3}]}, "uncertainty.inputs[0].field", "has no vmax"),
    ({"inputs": [{"field": "layers[0].diffusivity", "distribution": "uniform",
                  "low": "1 mm", "high": "2 mm"}]}, "uncertainty.inputs[0].low",
     "expected a diffusivity"),
    ({"inputs": [{"field": "layers[0].diffusivity", "distribution": "uniform",
                  "low": "2e-9 m^2/s"}]}, "uncertainty.inputs[0]", "takes low and high"),
    ({"inputs": [{"field": "layers[0].diffusivity", "distribution": "triangular",
                  "low": "1e-9 m^2/s", "mode": "3e-9 m^2/s", "high": "2e-9 m^2/s"}]},
     "uncertainty.inputs[0].mode", "between low and high"),
    ({"inputs": [{"field": "layers[0].diffusivity", "distribution": "normal", "sd": "1 m"}]},
     "uncertainty.inputs[0].sd", "expected a diffusivity"),
    ({"inputs": [{"field": "layers[0].thickness", "distribution": "lognormal",
                  "relative_sd": 0.1},
                 {"field": "layers[0].thickness", "distribution": "lognormal",
                  "relative_sd": 0.2}]}, "uncertainty.inputs[1].field", "already uncertain"),
    ({"inputs": [{"field": "layers[0].thickness", "distribution": "lognormal",
                  "relative_sd": 0.1}],
      "correlations": [{"fields": ["layers[0].thickness", "layers[1].thickness"],
                        "coefficient": 0.5}]},
     "uncertainty.correlations[0].fields[1]", "not among the uncertain inputs"),
    ({"inputs": [{"field": "layers[0].thickness", "distribution": "lognormal",
                  "relative_sd": 0.1}], "max_trials": 5000},
     "uncertainty.max_trials", "at least 20000 trials"),
])
def test_a_wrong_uncertainty_block_names_its_path(block, path, words):
    errors = _errors(_with(STEADY, uncertainty=block))
    assert any(p == path and words in m for p, m in errors), errors


def test_a_limit_and_a_sweep_are_checked_against_the_varied_field():
    doc = _with(STEADY,
                requirements=[{"id": "A", "quantity": "concentration_min", "at_least": 0.0}],
                design_limit={"vary": "layers[0].thickness", "requirement": "B",
                              "range": ["10 um", "1 mm"]},
                sweep={"vary": "outer_boundary.value", "values": ["0.1 mol/m^3", "2 m"]})
    errors = _errors(doc)
    assert ("design_limit.requirement", "no requirement has the id 'B'") in errors
    assert any(p == "requirements[0].at_least" and "the unit is missing" in m
               for p, m in errors)
    assert any(p == "sweep.values[1]" and "expected a concentration" in m for p, m in errors)
    doc["requirements"][0]["at_least"] = "0 mol/m^3"
    doc["design_limit"].update(requirement="A", range=["0 um", "1 mm"])
    assert any(p == "design_limit.range[0]" and "must be > 0" in m for p, m in _errors(doc))


def test_valid_design_fields_normalise_to_si():
    doc = _with(
        TRANSIENT,
        requirements=[{"id": "DI-14", "quantity": "t90", "at_most": "21 d", "source": "DI rev B"},
                      {"id": "DI-13", "quantity": "release_fraction", "at": "7 d",
                       "between": [0.2, 0.6]}],
        uncertainty={"inputs": [{"field": "layers[0].diffusivity", "distribution": "normal",
                                 "relative_sd": 0.1}], "seed": 7},
        sweep={"vary": "layers[0].thickness", "values": ["50 um", "0.1 mm"]})
    validated = validate_case(doc)
    normalised = validated.normalised
    assert normalised["requirements"][0]["at_most"] == {"value": 21 * 86400.0, "unit": "s"}
    assert normalised["requirements"][1]["between"] == [0.2, 0.6]
    assert normalised["requirements"][1]["at"] == {"value": 7 * 86400.0, "unit": "s"}
    assert normalised["sweep"]["values"] == [{"value": 5e-5, "unit": "m"},
                                             {"value": 1e-4, "unit": "m"}]
    spec = validated.design.uncertainty.inputs[0]
    assert spec.sd == pytest.approx(0.1 * 1e-13)
    # The normalised document is itself a valid case that reads the same.
    assert validate_case(normalised).design == validated.design


def test_requirement_times_join_the_output_times_in_both_readings():
    doc = _with(TRANSIENT, requirements=[
        {"id": "A", "quantity": "release_fraction", "at": "7 d", "at_least": 0.1}])
    validated = validate_case(doc)
    expected = tuple(d * 86400.0 for d in (1, 7, 10, 30))
    assert validated.problem.regime.times == expected
    assert build_independent_problem(doc).regime.times == expected


def test_inputs_units_covers_the_design_values():
    doc = _with(STEADY, requirements=[
        {"id": "A", "quantity": "concentration_min", "layer": "core", "at_least": "5 umol/L"}])
    record = check_case(doc)
    units = next(c for c in record["checks"] if c["name"] == "inputs.units")
    assert units["passed"]
    # The seven dimensional values of the case itself, and the bound.
    assert units["detail"].startswith("8 dimensional values")
    assert record["design"]["requirements"][0]["bound"] == pytest.approx(5e-3)
