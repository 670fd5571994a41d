"""``run_problem``: solve one normalised problem by the checks of its regime."""

from __future__ import annotations

from worker.engine.input_checks import interpretation_check
from worker.engine.lumen.run import run_flow
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
        # The two readings differ so much that the methods cannot even be compared (positions
        # of one body outside the other): record the primary reading's solution, with the
        # failed inputs check saying why the independent methods are missing.
        outcome = _solve(problem, None)
        outcome.warnings.insert(0, (
            "the independent methods could not be run on the independent reading of the case "
            f"({exc}); the methods shown all solved the primary reading, and the verdict rests "
            "on the inputs checks"))
    outcome.checks.insert(0, check)
    return outcome


def _solve(problem: Problem, independent: Problem | None) -> Outcome:
    if problem.inner_boundary.condition.lumen:
        return run_flow(problem, independent)
    if problem.regime.kind == "steady":
        for side, boundary in (("inner", problem.inner_boundary),
                               ("outer", problem.outer_boundary)):
            if boundary.condition.transient_only:
                raise ValueError(
                    f"{side}_boundary.kind: {boundary.kind!r} is for transient cases only (its "
                    "level follows the body and has no steady value of its own); expected "
                    "regime.kind 'transient', or a concentration or mass_transfer face")
        return run_steady(problem, independent)
    return run_transient(problem, independent)
