"""The independent problem (worker.engine.independent_problem): built from the case document by
its own code, with its own face partitions, edges and measures.

Check values: unit definitions (SI Brochure 2019; 1 um = 1e-6 m, 1 d = 86400 s, 1 mg/mL =
1 kg/m^3), the shell geometry of a cylinder (circumference 2 pi r) and a sphere (surface
4 pi r^2, volume of a shell 4/3 pi (b^3 - a^3)) — facts of geometry — and the case format's
stated defaults (README, "The case").
"""

from __future__ import annotations

import math

import pytest

from worker.engine import model
from worker.engine.boundaries import BOUNDARIES
from worker.engine.independent_problem import (
    BOUNDARY_FIELDS,
    REACTION_FIELDS,
    IndependentInputError,
    IndependentProblem,
    build_independent_problem,
    initial_load,
)
from worker.engine.model import Problem
from worker.engine.reactions import REACTIONS


def _shell(**changes) -> dict:
    case = {
        "schema_version": 1, "title": "shell", "geometry": "sphere", "inner": "1 mm",
        "layers": [
            {"name": "core coat", "thickness": "40 um", "diffusivity": "1e-12 m^2/s",
             "partition": 3.0, "initial": "2 mg/mL",
             "reaction": {"kind": "michaelis_menten", "vmax": "1 ug/mL/h", "km": "5 ug/mL"}},
            {"thickness": {"value": 60, "unit": "um"}, "diffusivity": "2e-12 m^2/s"},
        ],
        "inner_boundary": {"kind": "symmetry"},
        "outer_boundary": {"kind": "concentration", "value": "0.5 mg/mL", "partition": 0.25},
        "regime": {"kind": "transient", "duration": "7 d", "times": ["1 d", "7 d"]},
        "probes": ["1.02 mm"],
        "tolerances": {"cross_check": 1e-3},
    }
    case.update(changes)
    return case


def test_values_are_read_by_the_table_route_in_si():
    problem = build_independent_problem(_shell())
    assert isinstance(problem, IndependentProblem) and isinstance(problem, Problem)
    assert problem.inner == 1e-3
    first, second = problem.layers
    assert (first.thickness, second.thickness) == (4e-5, 6e-5)
    assert first.initial == 2.0 and first.reaction.km == 5e-3
    assert first.reaction.vmax == pytest.approx(1e-3 / 3600, rel=1e-15)
    assert problem.regime.duration == 7 * 86400.0 and problem.regime.times == (86400.0,
                                                                                604800.0)
    assert problem.probes == (1.02e-3,) and problem.basis == "mass"
    assert problem.outer_boundary.value == 0.5
    assert problem.table_values["layers[1].thickness"].value == 6e-5
    assert problem.table_values["regime.times[1]"].dimension == (0, 0, 1, 0)


def test_the_case_formats_defaults():
    problem = build_independent_problem(_shell())
    second = problem.layers[1]
    assert second.name == "layer 2"
    assert second.partition == 1.0 and second.initial == 0.0 and second.reaction.kind == "none"
    assert "layers[1].initial" not in problem.table_values


def test_the_boundarys_own_partition_wins_over_the_layers():
    problem = build_independent_problem(_shell())
    assert problem.face_partition("outer") == 0.25
    assert problem.face_partition("inner") == 3.0  # no partition given: the first layer's
    with pytest.raises(ValueError, match="side"):
        problem.face_partition("middle")


def test_a_broken_primary_face_partition_does_not_reach_the_independent_one(monkeypatch):
    monkeypatch.setattr(model.Problem, "face_partition",
                        lambda self, side: self.layers[-1].partition)
    assert build_independent_problem(_shell()).face_partition("outer") == 0.25


def test_geometry_members():
    sphere = build_independent_problem(_shell())
    assert sphere.exponent == 2 and sphere.measure_factor == 4 * math.pi
    assert sphere.edges.tolist() == pytest.approx([1e-3, 1.04e-3, 1.1e-3], rel=1e-15)
    assert not sphere.edges.flags.writeable
    assert sphere.outer == pytest.approx(1.1e-3, rel=1e-15)
    assert sphere.total_thickness == pytest.approx(1e-4, rel=1e-15)
    assert not sphere.solid_centre
    assert sphere.geometric_weight([2.0]).tolist() == [4.0]
    cylinder = build_independent_problem(_shell(geometry="cylinder", inner=0))
    assert cylinder.exponent == 1 and cylinder.measure_factor == 2 * math.pi
    assert cylinder.solid_centre
    slab = build_independent_problem(_shell(geometry="slab", inner="0 m"))
    assert slab.exponent == 0 and slab.measure_factor == 1.0 and not slab.solid_centre


def test_initial_load_is_the_shell_volume_times_the_concentration():
    problem = build_independent_problem(_shell())
    a, b = 1e-3, 1.04e-3
    expected = 2.0 * 4.0 / 3.0 * math.pi * (b**3 - a**3)  # kg: 2 kg/m^3 in the first shell
    assert initial_load(problem) == pytest.approx(expected, rel=1e-12)
    slab = build_independent_problem(_shell(geometry="slab", inner="0 m"))
    assert initial_load(slab) == pytest.approx(2.0 * 4e-5, rel=1e-14)  # per m^2


@pytest.mark.parametrize(
    ("path", "raw"),
    [("layers[0].thickness", "40 furlongz"), ("layers[0].thickness", "40 s"),
     ("outer_boundary.value", "0.5 mol/m^2")],
)
def test_an_unreadable_value_names_its_field(path, raw):
    case = _shell()
    if path.startswith("layers"):
        case["layers"][0]["thickness"] = raw
    else:
        case["outer_boundary"]["value"] = raw
    with pytest.raises(IndependentInputError) as info:
        build_independent_problem(case)
    assert info.value.path == path


def test_the_written_out_kind_fields_match_the_registries():
    """The independent reading lists each kind's dimensional fields itself; this holds the
    list to the kinds' declarations (a new kind or parameter must be added to both)."""
    declared = {name: {p.name: p.dimension for p in kind.parameters if p.dimension}
                for name, kind in REACTIONS.items()}
    assert declared == {k: dict(v) for k, v in REACTION_FIELDS.items()}
    declared = {name: {p.name: p.dimension for p in kind.parameters if p.dimension}
                for name, kind in BOUNDARIES.items()}
    written = {k: dict(v) for k, v in BOUNDARY_FIELDS.items()}
    # The compartment kind (issue 14) is written out here ahead of its module; once the
    # registry holds it, the two lists must agree on it as on every other kind.
    if "compartment" not in BOUNDARIES:
        del written["compartment"]
    assert declared == written
