"""Transient cases through the schema: a valid document reaches run_transient; bad transient
input is refused by ``schemas.validate_case`` with the field's path."""

from __future__ import annotations

import copy

import pytest

from schemas import CaseError, validate_case
from worker.engine.transient import run_transient

CASE = {
    "schema_version": 1,
    "title": "Invented test scenario: slab matrix releasing into a sink",
    "geometry": "slab",
    "inner": "0 m",
    "area": "1 cm^2",
    "layers": [{"name": "matrix", "thickness": "200 um", "diffusivity": "1e-11 m^2/s",
                "partition": 1.0, "initial": "2 mol/m^3"}],
    "inner_boundary": {"kind": "symmetry"},
    "outer_boundary": {"kind": "concentration", "value": "0 mol/m^3"},
    "regime": {"kind": "transient", "duration": "2 h", "times": ["10 min", "1 h", "2 h"]},
    "probes": ["100 um"],
}


def _paths(error: CaseError) -> list[str]:
    return [item["path"] for item in error.errors]


def test_valid_transient_case_runs():
    problem = validate_case(copy.deepcopy(CASE)).problem
    outcome = run_transient(problem)
    assert outcome.series["time"]["values"] == [600.0, 3600.0, 7200.0]
    assert outcome.series["released_outer"]["unit"] == "mol"
    assert all(c.passed for c in outcome.checks), [c.as_dict() for c in outcome.checks]


def test_time_after_the_duration_is_refused():
    case = copy.deepcopy(CASE)
    case["regime"]["times"] = ["1 h", "3 h"]
    with pytest.raises(CaseError) as caught:
        validate_case(case)
    assert any(path.startswith("regime.times") for path in _paths(caught.value))


def test_negative_initial_load_is_refused():
    case = copy.deepcopy(CASE)
    case["layers"][0]["initial"] = "-1 mol/m^3"
    with pytest.raises(CaseError) as caught:
        validate_case(case)
    assert any("layers" in path and "initial" in path for path in _paths(caught.value))


def test_missing_times_are_refused():
    case = copy.deepcopy(CASE)
    case["regime"]["times"] = []
    with pytest.raises(CaseError) as caught:
        validate_case(case)
    assert any(path.startswith("regime.times") for path in _paths(caught.value))
