"""Layered bodies whose zero-order uptake runs out beyond a front (``worker.engine.
depletion_layers``): a hollow cylinder fed through its inner face (and also through its outer
face), a solid sphere fed from outside, and the fluid level at which the depleted zone first
appears (``depletion_onset``).

Check values: A.V. Hill, "The diffusion of oxygen and lactic acid through tissues", Proc. R. Soc.
B 104 (1928) 39 and J. Crank, *The Mathematics of Diffusion*, 2nd ed., 1975, ch. 14. With
constant consumption Q in the live zone of a cylinder and a front s where C = dC/dr = 0, the
outward flux is J(r) = Q (s^2 - r^2) / (2 r) (a balance on the shell from r to s), and with
C/K continuous at the interfaces (partition K)

    C(R)/K_1 = sum over the live layers of (Q / (D_i K_i)) [F(a_i; s) - F(b_i; s)],
    F(r; s) = (s^2 / 2) ln(s / r) - (s^2 - r^2) / 4,

each layer's part of the integral of J / (D K) from the face R to s (a_i, b_i its live
edges). The front equation C(R) = K_1 c_w is solved with mpmath.findroot at 60 digits
(``tests.lumen_checks.hill_front``); with s at the outer face it gives the onset. Layer
values are invented (a fibre wall and a layer of cells).
"""

from __future__ import annotations

import dataclasses

import mpmath
import numpy as np
import pytest

from tests.lumen_checks import T1, T2, R, assert_check_and_injection, hill_front, hill_level, within
from worker.engine.depletion_layers import depletion_onset, solve_depleted_layers
from worker.engine.exact_steady import solve_exact
from worker.engine.fv_steady import solve_fv
from worker.engine.model import Boundary, Layer, Problem, Reaction


@pytest.fixture(autouse=True)
def _mpmath_precision():
    with mpmath.workdps(30):
        yield


def _body(q: float, c_wall: float, d1=1e-10, d2=1.5e-9, k1=1.0, k2=1.0,
          first_reacts=True) -> Problem:
    uptake = Reaction("zero_order", rate=q)
    return Problem("cylinder", R,
                   (Layer("wall", T1, d1, k1, uptake if first_reacts else Reaction()),
                    Layer("cells", T2, d2, k2, uptake)),
                   Boundary("concentration", value=c_wall), Boundary("symmetry"))


CASES = {
    # front in the wall layer: the brief's high uptake (the cells beyond all depleted)
    "front in the first layer": dict(q=3.0, c_wall=0.12),
    # front in the cell layer, partition 2 in the cells
    "front in the second layer, partition": dict(q=4e-4, c_wall=0.05, k2=2.0),
    # a wall without uptake, the cells depleted beyond a front
    "wall without uptake": dict(q=1e-3, c_wall=0.1, first_reacts=False),
}


@pytest.mark.parametrize("name", list(CASES))
def test_front_flux_and_consumption_against_hill(name):
    args = CASES[name]
    s, flux, consumed = hill_front(**args)
    kwargs = {k: v for k, v in args.items() if k != "q" and k != "c_wall"}
    problem = _body(args["q"], args["c_wall"], **kwargs)
    assert solve_exact(problem) is None  # no closed form before this route
    solution = solve_depleted_layers(problem)
    assert solution is not None and solution.success
    for value, reference, rtol in ((solution.depletion_front, s, 1e-12),
                                   (solution.flux_inner, flux, 1e-11),
                                   (solution.consumption, consumed, 1e-11)):
        assert_check_and_injection(within(reference, rtol), value, 1e3 * rtol)
    # the profile: zero at and beyond the front, nowhere negative, C = K c_w at the face
    inside = np.linspace(R, R + T1 + T2, 2001)
    profile = solution.concentration_at(inside)
    assert float(np.min(profile)) >= 0.0
    assert np.all(profile[inside > s * (1 + 1e-9)] == 0.0)
    k1 = args.get("k1", 1.0)
    assert float(solution.concentration_at(np.array([R]))[0]) == pytest.approx(
        k1 * args["c_wall"], rel=1e-12)


def test_finite_volumes_approach_the_front_solution():
    """The engine's other route (finite volumes on the obstacle problem) converges on the same
    flux: its error falls as the mesh is refined (the first-layer case, where its error at the
    default mesh is about 1e-3: the live zone spans about ten cells); the flux against Hill's
    (``hill_front``), not against this module's own solve."""
    problem = _body(3.0, 0.14)
    _, flux, _ = hill_front(q=3.0, c_wall=0.14)
    errors = [abs(solve_fv(problem, [n, 60]).flux_inner / float(flux) - 1.0)
              for n in (200, 800, 3200)]
    assert errors[0] > errors[1] > errors[2]
    assert errors[2] < 1e-4


@pytest.mark.parametrize("name, kwargs", [
    ("both layers consume", {}),
    ("partition 2 in the cells", {"k2": 2.0}),
    ("wall without uptake", {"first_reacts": False}),
])
def test_onset_against_hill_with_the_front_at_the_outer_face(name, kwargs):
    q = 4e-4 if kwargs.get("first_reacts", True) else 2e-4
    reference = float(hill_level(q, R + T1 + T2, 1e-10, 1.5e-9, 1.0, kwargs.get("k2", 1.0),
                             kwargs.get("first_reacts", True)))
    onset = depletion_onset(_body(q, 0.0, **kwargs), 1.0)
    assert onset is not None
    assert_check_and_injection(within(reference, 1e-10), onset, 1e-7)
    # just above it the body is live to the outer face; just below, a front has entered
    above = solve_exact(_body(q, onset * (1 + 1e-6), **kwargs))
    assert above is not None and above.depletion_front is None
    below = solve_depleted_layers(_body(q, onset * (1 - 1e-6), **kwargs))
    assert below is not None and below.depletion_front < R + T1 + T2


def test_no_onset_outside_the_range_and_without_zero_order():
    assert depletion_onset(_body(4e-4, 0.0), 0.1) is None  # the onset is at 0.169
    assert depletion_onset(_body(3.0, 0.0), 0.2) is None  # depleted at every level
    first_order = dataclasses.replace(
        _body(4e-4, 0.0), layers=tuple(dataclasses.replace(
            ly, reaction=Reaction("first_order", rate_constant=1.0))
            for ly in _body(4e-4, 0.0).layers))
    assert depletion_onset(first_order, 1.0) is None


def test_outside_its_configurations_it_returns_none():
    drawn_out = dataclasses.replace(_body(3.0, 0.1),
                                    outer_boundary=Boundary("flux", value=1e-9))
    assert solve_depleted_layers(drawn_out) is None
    mm = dataclasses.replace(_body(3.0, 0.1), layers=(
        Layer("wall", T1, 1e-10), Layer("cells", T2, 1.5e-9, 1.0,
                                        Reaction("michaelis_menten", vmax=1.0, km=0.01))))
    assert solve_depleted_layers(mm) is None
    assert solve_depleted_layers(_body(1e-6, 0.1)) is None  # not depleted: solve_exact's case


def test_both_faces_fed_a_dead_zone_between_two_fronts():
    """The cells fed from outside too (a concentration c_o at the outer face b): the outer live
    zone ends at its own front s_2 with C(b) = (Q / D_2) F(b; s_2) and outward flux
    -Q (b^2 - s_2^2) / (2 b) (Hill 1928; Crank 1975 ch. 14, the same F from the other side);
    the inner front is the one fed alone."""
    q, c_wall, c_out, d2 = 3.0, 0.12, 0.1, 1.5e-9
    b = mpmath.mpf(R + T1 + T2)
    problem = dataclasses.replace(_body(q, c_wall),
                                  outer_boundary=Boundary("concentration", value=c_out))
    solution = solve_depleted_layers(problem)
    assert solution is not None
    s1, flux_in, _ = hill_front(q, c_wall)
    s2 = mpmath.findroot(lambda s: q / d2 * (s**2 / 2 * mpmath.log(s / b) - (s**2 - b**2) / 4)
                         - c_out, (mpmath.mpf(R + T1), b * (1 - mpmath.mpf(10) ** -12)),
                         solver="anderson")
    flux_out = float(-q * (b**2 - s2**2) / (2 * b))
    assert solution.diagnostics["depleted_zone"][0] == pytest.approx(s1, rel=1e-12)
    assert_check_and_injection(within(float(s2), 1e-12),
                               solution.diagnostics["depleted_zone"][1], 1e-9)
    assert_check_and_injection(within(flux_in, 1e-11), solution.flux_inner, 1e-8)
    assert_check_and_injection(within(flux_out, 1e-11), solution.flux_outer, 1e-8)
    middle = np.linspace(s1 * (1 + 1e-9), float(s2) * (1 - 1e-9), 50)
    assert np.all(solution.concentration_at(middle) == 0.0)
    assert float(solution.concentration_at(np.array([float(b)]))[0]) == pytest.approx(
        c_out, rel=1e-12)


def test_a_solid_sphere_of_two_layers_fed_from_outside():
    """Two layers of equal D and Q around a solid centre are one sphere: the front s from
    (Q / (6 D)) (b - s)^2 (b + 2 s) / b = c_o (Hill 1928; Crank 1975 ch. 14)."""
    q, d, c_out, b = 1.0, 1e-9, 0.05, mpmath.mpf(300e-6)
    uptake = Reaction("zero_order", rate=q)
    problem = Problem("sphere", 0.0, (Layer("core", 150e-6, d, 1.0, uptake),
                                      Layer("shell", 150e-6, d, 1.0, uptake)),
                      Boundary("symmetry"), Boundary("concentration", value=c_out))
    solution = solve_depleted_layers(problem)
    assert solution is not None
    s = mpmath.findroot(lambda x: q / (6 * d) * (b - x) ** 2 * (b + 2 * x) / b - c_out,
                        (mpmath.mpf(0), b * (1 - mpmath.mpf(10) ** -12)), solver="anderson")
    assert_check_and_injection(within(float(s), 1e-12), solution.depletion_front, 1e-9)
    flux = float(-q * (b**3 - s**3) / (3 * b**2))
    assert_check_and_injection(within(flux, 1e-11), solution.flux_outer, 1e-8)
    assert solution.flux_inner == 0.0
