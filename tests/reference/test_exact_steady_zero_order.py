"""Zero-order consumption: undepleted profiles, critical sizes, depletion fronts, Krogh cylinder.

Check values: A.V. Hill, "The diffusion of oxygen and lactic acid through tissues", Proc. R. Soc.
B 104 (1928) 39 and J. Crank, The Mathematics of Diffusion, 2nd ed., 1975, ch. 14 (profiles
C = Cs - Q (R^2 - r^2)/(2 N D), N = 1, 2, 3 for slab, cylinder, sphere; critical sizes
sqrt(2 D Cs/Q), sqrt(4 D Cs/Q), sqrt(6 D Cs/Q); front equations), A. Krogh, J. Physiol. 52 (1919)
409-415 (tissue cylinder around a capillary). Front equations are solved here independently with
mpmath.findroot. Scenario values are invented.
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
    """Reference values at 30 significant digits, without touching other modules' setting."""
    with mpmath.workdps(30):
        yield
N_OF = {"slab": 1, "cylinder": 2, "sphere": 3}  # space dimensions: the geometry exponent + 1


def zero(q):
    return Reaction("zero_order", rate=q)


def fed_body(geometry, radius, d, q, surface, inner=0.0, outer=None):
    return Problem(geometry=geometry, inner=inner,
                   layers=(Layer("tissue", radius - inner, d, reaction=zero(q)),),
                   inner_boundary=Boundary("symmetry"),
                   outer_boundary=outer or Boundary("concentration", value=surface))


@pytest.mark.parametrize("geometry", ["slab", "cylinder", "sphere"])
def test_undepleted_profile(geometry):
    """Hill 1928; Crank 1975 ch. 14: C(r) = Cs - Q (R^2 - r^2) / (2 N D), N = 1, 2, 3, below the
    critical size (here R = 0.8 of it)."""
    d, q, cs = 1.7e-9, 2.4e-2, 0.13
    big_n = N_OF[geometry]
    radius = 0.8 * math.sqrt(2 * big_n * d * cs / q)
    sol = solve_exact(fed_body(geometry, radius, d, q, cs))
    assert sol.success and sol.depletion_front is None
    r = np.linspace(0.0, radius, 9)
    assert_allclose(sol.concentration_at(r), cs - q * (radius**2 - r**2) / (2 * big_n * d),
                    rtol=1e-12, atol=1e-15)
    assert_allclose(sol.flux_at(r), -q * r / big_n, rtol=1e-12, atol=1e-20)
    # Consumption is Q times the r^n-weighted volume R^N / N.
    assert_allclose(sol.consumption, q * radius**big_n / big_n, rtol=1e-14)


@pytest.mark.parametrize("geometry", ["slab", "cylinder", "sphere"])
def test_critical_size(geometry):
    """Hill 1928; Crank 1975 ch. 14: the centre just runs out at R_crit = sqrt(2 N D Cs / Q).
    Just below it there is no depleted zone and C(0) ~ 0; just above it a small core appears."""
    d, q, cs = 2.5e-9, 0.11, 0.05
    critical = math.sqrt(2 * N_OF[geometry] * d * cs / q)
    below = solve_exact(fed_body(geometry, critical * (1 - 1e-9), d, q, cs))
    assert below.depletion_front is None
    assert 0.0 <= below.concentration_at(0.0) < 1e-8 * cs
    above = solve_exact(fed_body(geometry, critical * 1.01, d, q, cs))
    assert above.depletion_front is not None
    assert 0.0 < above.depletion_front < 0.3 * critical


def published_front(geometry, radius, d, q, cs):
    """Front position from the published equations (Hill 1928; Crank 1975 ch. 14), mpmath:
    slab (sealed mid-plane): s = R - sqrt(2 D Cs/Q);
    cylinder: Cs = (Q/(4D)) [R^2 - s^2 - 2 s^2 ln(R/s)];
    sphere:   Cs = (Q/(6D)) [R^2 - 3 s^2 + 2 s^3 / R]."""
    R, D, Q, C = (mpmath.mpf(v) for v in (radius, d, q, cs))
    if geometry == "slab":
        return float(R - mpmath.sqrt(2 * D * C / Q))
    if geometry == "cylinder":
        def f(s):
            return Q / (4 * D) * (R**2 - s**2 - 2 * s**2 * mpmath.log(R / s)) - C
    else:
        def f(s):
            return Q / (6 * D) * (R**2 - 3 * s**2 + 2 * s**3 / R) - C
    return float(mpmath.findroot(f, (R * mpmath.mpf("1e-6"), R * (1 - mpmath.mpf("1e-9"))),
                                 solver="anderson"))


@pytest.mark.parametrize("geometry", ["slab", "cylinder", "sphere"])
@pytest.mark.parametrize("oversize", [1.05, 2.0, 40.0])
def test_depleted_core_front(geometry, oversize):
    """Above the critical size the core is depleted; its edge has C = dC/dr = 0 and solves the
    published front equation (Hill 1928; Crank 1975 ch. 14, solved with mpmath.findroot).
    Consumption is exactly Q times the live volume, and equals the uptake through the surface."""
    d, q, cs = 2e-9, 0.04, 0.2
    big_n = N_OF[geometry]
    radius = oversize * math.sqrt(2 * big_n * d * cs / q)
    sol = solve_exact(fed_body(geometry, radius, d, q, cs))
    front = published_front(geometry, radius, d, q, cs)
    assert_allclose(sol.depletion_front, front, rtol=1e-12)
    own_front = sol.depletion_front
    assert_allclose(sol.concentration_at(np.array([0.0, 0.5 * own_front, own_front])), 0.0,
                    atol=1e-16)
    assert_allclose(sol.flux_at(np.array([0.5 * own_front, own_front])), 0.0, atol=1e-20)
    assert_allclose(sol.concentration_at(radius), cs, rtol=1e-13)
    live = q * (radius**big_n - front**big_n) / big_n
    assert_allclose(sol.consumption, live, rtol=1e-13)
    assert_allclose(-radius ** (big_n - 1) * sol.flux_outer, live, rtol=1e-11)
    assert sol.flux_inner == 0.0
    assert np.all(sol.concentration_at(np.linspace(0.0, radius, 200)) >= 0.0)


def test_slab_fed_on_both_faces_has_central_dead_zone():
    """Plane sheet fed at both faces (different surface concentrations), thick enough to run out
    in the middle: each live zone reaches sqrt(2 D Cs_i / Q) from its face (Hill 1928; Crank 1975
    ch. 14), the dead zone lies between."""
    d, q, c1, c2, thickness = 1e-9, 0.5, 0.3, 0.08, 4e-4
    sol = solve_exact(Problem(
        geometry="slab", inner=1e-3, layers=(Layer("gel", thickness, d, reaction=zero(q)),),
        inner_boundary=Boundary("concentration", value=c1),
        outer_boundary=Boundary("concentration", value=c2)))
    depth1, depth2 = math.sqrt(2 * d * c1 / q), math.sqrt(2 * d * c2 / q)
    low, high = sol.diagnostics["depleted_zone"]
    assert_allclose([low, high], [1e-3 + depth1, 1e-3 + thickness - depth2], rtol=1e-13)
    assert_allclose(sol.depletion_front, 1e-3 + depth1, rtol=1e-13)
    assert_allclose(sol.flux_inner, q * depth1, rtol=1e-12)
    assert_allclose(sol.flux_outer, -q * depth2, rtol=1e-12)
    assert_allclose(sol.consumption, q * (depth1 + depth2), rtol=1e-13)
    assert_allclose(sol.concentration_at(0.5 * (low + high)), 0.0, atol=0)


def test_slab_with_film_depletes():
    """Sheet sealed at x = 0, film on the fed face: the live depth L solves
    Q L^2/(2 D) = K (C_bulk - Q L / h) (Hill 1928 front with a film balance, Crank 1975 §4.3.5
    surface condition), solved with mpmath.findroot."""
    d, q, k_face, h, bulk, thickness = 1e-9, 0.3, 0.6, 2e-6, 0.5, 1e-3
    sol = solve_exact(Problem(
        geometry="slab", inner=0.0,
        layers=(Layer("gel", thickness, d, partition=k_face, reaction=zero(q)),),
        inner_boundary=Boundary("symmetry"),
        outer_boundary=Boundary("mass_transfer", coefficient=h, bulk=bulk)))
    depth = mpmath.findroot(lambda x: q * x**2 / (2 * d) - k_face * (bulk - q * x / h), 1e-4)
    assert_allclose(sol.depletion_front, thickness - float(depth), rtol=1e-12)
    surface = sol.concentration_at(thickness)
    assert_allclose(-sol.flux_outer, h * (bulk - surface / k_face), rtol=1e-12)


def test_sphere_with_film_depletes():
    """Sphere with a film: live shell s..R with C(R) = (Q/(6 D R)) (R - s)^2 (R + 2 s) (Hill 1928;
    Crank 1975 ch. 14) and the film balance Q (R^3 - s^3)/(3 R^2) = h (C_bulk - C(R)), mpmath."""
    d, q, h, bulk, radius = 2e-9, 0.2, 5e-6, 0.4, 1.5e-3
    sol = solve_exact(fed_body("sphere", radius, d, q, None,
                               outer=Boundary("mass_transfer", coefficient=h, bulk=bulk)))
    R = mpmath.mpf(radius)

    def balance(s):
        c_surface = q / (6 * d * R) * (R - s) ** 2 * (R + 2 * s)
        return q * (R**3 - s**3) / (3 * R**2) - h * (bulk - c_surface)

    assert_allclose(sol.depletion_front, float(mpmath.findroot(balance, 0.5 * R)), rtol=1e-12)


def test_krogh_cylinder_undepleted():
    """Krogh 1919: tissue annulus r_c..R around a capillary at C_c, sealed at R, zero-order
    uptake: C(r) = C_c + (Q/(4D)) (r^2 - r_c^2) - (Q R^2/(2D)) ln(r/r_c). Independent second check
    (the formula is quoted from memory): the capillary supplies Q pi (R^2 - r_c^2) per length."""
    rc, big_r, d, q, cc = 4e-6, 40e-6, 2.4e-9, 0.02, 0.12
    sol = solve_exact(Problem(
        geometry="cylinder", inner=rc, layers=(Layer("tissue", big_r - rc, d, reaction=zero(q)),),
        inner_boundary=Boundary("concentration", value=cc),
        outer_boundary=Boundary("flux", value=0.0)))
    assert sol.depletion_front is None
    r = np.linspace(rc, big_r, 11)
    krogh = cc + q / (4 * d) * (r**2 - rc**2) - q * big_r**2 / (2 * d) * np.log(r / rc)
    assert_allclose(sol.concentration_at(r), krogh, rtol=1e-11)
    assert_allclose(2 * math.pi * rc * sol.flux_inner, q * math.pi * (big_r**2 - rc**2),
                    rtol=1e-12)
    assert abs(sol.flux_outer) < 1e-12 * sol.flux_inner


def test_krogh_cylinder_with_anoxic_rim():
    """Krogh 1919 geometry beyond its supply radius: the live tissue ends at s where the Krogh
    profile with s in place of R reaches zero, C_c + (Q/(4D))(s^2 - r_c^2) - (Q s^2/(2D)) ln(s/r_c)
    = 0 (C = dC/dr = 0 there, Hill 1928), solved with mpmath.findroot; beyond s, C = 0."""
    rc, big_r, d, q, cc = 4e-6, 120e-6, 2.4e-9, 0.02, 0.12
    sol = solve_exact(Problem(
        geometry="cylinder", inner=rc, layers=(Layer("tissue", big_r - rc, d, reaction=zero(q)),),
        inner_boundary=Boundary("concentration", value=cc),
        outer_boundary=Boundary("symmetry")))

    def krogh_at_front(s):
        return cc + q / (4 * d) * (s**2 - rc**2) - q * s**2 / (2 * d) * mpmath.log(s / rc)

    front = float(mpmath.findroot(krogh_at_front, 60e-6))
    assert_allclose(sol.depletion_front, front, rtol=1e-12)
    r = np.linspace(rc, front, 7)
    krogh = cc + q / (4 * d) * (r**2 - rc**2) - q * front**2 / (2 * d) * np.log(r / rc)
    assert_allclose(sol.concentration_at(r), krogh, rtol=1e-9, atol=1e-14)
    assert_allclose(sol.concentration_at(np.array([front, big_r])), 0.0, atol=1e-16)
    assert_allclose(2 * math.pi * rc * sol.flux_inner, q * math.pi * (front**2 - rc**2),
                    rtol=1e-12)


def test_coated_slab_zero_order_undepleted():
    """A non-reacting coating (thickness L1, D1, K1) over a consuming sheet (L2, D2, K2 = 1),
    sealed at the back: all uptake Q L2 crosses the coating, so (Crank 1975 ch. 4 and Hill 1928,
    with C/K continuous) the interface has C2 = K2 (Cs/K1 - Q L2 L1/(D1 K1)) and the back face
    C2 - Q L2^2/(2 D2)."""
    l1, d1, k1 = 30e-6, 2e-10, 0.5
    l2, d2, q, c_fluid = 200e-6, 1e-9, 1e-3, 1.0
    sol = solve_exact(Problem(
        geometry="slab", inner=0.0,
        layers=(Layer("sheet", l2, d2, reaction=zero(q)),
                Layer("coating", l1, d1, partition=k1)),
        inner_boundary=Boundary("symmetry"),
        outer_boundary=Boundary("concentration", value=c_fluid)))
    interface = (k1 * c_fluid - q * l2 * l1 / d1) / k1
    assert_allclose(sol.concentration_at(l2, layer=0), interface, rtol=1e-12)
    assert_allclose(sol.concentration_at(0.0), interface - q * l2**2 / (2 * d2), rtol=1e-12)
    assert_allclose(sol.flux_outer, -q * l2, rtol=1e-12)


def test_no_closed_form_cases_return_none():
    """Multi-layer depletion and Michaelis-Menten kinetics have no closed form here (the
    numerical solver covers them): solve_exact must return None, not numbers."""
    multi = Problem(
        geometry="slab", inner=0.0,
        layers=(Layer("deep", 1e-3, 1e-9, reaction=zero(1.0)), Layer("coat", 1e-5, 1e-9)),
        inner_boundary=Boundary("symmetry"),
        outer_boundary=Boundary("concentration", value=0.1))
    assert solve_exact(multi) is None
    mm = Problem(
        geometry="sphere", inner=0.0,
        layers=(Layer("s", 1e-3, 1e-9, reaction=Reaction("michaelis_menten", vmax=1e-3,
                                                          km=1e-2)),),
        inner_boundary=Boundary("symmetry"),
        outer_boundary=Boundary("concentration", value=0.1))
    assert solve_exact(mm) is None
