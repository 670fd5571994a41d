"""Cases: validation, content-addressed storage, listing.

A case is stored once per content: its address is ``schemas.case_sha256`` of the document as
sent (canonical JSON), and storing the same content again returns the stored case.
"""

from __future__ import annotations

from typing import Any

from sqlalchemy import func, select
from sqlalchemy.exc import IntegrityError
from sqlalchemy.orm import Session

from service.case_intake import stored_case_fields, validate_document
from service.errors import NotFound
from service.runs.records import run_summary
from service.store import Store
from service.store.models import Case, CaseTag, Run
from service.store.run_writer import StoredCase, find_case, insert_case

__all__ = ["StoredCase", "case_history", "case_to_dict", "get_case", "list_cases",
           "store_case", "store_case_in", "stored_case_fields", "validate_document"]


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


def store_case_in(session: Session, document: dict[str, Any], actor: str
                  ) -> tuple[StoredCase, bool]:
    """Store a validated case in the caller's transaction; return (case, created)."""
    return insert_case(session, document, stored_case_fields(document), actor)


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
        with store.transaction() as session:
            case = find_case(session, stored_case_fields(document)["sha256"])
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
    with store.transaction() as session:
        if session.get(Case, case_id) is None:
            raise NotFound(f"There is no stored case with id {case_id!r}.")
        runs = session.execute(
            select(Run).where(Run.case_id == case_id).order_by(Run.created_at.desc(), Run.id)
        ).scalars().all()
        return {"case_id": case_id, "items": [run_summary(r) for r in runs]}
