"""``check_case``: validate a case document, solve it, and return its check record."""

from __future__ import annotations

import logging
from collections.abc import Callable

from schemas.build import validate_case
from schemas.canonical import case_sha256
from schemas.errors import CaseError
from schemas.record import failed_record, succeeded_record
from worker.engine.design.requirements import design_block
from worker.engine.design.runner import run_design
from worker.engine.independent_problem import (
    IndependentInputError,
    IndependentProblem,
    build_independent_problem,
)
from worker.engine.input_checks import unit_routes_check, unread_inputs_checks
from worker.engine.plausibility import input_warnings
from worker.engine.provenance import provenance_block, utc_now
from worker.engine.run import run_problem

logger = logging.getLogger(__name__)

__all__ = ["CaseError", "check_case"]


def check_case(case: dict, *, on_progress: Callable[[int, int], None] | None = None) -> dict:
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
        ``warnings``, ``provenance``, ``inputs`` (the normalised case)
        and ``caution`` (see :mod:`schemas.record`).

    Raises
    ------
    schemas.CaseError
        When the case is invalid; ``.errors`` lists every ``{path, message}``. An engine
        failure is not raised: it is recorded (status ``failed``).

    ``on_progress(trials, blocks)`` is told how far a Monte Carlo run of the case's
    ``uncertainty`` has got, after each block.
    """
    started_at = utc_now()
    validated = validate_case(case)
    digest = case_sha256(case)
    independent: IndependentProblem | None = None
    try:
        independent = build_independent_problem(validated.original)
        input_checks = [unit_routes_check(validated.problem, independent, validated.normalised,
                                          validated.original)]
    except IndependentInputError as exc:
        input_checks = unread_inputs_checks(validated.problem, exc)
    try:
        outcome = run_problem(validated.problem, independent)
        outcome.checks[:0] = input_checks
    except Exception as exc:  # the engine could not produce a result: recorded, not raised
        logger.exception("engine failure for case %s", digest)
        return failed_record(digest, exc, provenance_block(digest, started_at, utc_now()),
                             validated.normalised,
                             design_block(validated.design.requirements, {}, {}))
    warnings = input_warnings(validated.problem)
    design = design_block(validated.design.requirements, outcome.quantities, outcome.series,
                          validated.problem.regime.duration)
    extra = run_design(validated.problem, independent, validated.design, run_problem,
                       on_progress=on_progress)
    record = succeeded_record(digest, outcome, warnings,
                              provenance_block(digest, started_at, utc_now()),
                              validated.normalised, design)
    record.update(extra)
    return record
