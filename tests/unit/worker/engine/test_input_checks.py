"""The inputs checks (worker.engine.input_checks): each passes on a case read alike both ways
and fails when one reading is off, either way.

Check values are unit definitions (SI Brochure 2019: 1 um = 1e-6 m, 1 mg/mL = 1 kg/m^3, 1 h =
3600 s) and the case format's defaults; the injected errors are relative changes of 1e-9 (far
above round-off, far below what any other check would see) up and down.
"""

from __future__ import annotations

import copy
import dataclasses
import math

import pytest

from worker.engine import input_checks, model, run
from worker.engine.independent_problem import build_independent_problem
from worker.engine.input_checks import (
    interpretation_check,
    relative_difference,
    unit_route_differences,
    unit_routes_check,
)
from worker.engine.limits import INPUT_LIMITS
from worker.engine.model import Boundary, Layer, Problem, Reaction, Regime

ORIGINAL = {
    "schema_version": 1, "title": "membrane", "geometry": "slab", "inner": "0 m",
    "area": "2 cm^2",
    "layers": [{"name": "membrane", "thickness": "40 um", "diffusivity": "1e-11 m^2/s",
                "partition": 2.0, "reaction": {"kind": "first_order",
                                               "rate_constant": "0.36 1/h"}}],
    "inner_boundary": {"kind": "concentration", "value": "3 mg/mL", "partition": 0.5},
    "outer_boundary": {"kind": "concentration", "value": "0 mg/mL"},
    "regime": {"kind": "steady"},
    "probes": ["10 um"],
}
#: The same case in SI as the primary route states it (unit definitions above).
NORMALISED = {
    "schema_version": 1, "title": "membrane", "tags": [], "geometry": "slab",
    "inner": {"value": 0.0, "unit": "m"}, "area": {"value": 2e-4, "unit": "m^2"},
    "layers": [{"name": "membrane", "thickness": {"value": 4e-5, "unit": "m"},
                "diffusivity": {"value": 1e-11, "unit": "m^2/s"}, "partition": 2.0,
                "reaction": {"kind": "first_order",
                             "rate_constant": {"value": 1e-4, "unit": "1/s"}},
                "initial": {"value": 0.0, "unit": "kg/m^3"}}],
    "inner_boundary": {"kind": "concentration", "value": {"value": 3.0, "unit": "kg/m^3"},
                       "partition": 0.5},
    "outer_boundary": {"kind": "concentration", "value": {"value": 0.0, "unit": "kg/m^3"}},
    "regime": {"kind": "steady"},
    "probes": [{"value": 1e-5, "unit": "m"}],
    "tolerances": {},
}


def _primary() -> Problem:
    return Problem(
        geometry="slab", inner=0.0, area=2e-4,
        layers=(Layer("membrane", 4e-5, 1e-11, 2.0, Reaction("first_order", rate_constant=1e-4)),),
        inner_boundary=Boundary("concentration", value=3.0, partition=0.5),
        outer_boundary=Boundary("concentration", value=0.0),
        probes=(1e-5,), basis="mass",
    )


def test_relative_difference():
    assert relative_difference(1.0, 1.0) == 0.0
    assert relative_difference(2.0, 1.0) == 0.5
    assert relative_difference(-1.0, 1.0) == 2.0
    assert relative_difference(0.0, 1e-300) == 1.0
    assert math.isnan(relative_difference(math.nan, 1.0))
    assert relative_difference("slab", "sphere") == 1.0
    assert relative_difference(None, None) == 0.0 and relative_difference(None, 1.0) == 1.0
    assert relative_difference(True, True) == 0.0 and relative_difference(True, False) == 1.0


# --- inputs.units ----------------------------------------------------------------------------


def test_units_pass_when_both_routes_agree():
    independent = build_independent_problem(ORIGINAL)
    check = unit_routes_check(_primary(), independent, NORMALISED, ORIGINAL)
    assert check.passed and check.value == 0.0 and check.limit == INPUT_LIMITS["inputs"]
    paths = {path for path, _, _ in unit_route_differences(independent.table_values,
                                                           NORMALISED, ORIGINAL)}
    # every value the case gives, and not the default filled in for the initial state
    assert paths == {"inner", "area", "layers[0].thickness", "layers[0].diffusivity",
                     "layers[0].reaction.rate_constant", "inner_boundary.value",
                     "outer_boundary.value", "probes[0]"}


@pytest.mark.parametrize("factor", [1 + 1e-9, 1 - 1e-9, 1e3, 1e-3])
@pytest.mark.parametrize("path", [("layers", 0, "thickness"), ("layers", 0, "reaction",
                                                               "rate_constant")])
def test_units_fail_when_pint_reads_a_value_high_or_low(factor, path):
    normalised = copy.deepcopy(NORMALISED)
    node = normalised
    for key in path:
        node = node[key]
    node["value"] *= factor
    check = unit_routes_check(_primary(), build_independent_problem(ORIGINAL), normalised,
                              ORIGINAL)
    assert not check.passed
    assert check.value == pytest.approx(abs(factor - 1) / max(factor, 1), rel=1e-6)
    named = f"layers[0].{'.'.join(str(k) for k in path[2:])}"
    assert f"worst: {named}:" in check.detail


def test_units_fail_on_another_dimension_and_on_a_field_the_table_missed():
    normalised = copy.deepcopy(NORMALISED)
    normalised["layers"][0]["thickness"]["unit"] = "m^2"
    check = unit_routes_check(_primary(), build_independent_problem(ORIGINAL), normalised,
                              ORIGINAL)
    assert not check.passed and check.value == 1.0 and "dimension" in check.detail
    independent = build_independent_problem(ORIGINAL)
    missed = dict(independent.table_values)
    del missed["probes[0]"]
    rows = unit_route_differences(missed, NORMALISED, ORIGINAL)
    assert ("probes[0]", 1.0, "not read by the table route") in rows


def test_a_case_override_sets_the_units_limit():
    primary = dataclasses.replace(_primary(), tolerances={"inputs.units": 1e-6})
    normalised = copy.deepcopy(NORMALISED)
    normalised["probes"][0]["value"] *= 1 + 1e-9
    assert unit_routes_check(primary, build_independent_problem(ORIGINAL), normalised,
                             ORIGINAL).passed


# --- inputs.interpretation ---------------------------------------------------------------------


def test_interpretation_passes_when_both_problems_agree():
    check = interpretation_check(_primary(), build_independent_problem(ORIGINAL))
    assert check.passed and check.value == 0.0
    assert check.limit == INPUT_LIMITS["inputs.interpretation"]


@pytest.mark.parametrize("factor", [1 + 1e-9, 1 - 1e-9])
@pytest.mark.parametrize(
    ("field", "change"),
    [
        ("layers[0].thickness", lambda p, f: dataclasses.replace(p, layers=(
            dataclasses.replace(p.layers[0], thickness=p.layers[0].thickness * f),))),
        ("layers[0].reaction.rate_constant", lambda p, f: dataclasses.replace(p, layers=(
            dataclasses.replace(p.layers[0], reaction=Reaction(
                "first_order", rate_constant=1e-4 * f)),))),
        ("inner_boundary.value", lambda p, f: dataclasses.replace(
            p, inner_boundary=Boundary("concentration", value=3.0 * f, partition=0.5))),
        ("probes[0]", lambda p, f: dataclasses.replace(p, probes=(1e-5 * f,))),
        ("area", lambda p, f: dataclasses.replace(p, area=2e-4 * f)),
    ],
)
def test_interpretation_fails_when_a_field_is_off_either_way(field, change, factor):
    check = interpretation_check(change(_primary(), factor), build_independent_problem(ORIGINAL))
    assert not check.passed
    assert check.value == pytest.approx(abs(factor - 1) / max(factor, 1), rel=1e-6)
    assert f"worst: {field}:" in check.detail


@pytest.mark.parametrize("own_partition", [0.5, 8.0])
def test_interpretation_reads_each_problems_own_face_partition(monkeypatch, own_partition):
    """A primary ``face_partition`` that answers the layer's partition (2) for a face with a
    partition of its own, below or above the layer's, is seen."""
    original = copy.deepcopy(ORIGINAL)
    original["inner_boundary"]["partition"] = own_partition
    primary = dataclasses.replace(_primary(), inner_boundary=Boundary(
        "concentration", value=3.0, partition=own_partition))
    assert interpretation_check(primary, build_independent_problem(original)).passed
    monkeypatch.setattr(model.Problem, "face_partition", lambda self, side: (
        self.layers[0] if side == "inner" else self.layers[-1]).partition)
    check = interpretation_check(primary, build_independent_problem(original))
    assert not check.passed
    assert check.value == pytest.approx(abs(2.0 - own_partition) / max(2.0, own_partition))
    assert f"worst: face_partition(inner): 2.0 vs {own_partition}" in check.detail


@pytest.mark.parametrize("factor", [1 + 1e-6, 1 - 1e-6])
def test_interpretation_compares_the_initial_loads(monkeypatch, factor):
    transient = dict(ORIGINAL, regime={"kind": "transient", "duration": "1 h",
                                       "times": ["1 h"]})
    transient["layers"] = [dict(ORIGINAL["layers"][0], initial="5 mg/mL")]
    primary = dataclasses.replace(
        _primary(), regime=Regime("transient", 3600.0, (3600.0,)),
        layers=(dataclasses.replace(_primary().layers[0], initial=5.0),))
    independent = build_independent_problem(transient)
    assert interpretation_check(primary, independent).passed
    own = input_checks.primary_initial_load
    monkeypatch.setattr(input_checks, "primary_initial_load", lambda p: own(p) * factor)
    check = interpretation_check(primary, independent)
    assert not check.passed and "worst: initial load per measure" in check.detail


# --- run_problem -----------------------------------------------------------------------------


def test_run_problem_adds_the_interpretation_check_only_with_an_independent_problem():
    alone = run.run_problem(_primary())
    assert not [c for c in alone.checks if c.name.startswith("inputs")]
    both = run.run_problem(_primary(), build_independent_problem(ORIGINAL))
    assert both.checks[0].name == "inputs.interpretation" and both.checks[0].passed
    assert all(c.passed for c in both.checks)
