"""The ``compartment`` boundary kind in the engine: its fields and errors, its state in the
method of lines, the routes that take it or step aside, its record series and its two checks
(each shown failing when its error is injected either way).

Sources: the compartment balance V dC_f/dt = A J_out - V k C_f and Crank's limited-volume
solutions (J. Crank, *The Mathematics of Diffusion*, 2nd ed., 1975, §§4.3.5, 5.3.4, 6.3.4);
the exact equilibrium partition of the load is conservation (common practice). Scenario values
are invented.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from worker.engine.boundaries import BOUNDARIES
from worker.engine.boundaries.compartment import capacity
from worker.engine.fv_mesh import build_mesh
from worker.engine.limits import check_limit
from worker.engine.model import Boundary, Layer, Problem, Reaction, Regime
from worker.engine.outcome import Outcome
from worker.engine.run import run_problem
from worker.engine.transient import compartment_checks, run_transient, uptake
from worker.engine.transient.exact_series import series_unsupported_reason
from worker.engine.transient.laplace import laplace_unsupported_reason
from worker.engine.transient.limited_volume import crank_case, equilibrium_level
from worker.engine.transient.method_of_lines import _Rhs, concentration_scale, solve_transient_fv
from worker.engine.transient.solution import Route

TIMES = (200.0, 2.0e3, 2.0e4)


def _release(volume=2e-6, clearance=0.0, fluid=0.0, initial=10.0, geometry="slab"):
    sealed = Boundary("flux") if geometry == "slab" else Boundary("symmetry")
    return Problem(geometry, 0.0, (Layer("coating", 1e-3, 1e-10, 2.0, initial=initial),),
                   sealed, Boundary("compartment", volume=volume, initial=fluid,
                                    clearance=clearance),
                   Regime("transient", TIMES[-1], TIMES), area=1e-3, length=0.01)


def test_kind_declares_its_case_fields():
    kind = BOUNDARIES["compartment"]
    fields = {p.name: (p.dimension, p.sign, p.required) for p in kind.parameters}
    assert fields == {"volume": ("volume", "positive", True),
                      "initial": ("concentration", "non_negative", False),
                      "partition": (None, "positive", False),
                      "clearance": ("rate_constant", "non_negative", False)}
    boundary = Boundary("compartment", volume=1e-6, initial=0.4)
    assert kind.fluid_concentration(boundary) == 0.4
    assert kind.transient_only and kind.finite_volume


@pytest.mark.parametrize("change,field", [
    ({"area": None}, "area"),
    ({"outer_boundary": Boundary("compartment", volume=0.0)}, "outer_boundary.volume"),
    ({"outer_boundary": Boundary("compartment", volume=1e-6, clearance=-1.0)},
     "outer_boundary.clearance"),
])
def test_bad_compartment_fields_are_named(change, field):
    problem = dataclasses.replace(_release(), **change)
    with pytest.raises(ValueError, match=field.replace(".", r"\.")):
        capacity(problem, "outer")


def test_cylinder_needs_its_length():
    problem = dataclasses.replace(_release(geometry="cylinder"), length=None)
    with pytest.raises(ValueError, match="^length"):
        solve_transient_fv(problem, cells_per_layer=[10])


def test_capacity_is_volume_per_measure():
    # slab V/A; cylinder V/(2 pi L); sphere V/(4 pi)
    assert capacity(_release(), "outer") == pytest.approx(2e-6 / 1e-3)
    assert capacity(_release(geometry="cylinder"), "outer") == pytest.approx(
        2e-6 / (2 * np.pi * 0.01))
    assert capacity(_release(geometry="sphere"), "outer") == pytest.approx(2e-6 / (4 * np.pi))


def test_steady_case_is_refused_naming_the_face():
    problem = dataclasses.replace(_release(), regime=Regime("steady"))
    with pytest.raises(ValueError, match=r"^outer_boundary\.kind: 'compartment' is for "
                                         r"transient cases only"):
        run_problem(problem)


def test_series_steps_aside_and_laplace_takes_it():
    problem = dataclasses.replace(_release(), inner_boundary=Boundary("concentration", 0.0))
    assert "outer_boundary is a compartment" in series_unsupported_reason(problem)
    assert laplace_unsupported_reason(problem) is None


def test_jacobian_is_the_derivative_of_the_rhs():
    """The exact Jacobian (compartment rows and columns included) against central differences
    of the right-hand side, so any implicit integrator can use it."""
    problem = Problem("cylinder", 2e-4, (Layer("a", 1e-4, 1e-10, 2.0, initial=3.0),
                                        Layer("b", 2e-4, 3e-11, 0.5, initial=1.0)),
                      Boundary("compartment", volume=1e-8, initial=0.5, clearance=1e-3),
                      Boundary("compartment", volume=4e-8, partition=0.8),
                      Regime("transient", 10.0, (10.0,)), length=0.02)
    mesh = build_mesh(problem, [6, 5])
    system = _Rhs(problem, mesh, concentration_scale(problem))
    rng = np.random.default_rng(3)
    y = rng.uniform(0.1, 2.0, system.size)
    jac = system.jacobian(0.0, y).toarray()
    numeric = np.empty_like(jac)
    for j in range(system.size):
        step = 1e-6 * max(1.0, abs(y[j]))
        up, down = y.copy(), y.copy()
        up[j] += step
        down[j] -= step
        numeric[:, j] = (system(0.0, up) - system(0.0, down)) / (2 * step)
    assert np.allclose(jac, numeric, rtol=1e-6, atol=1e-9 * np.abs(jac).max())
    assert system.size == mesh.n_cells + 5


def test_compartment_holds_what_crossed_less_what_was_cleared():
    """No clearance: released = measure * W * (C_f - C_f0) exactly in the discretisation; with
    clearance the difference is the amount cleared, k W int C_f dt (trapezoid on the dense
    output)."""
    problem = _release(fluid=0.5)
    solution = solve_transient_fv(problem, cells_per_layer=[30])
    w = capacity(problem, "outer")
    held = w * (solution.compartments["outer"] - 0.5)
    assert solution.released_outer == pytest.approx(held, rel=1e-7)
    cleared_problem = _release(clearance=2e-4)
    cleared = solve_transient_fv(cleared_problem, cells_per_layer=[30], rtol=1e-9)
    t = np.linspace(0.0, TIMES[-1], 20001)
    n = cleared.mesh.n_cells
    level = np.asarray(cleared.state_at(t))[n + 3]
    removed = 2e-4 * w * np.trapezoid(level, t)
    assert cleared.released_outer[-1] - w * cleared.compartments["outer"][-1] == pytest.approx(
        removed, rel=1e-5)


def test_release_medium_releases_and_a_donor_feeds():
    assert uptake.releases(_release())
    donor = _release(initial=0.0, fluid=3.0)
    assert uptake.supplying_faces(donor) == ["outer"]
    assert not uptake.releases(donor)


def test_record_of_a_release_into_a_finite_medium():
    outcome = run_transient(_release())
    checks = {c.name: c for c in outcome.checks}
    for name in ("cross_check.limited_volume", "compartment.equilibrium", "mass_balance",
                 "cross_check.release_fraction"):
        assert checks[name].passed, checks[name].detail
    assert "steady_limit" not in checks
    entry = outcome.series["compartment_outer"]
    assert len(entry["values"]) == len(TIMES) and entry["unit"] == "mol/m^3"
    assert all(u is not None for u in entry["uncertainty"])
    case, _ = crank_case(_release())
    assert entry["values"] == pytest.approx(case.fluid(np.array(TIMES)).tolist(), rel=1e-6)
    fraction = outcome.series["release_fraction"]["values"][-1]
    assert fraction < case.alpha / (1 + case.alpha) + 1e-9  # never beyond the equilibrium


def test_nonlinear_case_with_a_compartment_runs_with_the_galerkin_route():
    problem = Problem("slab", 0.0, (Layer("gel", 1e-3, 1e-9, initial=0.0, reaction=Reaction(
        "michaelis_menten", vmax=1e-4, km=0.01)),), Boundary("flux"),
        Boundary("compartment", volume=1e-6, initial=0.2), Regime("transient", 1e4, (1e3, 1e4)),
        area=1e-4)
    outcome = run_transient(problem)
    assert any(m["role"] == "independent" and m["name"].startswith("Galerkin")
               for m in outcome.methods)
    assert any("compartment.equilibrium: not applicable" in w for w in outcome.warnings)
    assert {c.name: c.passed for c in outcome.checks}["mass_balance"]


# --- each check fails when its error is injected, either way -----------------------------------

def _route(problem, fluid, released):
    internal = np.array(TIMES)
    amounts = {"released_inner": np.zeros(3), "released_outer": released,
               "remaining": np.zeros(3), "consumed": np.zeros(3), "flux_inner": np.zeros(3),
               "flux_outer": np.zeros(3)}
    return Route("stand-in", "", amounts, 1.0, np.ones(internal.size, bool),
                 np.ones(internal.size, bool), lambda r, k, j: r, compartments={"outer": fluid})


@pytest.mark.parametrize("sign", [1.0, -1.0])
@pytest.mark.parametrize("what", ["fluid", "released"])
def test_limited_volume_check_fails_on_an_injected_error(sign, what):
    problem = _release()
    case, _ = crank_case(problem)
    internal = np.array(TIMES)
    fluid, released = case.fluid(internal), case.released(internal)
    clean = Outcome()
    compartment_checks.limited_volume_check(clean, problem, [_route(problem, fluid, released)],
                                            internal)
    assert clean.checks[0].passed and clean.checks[0].value < 1e-12
    error = 1e-3 * sign
    if what == "fluid":
        fluid = fluid + error * case.final_fluid
    else:
        released = released * (1 + error)
    bad = Outcome()
    compartment_checks.limited_volume_check(bad, problem, [_route(problem, fluid, released)],
                                            internal)
    assert not bad.checks[0].passed


@pytest.mark.parametrize("sign", [1.0, -1.0])
def test_equilibrium_check_fails_on_an_injected_error(sign):
    """A compartment state off by 1 % at the duration (load not conserved) ends at another
    equilibrium than the exact partition of the case's load."""
    problem = _release()
    fine = solve_transient_fv(problem, cells_per_layer=[20])
    clean = Outcome()
    compartment_checks.equilibrium_check(clean, problem, fine, TIMES[-1],
                                         concentration_scale(problem))
    assert clean.checks[0].passed, clean.checks[0].detail
    end_state = fine.diagnostics["end_state"].copy()
    n = fine.mesh.n_cells
    end_state[n + 3] *= 1.0 + 0.01 * sign
    fine.diagnostics["end_state"] = end_state
    bad = Outcome()
    compartment_checks.equilibrium_check(bad, problem, fine, TIMES[-1],
                                         concentration_scale(problem))
    assert not bad.checks[0].passed


def test_equilibrium_applies_only_to_closed_cases():
    assert equilibrium_level(_release()) is not None
    assert equilibrium_level(_release(clearance=1e-4)) is None
    leaky = dataclasses.replace(_release(), inner_boundary=Boundary("concentration", 0.0))
    assert equilibrium_level(leaky) is None


def _crank_route(case, internal, fluid_error=0.0, amount_error=0.0) -> Route:
    """A route giving Crank's exact level and release with the injected errors (fractions of
    the exact change in the level and of the exact exchange)."""
    ones = np.ones(internal.size, dtype=bool)
    change = abs(case.final_fluid - case.start_fluid)
    amounts = {f"released_{case.side}": case.released(internal)
               + amount_error * case.measure * case.capacity * change}
    route = Route("injected", "ref", amounts, 1.0, ones, ones, lambda r, k, j: np.zeros_like(r))
    route.compartments = {case.side: case.fluid(internal) + fluid_error * change}
    return route


@pytest.mark.parametrize("sign", [+1.0, -1.0])
@pytest.mark.parametrize("which", ["fluid_error", "amount_error"])
def test_limited_volume_check_turns_on_an_injected_error_either_way(sign, which):
    problem = _release()
    case, _ = crank_case(problem)
    assert case is not None
    internal = np.array(TIMES)
    limit = check_limit(problem, "cross_check.limited_volume")
    verdicts = []
    for size in (0.5, 2.0):
        outcome = Outcome()
        route = _crank_route(case, internal, **{which: sign * size * limit})
        compartment_checks.limited_volume_check(outcome, problem, [route], internal)
        check = outcome.check("cross_check.limited_volume")
        assert check is not None and check.value == pytest.approx(size * limit, rel=1e-6)
        verdicts.append(check.passed)
    assert verdicts == [True, False]


@pytest.mark.parametrize("geometry", ["slab", "cylinder", "sphere"])
def test_the_galerkin_route_derives_the_fluids_capacity_itself(geometry):
    """The Galerkin route's fluid per weight, V r^n / A_face from the face's own area, equals
    ``boundaries.compartment.capacity`` (V / (area per measure x measure factor)) used by the
    other routes: two derivations of one quantity."""
    from worker.engine.transient.galerkin import _fluid_per_weight

    inner = 0.0 if geometry == "slab" else 2e-4
    problem = Problem(geometry, inner, (Layer("gel", 1e-4, 1e-10, 1.0, initial=1.0),),
                      Boundary("flux") if geometry == "slab" else Boundary("symmetry"),
                      Boundary("compartment", volume=2e-6), area=3e-4, length=0.02,
                      regime=Regime("transient", 100.0, (100.0,)))
    radius = problem.outer
    weight = radius ** problem.exponent
    assert _fluid_per_weight(problem, "outer", radius, weight) == pytest.approx(
        capacity(problem, "outer"), rel=1e-14, abs=0)


def test_a_wrong_shared_capacity_is_caught_by_the_galerkin_route(monkeypatch):
    """The method of lines, the Laplace route and Crank's reference read the fluid's capacity
    from ``boundaries.compartment.capacity``; the Galerkin route derives its own. A 2 % error
    in the shared function then turns a zero-order case behind a compartment from pass to fail
    (the routes disagree); the honest function passes."""
    from worker.engine.transient import laplace, limited_volume, method_of_lines

    problem = Problem("slab", 0.0, (Layer("gel", 5e-4, 1e-10, 1.0, initial=1.0,
                                          reaction=Reaction("zero_order", rate=1e-4)),),
                      Boundary("flux"), Boundary("compartment", volume=2e-7), area=1e-4,
                      regime=Regime("transient", 4000.0, (500.0, 1000.0, 2000.0, 4000.0)))
    honest = run_transient(problem)
    assert all(c.passed for c in honest.checks), [c.name for c in honest.checks if not c.passed]

    def wrong(problem, side):
        return 1.02 * capacity(problem, side)

    for module in (method_of_lines, laplace):
        monkeypatch.setattr(module, "compartment_capacity", wrong)
    for module in (limited_volume, compartment_checks):
        monkeypatch.setattr(module, "capacity", wrong)
    skewed = run_transient(problem)
    assert not all(c.passed for c in skewed.checks)
