"""Queueing runs: of a stored case, of a newly submitted case, and finding those not finished."""

from __future__ import annotations

from typing import Any

from sqlalchemy import select

from service.case_intake import stored_case_fields, validate_document
from service.errors import ValidationFailed
from service.store import Store
from service.store.models import UNFINISHED_STATES, Case, Run, RunStatus
from service.store.run_writer import insert_queued_runs


def create_run(store: Store, *, actor: str, case_id: str | None = None,
               document: dict[str, Any] | None = None) -> dict[str, Any]:
    """Queue a run of a stored case (``case_id``) or of a new case (``document``, stored first
    unless its content is stored already).

    Returns ``{run_id, status, case_id}``; the caller dispatches ``run_id`` after this returns.
    """
    if (case_id is None) == (document is None):
        raise ValidationFailed("Give exactly one of case_id and case.",
                               errors=[{"path": "", "message": "expected exactly one of "
                                        "'case_id' or 'case'"}])
    if document is not None:
        validate_document(document)
        run_id, case_id = store.runs.queue_new_case_run(document, stored_case_fields(document),
                                                        actor)
        return {"run_id": run_id, "status": RunStatus.QUEUED.value, "case_id": case_id}
    with store.transaction() as session:
        case = session.get(Case, case_id)
        if case is None:
            raise ValidationFailed("The case_id names no stored case.",
                                   errors=[{"path": "case_id", "message":
                                            f"no stored case with id {case_id!r}"}])
        run_id = insert_queued_runs(session, [(case.id, case.sha256)], actor)[0]
        return {"run_id": run_id, "status": RunStatus.QUEUED.value, "case_id": case.id}


def pending_run_ids(store: Store) -> list[str]:
    """Runs not finished (queued or running), oldest first: for re-sending after a restart."""
    with store.transaction() as session:
        return list(session.execute(
            select(Run.id).where(Run.status.in_(UNFINISHED_STATES)).order_by(Run.created_at)
        ).scalars())
