"""Assembly of the check record (the result document) from what the engine produced.

The record has no run or case ids, which the service adds. ``status`` is ``failed`` only when
the engine could not produce a result; ``verdict`` is ``pass`` exactly when every check passed.
"""

from __future__ import annotations

import traceback
from collections.abc import Mapping

from schemas.result import RunStatus, Verdict
from worker.engine.outcome import Check, Outcome

#: The caution every record carries.
CAUTION = (
    "These results support, but do not replace, design verification testing and qualified, "
    "independent review; local regulations and licensed professional practice govern their use."
)

#: The design block of a case that states no requirement.
NO_DESIGN: dict = {"status": "none_stated", "requirements": []}

__all__ = ["CAUTION", "NO_DESIGN", "failed_record", "succeeded_record"]


def _check_dict(check: Check | Mapping) -> dict:
    return check.as_dict() if isinstance(check, Check) else Check(**check).as_dict()


def _record(case_sha256: str, status: str, verdict: str | None, error: str | None,
            provenance: dict, inputs: dict, **results) -> dict:
    record: dict = {
        "case_sha256": case_sha256,
        "status": status,
        "verdict": verdict,
        "error": error,
        "quantities": {},
        "series": {},
        "methods": [],
        "checks": [],
        "warnings": [],
    }
    record.update(results)
    record["provenance"] = provenance
    record["inputs"] = inputs
    record["caution"] = CAUTION
    return record


def succeeded_record(case_sha256: str, outcome: Outcome, input_warnings: list[str],
                     provenance: dict, inputs: dict, design: dict | None = None) -> dict:
    """The record of a solved case: ``outcome``'s results, the warnings about the inputs
    first, and the verdict ``pass`` exactly when there are checks and every one passed.
    ``design`` is the design verdict (:func:`worker.engine.design.requirements.design_block`):
    it stands beside ``verdict`` and never changes it."""
    checks = [_check_dict(c) for c in outcome.checks]
    return _record(
        case_sha256, RunStatus.SUCCEEDED.value,
        (Verdict.PASS if checks and all(c["passed"] for c in checks) else Verdict.FAIL).value,
        None,
        provenance, inputs,
        quantities=outcome.quantities,
        series=outcome.series,
        methods=outcome.methods,
        checks=checks,
        warnings=list(input_warnings) + list(outcome.warnings),
        design=design if design is not None else NO_DESIGN,
    )


def failed_record(case_sha256: str, error: BaseException, provenance: dict,
                  inputs: dict, design: dict | None = None) -> dict:
    """The record of a case the engine could not solve: status ``failed``, verdict ``fail``,
    the exception named in ``error`` and its last line as the only warning; ``design`` judges
    each requirement on no figures (every one ``indeterminate``)."""
    return _record(
        case_sha256, RunStatus.FAILED.value, Verdict.FAIL.value,
        f"{type(error).__name__}: {error}", provenance, inputs,
        warnings=[traceback.format_exception_only(error)[-1].strip()],
        design=design if design is not None else NO_DESIGN,
    )
