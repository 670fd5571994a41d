"""Steady checks that must fail when an error is injected into a solver's result.

The case is a plain reaction-free slab (Fick's law, linear profile: Crank 1975, eq. 4.1). A
failed fine grid is injected the way a solver that did not converge reports itself
(``failed_steady_solution``); a wrong flux by scaling the exact solution's outer flux.
"""

from __future__ import annotations

import dataclasses

import pytest

from worker.engine import convergence, steady_check
from worker.engine.failed_solution import failed_steady_solution
from worker.engine.model import Boundary, Layer, Problem, Reaction


def _slab() -> Problem:
    return Problem(
        geometry="slab", inner=0.0,
        layers=(Layer(name="membrane", thickness=1e-4, diffusivity=1e-9, partition=1.0,
                      reaction=Reaction("none")),),
        inner_boundary=Boundary("concentration", value=1.0),
        outer_boundary=Boundary("concentration", value=0.0),
    )


@pytest.fixture
def failing_fine_grid(monkeypatch):
    solve_grids = convergence.refined_solutions

    def with_failed_fine(problem, *args, **kwargs):
        grids = list(solve_grids(problem, *args, **kwargs))
        grids[0] = failed_steady_solution(grids[0].method, grids[0].reference,
                                          "injected: Newton did not converge",
                                          diagnostics=grids[0].diagnostics)
        return grids

    monkeypatch.setattr(convergence, "refined_solutions", with_failed_fine)


def test_a_failed_fine_grid_fails_the_record_with_its_reason(failing_fine_grid):
    outcome = steady_check.run_steady(_slab())
    checks = {c.name: c for c in outcome.checks}
    assert not checks["numerical.converged"].passed
    assert "injected: Newton did not converge" in checks["numerical.converged"].detail
    profile = checks["cross_check.profile"]
    assert not profile.passed
    assert "injected: Newton did not converge" in profile.detail


def test_the_same_case_passes_when_nothing_fails():
    outcome = steady_check.run_steady(_slab())
    checks = {c.name: c for c in outcome.checks}
    assert "numerical.converged" not in checks
    assert checks["cross_check.profile"].passed
    assert all(c.passed for c in outcome.checks)


@pytest.mark.parametrize("factor", [0.9, 1.1])
def test_the_flux_cross_check_fails_whichever_way_a_flux_is_wrong(monkeypatch, factor):
    """An error injected into the exact solution's outer flux, too small or too large by 10 %,
    fails ``cross_check.flux_outer``: the check measures a distance, not a signed difference."""
    solve_exact = steady_check.exact_steady.solve_exact

    def with_wrong_outer_flux(problem, *args, **kwargs):
        exact = solve_exact(problem, *args, **kwargs)
        return dataclasses.replace(exact, flux_outer=factor * exact.flux_outer)

    monkeypatch.setattr(steady_check.exact_steady, "solve_exact", with_wrong_outer_flux)
    checks = {c.name: c for c in steady_check.run_steady(_slab()).checks}
    assert not checks["cross_check.flux_outer"].passed
    assert checks["cross_check.flux_outer"].value > checks["cross_check.flux_outer"].limit
    assert checks["cross_check.flux_inner"].passed
