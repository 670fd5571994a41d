"""``check_case``: validate a case document, solve it, and return its check record."""

from __future__ import annotations

import logging
from collections.abc import Callable

import numpy as np

from schemas.build import validate_case
from schemas.canonical import case_sha256
from schemas.credibility import credibility_block
from schemas.errors import CaseError
from schemas.record import failed_record, succeeded_record
from worker.engine.cost import DEFAULT_BUDGETS, Budgets
from worker.engine.design.measured import (
    CalibrationRun,
    calibrate_case,
    calibration_propagation,
    fit_check,
    validation_block,
)
from worker.engine.design.monte_carlo import BlockResult
from worker.engine.design.paths import with_values
from worker.engine.design.request import MONTE_CARLO, DesignRequest
from worker.engine.design.requirements import design_block
from worker.engine.design.runner import (
    BlockScheduler,
    DesignRunner,
    run_design,
    sequential_blocks,
)
from worker.engine.independent_problem import (
    IndependentInputError,
    IndependentProblem,
    build_independent_problem,
)
from worker.engine.input_checks import unit_routes_check, unread_inputs_checks
from worker.engine.limits import loosened_limits, regime_defaults
from worker.engine.model import Problem
from worker.engine.outcome import Outcome
from worker.engine.plausibility import input_warnings
from worker.engine.provenance import provenance_block, utc_now
from worker.engine.run import run_problem

logger = logging.getLogger(__name__)

__all__ = ["CaseError", "check_case", "uncertainty_block"]


def check_case(case: dict, *, on_progress: Callable[[int, int], None] | None = None,
               seed: int | None = None, scheduler: BlockScheduler = sequential_blocks,
               budgets: Budgets = DEFAULT_BUDGETS) -> dict:
    """Check one case document and return its record.

    Parameters
    ----------
    case : dict
        A case document, schema_version 1.

    Returns
    -------
    dict
        The result document: ``status``, ``verdict``, ``quantities`` (SI), ``series``,
        ``methods``, ``checks`` (first the two inputs checks: the units converted by pint and
        by the unit table, and the case as the primary and the independent problem read it),
        ``warnings``, ``provenance``, ``inputs`` (the normalised case), ``design`` (each
        stated requirement judged; ``none_stated`` without any), ``deviations`` (the default
        limits the case loosens), ``uncertainty``, ``design_limit`` and ``sweep`` where the case
        asks for them, ``calibration`` (the inputs fitted to the measurement sets marked
        calibration: every figure of the record is then the fitted case's) and ``validation``
        (ASME V&V 20-2009 comparison with the sets marked validation) where it gives measured
        data, ``credibility`` (the ASME V&V 40-2018 evidence this record holds) and
        ``caution`` (see :mod:`schemas.record`).

    Raises
    ------
    schemas.CaseError
        When the case is invalid; ``.errors`` lists every ``{path, message}``. An engine
        failure is not raised: it is recorded (status ``failed``).

    ``on_progress(trials, blocks)`` is told how far a Monte Carlo run of the case's
    ``uncertainty`` has got, after each block; ``seed`` is the Monte Carlo seed when the case
    gives none (else one is drawn; the record holds it either way); ``scheduler`` runs the
    Monte Carlo blocks (:data:`worker.engine.design.runner.BlockScheduler`; a service shares
    them among workers, each computing :func:`uncertainty_block`); ``budgets``: what the case
    may cost (:mod:`worker.engine.cost`; a case over budget raises CaseError).
    """
    started_at = utc_now()
    validated = validate_case(case, budgets)
    digest = case_sha256(case)
    independent: IndependentProblem | None = None
    try:
        independent = build_independent_problem(validated.original)
        input_checks = [unit_routes_check(validated.problem, independent, validated.normalised,
                                          validated.original)]
    except IndependentInputError as exc:
        input_checks = unread_inputs_checks(validated.problem, exc)
    problem = validated.problem
    second: Problem | None = independent
    calibrated: CalibrationRun | None = None
    try:
        if validated.design.calibration is not None:
            calibrated = calibrate_case(problem, validated.design)
            problem = with_values(problem, calibrated.values)
            if second is not None:
                second = with_values(second, calibrated.values)
        outcome = run_problem(problem, second)
        outcome.checks[:0] = input_checks
    except Exception as exc:  # the engine could not produce a result: recorded, not raised
        logger.exception("engine failure for case %s", digest)
        failed = failed_record(digest, exc, provenance_block(digest, started_at, utc_now()),
                               validated.normalised,
                               design_block(validated.design.requirements, {}, {}))
        failed["deviations"] = deviations(validated.problem)
        failed["credibility"] = credibility_block(failed)
        return failed
    duration = problem.regime.duration
    warnings = input_warnings(problem)
    design = design_block(validated.design.requirements, outcome.quantities, outcome.series,
                          duration)
    extra = run_design(problem, second, validated.design, run_problem,
                       seed=seed, scheduler=scheduler, on_progress=on_progress)
    record = succeeded_record(digest, outcome, warnings,
                              provenance_block(digest, started_at, utc_now()),
                              validated.normalised, design)
    record.update(extra)
    record["warnings"].extend(f"uncertainty: {w}"
                              for w in (record.get("uncertainty") or {}).get("warnings", []))
    if calibrated is not None:
        record["calibration"] = calibrated.block
        record["checks"].append(fit_check(calibrated, outcome, validated.design, duration))
        record["verdict"] = "pass" if all(c["passed"] for c in record["checks"]) else "fail"
        record["warnings"].extend(f"calibration: {w}" for w in calibrated.block["warnings"])
    if validated.design.validation_sets:
        record["validation"] = _validation(validated.design, outcome, problem, duration,
                                           record.get("uncertainty"), calibrated)
        if not record["validation"].get("agrees", True):
            record["warnings"].append(
                "validation: the measured data disagree with the simulation beyond the "
                "validation uncertainty u_val at some points (ASME V&V 20-2009): the model "
                "error there is evident; see the validation block")
    _add_design_checks(record)
    record["deviations"] = deviations(validated.problem)
    record["credibility"] = credibility_block(record)
    return record


def _validation(request: DesignRequest, outcome: Outcome, problem: Problem,
                duration: float | None, uncertainty: dict | None,
                calibrated: CalibrationRun | None) -> dict:
    """The record's ``validation`` block; an error is recorded in the block, never dropped."""
    targets = list(request.validation_targets)
    propagated = None
    if uncertainty is not None and "quantities" in uncertainty:
        found = uncertainty["quantities"]
        propagated = {t.key: float(found[t.key]["standard_uncertainty"]) for t in targets
                       if found.get(t.key, {}).get("standard_uncertainty") is not None}
    fit = None
    try:
        if calibrated is not None:
            spread = calibration_propagation(calibrated, problem, targets)
            fit = {t.key: float(u) for t, u in zip(targets, spread, strict=True)}
        return validation_block(request, outcome, duration, propagated, fit,
                                method=(uncertainty or {}).get("propagation", MONTE_CARLO))
    except (ValueError, ArithmeticError, np.linalg.LinAlgError) as exc:
        error = f"{type(exc).__name__}: {exc}"
        return {"error": error, "reason": f"not computed: {error}", "agrees": False}


def deviations(problem: Problem) -> list[dict]:
    """The default limits the case loosens, as the record lists them."""
    return [{"check": name, "default": default, "value": value}
            for name, default, value in loosened_limits(problem.tolerances,
                                                        regime_defaults(problem))]


def _add_design_checks(record: dict) -> None:
    """The checks of the design runs (the fast solve against the full check, the verification
    subset) join the record's checks: a design run on wrong figures fails the verdict."""
    added = [check for block in ("uncertainty", "design_limit")
             for check in (record.get(block) or {}).pop("checks", [])]
    added += (record.get("uncertainty") or {}).get("verification", {}).pop("checks", [])
    if added:
        record["checks"].extend(added)
        record["verdict"] = "pass" if all(c["passed"] for c in record["checks"]) else "fail"


def uncertainty_block(case: dict, seed: int, index: int) -> BlockResult:
    """Monte Carlo block ``index`` of ``case``'s uncertainty with ``seed``: what a worker
    computes when a service shares a run's blocks (the same block wherever it runs)."""
    validated = validate_case(case, budgets=None)  # its run was accepted within budget
    problem: Problem = validated.problem
    independent: Problem = build_independent_problem(validated.original)
    if validated.design.calibration is not None:  # the run's Monte Carlo is on the fitted case
        values = calibrate_case(problem, validated.design).values
        problem, independent = with_values(problem, values), with_values(independent, values)
    runner = DesignRunner(problem, independent, validated.design, run_problem)
    return runner.block(seed, index)
