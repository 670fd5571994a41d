"""The Galerkin transient solver (``transient.galerkin``): its Jacobian, mass balance, faces,
profile reading, input errors, and that a cross-check against the method of lines within the two
GCI bands catches an injected error in either direction.

Scenario values are invented; check values are definitions (a Jacobian is the derivative of its
right-hand side; the load of a piecewise-constant state is sum C0_j (r_j+1^(n+1) - r_j^(n+1))/(n+1)
times the measure factor) or the method of lines' own study, which has its own published checks.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from worker.engine.model import Boundary, Layer, Problem, Reaction, Regime
from worker.engine.transient import galerkin, solve
from worker.engine.transient.galerkin import (
    build_galerkin_mesh,
    galerkin_study,
    solve_transient_galerkin,
)
from worker.engine.transient.refinement import amount_study, outside_bands

D = 1e-10
L = 1e-3
TIMES = tuple(np.linspace(200.0, 4000.0, 8))


def _problem(geometry, layers, inner, outer, times=TIMES, start=0.0):
    return Problem(geometry, start, tuple(layers), inner, outer,
                   Regime("transient", max(times), tuple(times)))


INFLUX = Boundary("flux", value=2e-9)
HELD = Boundary("concentration", 0.3, partition=0.8)


def _mixed(geometry="cylinder", inner=INFLUX, outer=HELD, start=2e-4):
    return _problem(geometry, [
        Layer("core", 0.6 * L, D, 1.0, Reaction("michaelis_menten", vmax=3e-4, km=0.05), 0.5),
        Layer("middle", 0.3 * L, 0.5 * D, 2.0, Reaction("zero_order", rate=2e-4), 0.1),
        Layer("skin", 0.2 * L, 0.2 * D, 0.4, Reaction("first_order", rate_constant=1e-4), 0.0),
    ], inner, outer, start=start)


def _exact_load(problem):
    n = problem.exponent
    edges = problem.edges
    return problem.measure_factor * sum(
        ly.initial * (edges[j + 1] ** (n + 1) - edges[j] ** (n + 1)) / (n + 1)
        for j, ly in enumerate(problem.layers))


# --------------------------------------------------------------------------------------------
@pytest.mark.parametrize("outer", [Boundary("concentration", 0.3, partition=0.8),
                                   Boundary("mass_transfer", coefficient=3e-7, bulk=0.2),
                                   Boundary("flux", value=-1e-9), Boundary("symmetry")])
def test_jacobian_is_the_derivative_of_the_right_hand_side(outer):
    """The slopes the stepper linearises with are the derivative of the smooth balance
    (stiffness, Gauss-point reactions, Robin face), checked by central differences."""
    problem = _mixed(outer=outer)
    meshes = [build_galerkin_mesh(problem, (6, 4, 3)), build_galerkin_mesh(problem, (12, 8, 6))]
    system = galerkin._System(problem, meshes, 0.5)
    rng = np.random.default_rng(7)
    # states away from the kinks: C/K spread over the live range, a few nodes in the switch
    u = rng.uniform(0.02, 0.6, system.size)
    u[3] = 0.3 * system.epsilon / 2.0
    _, diag, off = system.balance(u, 1.0)
    analytic = np.diag(diag) + np.diag(off, 1) + np.diag(off, -1)
    numeric = np.empty_like(analytic)
    for j in range(u.size):
        step = 1e-7 * max(abs(u[j]), 1e-3) if j != 3 else 1e-4 * system.epsilon
        up, down = u.copy(), u.copy()
        up[j] += step
        down[j] -= step
        numeric[:, j] = (system.balance(up, 1.0, False)[0]
                         - system.balance(down, 1.0, False)[0]) / (2 * step)
    scale = np.max(np.abs(analytic), axis=1, keepdims=True) + 1e-300
    assert np.max(np.abs(analytic - numeric) / scale) < 1e-5


@pytest.mark.parametrize("geometry", ["slab", "cylinder", "sphere"])
@pytest.mark.parametrize(("inner", "outer"), [
    (Boundary("flux", value=2e-9), Boundary("concentration", 0.3, partition=0.8)),
    (Boundary("concentration", 0.2), Boundary("mass_transfer", coefficient=3e-7, bulk=0.1,
                                              partition=1.5)),
    (Boundary("symmetry"), Boundary("flux", value=-1e-9)),
])
def test_mass_balance_and_load_hold_for_every_face_kind(geometry, inner, outer):
    problem = _mixed(geometry, inner, outer)
    solution = solve_transient_galerkin(problem, elements_per_layer=(12, 8, 6))
    assert solution.success
    assert solution.initial_load == pytest.approx(_exact_load(problem), rel=1e-13)
    residual = (solution.initial_load - solution.remaining - solution.released_inner
                - solution.released_outer - solution.consumed)
    throughput = np.max(np.abs(solution.released_inner) + np.abs(solution.released_outer)
                        + np.abs(solution.consumed))
    assert np.max(np.abs(residual)) < 1e-9 * max(solution.initial_load, throughput)


def test_mass_balance_catches_a_wrong_consumption_either_way(monkeypatch):
    """The balance is not true by construction: scale the consumed-amount row alone up or down
    and the residual shows it."""
    problem = _mixed()
    original = galerkin._System.substep_amounts
    for factor in (1.01, 0.99):
        def scaled(self, u, flow, rate, u0, tau, factor=factor):
            inner, outer, consumption = original(self, u, flow, rate, u0, tau)
            return inner, outer, consumption * factor
        monkeypatch.setattr(galerkin._System, "substep_amounts", scaled)
        solution = solve_transient_galerkin(problem, elements_per_layer=(12, 8, 6))
        residual = (solution.initial_load - solution.remaining - solution.released_inner
                    - solution.released_outer - solution.consumed)
        assert np.sign(residual[-1]) == -np.sign(factor - 1.0)
        assert abs(residual[-1]) > 1e-3 * solution.consumed[-1]
    monkeypatch.undo()


def test_solid_centre_carries_nothing():
    problem = _problem("sphere", [Layer("body", L, D, 1.0, initial=1.0)],
                       Boundary("flux", value=5.0), Boundary("concentration", 0.0))
    solution = solve_transient_galerkin(problem, elements_per_layer=20)
    assert np.all(solution.flux_inner == 0.0)
    assert np.all(solution.released_inner == 0.0)


def test_time_zero_reports_the_load_and_the_face_impulse_is_booked_at_zero_plus():
    problem = _problem("slab", [Layer("body", L, D, 1.0, initial=1.0)], Boundary("symmetry"),
                       Boundary("concentration", 0.0), times=(0.0, 1e-6, 100.0))
    solution = solve_transient_galerkin(problem, elements_per_layer=10)
    assert solution.remaining[0] == solution.initial_load == pytest.approx(L)
    assert solution.released_outer[0] == 0.0
    # just after the start the held node's half element (L/20 at C0 = 1) has gone
    assert solution.released_outer[1] == pytest.approx(L / 20, rel=1e-3)


def test_profile_takes_the_inner_layer_on_an_interface_and_jumps_by_the_partition():
    problem = _problem("slab", [Layer("a", L, D, 2.0, initial=1.0),
                                Layer("b", L, D, 0.5, initial=0.0)],
                       Boundary("symmetry"), Boundary("concentration", 0.0))
    solution = solve_transient_galerkin(problem, elements_per_layer=(10, 10))
    at = solution.concentration_at([L * (1 - 1e-9), L, L * (1 + 1e-9)], [TIMES[-1]])[0]
    assert at[1] == pytest.approx(at[0], rel=1e-6)
    assert at[2] == pytest.approx(at[1] * 0.5 / 2.0, rel=1e-6)
    with pytest.raises(ValueError, match="r: expected positions within"):
        solution.concentration_at([3 * L], [TIMES[-1]])


@pytest.mark.parametrize(("change", "match"), [
    ({"elements_per_layer": (4, 4)}, "elements_per_layer: expected 1 positive"),
    ({"elements_per_layer": 0}, "elements_per_layer: expected 1 positive"),
    ({"times": (300.0, 100.0)}, "times: expected increasing"),
    ({"times": (-1.0,)}, "times: expected values within"),
])
def test_bad_arguments_name_the_argument(change, match):
    problem = _problem("slab", [Layer("body", L, D, 1.0, initial=1.0)], Boundary("symmetry"),
                       Boundary("concentration", 0.0))
    with pytest.raises(ValueError, match=match):
        solve_transient_galerkin(problem, **{"elements_per_layer": 4, **change})


@pytest.mark.parametrize(("layer", "outer", "match"), [
    (Layer("body", L, 0.0, 1.0), Boundary("symmetry"), r"layers\[0\].diffusivity"),
    (Layer("body", L, D, -1.0), Boundary("symmetry"), r"layers\[0\].partition"),
    (Layer("body", L, D, 1.0), Boundary("wall"), "outer_boundary.kind"),
    (Layer("body", L, D, 1.0), Boundary("mass_transfer", coefficient=-1.0),
     "outer_boundary.coefficient"),
])
def test_bad_cases_name_the_field(layer, outer, match):
    problem = _problem("slab", [layer], Boundary("symmetry"), outer)
    with pytest.raises(ValueError, match=match):
        solve_transient_galerkin(problem, elements_per_layer=4)


# --------------------------------------------------------------------------------------------
# The cross-check an injected error cannot pass
# --------------------------------------------------------------------------------------------
COATING_TIMES = tuple(np.linspace(2.0e4, 2.0e5, 10))


def _coating():
    """Reservoir with Michaelis-Menten binding under a partitioning topcoat, sink outside."""
    return _problem("slab", [
        Layer("reservoir", 100e-6, 2e-12, 1.0,
              Reaction("michaelis_menten", vmax=2e-6, km=0.5), initial=10.0),
        Layer("topcoat", 20e-6, 5e-14, 0.3, initial=0.0),
    ], Boundary("symmetry"), Boundary("concentration", 0.0), times=COATING_TIMES)


@pytest.fixture(scope="module")
def method_of_lines_study():
    problem = _coating()
    times, duration = solve.requested_times(problem)
    fvs = solve.fv_on_meshes(problem, times, duration)
    assert all(f.success for f in fvs)
    return amount_study(fvs, [sum(f.diagnostics["cells_per_layer"]) for f in fvs])


def _released(study):
    return study.extrapolated["released_outer"]


def _time_floor(problem):
    """The integrators' time error, which no space study sees: their rtol (1e-6 both) times
    the initial load."""
    return galerkin.RTOL * _exact_load(problem)


def test_the_two_methods_agree_within_their_bands(method_of_lines_study):
    study = galerkin_study(_coating())
    assert study.success
    floor = _time_floor(_coating())
    for name in ("released_outer", "remaining", "consumed"):
        assert not np.any(outside_bands(study.amounts, method_of_lines_study, name, floor)), name
    flux = method_of_lines_study.extrapolated["flux_outer"]
    assert not np.any(outside_bands(study.amounts, method_of_lines_study, "flux_outer",
                                    galerkin.RTOL * np.max(np.abs(flux))))


@pytest.mark.parametrize(("mutate", "direction"), [
    (lambda ly: [dataclasses.replace(ly[0], initial=2 * ly[0].initial), ly[1]], +1),
    (lambda ly: [dataclasses.replace(ly[0], initial=0.5 * ly[0].initial), ly[1]], -1),
    (lambda ly: [ly[0], dataclasses.replace(ly[1], partition=1.0)], +1),  # partition ignored
    (lambda ly: [ly[0], dataclasses.replace(ly[1], partition=0.09)], -1),  # applied twice
], ids=["initial-doubled", "initial-halved", "partition-ignored", "partition-squared"])
def test_an_injected_error_falls_outside_the_bands(method_of_lines_study, mutate, direction):
    problem = _coating()
    wrong = dataclasses.replace(problem, layers=tuple(mutate(problem.layers)))
    study = galerkin_study(wrong)
    assert np.all(outside_bands(study.amounts, method_of_lines_study, "released_outer",
                                _time_floor(problem)))
    difference = _released(study.amounts) - _released(method_of_lines_study)
    assert np.all(np.sign(difference) == direction)


@pytest.mark.parametrize("geometry", ["slab", "sphere"])
def test_sequences_stepped_together_end_where_each_alone_does(geometry):
    # The extrapolation's implicit Euler sequences (1 to 4 substeps) taken together on copies
    # of the meshes end where each taken alone ends: a dispersed layer, a zero-order layer and
    # a compartment face with clearance (its inflow reads the copies' own substep sizes).
    from worker.engine.transient import galerkin_steps

    layers = (Layer("core", 4e-4, 2e-11, initial=5.0, solubility=1.0),
              Layer("coat", 2e-4, 5e-12, reaction=Reaction("zero_order", rate=1e-4),
                    initial=0.2))
    outer = Boundary("compartment", volume=2e-6, initial=0.1, clearance=1e-4)
    problem = dataclasses.replace(
        _problem(geometry, layers, Boundary("symmetry"), outer, start=0.0),
        area=1e-3, length=0.01)
    meshes = [build_galerkin_mesh(problem, (8, 4)), build_galerkin_mesh(problem, (16, 8))]
    system = galerkin._System(problem, meshes, 5.0)
    y0 = system.start_state()
    _, diag, off = system.balance(y0[:system.size], 1.0, slopes=True)
    for h in (50.0, 5e3):
        tally = galerkin_steps.StepHistory()
        together = galerkin_steps._euler_together(system, y0, h, (diag, off), tally)
        assert tally.substeps == sum(galerkin_steps.SEQUENCE)
        for n in galerkin_steps.SEQUENCE:
            alone = galerkin_steps._euler(system, y0, h, n, (diag, off),
                                          galerkin_steps.StepHistory())
            np.testing.assert_allclose(together[n], alone, rtol=1e-12, atol=1e-15)
