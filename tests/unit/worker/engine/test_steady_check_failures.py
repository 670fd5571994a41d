"""A steady check whose finite-volume solve fails ends with a record that says why.

The case is a plain reaction-free slab (Fick's law, linear profile: Crank 1975, eq. 4.1); the
failure is injected into the fine grid of the three-grid study, the way a solver that did not
converge reports itself (``failed_steady_solution``).
"""

from __future__ import annotations

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
