"""A run as a document: its summary, its full record, and reading them from the store."""

from __future__ import annotations

from typing import Any

from service.errors import NotFound
from service.store import Store
from service.store.models import Case, Run, RunStatus


def _iso(value: Any) -> str | None:
    return None if value is None else value.isoformat()


def signoff_to_dict(signoff: Any) -> dict[str, Any]:
    """A sign-off and its electronic signature (None in each signature field for sign-offs
    made before signatures existed)."""
    return {"reviewer": signoff.reviewer, "name": signoff.signer_name,
            "decision": signoff.decision, "meaning": signoff.meaning,
            "comment": signoff.comment, "justification": signoff.justification,
            "at": _iso(signoff.at), "record_sha256": signoff.record_sha256,
            "payload_sha256": signoff.payload_sha256, "signature": signoff.signature,
            "key_id": signoff.key_id}


def run_summary(run: Run) -> dict[str, Any]:
    """The run's state without the record body (for lists and histories); a running Monte
    Carlo run also says how far it has got (``progress``, :mod:`service.runs.waves`)."""
    record = run.record or {}
    summary = {
        "run_id": run.id,
        "case_id": run.case_id,
        "status": run.status,
        "verdict": record.get("verdict"),
        "error": run.error,
        "submitted_by": run.submitted_by,
        "batch_id": run.batch_id,
        "attempts": run.attempts,
        "created_at": _iso(run.created_at),
        "started_at": _iso(run.started_at),
        "finished_at": _iso(run.finished_at),
        "signoffs": [signoff_to_dict(s) for s in run.signoffs],
    }
    if run.progress is not None and run.status == RunStatus.RUNNING.value:
        summary["progress"] = dict(run.progress)
    return summary


def record_of(run: Run, case_author: str | None = None) -> dict[str, Any]:
    """The full record: the engine's result document plus the run's own fields (and who first
    stored the case, when given: the second person four-eyes excludes)."""
    record = dict(run.record or {})
    record.update(run_summary(run))
    if case_author is not None:
        record["case_author"] = case_author
    return record


def _case_author(session: Any, run: Run) -> str | None:
    case = session.get(Case, run.case_id)
    return None if case is None else case.created_by


def get_record(store: Store, run_id: str) -> dict[str, Any]:
    with store.transaction() as session:
        run = session.get(Run, run_id)
        if run is None:
            raise NotFound(f"There is no run with id {run_id!r}.")
        return record_of(run, _case_author(session, run))


def get_run_and_case(store: Store, run_id: str) -> tuple[dict[str, Any], dict[str, Any]]:
    """The record and the stored case document of one run (for the report)."""
    with store.transaction() as session:
        run = session.get(Run, run_id)
        if run is None:
            raise NotFound(f"There is no run with id {run_id!r}.")
        case = session.get(Case, run.case_id)
        assert case is not None
        return record_of(run, case.created_by), dict(case.document)
