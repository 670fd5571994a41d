"""``run_problem``: solve one normalised problem by the checks of its regime."""

from __future__ import annotations

from worker.engine.model import Problem
from worker.engine.outcome import Outcome
from worker.engine.steady_check import run_steady
from worker.engine.transient import run_transient

__all__ = ["run_problem"]


def run_problem(problem: Problem) -> Outcome:
    """Quantities, series, methods, checks and warnings of ``problem``: :func:`run_steady` for a
    steady regime, :func:`run_transient` for a transient one. Raises what the solvers raise."""
    if problem.regime.kind == "steady":
        return run_steady(problem)
    return run_transient(problem)
