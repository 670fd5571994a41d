"""Cases: validation, content-addressed storage, listing.

A case is stored once per content: its address is ``schemas.case_sha256`` of the document as
sent (canonical JSON), and storing the same content again returns the stored case.
"""

from __future__ import annotations

import uuid
from dataclasses import dataclass
from typing import Any

from sqlalchemy import bindparam, func, insert, select
from sqlalchemy.exc import IntegrityError
from sqlalchemy.orm import Session

from service import audit
from service.errors import NotFound, ValidationFailed
from service.store import Store
from service.store.models import Case, CaseTag, Run, utc_now


def validate_document(document: dict[str, Any]) -> Any:
    """Validate a case with the project's schema; ValidationFailed (422) lists every error."""
    import schemas

    try:
        return schemas.validate_case(document)
    except schemas.CaseError as exc:
        raise ValidationFailed("The case is not valid.", errors=list(exc.errors)) from exc


def case_to_dict(case: Case, *, with_document: bool = True) -> dict[str, Any]:
    result: dict[str, Any] = {
        "case_id": case.id,
        "sha256": case.sha256,
        "title": case.title,
        "tags": list(case.tags),
        "created_at": case.created_at.isoformat(),
        "created_by": case.created_by,
    }
    if with_document:
        result["document"] = case.document
    return result


@dataclass(frozen=True)
class StoredCase:
    """The address of a stored case: its id and the SHA-256 of its canonical JSON."""

    id: str
    sha256: str


_CASES = Case.__table__
#: Statements of storing a case, built once (they run on every POST /v1/runs).
_CASE_BY_SHA = select(_CASES.c.id, _CASES.c.sha256).where(_CASES.c.sha256 == bindparam("sha256"))
_INSERT_CASE = insert(_CASES)
_INSERT_TAGS = insert(CaseTag.__table__)


def _find_by_sha(session: Session, sha256: str) -> StoredCase | None:
    row = session.execute(_CASE_BY_SHA, {"sha256": sha256}).first()
    return None if row is None else StoredCase(id=row.id, sha256=row.sha256)


def stored_case_fields(document: dict[str, Any]) -> dict[str, Any]:
    """What a case is stored under, which is also its ``case.stored`` event's payload: the
    content address ``sha256``, the ``title`` (at most 500 characters) and the sorted,
    distinct ``tags``."""
    import schemas

    return {"sha256": schemas.case_sha256(document),
            "title": str(document.get("title") or "")[:500],
            "tags": sorted({str(t) for t in document.get("tags") or []})}


def store_case_in(session: Session, document: dict[str, Any], actor: str
                  ) -> tuple[StoredCase, bool]:
    """Store a validated case in the caller's transaction; return (case, created)."""
    fields = stored_case_fields(document)
    sha256, title, tags = fields["sha256"], fields["title"], fields["tags"]
    existing = _find_by_sha(session, sha256)
    if existing is not None:
        return existing, False
    case_id = str(uuid.uuid4())
    session.execute(_INSERT_CASE, {"id": case_id, "sha256": sha256, "document": document,
                                   "title": title, "tags": tags, "created_at": utc_now(),
                                   "created_by": actor})
    if tags:
        session.execute(_INSERT_TAGS, [{"case_id": case_id, "tag": tag} for tag in tags])
    audit.append_event(session, actor=actor, kind="case.stored", subject=case_id,
                       payload=fields)
    return StoredCase(id=case_id, sha256=sha256), True


def store_case(store: Store, document: dict[str, Any], actor: str) -> tuple[dict[str, Any], bool]:
    """Validate and store a case; return ({case_id, sha256}, created).

    Two writers racing with the same content both end with the one stored case.
    """
    validate_document(document)
    try:
        with store.transaction() as session:
            case, created = store_case_in(session, document, actor)
            return {"case_id": case.id, "sha256": case.sha256}, created
    except IntegrityError:
        import schemas

        with store.transaction() as session:
            case = _find_by_sha(session, schemas.case_sha256(document))
            if case is None:
                raise
            return {"case_id": case.id, "sha256": case.sha256}, False


def get_case(store: Store, case_id: str) -> dict[str, Any]:
    with store.transaction() as session:
        case = session.get(Case, case_id)
        if case is None:
            raise NotFound(f"There is no stored case with id {case_id!r}.")
        return case_to_dict(case)


def list_cases(store: Store, *, limit: int, offset: int, tag: str | None = None
               ) -> dict[str, Any]:
    """A page of cases, newest first, optionally only those carrying ``tag``."""
    with store.transaction() as session:
        query = select(Case)
        count = select(func.count()).select_from(Case)
        if tag:
            tagged = select(CaseTag.case_id).where(CaseTag.tag == tag)
            query = query.where(Case.id.in_(tagged))
            count = count.where(Case.id.in_(tagged))
        total = session.execute(count).scalar_one()
        rows = session.execute(
            query.order_by(Case.created_at.desc(), Case.id).limit(limit).offset(offset)
        ).scalars()
        items = [case_to_dict(c, with_document=False) for c in rows]
    return {"items": items, "total": total, "limit": limit, "offset": offset}


def case_history(store: Store, case_id: str) -> dict[str, Any]:
    """Every run of one case, newest first (without the record bodies)."""
    from service.runs import run_summary

    with store.transaction() as session:
        if session.get(Case, case_id) is None:
            raise NotFound(f"There is no stored case with id {case_id!r}.")
        runs = session.execute(
            select(Run).where(Run.case_id == case_id).order_by(Run.created_at.desc(), Run.id)
        ).scalars().all()
        return {"case_id": case_id, "items": [run_summary(r) for r in runs]}
