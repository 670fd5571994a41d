"""Every transient figure by two routes: each check of ``transient.compare`` fails when an
error is injected into either route, in either direction, and passes on the plain case.

Check values from outside the project: release from a sphere into a perfect sink,
M_t/M_inf = 1 - (6/pi^2) sum exp(-D n^2 pi^2 t / a^2) / n^2 (Crank, *The Mathematics of
Diffusion*, 2nd ed., 1975, eq. 6.20).
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

from worker.engine.model import Boundary, Layer, Problem, Reaction, Regime
from worker.engine.outcome import Outcome
from worker.engine.transient import compare, exact_series, run_transient, solve
from worker.engine.transient.compare import Route

RADIUS = 1.0e-4  # m
D = 1.0e-11  # m^2/s
TIMES = (0.0, 30.0, 120.0, 300.0, 600.0)


def _sphere(reaction: Reaction | None = None) -> Problem:
    return Problem("sphere", 0.0,
                   (Layer("bead", RADIUS, D, 1.0, reaction or Reaction(), initial=1.0),),
                   Boundary("symmetry"), Boundary("concentration", 0.0),
                   Regime("transient", 600.0, TIMES), probes=(0.5e-4,))


def _crank_sphere_fraction(t: float) -> float:
    n = np.arange(1, 4000)
    return float(1.0 - 6.0 / math.pi**2 * np.sum(
        np.exp(-D * n**2 * math.pi**2 * t / RADIUS**2) / n**2))


def _checks(outcome) -> dict:
    return {c.name: c for c in outcome.checks}


@pytest.fixture(scope="module")
def plain():
    return run_transient(_sphere())


def test_plain_sphere_passes_every_route_check(plain):
    checks = _checks(plain)
    for name in ("cross_check.initial_load", "cross_check.release_fraction",
                 "cross_check.remaining", "cross_check.profile", "cross_check.probes",
                 "cross_check.t50", "non_negativity"):
        assert checks[name].passed, (name, checks[name].detail)
    fraction = plain.quantities["release_fraction_final"]
    assert fraction["value"] == pytest.approx(_crank_sphere_fraction(600.0), rel=1e-6)
    assert fraction["verified_by"] == "cross_check.release_fraction"
    assert 0.0 <= fraction["uncertainty"] < 1e-4
    assert len(plain.quantities["t50"]["routes"]) == 3  # series, Laplace, method of lines


def _patch_series(monkeypatch, change):
    solve_exact = exact_series.solve_transient_exact

    def patched(problem, times=None):
        solution = solve_exact(problem, times)
        return None if solution is None else change(solution)

    monkeypatch.setattr(exact_series, "solve_transient_exact", patched)


@pytest.mark.parametrize("factor", [3.0, 1.0 / 3.0])
def test_a_wrong_series_load_fails(monkeypatch, factor):
    _patch_series(monkeypatch, lambda s: dataclasses.replace(
        s, initial_load=factor * s.initial_load))
    checks = _checks(run_transient(_sphere()))
    assert not checks["cross_check.initial_load"].passed
    assert not checks["cross_check.release_fraction"].passed


def test_a_load_that_hides_t50_fails_rather_than_skips(monkeypatch):
    _patch_series(monkeypatch, lambda s: dataclasses.replace(s, initial_load=3.0 * s.initial_load))
    outcome = run_transient(_sphere())
    check = _checks(outcome)["cross_check.t50"]
    assert not check.passed and check.value is None
    assert "one route only" in check.detail


@pytest.mark.parametrize("factor", [0.99, 1.01])
def test_a_wrong_amount_held_fails(monkeypatch, factor):
    _patch_series(monkeypatch, lambda s: dataclasses.replace(s, remaining=factor * s.remaining))
    assert not _checks(run_transient(_sphere()))["cross_check.remaining"].passed


@pytest.mark.parametrize("factor", [0.98, 1.02])
def test_a_wrong_amount_consumed_fails(monkeypatch, factor):
    reacting = _sphere(Reaction("first_order", rate_constant=2e-3))
    assert _checks(run_transient(reacting))["cross_check.consumed"].passed
    _patch_series(monkeypatch, lambda s: dataclasses.replace(s, consumed=factor * s.consumed))
    assert not _checks(run_transient(reacting))["cross_check.consumed"].passed


def test_a_sign_slip_in_the_series_profile_fails(monkeypatch):
    def negated(solution):
        inner = solution.concentration_at
        return dataclasses.replace(solution, concentration_at=lambda r, t: -inner(r, t))

    _patch_series(monkeypatch, negated)
    checks = _checks(run_transient(_sphere()))
    assert not checks["cross_check.profile"].passed
    assert not checks["cross_check.probes"].passed
    assert not checks["non_negativity"].passed


@pytest.mark.parametrize("factor", [0.99, 1.01])
def test_a_wrong_numerical_profile_fails(monkeypatch, factor):
    """The method's profile evaluation off on every mesh (a slip in its code)."""
    early = dataclasses.replace(_sphere(), regime=Regime("transient", 120.0, (0.0, 30.0, 120.0)))
    assert _checks(run_transient(early))["cross_check.profile"].passed
    meshes = solve.fv_on_meshes

    def scaled(problem, times, end):
        fvs = meshes(problem, times, end)

        def wrong_profiles(solution):
            profile_at = solution.profile_at

            def wrong(index):
                concentration_at, flux_at = profile_at(index)
                return (lambda r, layer=None: factor * np.asarray(
                    concentration_at(r, layer=layer)), flux_at)

            return dataclasses.replace(solution, profile_at=wrong)

        return [wrong_profiles(solution) for solution in fvs]

    monkeypatch.setattr(solve, "fv_on_meshes", scaled)
    # run.py imported the name: patch it there too
    monkeypatch.setattr("worker.engine.transient.run.fv_on_meshes", scaled)
    assert not _checks(run_transient(early))["cross_check.profile"].passed


def _route(name: str, load: float, events: dict) -> Route:
    times = np.array([0.0, 1.0, 2.0])
    amounts = {"remaining": load - np.array([0.0, 0.5, 0.9]) * load,
               "released_inner": np.zeros(3), "released_outer": np.array([0.0, 0.5, 0.9]) * load,
               "consumed": np.zeros(3), "flux_inner": np.zeros(3), "flux_outer": np.ones(3)}
    every = np.ones(times.size, dtype=bool)
    return Route(name, "", amounts, load, every, every, lambda r, k, layer: np.ones_like(r),
                 events)


@pytest.mark.parametrize("pair", [({"t50": 1.0}, {"t50": None}), ({"t50": None}, {"t50": 1.0})])
def test_t50_reached_by_one_route_only_fails_either_way(pair):
    outcome = Outcome()
    problem = _sphere()
    primary, other = _route("a", 1.0, pair[0]), _route("b", 1.0, pair[1])
    compare.compare_routes(outcome, problem, primary, [other], np.array([0.0, 1.0, 2.0]),
                           [(0, np.linspace(0.0, RADIUS, 5))], 2, 1.0, 1.0)
    check = _checks(outcome)["cross_check.t50"]
    assert not check.passed and check.value is None


def test_routes_that_agree_pass_the_comparison():
    outcome = Outcome()
    primary, other = _route("a", 1.0, {"t50": 1.0}), _route("b", 1.0, {"t50": 1.0})
    compare.compare_routes(outcome, _sphere(), primary, [other], np.array([0.0, 1.0, 2.0]),
                           [(0, np.linspace(0.0, RADIUS, 5))], 2, 1.0, 1.0)
    assert all(c.passed for c in outcome.checks), [(c.name, c.detail) for c in outcome.checks]
    assert {"cross_check.t50", "cross_check.release_fraction", "cross_check.initial_load",
            "cross_check.profile", "cross_check.remaining"} <= set(_checks(outcome))


@pytest.mark.parametrize("factor", [0.9, 1.1])
def test_a_grid_band_never_forgives_more_than_the_limit(monkeypatch, factor):
    """Only the fine mesh off: its band |fine - medium| grows with the error, but a band counts
    at most half the limit, so the error still shows."""
    early = dataclasses.replace(_sphere(), regime=Regime("transient", 120.0, (0.0, 30.0, 120.0)))
    meshes = solve.fv_on_meshes

    def fine_only(problem, times, end):
        fvs = meshes(problem, times, end)
        profile_at = fvs[-1].profile_at

        def wrong(index):
            concentration_at, flux_at = profile_at(index)
            return (lambda r, layer=None: factor * np.asarray(
                concentration_at(r, layer=layer)), flux_at)

        fvs[-1] = dataclasses.replace(fvs[-1], profile_at=wrong)
        return fvs

    monkeypatch.setattr("worker.engine.transient.run.fv_on_meshes", fine_only)
    assert not _checks(run_transient(early))["cross_check.profile"].passed
