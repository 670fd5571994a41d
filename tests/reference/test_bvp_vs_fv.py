"""The two numerical methods against each other and against published closed forms.

* Michaelis-Menten (no closed form): collocation (``solve_bvp_reference``) against the
  Richardson-extrapolated finite-volume result (``run_grid_study``); for the slab also against
  the first-integral quadrature D/2 (dC/dx)^2 = int R dC evaluated with mpmath (R. Aris, *The
  Mathematical Theory of Diffusion and Reaction in Permeable Catalysts*, Oxford, 1975, vol. 1,
  ch. 3; the quadrature is exact calculus, evaluated by an independent library).
* Zero order with a depleted core: A.V. Hill, "The diffusion of oxygen and lactic acid through
  tissues", Proc. R. Soc. B 104 (1928) 39-96; slab front L - sqrt(2 D Cs/Q); cylinder
  Cs = (Q/(4D)) [R^2 - r_c^2 - 2 r_c^2 ln(R/r_c)]; sphere Cs = (Q/(6D)) [R^2 - 3 r_c^2 +
  2 r_c^3/R] (from the conditions C(r_c) = dC/dr(r_c) = 0; see also J. Crank, *The Mathematics
  of Diffusion*, 2nd ed., 1975, ch. 14), the roots found with mpmath.findroot.

Scenario values are invented for these tests.
"""

from __future__ import annotations

import mpmath
import numpy as np
import pytest

from worker.engine.bvp_steady import solve_bvp_reference
from worker.engine.convergence import run_grid_study
from worker.engine.fv_steady import solve_fv
from worker.engine.model import Boundary, Layer, Problem, Reaction

D = 1.2e-9  # m^2/s
CS = 0.2  # mol/m^3
MM = Reaction("michaelis_menten", vmax=6e-3, km=0.05)
AGREEMENT = 1e-6  # relative, collocation vs extrapolated finite volume (the brief's target)

MM_CASES = {
    "slab": Problem("slab", 0.0, (Layer("gel", 0.4e-3, D, reaction=MM),),
                    Boundary("symmetry"), Boundary("concentration", CS)),
    "hollow-cylinder": Problem("cylinder", 0.1e-3, (Layer("tissue", 0.3e-3, D, reaction=MM),),
                               Boundary("concentration", CS), Boundary("flux", 0.0)),
    "solid-cylinder": Problem("cylinder", 0.0, (Layer("rod", 0.35e-3, D, reaction=MM),),
                              Boundary("symmetry"),
                              Boundary("mass_transfer", coefficient=3e-5, bulk=CS)),
    "sphere": Problem("sphere", 0.0, (Layer("bead", 0.5e-3, D, reaction=MM),),
                      Boundary("symmetry"), Boundary("concentration", CS)),
    "two-layer-cylinder": Problem(
        "cylinder", 0.1e-3,
        (Layer("fibre wall", 40e-6, 1.5e-9, partition=0.8),
         Layer("cell layer", 150e-6, 2.0e-9, reaction=Reaction("michaelis_menten",
                                                                vmax=4e-3, km=5e-3))),
        Boundary("concentration", CS), Boundary("flux", 0.0)),
    "two-layer-sphere": Problem(
        "sphere", 0.0,
        (Layer("core", 0.3e-3, D, partition=1.0, reaction=MM),
         Layer("shell", 0.1e-3, 0.3 * D, partition=2.5)),
        Boundary("symmetry"), Boundary("concentration", CS)),
}


@pytest.mark.parametrize("name", list(MM_CASES))
def test_michaelis_menten_collocation_matches_extrapolated_fv(name):
    problem = MM_CASES[name]
    reference = solve_bvp_reference(problem)
    assert reference.success, reference.message
    studies = run_grid_study(problem, 100)
    for quantity in ("flux_inner", "flux_outer", "consumption"):
        study = studies[quantity]
        value = getattr(reference, quantity)
        sealed = (problem.inner_boundary if quantity == "flux_inner"
                  else problem.outer_boundary).kind in ("symmetry", "flux")
        if quantity.startswith("flux") and sealed:  # scenario faces are sealed (zero flux)
            scale = abs(reference.consumption) / problem.outer**problem.exponent
            assert abs(value) <= 1e-12 * scale
            assert abs(study.fine) <= 1e-12 * scale
            continue
        assert study.convergence == "monotonic", (quantity, study)
        assert 1.8 < study.apparent_order < 2.2, (quantity, study)
        assert value == pytest.approx(study.extrapolated, rel=AGREEMENT), (quantity, study)
    # the collocation solution obeys the r^n-weighted balance r_in^n J_in - r_out^n J_out = S
    n = problem.exponent
    balance = problem.inner**n * reference.flux_inner - problem.outer**n * reference.flux_outer
    assert balance == pytest.approx(reference.consumption, rel=1e-7)


@mpmath.workdps(30)  # scoped: a global precision would leak into every later mpmath test
def _slab_first_integral_flux(d, cs, thickness, vmax, km):
    """Surface flux of a sealed MM slab from D/2 (dC/dx)^2 = int_{C0}^{C} R dc (mpmath)."""
    d, cs, thickness, vmax, km = (mpmath.mpf(v) for v in (d, cs, thickness, vmax, km))

    def integral_r(c0, c):
        return vmax * ((c - c0) - km * mpmath.log((km + c) / (km + c0)))

    def length_for(c0):
        return mpmath.quad(lambda c: 1 / mpmath.sqrt(2 / d * integral_r(c0, c)), [c0, cs])

    c0 = mpmath.findroot(lambda c0: length_for(c0) - thickness, (cs / 100, cs * 0.99),
                         solver="anderson", tol=1e-24)
    return float(-mpmath.sqrt(2 * d * integral_r(c0, cs))), float(c0)


def test_michaelis_menten_slab_against_first_integral_quadrature():
    problem = MM_CASES["slab"]
    flux, centre = _slab_first_integral_flux(D, CS, 0.4e-3, MM.vmax, MM.km)
    assert 0.0 < centre < CS  # the scenario is neither trivial nor depleted
    reference = solve_bvp_reference(problem)
    assert reference.flux_outer == pytest.approx(flux, rel=1e-8)
    assert reference.concentration_at(0.0) == pytest.approx(centre, rel=1e-7)
    study = run_grid_study(problem, 100)["flux_outer"]
    assert study.extrapolated == pytest.approx(flux, rel=AGREEMENT)
    assert study.fine == pytest.approx(flux, rel=1e-4)


# ---- zero order: Hill (1928) depleted core ---------------------------------------------------

Q = 2.0e-2  # mol/(m^3 s)
RADIUS = 0.5e-3  # m


@mpmath.workdps(30)
def _hill_front(geometry: str) -> float:
    """Depletion-front position from Hill's conditions C = dC/dr = 0 (mpmath.findroot)."""
    d, cs, q, big_r = (mpmath.mpf(v) for v in (D, CS, Q, RADIUS))
    if geometry == "slab":  # sealed mid-plane at x = 0, surface at x = L
        return float(big_r - mpmath.sqrt(2 * d * cs / q))
    if geometry == "cylinder":
        def equation(rc):
            return q / (4 * d) * (big_r**2 - rc**2 - 2 * rc**2 * mpmath.log(big_r / rc)) - cs
    else:
        def equation(rc):
            return q / (6 * d) * (big_r**2 - 3 * rc**2 + 2 * rc**3 / big_r) - cs
    return float(mpmath.findroot(equation, big_r / 2))


def _zero_order_problem(geometry: str) -> Problem:
    return Problem(geometry, 0.0, (Layer("core", RADIUS, D, reaction=Reaction("zero_order",
                                                                             rate=Q)),),
                   Boundary("symmetry"), Boundary("concentration", CS))


@pytest.mark.parametrize("geometry", ["slab", "cylinder", "sphere"])
def test_zero_order_front_converges_to_hill(geometry):
    exact = _hill_front(geometry)
    assert 0.1 * RADIUS < exact < 0.9 * RADIUS  # scenario has a real depleted core
    problem = _zero_order_problem(geometry)
    errors = []
    for cells in (40, 80, 160, 320, 640):
        solution = solve_fv(problem, cells)
        assert solution.success, solution.message
        assert solution.depletion_front is not None
        errors.append(abs(solution.depletion_front - exact) / RADIUS)
    errors = np.array(errors)
    assert np.all(errors[1:] < errors[:-1]), errors  # converges with refinement
    assert errors[-1] < 2e-5, errors
    # the concentration is never negative: the depleted core holds C = 0
    assert np.min(solution.diagnostics["cell_concentrations"]) >= 0.0
    assert solution.concentration_at(0.5 * exact) == 0.0


@pytest.mark.parametrize("geometry", ["slab", "cylinder", "sphere"])
def test_zero_order_surface_flux_matches_live_volume(geometry):
    """Surface flux = -Q x live volume (r^n-weighted) / R^n (the steady balance).

    The error depends on where the front falls within its cell, so it does not shrink by the
    same factor at every refinement; over a 16-fold refinement it must shrink at least as
    fast as h^1.7 on average (second-order envelope).
    """
    exact_front = _hill_front(geometry)
    n = {"slab": 0, "cylinder": 1, "sphere": 2}[geometry]
    exact_flux = -Q * (RADIUS ** (n + 1) - exact_front ** (n + 1)) / ((n + 1) * RADIUS**n)
    problem = _zero_order_problem(geometry)
    coarse = abs(solve_fv(problem, 40).flux_outer / exact_flux - 1.0)
    fine = abs(solve_fv(problem, 640).flux_outer / exact_flux - 1.0)
    assert fine < 1e-5
    assert coarse / fine > 16**1.7, (coarse, fine)


@pytest.mark.parametrize("geometry", ["slab", "cylinder", "sphere"])
def test_zero_order_collocation_free_boundary_matches_hill(geometry):
    exact = _hill_front(geometry)
    reference = solve_bvp_reference(_zero_order_problem(geometry))
    assert reference.success, reference.message
    assert reference.depletion_front == pytest.approx(exact, rel=1e-7)


def test_zero_order_two_layer_fv_and_collocation_agree():
    problem = Problem(
        "cylinder", 0.0,
        (Layer("core", 0.5e-3, D, reaction=Reaction("zero_order", rate=Q)),
         Layer("coat", 0.1e-3, D / 3, partition=0.5)),
        Boundary("symmetry"), Boundary("concentration", CS))
    reference = solve_bvp_reference(problem)
    assert reference.success, reference.message
    fine = solve_fv(problem, 1280)
    assert fine.depletion_front == pytest.approx(reference.depletion_front, rel=1e-5)
    assert fine.flux_outer == pytest.approx(reference.flux_outer, rel=1e-5)


def test_zero_order_without_depletion_is_exact_in_both():
    """Q small enough that C stays positive: C = Cs - Q (L^2 - x^2)/(2D) (slab, sealed centre;
    Crank 1975 ch. 14), surface flux -Q L exactly."""
    q = 0.5 * 2 * D * CS / RADIUS**2
    problem = Problem("slab", 0.0, (Layer("gel", RADIUS, D, reaction=Reaction("zero_order",
                                                                            rate=q)),),
                      Boundary("symmetry"), Boundary("concentration", CS))
    fv = solve_fv(problem, 50)
    reference = solve_bvp_reference(problem)
    assert fv.depletion_front is None and reference.depletion_front is None
    assert fv.flux_outer == pytest.approx(-q * RADIUS, rel=1e-10)
    assert reference.flux_outer == pytest.approx(-q * RADIUS, rel=1e-8)
    centre = CS - q * RADIUS**2 / (2 * D)
    assert reference.concentration_at(0.0) == pytest.approx(centre, rel=1e-8)


def test_depleted_zone_inside_a_layer_is_reported_not_approximated():
    """Fed from both faces, the depleted zone sits inside the layer: not covered by the
    collocation reference, which must say so rather than return a figure."""
    problem = Problem("slab", 0.0, (Layer("gel", 2 * RADIUS, D, reaction=Reaction("zero_order",
                                                                                rate=Q)),),
                      Boundary("concentration", CS), Boundary("concentration", CS))
    reference = solve_bvp_reference(problem)
    assert not reference.success
    assert "depleted zone" in reference.message
    fv = solve_fv(problem, 200)  # the finite-volume solver handles it: two fronts
    assert fv.success and len(fv.diagnostics["depletion_fronts"]) == 2
    half_width = np.sqrt(2 * D * CS / Q)  # Hill slab penetration from each face
    assert fv.diagnostics["depletion_fronts"] == pytest.approx(
        [half_width, 2 * RADIUS - half_width], rel=1e-3
    )
