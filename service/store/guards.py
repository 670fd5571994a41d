"""Store-level guard: a signed-off record never changes.

The domain layer refuses such changes first (``service.runs`` and ``service.signoffs``); this
``before_flush`` hook is the second line, so that no code path through the ORM can alter or
delete a signed-off run or its sign-off.
"""

from __future__ import annotations

from typing import Any

from sqlalchemy import event, inspect
from sqlalchemy.orm import Session

from service.store.models import Run, Signoff

SEALED_RUN_FIELDS = ("status", "record", "error", "case_id", "submitted_by", "started_at",
                     "finished_at", "created_at", "batch_id", "attempts")


class SealedRecordError(RuntimeError):
    """Raised when code tries to change or delete a signed-off record."""


def _is_sealed(session: Session, run: Run) -> bool:
    with session.no_autoflush:
        return bool(run.signoffs)


@event.listens_for(Session, "before_flush")
def _refuse_changes_to_sealed_records(session: Session, _context: Any, _instances: Any) -> None:
    for obj in list(session.dirty):
        if isinstance(obj, Run) and session.is_modified(obj):
            state = inspect(obj)
            changed = [f for f in SEALED_RUN_FIELDS if state.attrs[f].history.has_changes()]
            if changed and _is_sealed(session, obj):
                raise SealedRecordError(
                    f"run {obj.id} is signed off; its record never changes (tried: "
                    f"{', '.join(changed)})")
        if isinstance(obj, Signoff) and session.is_modified(obj):
            raise SealedRecordError(f"the sign-off of run {obj.run_id} never changes")
    for obj in list(session.deleted):
        if isinstance(obj, Signoff) or (isinstance(obj, Run) and _is_sealed(session, obj)):
            raise SealedRecordError("signed-off records and their sign-offs are never deleted")
