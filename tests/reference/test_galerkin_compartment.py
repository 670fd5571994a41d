"""The Galerkin second discretisation with a ``compartment`` face (the stirred fluid as extra
lumped capacity of the face node, its clearance a sink there) against published closed forms,
and the record of a nonlinear case with a compartment now checked by two discretisations.

Sources, beside each test:

* J. Crank, *The Mathematics of Diffusion*, 2nd ed., Oxford, 1975: the limited-volume solutions
  (plane sheet §4.3.5, eqs. 4.37-4.38; cylinder §5.3.4; sphere §6.3.4, eq. 6.30), evaluated by
  ``limited_volume.crank_case`` (whose roots are checked against mpmath in
  ``test_limited_volume``).
* The compartment balance V dC_f/dt = A J_out - V k C_f (the definition of a stirred volume with
  first-order loss; common practice): the released amount equals what the fluid gained plus
  what the clearance removed, k V int C_f dt, the integral taken with numpy's trapezoid rule on
  a fine grid of the dense output.
* The exact Laplace-domain route (Talbot inversion of the transformed balance) for the linear
  case with a clearance, outside Crank's solutions.

Scenario values are invented.
"""

from __future__ import annotations

import numpy as np
import pytest

from worker.engine.boundaries.compartment import capacity
from worker.engine.model import Boundary, Layer, Problem, Reaction, Regime
from worker.engine.outcome import Outcome
from worker.engine.transient import compartment_checks, galerkin, run_transient
from worker.engine.transient.galerkin import galerkin_study, solve_transient_galerkin
from worker.engine.transient.laplace import solve_transient_laplace
from worker.engine.transient.limited_volume import crank_case
from worker.engine.transient.method_of_lines import solve_transient_fv
from worker.engine.transient.routes import galerkin_route

D = 1.0e-10  # m^2/s
THICK = 1.0e-3  # m
TIMES = np.array([50.0, 500.0, 2.0e3, 1.0e4, 3.0e4])
VOLUMES = {"slab": 2e-6, "cylinder": 2e-8, "sphere": 2e-8}


def _case(geometry, *, clearance=0.0, fluid=1.0, initial=10.0):
    sealed = Boundary("flux") if geometry == "slab" else Boundary("symmetry")
    return Problem(geometry, 0.0, (Layer("matrix", THICK, D, 2.0, initial=initial),), sealed,
                   Boundary("compartment", volume=VOLUMES[geometry], partition=1.5,
                            initial=fluid, clearance=clearance),
                   Regime("transient", TIMES[-1], tuple(TIMES)), area=1e-3, length=0.01)


def _crank_errors(problem, elements):
    """Largest error of the fluid level and of the released amount against Crank, each
    relative to the exact exchange, past the first output time."""
    case, why = crank_case(problem)
    assert case is not None, why
    later = TIMES[1:]
    solution = solve_transient_galerkin(problem, later, elements, rtol=1e-8, end=TIMES[-1])
    assert solution.success, solution.message
    change = abs(case.final_fluid - case.start_fluid)
    fluid = np.max(np.abs(solution.compartments["outer"] - case.fluid(later))) / change
    released = np.max(np.abs(solution.released_outer - case.released(later))) / (
        case.measure * case.capacity * change)
    return fluid, released


@pytest.mark.parametrize("geometry", ["slab", "sphere", "cylinder"])
def test_galerkin_converges_to_crank_at_second_order(geometry):
    """Crank 1975, §§4.3.5 (sheet), 5.3.4 (cylinder), 6.3.4 (sphere): loaded body, fluid
    starting at a level of its own (any uniform pair is the equilibrium plus the uptake
    problem)."""
    problem = _case(geometry)
    coarse = _crank_errors(problem, 20)
    fine = _crank_errors(problem, 40)
    for e_coarse, e_fine in zip(coarse, fine, strict=True):
        assert e_fine < 3e-4
        assert 3.5 < e_coarse / e_fine < 4.5  # observed order about 2 (P1, lumped mass)


@pytest.mark.parametrize("geometry", ["slab", "sphere"])
def test_galerkin_route_passes_the_limited_volume_check(geometry):
    """The three-mesh Galerkin route (extrapolated levels in ``Route.compartments``) against
    Crank's solution through the record's own check, within a far tighter bound than its
    limit."""
    problem = _case(geometry)
    study = galerkin_study(problem, TIMES, end=TIMES[-1])  # the route's own mesh rule
    route = galerkin_route(problem, study, TIMES, TIMES[-1])
    assert set(route.compartments) == {"outer"}
    outcome = Outcome()
    compartment_checks.limited_volume_check(outcome, problem, [route], TIMES)
    check = outcome.check("cross_check.limited_volume")
    assert check is not None and check.passed, check.detail
    assert check.value < 1e-5


def test_clearance_balance_and_exact_laplace_route():
    """Released = W (C_f - C_f(0)) + k W int C_f dt (the compartment balance), the body's
    balance closed, and the level against the exact Laplace-domain route with a clearance."""
    clearance = 2e-4
    problem = _case("slab", clearance=clearance, fluid=0.5)
    w = capacity(problem, "outer")
    solution = solve_transient_galerkin(problem, TIMES, 40, rtol=1e-9)
    assert solution.success, solution.message
    balance = (solution.remaining + solution.released_outer + solution.released_inner
               + solution.consumed - solution.initial_load)
    assert np.max(np.abs(balance)) < 1e-12 * solution.initial_load
    # the clearance leaves through the face, not as consumption (round-off only)
    assert np.max(np.abs(solution.consumed)) < 1e-12 * solution.initial_load
    t = np.linspace(0.0, TIMES[-1], 60001)
    nodes = solution.mesh.n_nodes
    level = np.asarray(solution.state_at(t))[nodes - 1] * 2.0 / 1.5  # u_b K / K_face
    removed = clearance * w * np.trapezoid(level, t)
    gained = w * (solution.compartments["outer"][-1] - 0.5)
    assert solution.released_outer[-1] == pytest.approx(gained + removed, rel=1e-5)
    exact = solve_transient_laplace(problem, TIMES).compartments["outer"]
    assert np.max(np.abs(solution.compartments["outer"][1:] - exact[1:])) < 1e-3 * 0.5


@pytest.mark.parametrize("geometry", ["slab", "cylinder", "sphere"])
def test_inner_donor_with_clearance_converges_to_the_laplace_route(geometry):
    """Two layers of a hollow body, a donor compartment with a clearance at the inner face and a
    film at the outer: the level, both released amounts and the inner face flux against the
    exact Laplace-domain route, at second order."""
    times = np.array([500.0, 2e3, 1e4, 3e4])
    problem = Problem(geometry, 1e-3, (Layer("a", 5e-4, 1e-10, 2.0, initial=1.0),
                                       Layer("b", 5e-4, 3e-10, 0.5)),
                      Boundary("compartment", volume=1e-8, initial=4.0, partition=1.5,
                               clearance=1e-5),
                      Boundary("mass_transfer", coefficient=1e-6, bulk=0.0),
                      Regime("transient", times[-1], tuple(times)), area=1e-4, length=0.01)
    exact = solve_transient_laplace(problem, times)
    errors = []
    for elements in (10, 20):
        found = solve_transient_galerkin(problem, times, elements, rtol=1e-9)
        assert found.success, found.message
        errors.append(max(
            np.max(np.abs(found.compartments["inner"] - exact.compartments["inner"])) / 4.0,
            np.max(np.abs(found.released_inner - exact.released_inner)) / exact.initial_load,
            np.max(np.abs(found.released_outer - exact.released_outer)) / exact.initial_load,
            np.max(np.abs(found.flux_inner - exact.flux_inner))
            / np.max(np.abs(exact.flux_inner))))
    assert errors[1] < 2e-3
    assert 3.5 < errors[0] / errors[1] < 4.5


def _with_capacity_factor(monkeypatch, factor):
    """The Galerkin route's own compartment capacity (``_fluid_per_weight``) times ``factor``."""
    original = galerkin._fluid_per_weight
    monkeypatch.setattr(galerkin, "_fluid_per_weight",
                        lambda problem, side, radius, weight:
                        factor * original(problem, side, radius, weight))


@pytest.mark.parametrize("factor", [1.002, 0.998])
def test_wrong_capacity_fails_the_limited_volume_check(monkeypatch, factor):
    """An injected error of 0.2 % in the compartment's volume, either way, moves the Galerkin
    route off Crank's solution by more than the check's limit."""
    problem = _case("slab")
    _with_capacity_factor(monkeypatch, factor)
    study = galerkin_study(problem, TIMES, end=TIMES[-1])
    outcome = Outcome()
    compartment_checks.limited_volume_check(
        outcome, problem, [galerkin_route(problem, study, TIMES, TIMES[-1])], TIMES)
    check = outcome.check("cross_check.limited_volume")
    assert check is not None and not check.passed


def _saturable():
    """A gel taking up solute from a stirred donor and consuming it (Michaelis-Menten): no
    exact route, so the Galerkin route is the independent one."""
    return Problem("slab", 0.0, (Layer("gel", 1e-3, 1e-9, initial=0.0, reaction=Reaction(
        "michaelis_menten", vmax=1e-4, km=0.01)),), Boundary("flux"),
        Boundary("compartment", volume=1e-6, initial=0.2), Regime("transient", 1e4, (1e3, 1e4)),
        area=1e-4)


def _zero_order():
    """A gel taking up solute from a stirred donor and consuming it at a zero-order rate until
    the donor runs low (exhaustion inside the gel)."""
    return Problem("slab", 0.0, (Layer("gel", 1e-3, 1e-9, initial=0.0, reaction=Reaction(
        "zero_order", rate=2e-4)),), Boundary("flux"),
        Boundary("compartment", volume=1e-6, initial=0.2), Regime("transient", 1e4, (1e3, 1e4)),
        area=1e-4)


@pytest.mark.parametrize("make", [_saturable, _zero_order])
def test_nonlinear_case_with_a_compartment_has_a_galerkin_route(make):
    outcome = run_transient(make())
    names = [m["name"] for m in outcome.methods]
    assert any(name.startswith("Galerkin") for name in names)
    assert not any("Galerkin second discretisation" in w for w in outcome.warnings)
    checks = {c.name: c for c in outcome.checks}
    for name in ("cross_check.released", "cross_check.remaining", "cross_check.consumed",
                 "cross_check.flux_outer", "mass_balance", "convergence.space"):
        assert checks[name].passed, checks[name].detail
    entry = outcome.series["compartment_outer"]
    assert all(u is not None for u in entry["uncertainty"])  # a second route compares it
    assert max(entry["uncertainty"]) < 1e-4 * max(entry["values"])


def test_loaded_coating_behind_a_compartment_agrees_with_the_method_of_lines():
    """A coating loaded ten times above its solubility releasing into a finite medium with a
    clearance (Paul & McSpadden's dispersed release, the sink replaced by a stirred volume):
    the Galerkin route's level and release against the method of lines past the first
    instants; in ``run_transient`` the route compares the front and every figure, and they
    pass."""
    times = np.array([1e3, 1e4])
    problem = Problem("slab", 0.0, (Layer("coat", 1e-4, 1e-12, 1.0, initial=50.0,
                                          solubility=5.0),),
                      Boundary("flux"), Boundary("compartment", volume=2e-6, clearance=1e-4),
                      Regime("transient", 1e4, tuple(times)), area=1e-4)
    found = solve_transient_galerkin(problem, times, 64)
    lines = solve_transient_fv(problem, times, [128])
    assert found.success and lines.success
    load = found.initial_load
    assert np.max(np.abs(found.released_outer - lines.released_outer)) < 2e-3 * load
    level = lines.compartments["outer"]
    assert np.max(np.abs(found.compartments["outer"] - level)) < 2e-3 * np.max(level)
    outcome = run_transient(problem)
    assert not any("Galerkin second discretisation" in w for w in outcome.warnings)
    assert any(m["name"].startswith("Galerkin") for m in outcome.methods)
    front = outcome.check("cross_check.front_position")
    assert front is not None and front.passed, front
    failed = [(c.name, c.value) for c in outcome.checks if not c.passed]
    assert not failed


@pytest.mark.parametrize("factor", [1.01, 0.99])
def test_wrong_capacity_fails_the_route_comparison(monkeypatch, factor):
    """An injected error of 1 % in the Galerkin route's compartment volume, either way, makes
    the record's comparison with the method of lines fail."""
    _with_capacity_factor(monkeypatch, factor)
    outcome = run_transient(_saturable())
    checks = {c.name: c for c in outcome.checks}
    assert not checks["cross_check.remaining"].passed
