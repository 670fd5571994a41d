"""Exact transient series against published closed forms and independent libraries.

Every scenario value (diffusivities, sizes, times) is invented for these tests; the check values
come from the published formulas written out here, from scipy.special / mpmath roots, or from
published table facts, never from the engine.
"""

from __future__ import annotations

import mpmath
import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import special
from scipy.optimize import brentq

from worker.engine.model import Boundary, Layer, Problem, Reaction, Regime
from worker.engine.transient.eigen_roots import sheet_surface_film_roots
from worker.engine.transient.exact_series import (
    membrane_time_lag,
    short_time_release_fraction,
    solve_transient_exact,
)

DIFFUSIVITY = 3.0e-11  # m^2/s, invented
SINK = Boundary("concentration", 0.0)
CENTRE = Boundary("symmetry")


def _single_layer(geometry, inner, thickness, inner_boundary, outer_boundary, times, *,
                  initial=1.0, rate_constant=0.0, partition=1.0, diffusivity=DIFFUSIVITY):
    reaction = Reaction("first_order", rate_constant=rate_constant) if rate_constant else Reaction()
    layer = Layer("body", thickness, diffusivity, partition, reaction, initial)
    times = tuple(float(t) for t in times)
    return Problem(geometry, inner, (layer,), inner_boundary, outer_boundary,
                   Regime("transient", max(times), times))


def _release_fraction(solution):
    return (solution.released_inner + solution.released_outer) / solution.initial_load


# Crank, The Mathematics of Diffusion, 2nd ed., 1975, eq. 4.18: sheet -l < x < l, uniform C0,
# both faces held at zero: M_t/M_inf = 1 - sum 8/((2n+1)^2 pi^2) exp(-D (2n+1)^2 pi^2 t/(4 l^2)).
def crank_sheet(tau_full):
    """M_t/M_inf of eq. 4.18 with tau = D t / l^2 (l the half-thickness)."""
    n = np.arange(0, 4000)[:, None]
    odd = 2 * n + 1
    return 1.0 - np.sum(8.0 / (odd**2 * np.pi**2) * np.exp(-(odd**2) * np.pi**2 * tau_full / 4.0),
                        axis=0)


def test_sheet_release_matches_crank_4_18():
    thickness = 0.8e-3  # full thickness 2l
    half = thickness / 2
    times = np.array([30.0, 300.0, 2000.0, 6000.0, 20000.0])
    problem = _single_layer("slab", 0.0, thickness, SINK, SINK, times)
    solution = solve_transient_exact(problem)
    expected = crank_sheet(DIFFUSIVITY * times / half**2)
    assert_allclose(_release_fraction(solution), expected, rtol=1e-10, atol=1e-13)
    # symmetry: half leaves through each face
    assert_allclose(solution.released_inner, solution.released_outer, rtol=1e-10)
    assert_allclose(1.0 - solution.remaining / solution.initial_load, expected, rtol=1e-10)


def test_sealed_back_layer_is_half_of_a_symmetric_sheet():
    # A layer of thickness l sealed at x = 0 releases like the half sheet (Crank 1975 section 4.3).
    thickness = 0.4e-3
    times = np.array([100.0, 1000.0, 5000.0])
    problem = _single_layer("slab", 0.0, thickness, CENTRE, SINK, times)
    solution = solve_transient_exact(problem)
    assert_allclose(solution.released_outer / solution.initial_load,
                    crank_sheet(DIFFUSIVITY * times / thickness**2), rtol=1e-10)
    assert np.all(solution.released_inner == 0.0)


def test_sheet_half_time_constant_0_049():
    # Crank 1975 section 4.3: for desorption from a sheet of full thickness L into a sink on both
    # faces, D t_half / L^2 = 0.049 (published to three decimals; L the full thickness).
    thickness = 1.0e-3

    def excess(t):
        solution = solve_transient_exact(_single_layer("slab", 0.0, thickness, SINK, SINK, [t]))
        return float(_release_fraction(solution)[0]) - 0.5

    t_half = brentq(excess, 100.0, 10000.0, xtol=1e-6)
    assert abs(DIFFUSIVITY * t_half / thickness**2 - 0.049) < 5e-4


def test_cylinder_release_matches_crank_5_23():
    # Crank 1975 eq. 5.23: M_t/M_inf = 1 - sum 4/(a^2 alpha_n^2) exp(-D alpha_n^2 t),
    # J0(a alpha_n) = 0; roots from scipy.special.jn_zeros.
    radius = 0.6e-3
    times = np.array([20.0, 400.0, 3000.0, 9000.0])
    problem = _single_layer("cylinder", 0.0, radius, CENTRE, SINK, times)
    solution = solve_transient_exact(problem)
    alpha = special.jn_zeros(0, 3000)[:, None] / radius
    expected = 1.0 - np.sum(4.0 / (radius**2 * alpha**2) * np.exp(-DIFFUSIVITY * alpha**2 * times),
                            axis=0)
    assert_allclose(solution.released_outer / solution.initial_load, expected, rtol=1e-9)
    assert_allclose(solution.initial_load, 2 * np.pi * radius**2 / 2, rtol=1e-14)  # per metre


def test_sphere_release_matches_crank_6_20():
    # Crank 1975 eq. 6.20 (printed p. 91):
    # M_t/M_inf = 1 - (6/pi^2) sum (1/n^2) exp(-D n^2 pi^2 t/a^2).
    radius = 0.5e-3
    times = np.array([10.0, 200.0, 1500.0, 8000.0])
    problem = _single_layer("sphere", 0.0, radius, CENTRE, SINK, times)
    solution = solve_transient_exact(problem)
    n = np.arange(1, 4000)[:, None]
    expected = 1.0 - 6.0 / np.pi**2 * np.sum(
        np.exp(-DIFFUSIVITY * n**2 * np.pi**2 * times / radius**2) / n**2, axis=0)
    assert_allclose(solution.released_outer / solution.initial_load, expected, rtol=1e-9)
    assert_allclose(solution.initial_load, 4 * np.pi * radius**3 / 3, rtol=1e-14)


@pytest.mark.parametrize(
    ("geometry", "centre"), [("slab", SINK), ("slab", CENTRE), ("sphere", CENTRE),
                             ("cylinder", CENTRE)])
def test_short_time_forms_agree_with_the_series(geometry, centre):
    # Second route: Crank 1975 eqs. 4.20 (sheet), 6.21 (sphere) and 5.24 (cylinder) are the
    # short-time (erfc) forms of the same solutions; at Dt/l^2 = 1e-6 .. 1e-2 both routes agree
    # (the cylinder form is truncated after three terms, so only at 1e-6).
    size = 1.0e-3
    tau = np.array([1e-6, 1e-5, 1e-4, 1e-2]) if geometry != "cylinder" else np.array([1e-6])
    scale = (size / 2) if (geometry == "slab" and centre is SINK) else size
    times = tau * scale**2 / DIFFUSIVITY
    problem = _single_layer(geometry, 0.0, size, centre, SINK, times)
    short = short_time_release_fraction(problem, times)
    series = solve_transient_exact(problem)
    assert np.all(series.converged)
    assert_allclose(short, _release_fraction(series), rtol=2e-6 if geometry == "cylinder" else 1e-9)


def test_surface_film_roots_match_mpmath():
    # Crank 1975 section 4.3.5 (from memory): roots of beta tan beta = L; verified independently
    # with mpmath.findroot started inside each bracket.
    for film in (0.05, 1.0, 7.5, 200.0):
        ours = sheet_surface_film_roots(film, 12)
        theirs = [float(mpmath.findroot(lambda b, f=film: b * mpmath.sin(b) - f * mpmath.cos(b),
                                        (k * mpmath.pi, k * mpmath.pi + mpmath.pi / 2),
                                        solver="illinois"))
                  for k in range(12)]
        assert_allclose(ours, theirs, rtol=1e-13)


def test_surface_film_sheet_matches_crank_4_3_5():
    # Crank 1975 section 4.3.5 (from memory; the coefficients re-derived by hand from the
    # eigenfunctions cos(beta x/l) give the same form, and the FV test checks it numerically):
    # sheet -l < x < l, -D dC/dx = alpha C at x = l,
    # M_t/M_inf = 1 - sum 2 L^2 exp(-beta_n^2 D t/l^2) / (beta_n^2 (beta_n^2 + L^2 + L)),
    # beta tan beta = L = l alpha/D. Roots from mpmath, independent of the engine.
    half = 0.3e-3
    coefficient = 2.0e-7  # m/s, invented
    film = half * coefficient / DIFFUSIVITY
    betas = np.array([float(mpmath.findroot(lambda b: b * mpmath.sin(b) - film * mpmath.cos(b),
                                            (k * mpmath.pi, k * mpmath.pi + mpmath.pi / 2),
                                            solver="illinois")) for k in range(400)])[:, None]
    times = np.array([50.0, 500.0, 3000.0, 12000.0])
    expected = 1.0 - np.sum(2 * film**2 * np.exp(-(betas**2) * DIFFUSIVITY * times / half**2)
                            / (betas**2 * (betas**2 + film**2 + film)), axis=0)
    film_face = Boundary("mass_transfer", coefficient=coefficient, bulk=0.0)
    problem = _single_layer("slab", 0.0, half, CENTRE, film_face, times)
    solution = solve_transient_exact(problem)
    assert_allclose(solution.released_outer / solution.initial_load, expected, rtol=1e-8)


def test_membrane_cumulative_amount_and_time_lag_daynes_barrer():
    # Daynes, Proc. R. Soc. A 97 (1920) 286; Barrer, Trans. Faraday Soc. 35 (1939) 628;
    # Crank 1975 section 4.3: initially empty sheet, C1 at x = 0, 0 at x = L:
    # Q_t/(L C1) = D t/L^2 - 1/6 - (2/pi^2) sum (-1)^n/n^2 exp(-D n^2 pi^2 t/L^2); lag L^2/(6D).
    thickness = 0.25e-3
    source = 4.0  # mol/m^3, invented
    times = np.array([20.0, 100.0, 400.0, 1000.0, 5000.0])
    problem = _single_layer("slab", 0.0, thickness, Boundary("concentration", source), SINK, times,
                            initial=0.0)
    solution = solve_transient_exact(problem)
    n = np.arange(1, 4000)[:, None]
    tau = DIFFUSIVITY * times / thickness**2
    expected = thickness * source * (
        tau - 1.0 / 6.0
        - 2.0 / np.pi**2 * np.sum((-1.0) ** n / n**2 * np.exp(-(n**2) * np.pi**2 * tau), axis=0))
    # absolute tolerance: the published series cancels badly at small times
    assert_allclose(solution.released_outer, expected, rtol=1e-9, atol=1e-12 * thickness * source)
    assert_allclose(solution.time_lag, thickness**2 / (6 * DIFFUSIVITY), rtol=1e-10)
    assert_allclose(membrane_time_lag(DIFFUSIVITY, thickness), thickness**2 / (6 * DIFFUSIVITY))
    # amount taken up through the source face = amount out + amount held (mass balance)
    assert_allclose(-solution.released_inner, solution.released_outer + solution.remaining,
                    rtol=1e-10)


def test_first_order_consumption_follows_danckwerts_transformation():
    # Danckwerts, Trans. Faraday Soc. 47 (1951) 1014; Crank 1975 ch. 14 (from memory): with zero
    # boundary data, C = exp(-k t) u with u the reaction-free solution, so the amount remaining is
    # exp(-k t) times that of eq. 4.18.
    half = 0.5e-3
    rate_constant = 4.0e-4  # 1/s, invented
    times = np.array([60.0, 600.0, 4000.0])
    problem = _single_layer("slab", 0.0, 2 * half, SINK, SINK, times, rate_constant=rate_constant)
    solution = solve_transient_exact(problem)
    remaining_free = 1.0 - crank_sheet(DIFFUSIVITY * times / half**2)
    assert_allclose(solution.remaining / solution.initial_load,
                    np.exp(-rate_constant * times) * remaining_free, rtol=1e-10)
    balance = (solution.remaining + solution.released_inner + solution.released_outer
               + solution.consumed)
    assert_allclose(balance, solution.initial_load, rtol=1e-11)


def test_hollow_cylinder_eigenvalues_match_mpmath_cross_product():
    # Carslaw & Jaeger 1959 section 7.7 / Crank 1975 ch. 5: both faces at zero, roots of
    # J0(a lam) Y0(b lam) - J0(b lam) Y0(a lam) = 0, found here with mpmath from the engine's
    # release decay: the slowest decay rate of the amount remaining is D lam_1^2.
    inner, outer = 0.4e-3, 1.0e-3
    lam1 = float(mpmath.findroot(
        lambda x: mpmath.besselj(0, inner * x) * mpmath.bessely(0, outer * x)
        - mpmath.besselj(0, outer * x) * mpmath.bessely(0, inner * x), np.pi / (outer - inner)))
    late = np.array([4.0e4, 6.0e4])
    problem = _single_layer("cylinder", inner, outer - inner, SINK, SINK, late)
    solution = solve_transient_exact(problem)
    observed_rate = np.log(solution.remaining[0] / solution.remaining[1]) / (late[1] - late[0])
    assert_allclose(observed_rate, DIFFUSIVITY * lam1**2, rtol=1e-8)


def test_hollow_bodies_reach_the_published_steady_rates():
    # Crank 1975 eqs. 5.4-5.5 and 6.4-6.5 (from memory); Bird, Stewart, Lightfoot 2002 ch. 10:
    # steady rate per length 2 pi D (C1 - C2)/ln(b/a) (cylinder), total 4 pi D ab (C1-C2)/(b-a)
    # (sphere). With partition K, surface values are K times the fluid values.
    inner, outer, partition = 0.3e-3, 0.9e-3, 0.6
    c1, c2 = 2.0, 0.5
    late = [2.0e6]
    for geometry, expected in (
        ("cylinder", 2 * np.pi * DIFFUSIVITY * partition * (c1 - c2) / np.log(outer / inner)),
        ("sphere",
         4 * np.pi * DIFFUSIVITY * partition * (c1 - c2) * inner * outer / (outer - inner)),
    ):
        problem = _single_layer(geometry, inner, outer - inner, Boundary("concentration", c1),
                                Boundary("concentration", c2), late, partition=partition)
        solution = solve_transient_exact(problem)
        measure = 2 * np.pi * outer if geometry == "cylinder" else 4 * np.pi * outer**2
        assert_allclose(measure * solution.flux_outer[0], expected, rtol=1e-10)
