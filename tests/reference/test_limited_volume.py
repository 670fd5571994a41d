"""The compartment face against published closed forms.

Sources, beside each test:

* J. Crank, *The Mathematics of Diffusion*, 2nd ed., Oxford, 1975: the limited-volume solutions
  (plane sheet §4.3.5, eqs. 4.37-4.38; cylinder §5.3.4; sphere §6.3.4, eq. 6.30) and, as their
  alpha -> infinity limits, the sink solutions (eqs. 4.18, 5.23, 6.20); the final exchange
  M_inf = (load) / (1 + alpha) taken up from the solution (his statement of the equilibrium).
* Roots of the eigen-conditions computed independently with mpmath's ``findroot`` (a
  general-purpose reference library), and the classical first roots of tan x = -x (2.0287578)
  and tan x = x (4.4934095) and the zeros of J0, J1 (A&S 1964, Tables 4.19 and 9.5, from
  memory).
* The finite-donor permeation limit: a donor behind a thin membrane into a sink decays as
  exp(-A D K t / (V h)) (E.L. Cussler, *Diffusion*, 3rd ed., 2009, §2.4, the diaphragm cell;
  from memory).

Scenario values are invented.
"""

from __future__ import annotations

import math

import mpmath
import numpy as np
import pytest
from scipy import special

from worker.engine.model import Boundary, Layer, Problem, Regime
from worker.engine.transient.laplace import solve_transient_laplace
from worker.engine.transient.limited_volume import (
    crank_case,
    donor_time_constant,
    equilibrium_level,
    limited_volume_fraction,
    limited_volume_roots,
)
from worker.engine.transient.method_of_lines import solve_transient_fv

GEOMETRIES = ("slab", "cylinder", "sphere")
D = 1.0e-10  # m^2/s
THICK = 1.0e-3  # m
TIMES = np.array([50.0, 500.0, 2.0e3, 1.0e4, 3.0e4])


def _case(geometry, volume, *, partition=2.0, face_partition=1.5, initial=10.0, fluid=0.0):
    sealed = Boundary("flux") if geometry == "slab" else Boundary("symmetry")
    return Problem(geometry, 0.0, (Layer("matrix", THICK, D, partition, initial=initial),),
                   sealed, Boundary("compartment", volume=volume, partition=face_partition,
                                    initial=fluid),
                   Regime("transient", TIMES[-1], tuple(TIMES)), area=1e-3, length=0.01)


VOLUMES = {"slab": 2e-6, "cylinder": 2e-8, "sphere": 2e-8}


def _mp_root(geometry, alpha, guess):
    a = mpmath.mpf(alpha)
    if geometry == "slab":
        return float(mpmath.findroot(lambda q: mpmath.tan(q) + a * q, guess))
    if geometry == "sphere":
        return float(mpmath.findroot(lambda q: mpmath.tan(q) - 3 * q / (3 + a * q * q), guess))
    return float(mpmath.findroot(lambda q: a * q * mpmath.besselj(0, q)
                                 + 2 * mpmath.besselj(1, q), guess))


@pytest.mark.parametrize("geometry", GEOMETRIES)
@pytest.mark.parametrize("alpha", [0.05, 1.0, 4.0, 250.0])
def test_roots_agree_with_mpmath(geometry, alpha):
    roots = limited_volume_roots(geometry, alpha, 6)
    for q in roots:
        assert _mp_root(geometry, alpha, q) == pytest.approx(q, rel=1e-12)
    assert np.all(np.diff(roots) > 2.0)  # one root per bracket, none skipped


def test_classical_first_roots():
    # alpha = 1: tan q = -q, first root 2.0287578 (A&S 1964, from memory)
    assert limited_volume_roots("slab", 1.0, 1)[0] == pytest.approx(2.0287578381, rel=1e-9)
    # alpha -> 0: the sphere's tan q = q (4.4934095) and the cylinder's J1 zero (3.8317060)
    assert limited_volume_roots("sphere", 1e-9, 1)[0] == pytest.approx(4.4934094579, rel=1e-8)
    assert limited_volume_roots("cylinder", 1e-9, 1)[0] == pytest.approx(3.8317059702,
                                                                          rel=1e-8)


@pytest.mark.parametrize("geometry,sink_roots,sink_weight", [
    # Crank 1975 eq. 4.18: 8/((2n+1)^2 pi^2) = 2/q^2 with q = (n+1/2) pi
    ("slab", [(n + 0.5) * math.pi for n in range(4)], 2.0),
    # eq. 5.23: 4/alpha_n^2, the zeros of J0
    ("cylinder", [2.404825557695773, 5.520078110286311, 8.653727912911013, 11.79153443901428],
     4.0),
    # eq. 6.20: 6/(n^2 pi^2), q = n pi
    ("sphere", [(n + 1) * math.pi for n in range(4)], 6.0),
])
def test_large_volume_limit_is_crank_sink_solution(geometry, sink_roots, sink_weight):
    alpha = 1e9
    roots = limited_volume_roots(geometry, alpha, 4)
    assert roots == pytest.approx(sink_roots, rel=1e-7)
    tau = 0.03
    if geometry == "cylinder":
        sink = special.jn_zeros(0, 400)
    else:
        sink = (np.arange(400) + (0.5 if geometry == "slab" else 1.0)) * math.pi
    expected = 1.0 - sum(sink_weight / q**2 * math.exp(-q * q * tau) for q in sink)
    assert limited_volume_fraction(geometry, alpha, [tau])[0] == pytest.approx(expected,
                                                                                rel=1e-6)


@pytest.mark.parametrize("geometry", GEOMETRIES)
def test_fraction_starts_at_zero_and_ends_at_one(geometry):
    values = limited_volume_fraction(geometry, 0.7, [0.0, 1e-6, 50.0])
    assert values[0] == 0.0
    assert 0.0 < values[1] < 0.01  # the weights sum to one (the series at t = 0)
    assert values[2] == pytest.approx(1.0, abs=1e-12)


@pytest.mark.parametrize("geometry", GEOMETRIES)
def test_final_exchange_is_crank_equilibrium(geometry):
    """Crank: the sheet/cylinder/sphere finally takes up 1/(1 + alpha) of the solute; for a
    loaded body releasing into an empty solution the solution finally holds alpha/(1 + alpha)
    of the load (the same partition, conservation)."""
    problem = _case(geometry, VOLUMES[geometry])
    case, why = crank_case(problem)
    assert case is not None, why
    load = problem.measure_factor * problem.layers[0].initial * (
        THICK if geometry == "slab" else THICK ** (problem.exponent + 1)
        / (problem.exponent + 1))
    released = case.released([1e12])[0]
    assert released / load == pytest.approx(case.alpha / (1.0 + case.alpha), rel=1e-12)
    uptake = _case(geometry, VOLUMES[geometry], initial=0.0, fluid=3.0)
    found, _ = crank_case(uptake)
    assert found is not None
    held = -found.released([1e12])[0]
    in_solution = found.measure * found.capacity * 3.0
    assert held / in_solution == pytest.approx(1.0 / (1.0 + found.alpha), rel=1e-12)


@pytest.mark.parametrize("geometry", GEOMETRIES)
def test_laplace_route_is_crank(geometry):
    problem = _case(geometry, VOLUMES[geometry], fluid=1.0)
    case, _ = crank_case(problem)
    solution = solve_transient_laplace(problem, TIMES)
    scale = abs(case.final_fluid - case.start_fluid)
    assert np.max(np.abs(solution.compartments["outer"] - case.fluid(TIMES))) < 1e-9 * scale
    exchange = case.measure * case.capacity * scale
    assert np.max(np.abs(solution.released_outer - case.released(TIMES))) < 1e-9 * exchange


@pytest.mark.parametrize("geometry", GEOMETRIES)
def test_method_of_lines_converges_to_crank_at_second_order(geometry):
    problem = _case(geometry, VOLUMES[geometry])
    case, _ = crank_case(problem)
    later = TIMES[1:]  # past the first instants, where a coarse mesh misses the surface layer
    exact = case.fluid(later)
    errors = []
    for cells in (40, 80):
        solution = solve_transient_fv(problem, later, [cells], rtol=1e-8)
        errors.append(np.max(np.abs(solution.compartments["outer"] - exact)))
    scale = abs(case.final_fluid)
    assert errors[1] < 2e-4 * scale
    assert 3.0 < errors[0] / errors[1] < 5.0  # observed order about 2


def test_equilibrium_level_is_the_partition_of_the_load():
    """Conservation: (body load + fluid load) = u (K_body V_body + V_fluid K_layer/K_face) per
    measure, written out for a two-layer slab between two compartments."""
    area = 2e-4
    problem = Problem(
        "slab", 0.0, (Layer("a", 1e-4, 1e-11, 2.0, initial=4.0),
                      Layer("b", 3e-4, 1e-10, 0.5, initial=1.0)),
        Boundary("compartment", volume=1e-7, initial=0.3, partition=4.0),
        Boundary("compartment", volume=5e-7),
        Regime("transient", 1e4, (1e4,)), area=area)
    total = 4.0 * 1e-4 + 1.0 * 3e-4 + 0.3 * 1e-7 / area
    held = 2.0 * 1e-4 + 0.5 * 3e-4 + (1e-7 / area) * 2.0 / 4.0 + (5e-7 / area) * 1.0
    assert equilibrium_level(problem) == pytest.approx(total / held, rel=1e-14)


def test_finite_donor_decays_at_the_diaphragm_cell_rate():
    """A donor of volume V behind a membrane (thickness h, K, D) into a sink: C_d = C_0
    exp(-t/tau), tau = V h/(A D K), within the thin-membrane error O(h K A / V) (the membrane's
    own capacity; here 1e-3)."""
    h, diffusivity, area, volume, k = 20e-6, 1e-11, 1e-4, 1e-6, 0.5
    problem = Problem("slab", 0.0, (Layer("membrane", h, diffusivity, k),),
                      Boundary("compartment", volume=volume, initial=5.0),
                      Boundary("concentration", value=0.0),
                      Regime("transient", 1e5, (1e5,)), area=area)
    tau = donor_time_constant(volume, h, area, diffusivity, k)
    times = np.array([0.5, 1.0, 2.0, 4.0]) * tau
    donor = solve_transient_laplace(problem, times).compartments["inner"]
    expected = 5.0 * np.exp(-times / tau)
    assert np.max(np.abs(donor / expected - 1.0)) < 5 * h * k * area / volume
    assert np.max(np.abs(donor / expected - 1.0)) > 1e-6  # the limit is an approximation
