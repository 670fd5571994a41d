"""``run_problem``: solve one normalised problem by the checks of its regime."""

from __future__ import annotations

from worker.engine.input_checks import interpretation_check
from worker.engine.model import Problem
from worker.engine.outcome import Outcome
from worker.engine.steady_check import run_steady
from worker.engine.transient import run_transient

__all__ = ["run_problem"]


def run_problem(problem: Problem, independent: Problem | None = None) -> Outcome:
    """Quantities, series, methods, checks and warnings of ``problem``: :func:`run_steady` for a
    steady regime, :func:`run_transient` for a transient one. Raises what the solvers raise.

    ``independent`` is the same case read a second way
    (:func:`worker.engine.independent_problem.build_independent_problem`): the independent
    methods solve it, and the check ``inputs.interpretation`` (first in the outcome) compares
    it with ``problem`` field by field. Without it both roles take ``problem`` and no inputs
    check is made.
    """
    if independent is None:
        return _solve(problem, None)
    check = interpretation_check(problem, independent)
    try:
        outcome = _solve(problem, independent)
    except Exception as exc:
        if check.passed:
            raise
        raise ValueError(f"inputs.interpretation: the two readings of the case differ "
                         f"({check.detail}; relative difference {check.value:.3g}), and the "
                         f"methods could not be compared: {exc}") from exc
    outcome.checks.insert(0, check)
    return outcome


def _solve(problem: Problem, independent: Problem | None) -> Outcome:
    if problem.regime.kind == "steady":
        return run_steady(problem, independent)
    return run_transient(problem, independent)
