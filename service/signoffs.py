"""Sign-off of a check record by a second person (four-eyes).

A reviewer records one decision (approved or rejected) on a succeeded run. The identity that
submitted the run (the token's name) may never sign it off, whatever roles it holds. After the
sign-off the record is sealed: it never changes again; re-verifying makes a new run.
"""

from __future__ import annotations

from typing import Any

from sqlalchemy import select

from service import audit
from service.errors import Conflict, FourEyesViolation, NotFound
from service.runs import record_of, signoff_to_dict
from service.store import Store
from service.store.models import Run, Signoff, utc_now
from service.tokens import Identity


def sign_off(store: Store, run_id: str, identity: Identity, *, decision: str,
             comment: str) -> dict[str, Any]:
    """Record ``identity``'s decision on run ``run_id``; return the sign-off.

    Raises NotFound (no run), FourEyesViolation (403, the submitter), Conflict (409: the run has
    not succeeded, or already carries a sign-off).
    """
    with store.transaction() as session:
        run = session.execute(select(Run).where(Run.id == run_id).with_for_update()
                              ).scalar_one_or_none()
        if run is None:
            raise NotFound(f"There is no run with id {run_id!r}.")
        if run.submitted_by == identity.name:
            raise FourEyesViolation(
                f"{identity.name!r} submitted this run and so cannot sign it off: a check "
                "record is signed off by a second person (four-eyes). Ask another reviewer.",
                extra={"submitted_by": run.submitted_by, "reviewer": identity.name})
        if run.status != "succeeded":
            raise Conflict(f"Only a succeeded run can be signed off; this one is {run.status}.",
                           extra={"run_status": run.status})
        if run.signoffs:
            existing = run.signoffs[0]
            raise Conflict(f"This run was already signed off ({existing.decision} by "
                           f"{existing.reviewer!r}); a signed record never changes. Re-verify "
                           "the case to get a new run.", extra={"signoff":
                                                                signoff_to_dict(existing)})
        signoff = Signoff(run_id=run.id, reviewer=identity.name, decision=decision,
                          comment=comment, at=utc_now())
        session.add(signoff)
        session.flush()
        audit.append_event(session, actor=identity.name, kind="signoff.recorded",
                           subject=run.id, payload={"decision": decision, "comment": comment,
                                                    "record_sha256": _record_digest(run)})
        session.refresh(run)
        return {"run_id": run.id, **signoff_to_dict(signoff), "record": record_of(run)}


def _record_digest(run: Run) -> str:
    """SHA-256 of the signed record body, so the audit trail pins what was approved."""
    import hashlib

    from service.audit import chain_json

    return hashlib.sha256(chain_json(run.record or {}).encode("utf-8")).hexdigest()
