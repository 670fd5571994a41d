"""Sign-off of a check record by a second person (four-eyes) as an electronic signature, and
the one rule of who may sign.

A reviewer records one decision (approved or rejected) with its meaning (review, approval,
responsibility) on a succeeded run, giving their password again at the signing (21 CFR Part 11
§11.200(a)(1)). Neither the person who submitted the run nor the person who first stored its
case may sign it, whatever roles they hold; persons are compared by login, normalised
(:func:`service.people.login_key`). A run whose verdict is ``fail`` cannot be approved, and a
run whose case loosens a default limit (the record's ``deviations``) is approved only with a
justification.

The signature (§11.50, §11.70): the signer's printed name, the UTC time and the meaning, bound
to the SHA-256 of the signed record (:func:`schemas.canonical.case_sha256` of the stored result
document) in a payload signed with the server's Ed25519 key (:mod:`service.server_keys`);
the signature, the key id and the payload's SHA-256 are stored with the sign-off, and
:func:`verify_signature` checks them with the published public key. After the sign-off the
record is sealed: it never changes again; re-verifying makes a new run.

:func:`signoff_refusals` is the rule; :func:`sign_off` enforces it on the locked row (API and
UI), and :func:`signoff_permission` answers the run page's question "may this person sign this
record off, and if not, why" with the same reasons.
"""

from __future__ import annotations

import hashlib
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey
from sqlalchemy import select

from schemas.canonical import canonical_json, case_sha256
from schemas.result import RunStatus
from service import audit, auth_events, server_keys
from service.errors import (
    Conflict,
    Forbidden,
    FourEyesViolation,
    NotFound,
    ProblemError,
    Unauthorized,
    ValidationFailed,
)
from service.people import login_key, password_matches
from service.runs import record_of, signoff_to_dict
from service.store import Store
from service.store.models import Case, Run, Signoff, utc_now
from service.tokens import Identity

#: Roles whose holders may sign a record off; the sign-off endpoint is declared with these
#: roles, so the role matrix grants it to exactly them.
SIGNOFF_ROLES = frozenset({"reviewer"})
APPROVED = "approved"
#: The fields of the signed payload, in the order a reader meets them.
PAYLOAD_FIELDS = ("run_id", "case_sha256", "record_sha256", "signer", "printed_name", "meaning",
                  "decision", "signed_at", "comment", "justification")


@dataclass(frozen=True)
class Refusal:
    """One reason why an identity may not sign a run off: the problem raised for it
    (``error``, with ``extra`` members) and the reason in words, addressed to that identity."""

    error: type[ProblemError]
    reason: str
    extra: dict[str, Any] = field(default_factory=dict)
    errors: list[dict[str, str]] = field(default_factory=list)

    def problem(self) -> ProblemError:
        return self.error(self.reason, extra=self.extra, errors=self.errors)


@dataclass(frozen=True)
class SignoffPermission:
    """Whether ``identity`` may sign the run off, every reason why not, who submitted it and
    who first stored its case; why it may not be approved (a failed verification), and the
    deviations an approval must justify."""

    allowed: bool
    reasons: tuple[str, ...]
    submitter: str | None
    case_author: str | None = None
    approval_reasons: tuple[str, ...] = ()
    deviations: tuple[Mapping[str, Any], ...] = ()


def _same_person(login: str, other: str | None) -> bool:
    return other is not None and login_key(login) == login_key(other)


def signoff_refusals(identity: Identity, *, submitted_by: str | None, status: str | None,
                     existing: Mapping[str, Any] | None, case_author: str | None = None,
                     verdict: str | None = None, decision: str | None = None,
                     deviations: list[Any] | tuple[Any, ...] = (),
                     justification: str | None = None) -> list[Refusal]:
    """Every reason why ``identity`` may not sign off (with ``decision``; None: any decision)
    a run submitted by ``submitted_by`` of a case first stored by ``case_author``, now in
    ``status`` with ``verdict``, carrying the sign-off ``existing`` (None when it has none) and
    the record's ``deviations``; empty when it may."""
    refusals = []
    if identity.role not in SIGNOFF_ROLES:
        refusals.append(Refusal(
            Forbidden, f"Sign-off is for reviewers; you are signed in as {identity.name} "
                       f"({identity.role}).", {"role": identity.role}))
    if _same_person(identity.login, submitted_by):
        refusals.append(Refusal(
            FourEyesViolation, f"You submitted this run ({submitted_by}), so you cannot sign it "
                               "off: a check record is signed off by a second person "
                               "(four-eyes). Ask another reviewer.",
            {"submitted_by": submitted_by, "reviewer": identity.login}))
    if _same_person(identity.login, case_author):
        refusals.append(Refusal(
            FourEyesViolation, f"You wrote this case ({case_author} stored it first), so you "
                               "cannot sign off a check of it (four-eyes). Ask another "
                               "reviewer.",
            {"case_author": case_author, "reviewer": identity.login}))
    if existing:
        refusals.append(Refusal(
            Conflict, f"Already signed off ({existing['decision']} by {existing['reviewer']}); "
                      "a signed record never changes. Re-verify the case for a new run.",
            {"signoff": dict(existing)}))
    elif status != RunStatus.SUCCEEDED:
        refusals.append(Refusal(
            Conflict, f"Only a succeeded run can be signed off; this one is {status}.",
            {"run_status": status}))
    elif decision == APPROVED:
        refusals.extend(approval_refusals(verdict, deviations, justification))
    return refusals


def approval_refusals(verdict: str | None, deviations: list[Any] | tuple[Any, ...],
                      justification: str | None) -> list[Refusal]:
    """Why a succeeded run may not be approved: its verification failed, or its case loosens
    a default limit and no justification is given."""
    refusals = []
    if verdict != "pass":
        refusals.append(Refusal(
            Conflict, f"This run's verification did not pass (verdict {verdict}); a failed "
                      "verification cannot be approved. Reject it, or correct the case and "
                      "re-verify.", {"verdict": verdict}))
    if deviations and not (justification or "").strip():
        names = ", ".join(str(d.get("check")) for d in deviations)
        refusals.append(Refusal(
            ValidationFailed, f"The case loosens default limits ({names}); approving it needs "
                              "a justification.",
            {"deviations": list(deviations)},
            [{"path": "justification",
              "message": "required to approve a record with deviations"}]))
    return refusals


def signoff_permission(record: Mapping[str, Any], identity: Identity) -> SignoffPermission:
    """May ``identity`` sign off the run whose record (as :func:`service.runs.get_run` returns
    it) is ``record``, and if not, why (:func:`signoff_refusals`)."""
    signed = record.get("signoffs") or []
    refusals = signoff_refusals(identity, submitted_by=record.get("submitted_by"),
                                status=record.get("status"),
                                existing=signed[0] if signed else None,
                                case_author=record.get("case_author"))
    deviations = tuple(record.get("deviations") or ())
    approval = [r.reason for r in approval_refusals(record.get("verdict"), (), None)]
    return SignoffPermission(allowed=not refusals,
                             reasons=tuple(refusal.reason for refusal in refusals),
                             submitter=record.get("submitted_by"),
                             case_author=record.get("case_author"),
                             approval_reasons=tuple(approval), deviations=deviations)


def record_sha256(record: Mapping[str, Any] | None) -> str:
    """SHA-256 of the stored result document (canonical JSON): what a signature binds to."""
    return case_sha256(dict(record or {}))


def signature_payload(signoff: Mapping[str, Any], run_id: str, case_sha: str) -> dict[str, Any]:
    """The payload a signature signs, from a sign-off as :func:`service.runs.signoff_to_dict`
    gives it."""
    return {"run_id": run_id, "case_sha256": case_sha,
            "record_sha256": signoff["record_sha256"], "signer": signoff["reviewer"],
            "printed_name": signoff["name"], "meaning": signoff["meaning"],
            "decision": signoff["decision"], "signed_at": signoff["at"],
            "comment": signoff["comment"], "justification": signoff.get("justification")}


def verify_signature(record: Mapping[str, Any], signoff: Mapping[str, Any],
                     public_pem: str) -> bool:
    """True when ``signoff``'s signature is the published key's signature of its payload and
    the payload binds exactly ``record`` (the run's record as :func:`service.runs.get_record`
    returns it: result document plus run fields)."""
    if not signoff.get("signature"):
        return False
    document = {key: value for key, value in record.items() if key not in RUN_FIELDS}
    payload = signature_payload(signoff, str(record.get("run_id")),
                                str(record.get("case_sha256")))
    data = canonical_json(payload).encode("utf-8")
    return (payload["record_sha256"] == record_sha256(document)
            and hashlib.sha256(data).hexdigest() == signoff.get("payload_sha256")
            and server_keys.verify(public_pem, data, signoff["signature"]))


#: Fields :func:`service.runs.record_of` adds to the stored result document (which holds its
#: own ``run_id`` and ``case_id``; ``status``, ``verdict`` and ``error`` are the same values).
RUN_FIELDS = frozenset({"submitted_by", "batch_id", "attempts", "created_at", "started_at",
                        "finished_at", "signoffs", "progress", "case_author"})


def sign_off(store: Store, run_id: str, identity: Identity, *, decision: str, comment: str,
             meaning: str, password: str, key: Ed25519PrivateKey,
             justification: str | None = None) -> dict[str, Any]:
    """Record ``identity``'s signed decision on run ``run_id``; return the sign-off.

    Raises Unauthorized (401: the password is not the signer's; an ``auth.failed`` event is
    written), NotFound (no run), or the problem of the first of :func:`signoff_refusals`:
    Forbidden (403, not a reviewer), FourEyesViolation (403, the submitter or the case's
    author), Conflict (409: already signed off, not succeeded, or approving a failed
    verification), ValidationFailed (422: approving deviations without a justification).
    """
    if not password_matches(store, identity.user_id, password):
        auth_events.record(store, "auth.failed", actor=identity.login, subject=run_id,
                           payload={"via": "signature", "reason": "wrong password"})
        raise Unauthorized("password: the password is not yours; a signature needs your own "
                           "password, given again at each signing.",
                           errors=[{"path": "password", "message": "does not match"}])
    justification = (justification or "").strip() or None
    with store.transaction() as session:
        run = session.execute(select(Run).where(Run.id == run_id).with_for_update()
                              ).scalar_one_or_none()
        if run is None:
            raise NotFound(f"There is no run with id {run_id!r}.")
        case = session.get(Case, run.case_id)
        record = run.record or {}
        refusals = signoff_refusals(
            identity, submitted_by=run.submitted_by, status=run.status,
            existing=signoff_to_dict(run.signoffs[0]) if run.signoffs else None,
            case_author=None if case is None else case.created_by,
            verdict=record.get("verdict"), decision=decision,
            deviations=record.get("deviations") or (), justification=justification)
        if refusals:
            raise refusals[0].problem()
        signed_at = utc_now().replace(microsecond=0)
        fields = {"reviewer": identity.login, "name": identity.name, "meaning": meaning,
                  "decision": decision, "at": signed_at.isoformat(), "comment": comment,
                  "justification": justification, "record_sha256": record_sha256(record)}
        data = canonical_json(signature_payload(fields, run.id,
                                                str(record.get("case_sha256")))).encode("utf-8")
        signoff = Signoff(run_id=run.id, reviewer=identity.login, decision=decision,
                          comment=comment, at=signed_at, meaning=meaning,
                          signer_name=identity.name, justification=justification,
                          record_sha256=fields["record_sha256"],
                          payload_sha256=hashlib.sha256(data).hexdigest(),
                          signature=server_keys.sign(key, data),
                          key_id=server_keys.key_id(key))
        session.add(signoff)
        session.flush()
        audit.append_event(session, actor=identity.login, kind="signoff.recorded",
                           subject=run.id, payload={
                               "decision": decision, "comment": comment, "meaning": meaning,
                               "printed_name": identity.name, "justification": justification,
                               "record_sha256": fields["record_sha256"],
                               "payload_sha256": signoff.payload_sha256,
                               "key_id": signoff.key_id})
        session.refresh(run)
        return {"run_id": run.id, **signoff_to_dict(signoff), "record": record_of(run)}
