"""``check_case``: validate a case, solve it two ways, check everything, build the record.

The record is the result document of ``DESIGN.md`` ("The result") without run or case ids,
which the service adds. ``status`` is ``failed`` only when the engine could not produce a result;
``verdict`` is ``pass`` exactly when every check passed.
"""

from __future__ import annotations

import logging
import traceback

from schemas import CaseError, case_sha256, validate_case
from worker.engine.outcome import Check, Outcome
from worker.engine.plausibility import input_warnings
from worker.engine.provenance import provenance_block, utc_now

CAUTION = (
    "These results support, but do not replace, design verification testing and qualified, "
    "independent review; local regulations and licensed professional practice govern their use."
)

logger = logging.getLogger(__name__)

__all__ = ["CAUTION", "CaseError", "check_case"]


def _solve(problem) -> Outcome:
    if problem.regime.kind == "steady":
        from worker.engine.steady_check import run_steady

        return run_steady(problem)
    from worker.engine.transient_check import run_transient

    transient = run_transient(problem)
    return Outcome(
        quantities=dict(transient.quantities),
        series=dict(transient.series),
        methods=list(transient.methods),
        checks=list(transient.checks),
        warnings=list(transient.warnings),
    )


def _check_dict(check) -> dict:
    return check.as_dict() if isinstance(check, Check) else Check(**check).as_dict()


def check_case(case: dict) -> dict:
    """Check one case document and return its record.

    Parameters
    ----------
    case : dict
        A case document, schema_version 1 (``DESIGN.md``, "The case document").

    Returns
    -------
    dict
        The result document: ``status``, ``verdict``, ``quantities`` (SI), ``series``,
        ``methods``, ``checks``, ``warnings``, ``provenance``, ``inputs`` (the normalised case)
        and ``caution``.

    Raises
    ------
    schemas.CaseError
        When the case is invalid; ``.errors`` lists every ``{path, message}``.
    """
    started_at = utc_now()
    validated = validate_case(case)
    digest = case_sha256(case)
    record: dict = {
        "case_sha256": digest,
        "status": "succeeded",
        "verdict": None,
        "error": None,
        "quantities": {},
        "series": {},
        "methods": [],
        "checks": [],
        "warnings": [],
    }
    try:
        outcome = _solve(validated.problem)
    except Exception as exc:  # the engine could not produce a result: recorded, not raised
        logger.exception("engine failure for case %s", digest)
        record["status"] = "failed"
        record["verdict"] = "fail"
        record["error"] = f"{type(exc).__name__}: {exc}"
        record["warnings"] = [traceback.format_exception_only(exc)[-1].strip()]
    else:
        checks = [_check_dict(c) for c in outcome.checks]
        record.update(
            quantities=outcome.quantities,
            series=outcome.series,
            methods=outcome.methods,
            checks=checks,
            warnings=input_warnings(validated.problem) + list(outcome.warnings),
            verdict="pass" if checks and all(c["passed"] for c in checks) else "fail",
        )
    record["provenance"] = provenance_block(digest, started_at, utc_now())
    record["inputs"] = validated.normalised
    record["caution"] = CAUTION
    return record
