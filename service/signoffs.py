"""Sign-off of a check record by a second person (four-eyes), and the one rule of who may sign.

A reviewer records one decision (approved or rejected) on a succeeded run. The identity that
submitted the run (the token's name) may never sign it off, whatever roles it holds. After the
sign-off the record is sealed: it never changes again; re-verifying makes a new run.

:func:`signoff_refusals` is the rule; :func:`sign_off` enforces it on the locked row (API and
UI), and :func:`signoff_permission` answers the run page's question "may this person sign this
record off, and if not, why" with the same reasons.
"""

from __future__ import annotations

import hashlib
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

from sqlalchemy import select

from schemas.result import RunStatus
from service import audit
from service.errors import Conflict, Forbidden, FourEyesViolation, NotFound, ProblemError
from service.runs import record_of, signoff_to_dict
from service.store import Store
from service.store.models import Run, Signoff, utc_now
from service.tokens import Identity

#: Roles whose holders may sign a record off; the sign-off endpoint is declared with these
#: roles, so the role matrix grants it to exactly them.
SIGNOFF_ROLES = frozenset({"reviewer"})


@dataclass(frozen=True)
class Refusal:
    """One reason why an identity may not sign a run off: the problem raised for it
    (``error``, with ``extra`` members) and the reason in words, addressed to that identity."""

    error: type[ProblemError]
    reason: str
    extra: dict[str, Any] = field(default_factory=dict)

    def problem(self) -> ProblemError:
        return self.error(self.reason, extra=self.extra)


@dataclass(frozen=True)
class SignoffPermission:
    """Whether ``identity`` may sign the run off, every reason why not, and who submitted it."""

    allowed: bool
    reasons: tuple[str, ...]
    submitter: str | None


def signoff_refusals(identity: Identity, *, submitted_by: str | None, status: str | None,
                     existing: Mapping[str, Any] | None) -> list[Refusal]:
    """Every reason why ``identity`` may not sign off a run submitted by ``submitted_by``, now
    in ``status``, carrying the sign-off ``existing`` (None when it has none); empty when it
    may."""
    refusals = []
    if identity.role not in SIGNOFF_ROLES:
        refusals.append(Refusal(
            Forbidden, f"Sign-off is for reviewers; you are signed in as {identity.name} "
                       f"({identity.role}).", {"role": identity.role}))
    if identity.name == submitted_by:
        refusals.append(Refusal(
            FourEyesViolation, f"You submitted this run ({submitted_by}), so you cannot sign it "
                               "off: a check record is signed off by a second person "
                               "(four-eyes). Ask another reviewer.",
            {"submitted_by": submitted_by, "reviewer": identity.name}))
    if existing:
        refusals.append(Refusal(
            Conflict, f"Already signed off ({existing['decision']} by {existing['reviewer']}); "
                      "a signed record never changes. Re-verify the case for a new run.",
            {"signoff": dict(existing)}))
    elif status != RunStatus.SUCCEEDED:
        refusals.append(Refusal(
            Conflict, f"Only a succeeded run can be signed off; this one is {status}.",
            {"run_status": status}))
    return refusals


def signoff_permission(record: Mapping[str, Any], identity: Identity) -> SignoffPermission:
    """May ``identity`` sign off the run whose record (as :func:`service.runs.get_run` returns
    it) is ``record``, and if not, why (:func:`signoff_refusals`)."""
    signed = record.get("signoffs") or []
    refusals = signoff_refusals(identity, submitted_by=record.get("submitted_by"),
                                status=record.get("status"),
                                existing=signed[0] if signed else None)
    return SignoffPermission(allowed=not refusals,
                             reasons=tuple(refusal.reason for refusal in refusals),
                             submitter=record.get("submitted_by"))


def sign_off(store: Store, run_id: str, identity: Identity, *, decision: str,
             comment: str) -> dict[str, Any]:
    """Record ``identity``'s decision on run ``run_id``; return the sign-off.

    Raises NotFound (no run), or the problem of the first of :func:`signoff_refusals`:
    Forbidden (403, not a reviewer), FourEyesViolation (403, the submitter), Conflict (409: the
    run already carries a sign-off, or has not succeeded).
    """
    with store.transaction() as session:
        run = session.execute(select(Run).where(Run.id == run_id).with_for_update()
                              ).scalar_one_or_none()
        if run is None:
            raise NotFound(f"There is no run with id {run_id!r}.")
        refusals = signoff_refusals(
            identity, submitted_by=run.submitted_by, status=run.status,
            existing=signoff_to_dict(run.signoffs[0]) if run.signoffs else None)
        if refusals:
            raise refusals[0].problem()
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
    return hashlib.sha256(audit.chain_json(run.record or {}).encode("utf-8")).hexdigest()
