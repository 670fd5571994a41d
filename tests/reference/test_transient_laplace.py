"""The Laplace-domain transient against published closed forms and reference libraries.

Each check names its source beside it: Crank, *The Mathematics of Diffusion*, 2nd ed., Oxford,
1975 (eqs. 4.18, 5.23, 6.20; the half-time constant; the erfc solution of a half space; the
membrane time lag of Daynes 1920 and Barrer 1939; Danckwerts' transformation for first-order
consumption, ch. 14), and for two layers with a partition jump, FiPy (NIST; Richardson-
extrapolated) and the project's own method of lines on two fine meshes (Richardson-
extrapolated). Scenario values are invented.
"""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import special
from scipy.optimize import brentq

from worker.engine.model import Boundary, Layer, Problem, Reaction, Regime
from worker.engine.transient.laplace import solve_transient_laplace
from worker.engine.transient.method_of_lines import solve_transient_fv

DIFFUSIVITY = 3.0e-11  # m^2/s, invented
SINK = Boundary("concentration", 0.0)
CENTRE = Boundary("symmetry")


def _single_layer(geometry, thickness, inner_boundary, outer_boundary, times, *, initial=1.0,
                  rate_constant=0.0, partition=1.0):
    reaction = Reaction("first_order", rate_constant=rate_constant) if rate_constant else Reaction()
    layer = Layer("body", thickness, DIFFUSIVITY, partition, reaction, initial)
    times = tuple(float(t) for t in np.atleast_1d(times))
    return Problem(geometry, 0.0, (layer,), inner_boundary, outer_boundary,
                   Regime("transient", max(times), times))


def _release_fraction(solution):
    return (solution.released_inner + solution.released_outer) / solution.initial_load


def _sheet_terms(tau_half):
    """Crank 1975 eq. 4.18 terms 8/((2n+1)^2 pi^2) and rates (2n+1)^2 pi^2 / 4 in D t / l^2
    (l the half-thickness)."""
    odd = 2 * np.arange(0, 4000)[:, None] + 1
    return 8.0 / (odd**2 * np.pi**2), odd**2 * np.pi**2 / 4.0


def test_sheet_release_matches_crank_4_18():
    # Crank 1975 eq. 4.18: sheet -l < x < l, uniform C0, both faces at zero:
    # M_t/M_inf = 1 - sum 8/((2n+1)^2 pi^2) exp(-D (2n+1)^2 pi^2 t/(4 l^2)).
    half = 0.4e-3
    times = np.array([30.0, 300.0, 2000.0, 6000.0, 20000.0])
    solution = solve_transient_laplace(_single_layer("slab", 2 * half, SINK, SINK, times))
    weights, rates = _sheet_terms(None)
    tau = DIFFUSIVITY * times / half**2
    expected = 1.0 - np.sum(weights * np.exp(-rates * tau), axis=0)
    assert_allclose(_release_fraction(solution), expected, rtol=1e-9)
    assert_allclose(solution.released_inner, solution.released_outer, rtol=1e-9)


def test_sheet_half_time_constant_0_049():
    # Crank 1975 section 4.3 (the half-time method): desorption from a sheet of full thickness
    # L into a sink on both faces reaches M_t/M_inf = 1/2 at D t / L^2 = 0.049 (three decimals).
    thickness = 1.0e-3

    def excess(t):
        problem = _single_layer("slab", thickness, SINK, SINK, [t])
        return float(_release_fraction(solve_transient_laplace(problem))[0]) - 0.5

    t_half = brentq(excess, 100.0, 10000.0, xtol=1e-6)
    assert abs(DIFFUSIVITY * t_half / thickness**2 - 0.049) < 5e-4


def test_cylinder_release_matches_crank_5_23():
    # Crank 1975 eq. 5.23: M_t/M_inf = 1 - sum 4/(a^2 alpha_n^2) exp(-D alpha_n^2 t),
    # J0(a alpha_n) = 0 (roots: scipy.special.jn_zeros).
    radius = 0.6e-3
    times = np.array([20.0, 400.0, 3000.0, 9000.0])
    solution = solve_transient_laplace(_single_layer("cylinder", radius, CENTRE, SINK, times))
    alpha = special.jn_zeros(0, 3000)[:, None] / radius
    expected = 1.0 - np.sum(4.0 / (radius**2 * alpha**2) * np.exp(-DIFFUSIVITY * alpha**2 * times),
                            axis=0)
    assert_allclose(solution.released_outer / solution.initial_load, expected, rtol=1e-9)
    assert_allclose(solution.initial_load, np.pi * radius**2, rtol=1e-14)  # per metre


def test_sphere_release_matches_crank_6_20():
    # Crank 1975 eq. 6.20: M_t/M_inf = 1 - (6/pi^2) sum (1/n^2) exp(-D n^2 pi^2 t/a^2).
    radius = 0.5e-3
    times = np.array([10.0, 200.0, 1500.0, 8000.0])
    solution = solve_transient_laplace(_single_layer("sphere", radius, CENTRE, SINK, times))
    n = np.arange(1, 4000)[:, None]
    expected = 1.0 - 6.0 / np.pi**2 * np.sum(
        np.exp(-DIFFUSIVITY * n**2 * np.pi**2 * times / radius**2) / n**2, axis=0)
    assert_allclose(solution.released_outer / solution.initial_load, expected, rtol=1e-9)
    assert_allclose(solution.initial_load, 4 * np.pi * radius**3 / 3, rtol=1e-14)


def test_first_order_consumption_follows_danckwerts_transformation():
    # Danckwerts, Trans. Faraday Soc. 47 (1951) 1014; Crank 1975 section 14.2: with zero
    # boundary data C = exp(-k t) u, u the solution without reaction (eq. 4.18). Hence the
    # amount held is exp(-k t) times that of eq. 4.18, and the amount released is the
    # integral of exp(-k t) times u's outflow rate: for each term w exp(-lam t) of eq. 4.18,
    # w lam (1 - exp(-(k + lam) t)) / (k + lam).
    half = 0.5e-3
    rate_constant = 4.0e-4  # 1/s, invented
    times = np.array([60.0, 600.0, 4000.0])
    problem = _single_layer("slab", 2 * half, SINK, SINK, times, rate_constant=rate_constant)
    solution = solve_transient_laplace(problem)
    weights, rates = _sheet_terms(None)
    lam = rates * DIFFUSIVITY / half**2
    held = np.sum(weights * np.exp(-lam * times), axis=0)
    # sum w lam/(k + lam) = 1 - k sum w/(k + lam), since sum w = 1 (sum 1/(2n+1)^2 = pi^2/8):
    # the slowly converging part summed in closed form
    rate = rate_constant + lam
    released = (1.0 - rate_constant * np.sum(weights / rate, axis=0)
                - np.sum(weights * lam * np.exp(-rate * times) / rate, axis=0))
    assert_allclose(solution.remaining / solution.initial_load,
                    np.exp(-rate_constant * times) * held, rtol=1e-9)
    assert_allclose(_release_fraction(solution), released, rtol=1e-9)
    assert_allclose(solution.consumed / solution.initial_load, 1.0 - released
                    - np.exp(-rate_constant * times) * held, rtol=1e-8)


def test_short_times_follow_the_erfc_solution_of_a_half_space():
    # Crank 1975 eq. 2.45 (from memory): a half space at zero, surface held at C_s from t = 0:
    # C = C_s erfc(x / (2 sqrt(D t))), with x the depth from the surface; the amount taken up
    # per area is 2 C_s sqrt(D t / pi) (Crank 1975 section 2.3, from memory). A slab of 1 mm
    # is a half space while sqrt(D t) stays below a few per cent of it.
    thickness = 1.0e-3
    fluid, partition = 2.0, 1.5
    times = np.array([1.0, 10.0, 100.0, 1000.0])
    depths = np.array([0.0, 2e-6, 1e-5, 3e-5, 1e-4])
    problem = _single_layer("slab", thickness, CENTRE, Boundary("concentration", fluid), times,
                            initial=0.0, partition=partition)
    solution = solve_transient_laplace(problem, positions=thickness - depths)
    surface = partition * fluid
    expected = surface * special.erfc(depths[None, :] / (2.0 * np.sqrt(DIFFUSIVITY
                                                                        * times[:, None])))
    assert_allclose(solution.profile, expected, rtol=1e-8, atol=1e-12 * surface)
    assert_allclose(-solution.released_outer, 2.0 * surface * np.sqrt(DIFFUSIVITY * times / np.pi),
                    rtol=1e-9)


def test_membrane_time_lag_daynes_barrer():
    # Daynes, Proc. R. Soc. A 97 (1920) 286; Barrer, Trans. Faraday Soc. 35 (1939) 628;
    # Crank 1975 section 4.3: initially empty sheet, C1 at x = 0, 0 at x = L:
    # Q_t/(L C1) = D t/L^2 - 1/6 - (2/pi^2) sum (-1)^n/n^2 exp(-D n^2 pi^2 t/L^2); the late
    # line Q_t = (D C1/L)(t - L^2/(6 D)) meets the time axis at the lag L^2/(6 D).
    thickness = 0.25e-3
    source = 4.0  # mol/m^3, invented
    scale = thickness**2 / DIFFUSIVITY
    times = np.array([0.02, 0.1, 0.4, 1.0, 12.0]) * scale
    problem = _single_layer("slab", thickness, Boundary("concentration", source), SINK, times,
                            initial=0.0)
    solution = solve_transient_laplace(problem)
    n = np.arange(1, 4000)[:, None]
    tau = DIFFUSIVITY * times / thickness**2
    expected = thickness * source * (
        tau - 1.0 / 6.0
        - 2.0 / np.pi**2 * np.sum((-1.0) ** n / n**2 * np.exp(-(n**2) * np.pi**2 * tau), axis=0))
    # absolute where the outflow is still far below its scale (the inversion's documented limit)
    assert_allclose(solution.released_outer, expected, rtol=1e-9, atol=1e-11 * thickness * source)
    lag = times[-1] - solution.released_outer[-1] / (solution.flux_outer[-1])
    assert_allclose(lag, thickness**2 / (6.0 * DIFFUSIVITY), rtol=1e-9)


# --------------------------------------------------------------------------------------------
# Two layers with a partition jump: FiPy and the method of lines
# --------------------------------------------------------------------------------------------

RESERVOIR = {"thickness": 100e-6, "diffusivity": 2e-12, "partition": 1.0, "initial": 10.0}
TOPCOAT = {"thickness": 20e-6, "diffusivity": 5e-14, "partition": 0.3, "initial": 0.0}
TWO_LAYER_TIMES = (2.0e4, 1.0e5, 2.0e5)


def _two_layer_problem():
    layers = tuple(Layer(name, spec["thickness"], spec["diffusivity"], spec["partition"],
                         initial=spec["initial"])
                   for name, spec in (("reservoir", RESERVOIR), ("topcoat", TOPCOAT)))
    return Problem("slab", 0.0, layers, CENTRE, SINK,
                   Regime("transient", TWO_LAYER_TIMES[-1], TWO_LAYER_TIMES))


def _fipy_release_fraction(cells_reservoir: int, cells_topcoat: int, dt: float) -> np.ndarray:
    """Release fraction at TWO_LAYER_TIMES from FiPy: backward Euler in u = C/K,
    ``TransientTerm(coeff=K) == DiffusionTerm(coeff=D K)``, the interface face given the
    series (harmonic) coefficient of its two half cells, u = 0 at the outer face."""
    from fipy import CellVariable, DiffusionTerm, FaceVariable, Grid1D, TransientTerm

    l1, l2 = RESERVOIR["thickness"], TOPCOAT["thickness"]
    mesh = Grid1D(dx=np.concatenate((np.full(cells_reservoir, l1 / cells_reservoir),
                                     np.full(cells_topcoat, l2 / cells_topcoat))))
    in_reservoir = mesh.cellCenters[0].value < l1
    k1, k2 = RESERVOIR["partition"], TOPCOAT["partition"]
    dk1, dk2 = RESERVOIR["diffusivity"] * k1, TOPCOAT["diffusivity"] * k2
    capacity = CellVariable(mesh=mesh, value=np.where(in_reservoir, k1, k2))
    u = CellVariable(mesh=mesh, value=np.where(in_reservoir, RESERVOIR["initial"] / k1,
                                               TOPCOAT["initial"] / k2))
    faces = mesh.faceCenters[0].value
    coefficient = np.where(faces < l1, dk1, dk2)
    h1, h2 = 0.5 * l1 / cells_reservoir, 0.5 * l2 / cells_topcoat
    coefficient[int(np.argmin(np.abs(faces - l1)))] = (h1 + h2) / (h1 / dk1 + h2 / dk2)
    u.constrain(0.0, mesh.facesRight)
    equation = TransientTerm(coeff=capacity) == DiffusionTerm(
        coeff=FaceVariable(mesh=mesh, value=coefficient))
    volumes = np.asarray(mesh.cellVolumes)
    load = float(np.sum(capacity.value * u.value * volumes))
    fractions, now = [], 0.0
    for target in TWO_LAYER_TIMES:
        for _ in range(int(round((target - now) / dt))):
            equation.solve(var=u, dt=dt)
        now = target
        fractions.append(1.0 - float(np.sum(capacity.value * u.value * volumes)) / load)
    return np.array(fractions)


@pytest.mark.slow
def test_two_layer_partition_jump_matches_fipy():
    # FiPy: Guyer, Wheeler, Warren, Computing in Science & Engineering 11 (2009) 6. Its answers
    # are Richardson-extrapolated in time (order 1) and space (order 2), common practice.
    coarse = [_fipy_release_fraction(40, 10, dt) for dt in (2000.0, 1000.0)]
    fine = [_fipy_release_fraction(80, 20, dt) for dt in (2000.0, 1000.0)]
    in_time_coarse, in_time_fine = (2.0 * short - long for long, short in (coarse, fine))
    reference = (4.0 * in_time_fine - in_time_coarse) / 3.0
    assert np.all(np.abs(reference - in_time_fine) < 5e-5)  # the reference itself is settled
    solution = solve_transient_laplace(_two_layer_problem())
    assert_allclose(_release_fraction(solution), reference, atol=5e-5)


def test_two_layer_partition_jump_matches_the_method_of_lines_extrapolated():
    # The project's method of lines (second order in space, BDF at a tight tolerance) on two
    # meshes, Richardson-extrapolated (Richardson 1911; common practice), amounts and fluxes.
    problem = _two_layer_problem()
    medium = solve_transient_fv(problem, TWO_LAYER_TIMES, (200, 50), rtol=1e-9)
    fine = solve_transient_fv(problem, TWO_LAYER_TIMES, (400, 100), rtol=1e-9)
    solution = solve_transient_laplace(problem)
    for name in ("remaining", "released_outer", "flux_outer"):
        extrapolated = (4.0 * getattr(fine, name) - getattr(medium, name)) / 3.0
        assert_allclose(getattr(solution, name), extrapolated, rtol=1e-7)
    assert_allclose(solution.released_inner, 0.0, atol=1e-12 * solution.initial_load)
