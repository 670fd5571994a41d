"""Exact steady solutions with first-order consumption (Thiele modulus from 1e-3 to 3000).

Check values: the effectiveness factors of E.W. Thiele, "Relation between catalytic activity and
size of particle", Ind. Eng. Chem. 31 (1939) 916-920 and R. Aris, The Mathematical Theory of
Diffusion and Reaction in Permeable Catalysts, Oxford, 1975, evaluated with mpmath at 40 digits;
the annulus solution A I0(m r) + B K0(m r) (H.S. Carslaw, J.C. Jaeger, Conduction of Heat in
Solids, 2nd ed., 1959; J. Crank, The Mathematics of Diffusion, 1975, ch. 14) solved with mpmath
at 40 digits; the large-phi asymptotes eta -> 1/phi, 2/phi, 3/phi. Scenario values are invented.
"""

import math

import mpmath
import numpy as np
import pytest
from numpy.testing import assert_allclose

from worker.engine.exact_steady import solve_exact
from worker.engine.model import Boundary, Layer, Problem, Reaction


@pytest.fixture(autouse=True)
def _mpmath_precision():
    """Reference values at 40 significant digits, without touching other modules' setting."""
    with mpmath.workdps(40):
        yield
PHIS = [1e-3, 1.0, 30.0, 300.0, 3000.0]


def first_order(k):
    return Reaction("first_order", rate_constant=k)


def reference_eta(geometry, phi):
    """Thiele 1939 / Aris 1975 effectiveness factors, evaluated with mpmath (40 digits)."""
    p = mpmath.mpf(phi)
    if geometry == "slab":
        return float(mpmath.tanh(p) / p)
    if geometry == "cylinder":
        return float(2 * mpmath.besseli(1, p) / (p * mpmath.besseli(0, p)))
    return float(3 / p**2 * (p * mpmath.coth(p) - 1))


def solid_body(geometry, radius, d, k, surface):
    # A slab with a sealed mid-plane at x = 0 is the slab counterpart of a solid body.
    return Problem(geometry=geometry, inner=0.0,
                   layers=(Layer("body", radius, d, reaction=first_order(k)),),
                   inner_boundary=Boundary("symmetry"),
                   outer_boundary=Boundary("concentration", value=surface))


@pytest.mark.parametrize("geometry", ["slab", "cylinder", "sphere"])
@pytest.mark.parametrize("phi", PHIS)
def test_effectiveness_factor_from_surface_flux(geometry, phi):
    """eta = (surface uptake) / (k Cs V): Thiele 1939; Aris 1975 (slab tanh(phi)/phi, cylinder
    2 I1/(phi I0), sphere (3/phi^2)(phi coth phi - 1)), mpmath at 40 digits. Also the
    consumption, integrated from the profile, gives the same eta."""
    radius, d, surface = 0.7e-3, 1.1e-9, 0.35
    k = phi**2 * d / radius**2
    sol = solve_exact(solid_body(geometry, radius, d, k, surface))
    assert sol.success
    n = {"slab": 0, "cylinder": 1, "sphere": 2}[geometry]
    full_rate = k * surface * radius ** (n + 1) / (n + 1)
    eta_flux = radius**n * (-sol.flux_outer) / full_rate
    eta_uptake = sol.consumption / full_rate
    expected = reference_eta(geometry, phi)
    assert_allclose(eta_flux, expected, rtol=1e-12)
    assert_allclose(eta_uptake, expected, rtol=1e-11)
    assert_allclose(sol.concentration_at(radius), surface, rtol=1e-14)


@pytest.mark.parametrize("geometry, factor", [("slab", 1.0), ("cylinder", 2.0), ("sphere", 3.0)])
@pytest.mark.parametrize("phi", [300.0, 3000.0])
def test_large_thiele_asymptote(geometry, factor, phi):
    """For phi >> 1 the reaction is confined to a surface layer and eta -> 1/phi, 2/phi, 3/phi
    (Aris 1975; Thiele 1939). The next term of the expansion is O(1/phi^2) relative: slab 0,
    sphere -3/phi^2 (exactly, coth -> 1), cylinder -1/(2 phi) from I1/I0 ~ 1 - 1/(2 phi)
    (Abramowitz & Stegun 1964, 9.7.1, number from memory)."""
    radius, d = 2e-3, 1e-9
    k = phi**2 * d / radius**2
    sol = solve_exact(solid_body(geometry, radius, d, k, 1.0))
    n = {"slab": 0, "cylinder": 1, "sphere": 2}[geometry]
    eta = radius**n * (-sol.flux_outer) / (k * radius ** (n + 1) / (n + 1))
    correction = {"slab": 1.0, "cylinder": 1 - 1 / (2 * phi), "sphere": 1 - 1 / phi}[geometry]
    assert_allclose(eta, factor / phi * correction, rtol=1.5 / phi**2)
    profile = sol.concentration_at(np.linspace(0.0, radius, 101))
    assert np.all(np.isfinite(profile))
    assert np.all(profile >= 0.0)
    # Surface-layer decay: C(R - 5/m) / Cs = exp(-5) (R/(R - 5/m))^(n/2) to O(1/phi).
    depth = 5.0 / math.sqrt(k / d)
    ratio = sol.concentration_at(radius - depth) / 1.0
    assert_allclose(ratio, math.exp(-5.0) * (radius / (radius - depth)) ** (n / 2), rtol=20 / phi)


def annulus_reference(r1, r2, d, k, c1, c2, radii):
    """C = A I0(m r) + B K0(m r) with C(r1) = c1, C(r2) = c2 (Carslaw & Jaeger 1959; Crank
    1975 ch. 14), evaluated with mpmath; returns C at radii and J = -D dC/dr at r1 and r2."""
    m = mpmath.sqrt(mpmath.mpf(k) / d)
    r1, r2 = mpmath.mpf(r1), mpmath.mpf(r2)
    i1_, k1_ = mpmath.besseli(0, m * r1), mpmath.besselk(0, m * r1)
    i2_, k2_ = mpmath.besseli(0, m * r2), mpmath.besselk(0, m * r2)
    det = i1_ * k2_ - k1_ * i2_  # Cramer's rule: the entries span thousands of decades
    a, b = (c1 * k2_ - c2 * k1_) / det, (i1_ * c2 - i2_ * c1) / det

    def conc(r):
        return a * mpmath.besseli(0, m * r) + b * mpmath.besselk(0, m * r)

    def flux(r):
        return -d * m * (a * mpmath.besseli(1, m * r) - b * mpmath.besselk(1, m * r))

    return ([float(conc(mpmath.mpf(r))) for r in radii], float(flux(r1)), float(flux(r2)))


@pytest.mark.parametrize("phi", PHIS)
def test_annulus_first_order_against_mpmath(phi):
    """Hollow cylinder with first-order uptake and fixed C at both faces: the I0/K0 solution
    (Carslaw & Jaeger 1959; Crank 1975 ch. 14) evaluated independently with mpmath."""
    r1, r2, d, c1, c2 = 0.4e-3, 1.0e-3, 2e-9, 1.6, 0.3
    k = (phi / (r2 - r1)) ** 2 * d
    sol = solve_exact(Problem(
        geometry="cylinder", inner=r1,
        layers=(Layer("annulus", r2 - r1, d, reaction=first_order(k)),),
        inner_boundary=Boundary("concentration", value=c1),
        outer_boundary=Boundary("concentration", value=c2)))
    radii = [r1, r1 + 0.3 * (r2 - r1), 0.5 * (r1 + r2), r2 - 1e-3 * (r2 - r1), r2]
    expected, j1, j2 = annulus_reference(r1, r2, d, k, c1, c2, radii)
    # Deep inside a thick layer C ~ exp(-phi/2) underflows relative to the faces: absolute floor.
    assert_allclose(sol.concentration_at(np.array(radii)), expected, rtol=1e-10, atol=1e-14)
    assert_allclose([sol.flux_inner, sol.flux_outer], [j1, j2], rtol=1e-10)


def test_sealed_annulus_effectiveness_against_mpmath():
    """Annulus fed at r1 (fixed C) and sealed at r2: C = A I0(m r) + B K0(m r) with
    I1(m r2) A = K1(m r2) B (Carslaw & Jaeger 1959), mpmath at 40 digits."""
    r1, r2, d, k, c1 = 0.2e-3, 0.9e-3, 1.5e-9, 6.0, 0.8
    sol = solve_exact(Problem(
        geometry="cylinder", inner=r1,
        layers=(Layer("tissue", r2 - r1, d, reaction=first_order(k)),),
        inner_boundary=Boundary("concentration", value=c1),
        outer_boundary=Boundary("symmetry")))
    m = mpmath.sqrt(mpmath.mpf(k) / d)
    ratio = mpmath.besselk(1, m * r2) / mpmath.besseli(1, m * r2)  # A = ratio * B
    b = c1 / (ratio * mpmath.besseli(0, m * r1) + mpmath.besselk(0, m * r1))
    a = ratio * b
    flux_r1 = -d * m * (a * mpmath.besseli(1, m * r1) - b * mpmath.besselk(1, m * r1))
    assert_allclose(sol.flux_inner, float(flux_r1), rtol=1e-12)
    assert abs(sol.flux_outer) < 1e-12 * abs(sol.flux_inner)
    c_r2 = a * mpmath.besseli(0, m * r2) + b * mpmath.besselk(0, m * r2)
    assert_allclose(sol.concentration_at(r2), float(c_r2), rtol=1e-12)


@pytest.mark.parametrize("geometry", ["slab", "cylinder", "sphere"])
@pytest.mark.parametrize("biot", [0.05, 2.0, 400.0])
def test_film_resistance_overall_effectiveness(geometry, biot):
    """External film (Aris 1975, overall effectiveness with external resistance; from memory, so
    verified here by the surface balance too): with Bi = hR/D and the surface flux
    D Cs m eta-bar, the surface concentration is Cs = C_bulk / (1 + phi^2 eta/((n+1) Bi)),
    eta the Thiele 1939 factor (mpmath), n the geometric exponent."""
    radius, d, phi, c_bulk = 0.5e-3, 1e-9, 4.0, 2.0
    k = phi**2 * d / radius**2
    h = biot * d / radius
    sol = solve_exact(Problem(
        geometry=geometry, inner=0.0,
        layers=(Layer("pellet", radius, d, reaction=first_order(k)),),
        inner_boundary=Boundary("symmetry"),
        outer_boundary=Boundary("mass_transfer", coefficient=h, bulk=c_bulk)))
    n = {"slab": 0, "cylinder": 1, "sphere": 2}[geometry]
    eta = reference_eta(geometry, phi)
    surface = c_bulk / (1 + phi**2 * eta / ((n + 1) * biot))
    assert_allclose(sol.concentration_at(radius), surface, rtol=1e-12)
    # Surface balance: film supply h (C_bulk - Cs) equals the uptake eta k Cs R/(n+1).
    assert_allclose(-sol.flux_outer, h * (c_bulk - surface), rtol=1e-12)
    assert_allclose(-sol.flux_outer, eta * k * surface * radius / (n + 1), rtol=1e-12)


def test_two_layer_cylinder_against_mpmath():
    """Fibre wall (no reaction, K = 0.8) around a lumen at fixed C, and a consuming cell layer
    (first order, K = 1) sealed outside. Wall: C = K(u1 + g ln(r/r1)); cell layer:
    A I0(m r) + B K0(m r) (Carslaw & Jaeger 1959; Crank 1975 ch. 12, 14); the four conditions
    (fixed C, C/K and flux continuous, sealed) are solved with mpmath at 40 digits."""
    r1, t1, t2 = 0.1e-3, 40e-6, 150e-6
    d1, d2, k1, k2, rate, c_lumen = 1.5e-9, 2.0e-9, 0.8, 1.0, 0.9, 0.2
    sol = solve_exact(Problem(
        geometry="cylinder", inner=r1,
        layers=(Layer("wall", t1, d1, partition=k1),
                Layer("cells", t2, d2, partition=k2, reaction=first_order(rate))),
        inner_boundary=Boundary("concentration", value=c_lumen),
        outer_boundary=Boundary("flux", value=0.0)))
    mp = mpmath.mpf
    ri, r2 = mp(r1) + mp(t1), mp(r1) + mp(t1) + mp(t2)
    m = mpmath.sqrt(mp(rate) / d2)
    i0, i1 = (lambda r: mpmath.besseli(0, m * r)), (lambda r: mpmath.besseli(1, m * r))
    k0, kk1 = (lambda r: mpmath.besselk(0, m * r)), (lambda r: mpmath.besselk(1, m * r))
    # unknowns: u (= C/K at r1, equal to the lumen value), g, A, B
    matrix = mpmath.matrix([
        [1, 0, 0, 0],
        [1, mpmath.log(ri / r1), -i0(ri) / k2, -k0(ri) / k2],
        [0, d1 * k1 / ri, -d2 * m * i1(ri), d2 * m * kk1(ri)],
        [0, 0, i1(r2), -kk1(r2)],
    ])
    u, g, a, b = mpmath.lu_solve(matrix, mpmath.matrix([c_lumen, 0, 0, 0]))
    flux_r1 = -d1 * k1 * g / r1
    c_interface_cells = a * i0(ri) + b * k0(ri)
    c_outer = a * i0(r2) + b * k0(r2)
    assert_allclose(sol.flux_inner, float(flux_r1), rtol=1e-12)
    assert_allclose(sol.concentration_at(float(ri), layer=1), float(c_interface_cells),
                    rtol=1e-12)
    assert_allclose(sol.concentration_at(float(r2)), float(c_outer), rtol=1e-12)
    # Exact conservation: r1 J(r1) - r2 J(r2) = integral of k C r dr (steady shell balance).
    assert_allclose(r1 * sol.flux_inner - float(r2) * sol.flux_outer, sol.consumption,
                    rtol=1e-12)


@pytest.mark.parametrize("geometry", ["slab", "cylinder", "sphere"])
@pytest.mark.parametrize("phi", PHIS)
def test_three_layer_body_conserves_mass(geometry, phi):
    """Steady shell balance (Bird, Stewart & Lightfoot 2002 §18): r_in^n J_in - r_out^n J_out
    equals the integral of R(C) r^n dr. The consumption is integrated from the profile and the
    fluxes come from its derivative, so the two routes are independent. Films on both faces,
    partition jumps, a reacting middle layer."""
    r_in, d = 0.3e-3, 1e-9
    t = [50e-6, 400e-6, 80e-6]
    k = (phi / t[1]) ** 2 * d
    sol = solve_exact(Problem(
        geometry=geometry, inner=r_in,
        layers=(Layer("a", t[0], 3e-10, partition=2.0),
                Layer("b", t[1], d, partition=0.7, reaction=first_order(k)),
                Layer("c", t[2], 5e-11, partition=5.0)),
        inner_boundary=Boundary("mass_transfer", coefficient=1e-5, bulk=1.0),
        outer_boundary=Boundary("mass_transfer", coefficient=2e-6, bulk=0.1)))
    assert sol.success
    n = {"slab": 0, "cylinder": 1, "sphere": 2}[geometry]
    r_out = r_in + sum(t)
    balance = r_in**n * sol.flux_inner - r_out**n * sol.flux_outer
    scale = max(abs(r_in**n * sol.flux_inner), abs(r_out**n * sol.flux_outer))
    assert_allclose(balance, sol.consumption, rtol=1e-10, atol=1e-12 * scale)
    assert sol.consumption > 0.0
    assert sol.diagnostics["relative_residual"] < 1e-13


@pytest.mark.parametrize("geometry", ["slab", "sphere"])
@pytest.mark.parametrize("phi", PHIS)
def test_sheet_and_shell_first_order_against_mpmath(geometry, phi):
    """Fixed C at both faces of a sheet or a spherical shell with first-order uptake:
    r^n/2 C = [c2 r2^(n/2) sinh(m (r - r1)) + c1 r1^(n/2) sinh(m (r2 - r))] / sinh(m L), n = 0, 2
    (Carslaw & Jaeger 1959; Crank 1975 ch. 6 and 14: u = r C obeys u'' = m^2 u in a sphere),
    evaluated with mpmath at 40 digits."""
    r1, r2, d, c1, c2 = 0.6e-3, 1.4e-3, 9e-10, 0.25, 1.1
    k = (phi / (r2 - r1)) ** 2 * d
    sol = solve_exact(Problem(
        geometry=geometry, inner=r1,
        layers=(Layer("shell", r2 - r1, d, reaction=first_order(k)),),
        inner_boundary=Boundary("concentration", value=c1),
        outer_boundary=Boundary("concentration", value=c2)))
    m = mpmath.sqrt(mpmath.mpf(k) / d)
    a, b = mpmath.mpf(r1), mpmath.mpf(r2)
    weight = (lambda r: 1) if geometry == "slab" else (lambda r: r)

    def u(r):
        return (c2 * weight(b) * mpmath.sinh(m * (r - a))
                + c1 * weight(a) * mpmath.sinh(m * (b - r))) / mpmath.sinh(m * (b - a))

    def conc(r):
        return u(r) / weight(r)

    def flux(r):
        return -d * mpmath.diff(conc, r)

    radii = [r1, r1 + 0.01 * (r2 - r1), 0.5 * (r1 + r2), r2 - 0.01 * (r2 - r1), r2]
    expected = [float(conc(mpmath.mpf(r))) for r in radii]
    assert_allclose(sol.concentration_at(np.array(radii)), expected, rtol=1e-10, atol=1e-14)
    assert_allclose([sol.flux_inner, sol.flux_outer],
                    [float(flux(a)), float(flux(b))], rtol=1e-10)
