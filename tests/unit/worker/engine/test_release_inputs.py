"""The release fields (issue 14) in the independent reading of the case
(worker.engine.independent_problem) and in both inputs checks (worker.engine.input_checks):
``loading``, ``solubility`` and a compartment's ``volume``, ``initial``, ``clearance`` are read
by the unit table as well as by pint, and a value either route mis-reads (injected, high and
low) fails ``inputs.units`` or ``inputs.interpretation`` naming the field.

Check values are unit definitions (SI Brochure 2019: 1 mg/mL = 1 kg/m^3, 1 mL = 1e-6 m^3,
1 h = 3600 s); the documents are invented scenarios used only as inputs.
"""

from __future__ import annotations

import copy
import dataclasses

import pytest

from schemas import validate_case
from worker.engine.independent_problem import build_independent_problem
from worker.engine.input_checks import (
    interpretation_check,
    unit_route_differences,
    unit_routes_check,
)

#: Invented: a two-layer coating, the inner layer loaded above its solubility.
COATING = {
    "schema_version": 1, "title": "Fixture: loaded coating", "geometry": "slab", "inner": 0,
    "area": "1 cm^2",
    "layers": [{"name": "drug layer", "thickness": "40 um", "diffusivity": "2e-14 m^2/s",
                "loading": "150 mg/mL", "solubility": "1.5 mg/mL"},
               {"name": "top coat", "thickness": "10 um", "diffusivity": "1e-14 m^2/s",
                "solubility": {"value": 800, "unit": "ug/mL"}}],
    "inner_boundary": {"kind": "symmetry"},
    "outer_boundary": {"kind": "concentration", "value": "0 mg/mL"},
    "regime": {"kind": "transient", "duration": "30 d", "times": ["1 d", "30 d"]},
}


def test_the_table_route_reads_loading_and_solubility():
    problem = build_independent_problem(COATING)
    drug, top = problem.layers
    assert drug.initial == 150.0 and drug.solubility == 1.5
    assert top.initial == 0.0 and top.solubility == pytest.approx(0.8, rel=1e-15)
    assert problem.table_values["layers[0].loading"].value == 150.0
    assert problem.table_values["layers[1].solubility"].dimension == (-3, 1, 0, 0)
    assert "layers[0].initial" not in problem.table_values


def test_both_routes_agree_on_the_loaded_case():
    validated = validate_case(COATING)
    independent = build_independent_problem(COATING)
    check = unit_routes_check(validated.problem, independent, validated.normalised, COATING)
    assert check.passed and check.value == 0.0
    paths = {row[0] for row in unit_route_differences(independent.table_values,
                                                      validated.normalised, COATING)}
    assert {"layers[0].loading", "layers[0].solubility", "layers[1].solubility"} <= paths
    assert interpretation_check(validated.problem, independent).passed


@pytest.mark.parametrize("factor", [1 + 1e-9, 1 - 1e-9, 1e3, 1e-3])
@pytest.mark.parametrize("path", [("layers", 0, "loading"), ("layers", 0, "solubility"),
                                  ("layers", 1, "solubility")])
def test_units_fail_when_pint_misreads_a_release_field(factor, path):
    validated = validate_case(COATING)
    normalised = copy.deepcopy(validated.normalised)
    normalised[path[0]][path[1]][path[2]]["value"] *= factor
    check = unit_routes_check(validated.problem, build_independent_problem(COATING), normalised,
                              COATING)
    assert not check.passed
    assert f"worst: layers[{path[1]}].{path[2]}:" in check.detail


def test_units_fail_when_the_table_route_misses_a_release_field():
    validated = validate_case(COATING)
    independent = build_independent_problem(COATING)
    missed = dict(independent.table_values)
    del missed["layers[0].loading"]
    rows = unit_route_differences(missed, validated.normalised, COATING)
    assert ("layers[0].loading", 1.0, "not read by the table route") in rows


@pytest.mark.parametrize("factor", [1 + 1e-9, 1 - 1e-9])
@pytest.mark.parametrize("field", ["initial", "solubility"])
def test_interpretation_fails_when_a_reading_of_the_load_differs(factor, field):
    validated = validate_case(COATING)
    independent = build_independent_problem(COATING)
    layers = list(independent.layers)
    layers[0] = dataclasses.replace(layers[0], **{field: getattr(layers[0], field) * factor})
    check = interpretation_check(validated.problem,
                                 dataclasses.replace(independent, layers=tuple(layers)))
    assert not check.passed
    assert f"layers[0].{field}" in check.detail or "initial load" in check.detail


def test_interpretation_fails_when_one_reading_drops_the_solubility():
    validated = validate_case(COATING)
    independent = build_independent_problem(COATING)
    layers = (dataclasses.replace(independent.layers[0], solubility=None),
              independent.layers[1])
    check = interpretation_check(validated.problem,
                                 dataclasses.replace(independent, layers=layers))
    assert not check.passed and check.value == 1.0
    assert "layers[0].solubility" in check.detail


# --- a compartment face --------------------------------------------------------------------
# The table route reads the document as submitted and needs no kind registry; the pint route's
# normalised document is written out here as schemas.build states it (SI values).

_MEDIUM = {"kind": "compartment", "volume": "2 mL", "initial": "0.1 mg/mL",
           "clearance": "0.5 1/h", "partition": 2.0}


def _with_medium() -> tuple[dict, dict]:
    original = copy.deepcopy(COATING)
    original["outer_boundary"] = dict(_MEDIUM)
    normalised = copy.deepcopy(validate_case(COATING).normalised)
    normalised["outer_boundary"] = {
        "kind": "compartment", "volume": {"value": 2e-6, "unit": "m^3"},
        "initial": {"value": 0.1, "unit": "kg/m^3"},
        "partition": 2.0, "clearance": {"value": 0.5 / 3600.0, "unit": "1/s"}}
    return original, normalised


def test_the_table_route_reads_a_compartment():
    original, normalised = _with_medium()
    problem = build_independent_problem(original)
    face = problem.outer_boundary
    assert face.kind == "compartment" and face.partition == 2.0
    assert face.volume == pytest.approx(2e-6, rel=1e-15)
    assert face.initial == pytest.approx(0.1, rel=1e-15)
    assert face.clearance == pytest.approx(0.5 / 3600.0, rel=1e-15)
    check = unit_routes_check(validate_case(COATING).problem, problem, normalised, original)
    assert check.passed, check.detail
    assert check.value < 1e-15


@pytest.mark.parametrize("factor", [1 + 1e-9, 1 - 1e-9])
@pytest.mark.parametrize("key", ["volume", "initial", "clearance"])
def test_units_fail_when_a_compartment_field_is_misread(factor, key):
    original, normalised = _with_medium()
    normalised["outer_boundary"][key]["value"] *= factor
    check = unit_routes_check(validate_case(COATING).problem,
                              build_independent_problem(original), normalised, original)
    assert not check.passed
    assert f"worst: outer_boundary.{key}:" in check.detail


@pytest.mark.parametrize("factor", [1 + 1e-9, 1 - 1e-9])
@pytest.mark.parametrize("key", ["volume", "initial", "clearance"])
def test_interpretation_compares_the_compartment_fields(factor, key):
    original, _ = _with_medium()
    independent = build_independent_problem(original)
    face = independent.outer_boundary
    primary = dataclasses.replace(independent, outer_boundary=dataclasses.replace(
        face, **{key: getattr(face, key) * factor}))
    check = interpretation_check(primary, independent)
    assert not check.passed
    assert f"worst: outer_boundary.{key}:" in check.detail
    assert interpretation_check(independent, independent).passed
