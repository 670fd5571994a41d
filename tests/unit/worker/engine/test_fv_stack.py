"""Stacked finite-volume meshes: several meshes solved in one banded system, unchanged results.

``solve_fv_grids`` solves the three grids of a linear case as one block-diagonal system
(``fv_mesh.MeshStack``). The check here is that stacking changes no arithmetic: every mesh of a
stack gives, bit for bit, the geometry, operator and solution of that mesh solved alone. The
accuracy of the scheme itself is checked against closed forms, FiPy and manufactured solutions
in ``test_fv_mesh.py`` and ``tests/reference``.
"""

from __future__ import annotations

import numpy as np
import pytest

from worker.engine.fv_mesh import (
    assemble_diffusion,
    assemble_stack,
    build_mesh,
    build_mesh_stack,
)
from worker.engine.fv_steady import solve_fv, solve_fv_grids
from worker.engine.model import Boundary, Layer, Problem, Reaction

D = 1e-9
FIRST = Reaction("first_order", rate_constant=2e-3)

CASES = {
    "slab, one layer": Problem(
        "slab", 0.0, (Layer("a", 2e-4, D),),
        Boundary("concentration", 1.0), Boundary("concentration", 0.0)),
    "slab, three layers, partition jumps, film": Problem(
        "slab", 1e-4,
        (Layer("a", 5e-5, 0.1 * D, partition=3.0), Layer("b", 2e-4, D, partition=0.7),
         Layer("c", 1e-4, 2 * D, partition=1.5, reaction=FIRST)),
        Boundary("concentration", 1.0),
        Boundary("mass_transfer", coefficient=1e-5, bulk=0.2, partition=0.9)),
    "hollow cylinder, first order": Problem(
        "cylinder", 1e-3, (Layer("wall", 5e-4, 2 * D, reaction=FIRST),),
        Boundary("concentration", 1.0), Boundary("concentration", 0.2)),
    "solid cylinder, film": Problem(
        "cylinder", 0.0, (Layer("core", 3e-4, D, reaction=FIRST),),
        Boundary("symmetry"), Boundary("mass_transfer", coefficient=2e-6, bulk=0.5)),
    "hollow sphere, two layers, inner flux": Problem(
        "sphere", 2e-4,
        (Layer("a", 1e-4, D, partition=2.0, reaction=FIRST), Layer("b", 2e-4, 0.5 * D)),
        Boundary("flux", 1e-6), Boundary("concentration", 0.1)),
    "solid sphere, first order": Problem(
        "sphere", 0.0, (Layer("bead", 4e-4, D, reaction=FIRST),),
        Boundary("symmetry"), Boundary("concentration", 0.2)),
}
GRIDS = {
    1: [[160], [80], [40]],
    2: [[120, 80], [60, 40], [30, 20]],
    3: [[48, 160, 80], [24, 80, 40], [12, 40, 20]],
}

MESH_ARRAYS = ("edges", "faces", "centres", "face_areas", "volumes", "west_gaps", "east_gaps",
               "layer_index", "layer_starts", "diffusivity", "partition")
OPERATOR_ARRAYS = ("ab", "rhs", "west_coefficient", "east_coefficient", "face_constant")
SOLUTION_ARRAYS = ("cell_centres", "cell_concentrations", "face_positions",
                   "face_flux_densities")


def _same(a, b) -> bool:
    a, b = np.asarray(a), np.asarray(b)
    return a.shape == b.shape and np.array_equal(a, b)


@pytest.mark.parametrize("name", list(CASES))
def test_each_stacked_mesh_and_operator_equals_its_mesh_alone(name):
    problem = CASES[name]
    cells = GRIDS[len(problem.layers)]
    stack = build_mesh_stack(problem, cells)
    _, operators = assemble_stack(stack, problem)
    assert len(stack.meshes) == len(operators) == 3
    for counts, mesh, operator in zip(cells, stack.meshes, operators, strict=True):
        alone = build_mesh(problem, counts)
        assert mesh.cells_per_layer == alone.cells_per_layer
        for field in MESH_ARRAYS:
            assert _same(getattr(mesh, field), getattr(alone, field)), field
        alone_operator = assemble_diffusion(alone, problem)
        for field in OPERATOR_ARRAYS:
            assert _same(getattr(operator, field), getattr(alone_operator, field)), field


@pytest.mark.parametrize("name", list(CASES))
def test_stacked_solutions_equal_each_mesh_solved_alone(name):
    problem = CASES[name]
    cells = GRIDS[len(problem.layers)]
    stacked = solve_fv_grids(problem, cells)
    for counts, together in zip(cells, stacked, strict=True):
        alone = solve_fv(problem, counts)
        assert together.success and alone.success
        assert together.message == alone.message
        for field in ("flux_inner", "flux_outer", "consumption"):
            assert getattr(together, field) == getattr(alone, field), field
        for field in SOLUTION_ARRAYS:
            assert _same(together.diagnostics[field], alone.diagnostics[field]), field
        r = np.linspace(problem.inner, problem.outer, 57)
        assert _same(together.concentration_at(r), alone.concentration_at(r))
        assert _same(together.flux_at(r), alone.flux_at(r))
        for layer, (a, b) in enumerate(zip(problem.edges[:-1], problem.edges[1:], strict=True)):
            points = np.linspace(a, b, 9)
            c, j = together.profile_at(points, layer=layer)
            assert _same(c, alone.concentration_at(points, layer=layer))
            assert _same(j, alone.flux_at(points, layer=layer))


def test_a_source_term_is_stacked_too():
    problem = CASES["hollow sphere, two layers, inner flux"]

    def source(r):
        return 1e-4 * np.sin(r / problem.outer)

    cells = GRIDS[2]
    for counts, together in zip(cells, solve_fv_grids(problem, cells, source=source),
                                strict=True):
        alone = solve_fv(problem, counts, source=source)
        assert _same(together.diagnostics["cell_concentrations"],
                     alone.diagnostics["cell_concentrations"])
        assert together.flux_outer == alone.flux_outer


def test_without_a_unique_steady_state_every_mesh_fails_with_the_reason():
    problem = Problem("slab", 0.0, (Layer("a", 1e-4, D),), Boundary("flux", 1e-6),
                      Boundary("symmetry"))
    solutions = solve_fv_grids(problem, GRIDS[1])
    assert [s.success for s in solutions] == [False, False, False]
    assert all("no unique steady state" in s.message for s in solutions)
    assert [s.diagnostics["cells"] for s in solutions] == [160, 80, 40]


def test_nonlinear_kinds_are_solved_mesh_by_mesh_with_the_same_results():
    problem = Problem(
        "sphere", 0.0,
        (Layer("bead", 3e-4, D, reaction=Reaction("michaelis_menten", vmax=1e-2, km=5e-3)),),
        Boundary("symmetry"), Boundary("concentration", 0.2))
    for counts, together in zip(GRIDS[1], solve_fv_grids(problem, GRIDS[1]), strict=True):
        alone = solve_fv(problem, counts)
        assert together.success and alone.success
        assert together.diagnostics["newton_iterations"] > 0
        assert _same(together.diagnostics["cell_concentrations"],
                     alone.diagnostics["cell_concentrations"])
