"""The Galerkin transient solver (``transient.galerkin``) against published closed forms, exact
steady solutions and FiPy.

Scenario values (sizes, diffusivities, rates, times) are invented; the check values come from the
published formulas written out here (Crank 1975; a superposition derived below from Carslaw &
Jaeger 1959), from the project's exact steady solutions (each itself checked against published
forms in this folder) and from FiPy, never from the solver under test.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import special

from worker.engine.depletion_exact import solve_depleted
from worker.engine.fv_steady import solve_fv
from worker.engine.model import Boundary, Layer, Problem, Reaction, Regime
from worker.engine.transient.exact_series import solve_transient_exact
from worker.engine.transient.galerkin import galerkin_study, solve_transient_galerkin

D = 1.0e-10  # m^2/s
L = 1.0e-3  # m
SINK = Boundary("concentration", 0.0)
SEALED = Boundary("symmetry")


def _problem(geometry, layers, inner, outer, times):
    times = tuple(float(t) for t in times)
    return Problem(geometry, 0.0, tuple(layers), inner, outer,
                   Regime("transient", max(times), times))


def _release_fraction(amounts, load):
    return (amounts["released_inner"] + amounts["released_outer"]) / load


# --------------------------------------------------------------------------------------------
# Crank 1975, eqs 4.18, 5.23, 6.20: uniform C0, surface held at zero
# --------------------------------------------------------------------------------------------
def crank_sheet(tau):
    """Crank eq. 4.18, M_t/M_inf of a sheet of half-thickness l, tau = D t / l^2."""
    odd = 2 * np.arange(4000)[:, None] + 1
    return 1.0 - np.sum(8.0 / (odd**2 * np.pi**2) * np.exp(-(odd**2) * np.pi**2 * tau / 4.0),
                        axis=0)


def crank_sheet_flux(c0, tau):
    """Outward flux at the surface of that sheet, from differentiating eq. 4.18 in time:
    F = (2 D C0 / l) sum exp(-D (2n+1)^2 pi^2 t / (4 l^2))."""
    odd = 2 * np.arange(4000)[:, None] + 1
    return 2.0 * D * c0 / L * np.sum(np.exp(-(odd**2) * np.pi**2 * tau / 4.0), axis=0)


def crank_cylinder(tau):
    """Crank eq. 5.23: M_t/M_inf = 1 - sum 4/(a^2 alpha_n^2) exp(-D alpha_n^2 t),
    J0(a alpha_n) = 0; tau = D t / a^2."""
    roots = special.jn_zeros(0, 2000)[:, None]
    return 1.0 - np.sum(4.0 / roots**2 * np.exp(-(roots**2) * tau), axis=0)


def crank_sphere(tau):
    """Crank eq. 6.20: M_t/M_inf = 1 - (6/pi^2) sum (1/n^2) exp(-D n^2 pi^2 t / a^2)."""
    n = np.arange(1, 4000)[:, None]
    return 1.0 - 6.0 / np.pi**2 * np.sum(np.exp(-(n**2) * np.pi**2 * tau) / n**2, axis=0)


TIMES = np.linspace(250.0, 5000.0, 20)


@pytest.mark.parametrize(("geometry", "closed_form"), [
    ("slab", crank_sheet), ("cylinder", crank_cylinder), ("sphere", crank_sphere)])
def test_release_fraction_matches_crank(geometry, closed_form):
    problem = _problem(geometry, [Layer("body", L, D, 1.0, initial=2.0)], SEALED, SINK, TIMES)
    study = galerkin_study(problem)
    assert study.success
    expected = closed_form(D * TIMES / L**2)
    load = study.fine.initial_load
    extrapolated = _release_fraction(study.amounts.extrapolated, load)
    assert_allclose(extrapolated, expected, rtol=0, atol=1e-6)
    # the fine mesh's own error lies inside its GCI band
    fine_error = np.abs(_release_fraction(study.fine.amounts(), load) - expected)
    band = (study.amounts.band["released_outer"]) / load
    assert np.all(fine_error <= band)
    # and the band is a real band, not a blanket: at most ten times the error it covers
    assert np.all(band <= 10.0 * fine_error)


def test_sheet_surface_flux_matches_crank():
    problem = _problem("slab", [Layer("body", L, D, 1.0, initial=2.0)], SEALED, SINK, TIMES)
    study = galerkin_study(problem)
    expected = crank_sheet_flux(2.0, D * TIMES / L**2)
    assert_allclose(study.amounts.extrapolated["flux_outer"], expected, rtol=2e-6)
    assert np.all(study.fine.flux_inner == 0.0)


def test_observed_order_is_two_in_the_amounts():
    """P1 elements with lumped mass: second order in the L2 norm and in the amounts (Thomee,
    Galerkin Finite Element Methods for Parabolic Problems, 2006, Theorem 15.1); a sphere
    releasing through a film with first-order uptake, smooth after the first requested time."""
    layer = Layer("body", L, D, 1.0, Reaction("first_order", rate_constant=2e-4), initial=1.0)
    problem = _problem("sphere", [layer], SEALED,
                       Boundary("mass_transfer", coefficient=2e-7, bulk=0.0), TIMES)
    study = galerkin_study(problem)
    for name in ("released_outer", "consumed", "remaining"):
        orders = study.amounts.order[name]
        assert set(study.amounts.convergence[name]) == {"monotonic"}
        assert np.all(np.abs(orders - 2.0) < 0.1), (name, orders)


def test_film_and_first_order_sphere_matches_exact_series():
    """Crank 1975 section 6.3.3 (surface evaporation) with Danckwerts' first-order uptake
    (Crank ch. 14 / Danckwerts 1951): the project's series, itself checked against those."""
    layer = Layer("body", L, D, 1.0, Reaction("first_order", rate_constant=2e-4), initial=1.0)
    problem = _problem("sphere", [layer], SEALED,
                       Boundary("mass_transfer", coefficient=2e-7, bulk=0.3), TIMES)
    study = galerkin_study(problem)
    series = solve_transient_exact(problem)
    scale = series.initial_load
    for name in ("remaining", "released_outer", "consumed"):
        assert_allclose(study.amounts.extrapolated[name], getattr(series, name), rtol=0,
                        atol=2e-6 * scale)
    assert_allclose(study.amounts.extrapolated["flux_outer"], series.flux_outer, rtol=1e-5)


# --------------------------------------------------------------------------------------------
# Zero order before exhaustion: steady parabola + sheet series (superposition)
# --------------------------------------------------------------------------------------------
def zero_order_sheet(c0, cs, q, times):
    """Slab 0 < x < L, sealed at 0, C(L) = Cs, uniform C0, consumption Q while C > 0 everywhere.

    While C stays positive the problem is linear with a constant source, so C = C_ss + w
    (Carslaw & Jaeger, Conduction of Heat in Solids, 2nd ed., 1959, section 3.14: steady state
    with constant heat production plus the transient of the source-free slab): C_ss = Cs -
    Q (L^2 - x^2)/(2D) and w the sheet series with w(L) = 0 (Crank 1975 eq. 4.17's eigen-
    functions cos(lambda_n x), lambda_n = (2n+1) pi/(2L)), w(x,0) = C0 - C_ss(x). With
    s_n = sin(lambda_n L) = (-1)^n, int_0^L cos = s_n/lambda_n and int_0^L (L^2 - x^2) cos =
    2 s_n/lambda_n^3, so a_n = (2/L) [(C0 - Cs) s_n/lambda_n + Q s_n/(D lambda_n^3)]. Returns
    (remaining, consumed, released_outer, flux_outer) per unit area.
    """
    n = np.arange(20000)[:, None]
    lam = (2 * n + 1) * np.pi / (2 * L)
    sign = (-1.0) ** n
    a = 2.0 / L * ((c0 - cs) * sign / lam + q * sign / (D * lam**3))
    decay = np.exp(-D * lam**2 * np.asarray(times)[None, :])
    remaining = cs * L - q * L**3 / (3 * D) + np.sum(a * sign / lam * decay, axis=0)
    consumed = q * L * np.asarray(times)
    released = c0 * L - remaining - consumed
    flux = -q * L + D * np.sum(a * lam * sign * decay, axis=0)  # J = -D dC/dx at x = L
    return remaining, consumed, released, flux


def test_zero_order_before_exhaustion_matches_superposition():
    c0, cs, q = 1.0, 1.0, 1e-4  # Q L^2/(2D) = 0.5 Cs: C stays within [0.5, 1]
    layer = Layer("body", L, D, 1.0, Reaction("zero_order", rate=q), initial=c0)
    problem = _problem("slab", [layer], SEALED, Boundary("concentration", cs), TIMES)
    study = galerkin_study(problem)
    remaining, consumed, released, flux = zero_order_sheet(c0, cs, q, TIMES)
    ext = study.amounts.extrapolated
    assert_allclose(ext["remaining"], remaining, rtol=1e-6)
    assert_allclose(ext["consumed"], consumed, rtol=1e-9)
    assert_allclose(ext["released_outer"], released, rtol=0, atol=1e-6 * c0 * L)
    assert_allclose(ext["flux_outer"], flux, rtol=0, atol=1e-5 * q * L)
    # the live rate never switched off: consumption is exactly Q L t on every mesh
    assert_allclose(study.fine.consumed, consumed, rtol=1e-9)


def test_exhaustion_front_reaches_the_exact_steady_front():
    """Long after the start the zero-order slab fed at x = L holds the exact depleted steady
    state (Hill 1928; Crank 1975 ch. 14: live depth l = sqrt(2 D Cs / Q), C = Q (x - s)^2 / (2D)
    in the live zone, 0 in the dead zone); four diffusion times L^2/D are twenty times the
    l^2/D that the front needs to settle."""
    cs, live_depth = 1.0, 0.45 * L
    q = 2.0 * D * cs / live_depth**2
    layer = Layer("body", L, D, 1.0, Reaction("zero_order", rate=q), initial=0.0)
    end = 4.0 * L**2 / D
    problem = _problem("slab", [layer], SEALED, Boundary("concentration", cs), [0.5 * end, end])
    steady = solve_depleted(dataclasses.replace(problem, regime=Regime("steady")))
    assert steady is not None
    front = steady.depletion_front
    assert front == pytest.approx(L - live_depth)
    solution = solve_transient_galerkin(problem, elements_per_layer=64)
    assert solution.success
    nodes = solution.mesh.nodes
    profile = solution.concentration_at(nodes, [end])[0]
    assert np.max(np.abs(profile - steady.concentration_at(nodes))) < 2e-4 * cs
    assert solution.flux_outer[-1] == pytest.approx(steady.flux_outer, rel=1e-4)
    # the dead zone stays dead and the front found in the profile lies within one element
    assert abs(nodes[profile > 1e-6 * cs].min() - front) < L / 64
    assert np.min(solution.nodal[-1]) > -1e-9 * cs
    assert solution.consumed[-1] - solution.consumed[0] == pytest.approx(
        -steady.flux_outer * 0.5 * end, rel=1e-4)


# --------------------------------------------------------------------------------------------
# Michaelis-Menten: comparison bracket and steady limit
# --------------------------------------------------------------------------------------------
VMAX, KM, CS = 4e-3, 0.05, 0.2


def _mm_sphere(reaction, times=TIMES):
    layer = Layer("body", L, 1e-9, 1.0, reaction, initial=0.0)
    return _problem("sphere", [layer], SEALED, Boundary("concentration", CS), times)


def test_michaelis_menten_uptake_lies_between_first_order_bounds():
    """Comparison principle (Protter & Weinberger, Maximum Principles in Differential
    Equations, 1967, ch. 3, parabolic): for 0 <= C <= Cs, vmax C/(km + Cs) <= R(C) <= vmax C/km,
    so the solution with k = vmax/km lies below the Michaelis-Menten one and the solution with
    k = vmax/(km + Cs) above it at every time; the amounts held follow. Both bounds from the
    exact series (Crank 1975 ch. 6 with Danckwerts' transformation)."""
    mm = galerkin_study(_mm_sphere(Reaction("michaelis_menten", vmax=VMAX, km=KM)))
    lower = solve_transient_exact(_mm_sphere(Reaction("first_order", rate_constant=VMAX / KM)))
    upper = solve_transient_exact(
        _mm_sphere(Reaction("first_order", rate_constant=VMAX / (KM + CS))))
    held = mm.amounts.extrapolated["remaining"]
    assert np.all(lower.remaining < held) and np.all(held < upper.remaining)
    # the bracket is not trivially wide here: the two bounds differ by more than 20 %
    assert np.all(upper.remaining > 1.2 * lower.remaining)
    r = np.linspace(0.0, L, 51)
    profile = mm.fine.concentration_at(r, TIMES)
    assert np.all(profile >= lower.concentration_at(r, TIMES) - 1e-4 * CS)
    assert np.all(profile <= upper.concentration_at(r, TIMES) + 1e-4 * CS)


def test_michaelis_menten_steady_limit_matches_steady_engine():
    reaction = Reaction("michaelis_menten", vmax=VMAX, km=KM)
    end = 40.0 * L**2 / 1e-9
    problem = _mm_sphere(reaction, [0.5 * end, end])
    solution = solve_transient_galerkin(problem, elements_per_layer=160)
    steady = solve_fv(dataclasses.replace(problem, regime=Regime("steady")), 1600)
    assert steady.success
    assert solution.flux_outer[-1] == pytest.approx(steady.flux_outer, rel=2e-4)
    r = np.linspace(0.0, L, 41)
    assert_allclose(solution.concentration_at(r, [end])[0], steady.concentration_at(r),
                    rtol=0, atol=2e-5 * CS)
    # at steady state everything that enters is consumed
    inflow = -4 * np.pi * L**2 * solution.flux_outer[-1]
    assert steady.consumption * 4 * np.pi == pytest.approx(inflow, rel=2e-4)


# --------------------------------------------------------------------------------------------
# FiPy (NIST) on a Michaelis-Menten slab
# --------------------------------------------------------------------------------------------
FIPY_TIMES = (300.0, 1000.0)
MM_SLAB = {"diffusivity": 1e-10, "vmax": 5e-4, "km": 0.05, "surface": 0.2, "initial": 0.1}
PICARD_TOLERANCE = 1e-12  # relative change of C ending FiPy's sweeps within a step
PICARD_MAX_SWEEPS = 100


def fipy_mm_remaining(cells: int, dt: float) -> np.ndarray:
    """Amount held (per m^2) at FIPY_TIMES by FiPy: backward Euler, the Michaelis-Menten sink as
    a lagged ``ImplicitSourceTerm(vmax/(km + C_previous))`` swept to convergence within each
    step, sealed at x = 0 (FiPy's natural condition), surface held at x = L. An LU solve with
    a tight tolerance: FiPy's default tolerance ends the solves early (see
    ``test_fv_vs_fipy``)."""
    from fipy import (
        CellVariable,
        DiffusionTerm,
        Grid1D,
        ImplicitSourceTerm,
        LinearLUSolver,
        TransientTerm,
    )

    spec = MM_SLAB
    mesh = Grid1D(dx=L / cells, nx=cells)
    c = CellVariable(mesh=mesh, value=spec["initial"], hasOld=True)
    c.constrain(spec["surface"], mesh.facesRight)
    lagged = CellVariable(mesh=mesh, value=0.0)
    equation = TransientTerm() == DiffusionTerm(coeff=spec["diffusivity"]) \
        - ImplicitSourceTerm(coeff=lagged)
    solver = LinearLUSolver(tolerance=1e-15, criterion="initial")
    volumes = np.asarray(mesh.cellVolumes)
    held, now = [], 0.0
    for target in FIPY_TIMES:
        for _ in range(int(round((target - now) / dt))):
            c.updateOld()
            for _ in range(PICARD_MAX_SWEEPS):
                previous = np.array(c.value)
                lagged.value = spec["vmax"] / (spec["km"] + np.maximum(previous, 0.0))
                equation.solve(var=c, dt=dt, solver=solver)
                if np.max(np.abs(c.value - previous)) <= PICARD_TOLERANCE * spec["surface"]:
                    break
            else:
                raise AssertionError("FiPy Picard sweeps did not settle")
        now = target
        held.append(float(np.sum(np.asarray(c.value) * volumes)))
    return np.array(held)


@pytest.mark.slow
def test_michaelis_menten_slab_matches_fipy():
    pytest.importorskip("fipy")
    coarse = [fipy_mm_remaining(50, dt) for dt in (25.0, 12.5)]
    fine = [fipy_mm_remaining(100, dt) for dt in (25.0, 12.5)]
    in_time = [2.0 * short - long for long, short in (coarse, fine)]  # backward Euler: order 1
    reference = (4.0 * in_time[1] - in_time[0]) / 3.0  # second order in space
    spread = np.abs(reference - in_time[1])
    spec = MM_SLAB
    layer = Layer("body", L, spec["diffusivity"], 1.0,
                  Reaction("michaelis_menten", vmax=spec["vmax"], km=spec["km"]),
                  initial=spec["initial"])
    problem = _problem("slab", [layer], SEALED, Boundary("concentration", spec["surface"]),
                       FIPY_TIMES)
    study = galerkin_study(problem)
    scale = spec["surface"] * L
    assert np.all(spread < 1e-4 * scale)  # FiPy's extrapolated answer is itself settled
    assert_allclose(study.amounts.extrapolated["remaining"], reference, rtol=0,
                    atol=1e-4 * scale)
