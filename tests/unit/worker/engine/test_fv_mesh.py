"""Finite-volume mesh, operator and solver: geometry, closed forms, input errors, failures.

Closed forms used as check values:
* composite plane wall, fixed fluid concentrations on both sides, no reaction: flux =
  (C_in - C_out) / sum(L_i / (D_i K_i)) in the fluid-referenced potential C/K (R.B. Bird,
  W.E. Stewart, E.N. Lightfoot, *Transport Phenomena*, 2nd ed., 2002, sec. 10.6; J. Crank,
  *The Mathematics of Diffusion*, 2nd ed., 1975, ch. 12). The profile is piecewise linear, which
  the scheme reproduces exactly, so the check holds to round-off on any mesh.
* hollow cylinder, no reaction: J(r1) = D (C1 - C2) / (r1 ln(r2/r1)) (Crank 1975, ch. 5).
* shell volumes: integral of r^n dr = (b^(n+1) - a^(n+1))/(n+1) (calculus).
"""

from __future__ import annotations

import numpy as np
import pytest

from worker.engine.fv_mesh import (
    MAX_CELLS_PER_LAYER,
    MIN_CELLS_PER_LAYER,
    THIELE_CELL_LIMIT,
    assemble_diffusion,
    build_mesh,
    default_cells_per_layer,
)
from worker.engine.fv_steady import solve_fv
from worker.engine.model import Boundary, Layer, Problem, Reaction

D = 1e-9


def _wall(**outer):
    return Problem(
        "slab", 0.0,
        (Layer("a", 0.2e-3, 0.1 * D, partition=3.0), Layer("b", 1.0e-3, D, partition=0.5),
         Layer("c", 0.3e-3, 2 * D, partition=1.2)),
        Boundary("concentration", 2.0), Boundary("concentration", 0.4, **outer))


def test_composite_wall_matches_series_resistance_on_a_coarse_mesh():
    problem = _wall()
    exact = (2.0 - 0.4) / (0.2e-3 / (0.1 * D * 3.0) + 1.0e-3 / (D * 0.5) + 0.3e-3 / (2 * D * 1.2))
    solution = solve_fv(problem, [3, 4, 2])
    assert solution.success
    assert solution.flux_inner == pytest.approx(exact, rel=1e-12)
    assert solution.flux_outer == pytest.approx(exact, rel=1e-12)
    # surface values carry the partition: C_s = K_face x fluid value
    assert solution.concentration_at(0.0) == pytest.approx(3.0 * 2.0, rel=1e-12)
    assert solution.concentration_at(problem.outer) == pytest.approx(1.2 * 0.4, rel=1e-12)
    # interface: C/K continuous, C jumps
    r1 = problem.edges[1]
    left, right = solution.concentration_at(r1, layer=0), solution.concentration_at(r1, layer=1)
    assert left / 3.0 == pytest.approx(right / 0.5, rel=1e-12)
    assert solution.flux_at(0.7e-3) == pytest.approx(exact, rel=1e-12)


def test_hollow_cylinder_flux_on_the_default_mesh():
    r1, r2 = 0.4e-3, 1.2e-3
    problem = Problem("cylinder", r1, (Layer("wall", r2 - r1, D),),
                      Boundary("concentration", 1.0), Boundary("concentration", 0.0))
    exact = D * 1.0 / (r1 * np.log(r2 / r1))
    solution = solve_fv(problem)
    assert solution.flux_inner == pytest.approx(exact, rel=2e-5)
    assert solution.flux_outer * r2 == pytest.approx(exact * r1, rel=2e-5)


@pytest.mark.parametrize(("geometry", "inner"), [("slab", 0.1e-3), ("cylinder", 0.0),
                                                   ("cylinder", 0.3e-3), ("sphere", 0.0),
                                                   ("sphere", 0.3e-3)])
def test_mesh_geometry(geometry, inner):
    problem = Problem(geometry, inner, (Layer("a", 0.5e-3, D), Layer("b", 0.25e-3, D)),
                      Boundary("symmetry" if inner == 0.0 and geometry != "slab" else "flux"),
                      Boundary("concentration", 1.0))
    mesh = build_mesh(problem, [7, 5])
    n = problem.exponent
    outer = inner + 0.75e-3
    assert mesh.volumes.sum() == pytest.approx((outer ** (n + 1) - inner ** (n + 1)) / (n + 1),
                                               rel=1e-12)
    assert mesh.faces[7] == problem.edges[1]  # interface exactly on a face
    assert mesh.faces[0] == inner and mesh.faces[-1] == problem.edges[-1]
    assert mesh.cells_per_layer == (7, 5)
    assert np.all(np.diff(mesh.faces) > 0.0)
    if inner == 0.0 and n > 0:
        assert mesh.face_areas[0] == 0.0  # the solid centre face carries no flux


def test_banded_layout_is_what_solve_banded_expects():
    problem = _wall()
    mesh = build_mesh(problem, 4)
    operator = assemble_diffusion(mesh, problem)
    c = np.linspace(1.0, 2.0, mesh.n_cells)
    dense = np.diag(operator.ab[1]) + np.diag(operator.ab[0, 1:], 1) + np.diag(
        operator.ab[2, :-1], -1)
    np.testing.assert_allclose(operator.apply(c), dense @ c, rtol=1e-14,
                               atol=1e-14 * np.abs(dense @ c).max())
    # every cell balance: Q_east - Q_west equals (A c - b) cell by cell
    q = operator.face_fluxes(c)
    np.testing.assert_allclose(q[1:] - q[:-1], operator.apply(c) - operator.rhs,
                               rtol=1e-12, atol=1e-12 * np.abs(q).max())


def test_default_mesh_rule():
    thin = Problem("slab", 0.0, (Layer("a", 1e-3, D),), Boundary("concentration", 1.0),
                   Boundary("concentration", 0.0))
    assert default_cells_per_layer(thin) == (max(MIN_CELLS_PER_LAYER, 200),)
    k = 4.0  # Thiele modulus m L = 1e-3 * sqrt(4/1e-9) = 63
    reacting = Problem("slab", 0.0, (Layer("a", 1e-3, D, reaction=Reaction("first_order",
                                                                          rate_constant=k)),),
                       Boundary("symmetry"), Boundary("concentration", 1.0))
    (cells,) = default_cells_per_layer(reacting)
    assert 1e-3 / cells * np.sqrt(k / D) <= THIELE_CELL_LIMIT
    huge = Problem("slab", 0.0, (Layer("a", 1e-3, D, reaction=Reaction("first_order",
                                                                      rate_constant=1e6)),),
                   Boundary("symmetry"), Boundary("concentration", 1.0))
    assert default_cells_per_layer(huge) == (MAX_CELLS_PER_LAYER,)


def test_michaelis_menten_solution_conserves_mass():
    problem = Problem("cylinder", 0.1e-3, (Layer("t", 0.3e-3, D, reaction=Reaction(
        "michaelis_menten", vmax=5e-3, km=0.02)),), Boundary("concentration", 0.2),
        Boundary("mass_transfer", coefficient=1e-6, bulk=0.05))
    solution = solve_fv(problem)
    assert solution.success and solution.diagnostics["newton_iterations"] >= 2
    balance = 0.1e-3 * solution.flux_inner - 0.4e-3 * solution.flux_outer
    assert balance == pytest.approx(solution.consumption, rel=1e-10)
    assert solution.diagnostics["residual_history"][-1] < solution.diagnostics[
        "residual_history"][0]


@pytest.mark.parametrize("reaction", [Reaction(), Reaction("zero_order", rate=1e-3)])
def test_no_unique_steady_state_is_a_result_not_an_exception(reaction):
    """Only flux or symmetry faces and no reaction that grows with C: C is fixed only up to a
    constant (common practice: a pure Neumann problem has no unique solution)."""
    problem = Problem("slab", 0.0, (Layer("a", 1e-3, D, reaction=reaction),),
                      Boundary("flux", 1e-6), Boundary("symmetry"))
    solution = solve_fv(problem, 20)
    assert not solution.success
    assert "no unique steady state" in solution.message
    assert np.isnan(solution.flux_outer)


def test_flux_faces_with_first_order_reaction_are_well_posed():
    problem = Problem("slab", 0.0, (Layer("a", 1e-3, D, reaction=Reaction(
        "first_order", rate_constant=1e-3)),), Boundary("flux", 1e-6), Boundary("symmetry"))
    solution = solve_fv(problem, 200)
    assert solution.success
    # all that enters is consumed (steady balance)
    assert solution.consumption == pytest.approx(1e-6, rel=1e-10)


@pytest.mark.parametrize(("cells", "fragment"), [
    ([10], "expected 3 counts"),
    ([10, 1, 10], "every layer needs at least 2 cells"),
])
def test_bad_cell_counts_name_the_argument(cells, fragment):
    with pytest.raises(ValueError, match=f"cells_per_layer: {fragment}"):
        solve_fv(_wall(), cells)


def test_bad_position_and_layer_name_the_argument():
    solution = solve_fv(_wall(), 4)
    with pytest.raises(ValueError, match="r: expected positions within the body"):
        solution.concentration_at(np.array([0.0, 5e-3]))
    with pytest.raises(ValueError, match="layer: expected an index"):
        solution.concentration_at(0.1e-3, layer=7)
    with pytest.raises(ValueError, match="r: expected positions within layer 0"):
        solution.flux_at(1.0e-3, layer=0)


def test_bad_reaction_and_film_constants_name_the_field():
    bad_km = Problem("slab", 0.0, (Layer("a", 1e-3, D, reaction=Reaction("michaelis_menten",
                                                                        vmax=1.0, km=0.0)),),
                     Boundary("symmetry"), Boundary("concentration", 1.0))
    with pytest.raises(ValueError, match=r"layers\[0\]\.reaction\.km"):
        solve_fv(bad_km, 10)
    bad_film = Problem("slab", 0.0, (Layer("a", 1e-3, D),), Boundary("concentration", 1.0),
                       Boundary("mass_transfer", coefficient=0.0, bulk=0.0))
    with pytest.raises(ValueError, match="outer_boundary.coefficient"):
        solve_fv(bad_film, 10)
