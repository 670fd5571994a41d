"""Read-only listings for the browser pages: runs with filters, a case's runs with their
figures, batches and their runs, and which runs have drifted. Every write goes through the other
domain modules (``cases``, ``runs``, ``signoffs``, ``batches``)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from sqlalchemy import false, func, select

from schemas.result import DESIGN_STATUSES, VERDICTS, RunStatus
from service.errors import MalformedBody
from service.store import Store
from service.store.models import RUN_STATES, Batch, Case, CaseTag, Run, Signoff

#: Rows in one page of a listing.
PAGE_SIZE = 50
#: Largest page offset accepted anywhere (API and pages): far beyond any store's rows, and
#: inside every database's integer range (an offset past 2^63 made the driver fail).
MAX_OFFSET = 2**31 - 1


def page_offset(raw: str | None) -> int:
    """A page's ``offset`` query parameter: 0 when absent or not a whole number; MalformedBody
    (400, naming ``offset``) when larger than :data:`MAX_OFFSET`."""
    try:
        offset = max(0, int(raw or "0"))
    except ValueError:
        return 0
    if offset > MAX_OFFSET:
        raise MalformedBody(f"The offset is larger than {MAX_OFFSET}.",
                            errors=[{"path": "offset", "message": f"at most {MAX_OFFSET}"}])
    return offset

__all__ = ["DESIGN_STATUSES", "PAGE_SIZE", "VERDICTS", "RunFilters", "all_tags", "batch_runs",
           "case_runs_with_figures", "drifted_run_ids", "list_batches", "list_runs"]


@dataclass(frozen=True)
class RunFilters:
    """The runs list's filters; None means "any"."""

    verdict: str | None = None   # pass | fail
    design: str | None = None    # met | not_met | indeterminate | none_stated
    status: str | None = None    # queued | running | succeeded | failed
    tag: str | None = None
    signed: bool | None = None
    drifted: bool | None = None

    def as_query(self) -> dict[str, str]:
        query = {}
        for name in ("verdict", "design", "status", "tag"):
            if getattr(self, name):
                query[name] = getattr(self, name)
        for name in ("signed", "drifted"):
            if getattr(self, name) is not None:
                query[name] = "yes" if getattr(self, name) else "no"
        return query


def drifted_run_ids(store: Store) -> set[str]:
    """Runs named in the drift list of any finished batch."""
    with store.transaction() as session:
        lists = session.execute(select(Batch.drift).where(Batch.drift.is_not(None))).scalars()
        return {entry.get("run_id") for drift in lists for entry in (drift or [])
                if isinstance(entry, dict)}


#: The design verdict of a stored run, read from its record like the verdict (no column of its
#: own); a record made before requirements existed has none, which reads as ``none_stated``.
DESIGN_STATUS = Run.record[("design", "status")].as_string()


def design_status_of(stored: str | None, run_status: str) -> str | None:
    """The design status the runs list shows: None before the run finishes."""
    if run_status not in (RunStatus.SUCCEEDED.value, RunStatus.FAILED.value):
        return None
    return stored if stored in DESIGN_STATUSES else "none_stated"


def list_runs(store: Store, filters: RunFilters, *, offset: int = 0,
              limit: int = PAGE_SIZE) -> dict[str, Any]:
    """A page of runs, newest first, with case title, verdict, design status, sign-off and
    drift."""
    drifted = drifted_run_ids(store)
    verdict = Run.record["verdict"].as_string()
    with store.transaction() as session:
        query = (select(Run.id, Run.case_id, Run.status, verdict, Run.submitted_by, Run.batch_id,
                        Run.created_at, Run.finished_at, Case.title, Case.tags,
                        Signoff.decision, Signoff.reviewer, DESIGN_STATUS)
                 .join(Case, Case.id == Run.case_id)
                 .outerjoin(Signoff, Signoff.run_id == Run.id))
        if filters.verdict:
            query = query.where(Run.status == RunStatus.SUCCEEDED.value, verdict == filters.verdict)
        if filters.design:
            finished = Run.status.in_((RunStatus.SUCCEEDED.value, RunStatus.FAILED.value))
            stated = (DESIGN_STATUS.is_(None) | (DESIGN_STATUS == filters.design)
                      if filters.design == "none_stated" else DESIGN_STATUS == filters.design)
            query = query.where(finished, stated)
        if filters.status:
            query = query.where(Run.status == filters.status)
        if filters.tag:
            query = query.where(Run.case_id.in_(select(CaseTag.case_id)
                                                .where(CaseTag.tag == filters.tag)))
        if filters.signed is True:
            query = query.where(Signoff.id.is_not(None))
        elif filters.signed is False:
            query = query.where(Signoff.id.is_(None))
        if filters.drifted is not None:
            inside = Run.id.in_(sorted(drifted)) if drifted else false()
            query = query.where(inside if filters.drifted else ~inside)
        total = session.execute(select(func.count()).select_from(query.subquery())).scalar_one()
        rows = session.execute(query.order_by(Run.created_at.desc(), Run.id)
                               .limit(limit).offset(offset)).all()
    items = [{"run_id": r[0], "case_id": r[1], "status": r[2], "verdict": r[3],
              "submitted_by": r[4], "batch_id": r[5], "created_at": r[6], "finished_at": r[7],
              "title": r[8], "tags": list(r[9] or []), "decision": r[10], "reviewer": r[11],
              "drifted": r[0] in drifted, "design": design_status_of(r[12], r[2])}
             for r in rows]
    return {"items": items, "total": total, "offset": offset, "limit": limit}


def all_tags(store: Store) -> list[str]:
    with store.transaction() as session:
        return list(session.execute(select(CaseTag.tag).distinct().order_by(CaseTag.tag))
                    .scalars())


def case_runs_with_figures(store: Store, case_id: str) -> list[dict[str, Any]]:
    """Every run of a case, oldest first, with its scalar quantities and sign-off."""
    with store.transaction() as session:
        runs = session.execute(select(Run).where(Run.case_id == case_id)
                               .order_by(Run.created_at, Run.id)).scalars().all()
        result = []
        for run in runs:
            record = run.record or {}
            signoff = run.signoffs[0] if run.signoffs else None
            result.append({
                "run_id": run.id, "status": run.status, "verdict": record.get("verdict"),
                "design": design_status_of(
                    (record.get("design") or {}).get("status"), run.status),
                "created_at": run.created_at, "batch_id": run.batch_id,
                "submitted_by": run.submitted_by, "error": run.error,
                "quantities": record.get("quantities") or {},
                "engine_version": (record.get("provenance") or {}).get("engine_version"),
                "decision": signoff.decision if signoff else None,
                "reviewer": signoff.reviewer if signoff else None,
            })
        return result


def list_batches(store: Store, *, limit: int = PAGE_SIZE) -> list[dict[str, Any]]:
    """The newest batches with their run counts by state."""
    with store.transaction() as session:
        batches = session.execute(select(Batch).order_by(Batch.created_at.desc(), Batch.id)
                                  .limit(limit)).scalars().all()
        counts: dict[str, dict[str, int]] = {b.id: dict.fromkeys(RUN_STATES, 0) for b in batches}
        if batches:
            rows = session.execute(select(Run.batch_id, Run.status, func.count())
                                   .where(Run.batch_id.in_(list(counts)))
                                   .group_by(Run.batch_id, Run.status)).all()
            for batch_id, status, number in rows:
                counts[batch_id][status] = number
        return [{"batch_id": b.id, "selector": b.selector, "status": b.status,
                 "created_by": b.created_by, "created_at": b.created_at,
                 "finished_at": b.finished_at, "counts": counts[b.id],
                 "drifted": len(b.drift or [])} for b in batches]


def batch_runs(store: Store, batch_id: str) -> list[dict[str, Any]]:
    """The runs of one batch with their case titles, in the order they were queued."""
    with store.transaction() as session:
        rows = session.execute(select(Run.id, Run.case_id, Run.status,
                                      Run.record["verdict"].as_string(), Case.title,
                                      DESIGN_STATUS)
                               .join(Case, Case.id == Run.case_id)
                               .where(Run.batch_id == batch_id)
                               .order_by(Run.created_at, Run.id)).all()
    return [{"run_id": r[0], "case_id": r[1], "status": r[2], "verdict": r[3], "title": r[4],
             "design": design_status_of(r[5], r[2])} for r in rows]
