"""Unit tests of the graded meshes: the finite volumes' tanh maps (``fv_grading``, M. Vinokur,
J. Comput. Phys. 50 (1983) 215, the one- and two-sided tanh stretching functions), the Galerkin
route's geometric progression (``transient.galerkin_grading``: the sum of a geometric series),
which layers and faces draw a grading (``transient.early_mesh``), and that a case whose first
time is not very early keeps exactly the uniform meshes it had.

Scenario values are invented; check values come from the closed forms named beside them.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from worker.engine.fv_grading import GradedCells, stretch_for_slope, unit_faces
from worker.engine.fv_mesh import build_mesh
from worker.engine.model import Boundary, Layer, Problem, Regime
from worker.engine.transient import early_mesh, galerkin, solve
from worker.engine.transient.galerkin_grading import (
    GradedElements,
    graded_elements,
    spread_for_first_element,
)

D = 1.0e-10  # m^2/s
A = 1.0e-4  # m
SINK = Boundary("concentration", 0.0)
SEALED = Boundary("symmetry")


def _case(geometry="sphere", inner=SEALED, outer=SINK, layers=None, first=1e-6, inner_radius=0.0):
    """A body releasing from its face(s), first requested time at D t1 / A^2 = ``first``."""
    t1 = first * A * A / D
    duration = 0.3 * A * A / D
    layers = layers or (Layer("matrix", A, D, 1.0, initial=1.0),)
    return Problem(geometry, inner_radius, layers, inner, outer,
                   Regime("transient", duration, (0.0, t1, duration)),
                   area=1.0e-4 if geometry == "slab" else None), t1


@pytest.mark.parametrize("side", ["inner", "outer", "both"])
def test_tanh_maps_end_exactly_grow_monotonically_and_have_vinokurs_end_slope(side):
    cells, stretch = 400, 5.0
    s = unit_faces(cells, side, stretch)
    assert s[0] == 0.0 and s[-1] == 1.0
    assert np.all(np.diff(s) > 0.0)
    # Vinokur 1983: ds/dxi = stretch / sinh(stretch) at the clustered end(s); the face cell
    # is that slope over N to first order in 1/N (its second-order term: s'' = 0 there for
    # "both"'s mid-plane only, so compare with a 1/N relative tolerance)
    slope = stretch / math.sinh(stretch)
    first, last = (s[1] - s[0]) * cells, (s[-1] - s[-2]) * cells
    clustered = {"inner": [first], "outer": [last], "both": [first, last]}[side]
    for width in clustered:
        assert width == pytest.approx(slope, rel=stretch / cells * 2)
    if side == "both":
        assert np.allclose(s + s[::-1], 1.0, atol=1e-15)  # symmetric about the mid-plane


def test_stretch_inverts_the_end_slope_and_refuses_bad_slopes():
    for slope in (0.5, 0.0875, 1e-3, 1e-9):
        stretch = stretch_for_slope(slope)
        assert stretch / math.sinh(stretch) == pytest.approx(slope, rel=1e-10)
    assert stretch_for_slope(1.0) == 0.0 and stretch_for_slope(3.0) == 0.0
    for bad in (0.0, -1.0, math.nan, 1e-300):
        with pytest.raises(ValueError, match="slope"):
            stretch_for_slope(bad)


def test_graded_cells_refuse_inconsistent_specifications():
    with pytest.raises(ValueError, match="sides\\[0\\]"):
        GradedCells((10,), ("middle",), (1.0,))
    with pytest.raises(ValueError, match="stretches\\[0\\]"):
        GradedCells((10,), ("outer",), (0.0,))
    with pytest.raises(ValueError, match="stretches\\[0\\]"):
        GradedCells((10,), ("",), (2.0,))
    with pytest.raises(ValueError, match="one entry per layer"):
        GradedCells((10, 10), ("",), (0.0,))


@pytest.mark.parametrize("side", ["inner", "outer", "both"])
def test_refined_meshes_keep_every_coarse_face_and_cut_each_cell_in_two(side):
    coarse = GradedCells((250,), (side,), (4.7,))
    faces = [coarse.refined(k).layer_faces(0) for k in (1, 2, 4)]
    assert np.array_equal(faces[1][::2], faces[0])  # the same numbers, not merely close
    assert np.array_equal(faces[2][::4], faces[0])
    # each coarse cell cut in two cells within a factor 1 + O(1/N) of one another
    halves = np.diff(faces[1]).reshape(-1, 2)
    assert np.all(np.abs(halves[:, 1] / halves[:, 0] - 1.0) < 4.7 / 250)


def test_fv_mesh_of_a_graded_spec_has_exact_volumes_and_layer_edges():
    problem, _ = _case("sphere")
    spec = GradedCells((50,), ("outer",), (3.0,))
    mesh = build_mesh(problem, spec)
    assert mesh.grading == spec and mesh.spec == spec
    assert mesh.faces[0] == 0.0 and mesh.faces[-1] == A
    # r^n-weighted volumes add up to the body's a^3/3 (sphere)
    assert float(np.sum(mesh.volumes)) == pytest.approx(A**3 / 3.0, rel=1e-13)
    assert np.allclose(mesh.volumes, (mesh.faces[1:] ** 3 - mesh.faces[:-1] ** 3) / 3.0,
                       rtol=1e-13, atol=0.0)
    widths = np.diff(mesh.faces)
    assert widths[-1] < widths[0] / 5.0  # finer at the releasing (outer) face


def test_two_layers_grade_only_the_layer_at_the_exchanging_face():
    layers = (Layer("core", A, D, 1.0, initial=1.0), Layer("coat", A / 4, D / 5, 0.5))
    problem, t1 = _case("sphere", layers=layers)
    meshes = solve.mesh_sequence(problem, t1)
    coarse = meshes[0]
    assert isinstance(coarse, GradedCells)
    assert coarse.sides == ("", "outer") and coarse.stretches[0] == 0.0
    mesh = build_mesh(problem, coarse)
    assert mesh.faces[coarse.cells[0]] == A  # the interface stays a face, exactly
    core = np.diff(mesh.faces[: coarse.cells[0] + 1])
    assert np.allclose(core, A / coarse.cells[0], rtol=1e-12)  # the inner layer stays uniform


@pytest.mark.parametrize(("inner", "outer", "radius", "expected"), [
    (SEALED, SINK, 0.0, ("outer",)),
    (SINK, SINK, A, ("inner", "outer")),
    (SINK, SEALED, A, ("inner",)),
    (SEALED, Boundary("mass_transfer", coefficient=1e-5, bulk=0.0), 0.0, ("outer",)),
    (SEALED, Boundary("compartment", volume=4e-12), 0.0, ("outer",)),
    (SEALED, Boundary("flux", 1e-9), 0.0, ()),
    (SEALED, SEALED, 0.0, ()),
])
def test_exchanging_faces_are_those_working_against_a_fluid(inner, outer, radius, expected):
    problem, t1 = _case("cylinder", inner=inner, outer=outer, inner_radius=radius)
    assert early_mesh.exchanging_sides(problem) == expected
    coarse = solve.mesh_sequence(problem, t1)[0]
    if expected:
        side = "both" if len(expected) == 2 else expected[0]
        assert isinstance(coarse, GradedCells) and coarse.sides == (side,)
    else:
        assert isinstance(coarse, tuple)


def test_a_solid_centre_never_draws_a_grading():
    # a sphere's centre carries a concentration kind but no area
    problem, t1 = _case("sphere", inner=SINK)
    assert early_mesh.exchanging_sides(problem) == ("outer",)


@pytest.mark.parametrize("first", [1e-3, 1e-4, 4e-5])
def test_a_late_first_time_keeps_exactly_the_uniform_meshes(first):
    # 4e-5: capped uniform cells of 0.63 diffusion lengths, under the 0.65 trigger
    problem, t1 = _case("sphere", first=first)
    meshes = solve.mesh_sequence(problem, t1)
    assert all(type(m) is tuple and all(type(n) is int for n in m) for m in meshes)
    assert [sum(m) for m in meshes] == [meshes[0][0], 2 * meshes[0][0], 4 * meshes[0][0]]
    n = meshes[0][0]
    mesh = build_mesh(problem, meshes[0])
    assert mesh.grading is None and mesh.spec == meshes[0]
    assert np.array_equal(mesh.faces[:-1], np.arange(n) * (A / n))  # the uniform faces


@pytest.mark.parametrize("first", [1e-3, 1e-4, 7e-5])
def test_a_late_first_time_keeps_exactly_the_uniform_elements(first):
    # 7e-5: capped uniform elements of 0.60 diffusion lengths, under the 0.62 trigger
    problem, t1 = _case("sphere", first=first)
    uniform = galerkin.coarse_elements(problem, t1)
    assert galerkin._coarse_mesh(problem, t1) == uniform
    built = galerkin.build_galerkin_mesh(problem, uniform)
    assert built.grading is None
    n = uniform[0]
    assert np.array_equal(built.nodes[1:-1], A * np.arange(1, n) / n)


def test_the_trigger_sits_between_the_measured_passing_and_failing_widths():
    # module docstring of early_mesh: 0.63 diffusion lengths pass, 0.73 fail (0.1 mm sphere)
    passing = 1.0 / (solve.MAX_COARSE_CELLS * math.sqrt(4e-5))
    failing = 1.0 / (solve.MAX_COARSE_CELLS * math.sqrt(3e-5))
    assert passing < early_mesh.GRADING_TRIGGER < failing


@pytest.mark.parametrize("halves", [False, True])
def test_galerkin_elements_form_a_geometric_progression_from_the_face(halves):
    n, fraction = 200, 1e-3
    kappa = spread_for_first_element(fraction, n, halves)
    spec = GradedElements((n,), ("both" if halves else "inner",), (kappa,))
    nodes = spec.layer_nodes(0)
    assert nodes[0] == 0.0 and nodes[-1] == 1.0
    widths = np.diff(nodes)
    assert widths[0] == pytest.approx(fraction, rel=1e-10)
    run = widths[: n // 2] if halves else widths
    ratio = run[1:] / run[:-1]
    q = math.exp((2.0 if halves else 1.0) * kappa / n)
    assert np.allclose(ratio, q, rtol=1e-9)  # h_i = h_0 q^i
    # the sum of the geometric series h_0 (q^m - 1)/(q - 1) is the (half) layer
    m = run.size
    assert widths[0] * (q**m - 1.0) / (q - 1.0) == pytest.approx(0.5 if halves else 1.0,
                                                                  rel=1e-10)
    if halves:
        assert np.allclose(widths, widths[::-1], rtol=1e-9)
    refined = spec.refined(2).layer_nodes(0)
    assert np.array_equal(refined[::2], nodes)


def test_galerkin_outer_grading_mirrors_the_inner_one_and_refuses_bad_input():
    kappa = spread_for_first_element(2e-3, 100)
    inner = GradedElements((100,), ("inner",), (kappa,)).layer_nodes(0)
    outer = GradedElements((100,), ("outer",), (kappa,)).layer_nodes(0)
    assert np.allclose(outer, 1.0 - inner[::-1], atol=1e-15)
    assert spread_for_first_element(0.02, 100) == 0.0  # uniform is already that fine
    with pytest.raises(ValueError, match="fraction"):
        spread_for_first_element(-1.0, 100)
    with pytest.raises(ValueError, match="elements"):
        spread_for_first_element(1e-3, 101, halves=True)


def test_galerkin_grades_a_single_layer_with_two_sinks_on_an_even_count():
    problem, t1 = _case("slab", inner=SINK, outer=SINK)
    graded = graded_elements(problem, t1, (201,), galerkin.EARLY_RESOLUTION)
    assert graded is not None and graded.towards == ("both",) and graded.elements == (202,)
    late, t_late = _case("slab", inner=SINK, outer=SINK, first=1e-3)
    assert graded_elements(late, t_late, (60,), galerkin.EARLY_RESOLUTION) is None
