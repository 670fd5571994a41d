"""Batches: re-verify stored cases (all, or those with a tag) and report drift.

A batch makes one new run per selected case, linked to the batch. Its status is derived from
its runs (queued: none started; running: some not finished; finished: all finished); the stored
row says only ``queued`` or ``finished``. When the last run finishes, the batch is closed (see
:func:`close_batch_if_done`): drift is computed once and stored with the batch. For every case,
the batch run's scalar quantities are compared with the baseline, the case's last *approved*
record from before the batch (or its last succeeded record, where none is approved).

A quantity has drifted when ``|now - baseline| / |baseline|`` exceeds the case's
``tolerances.cross_check`` (default :data:`DEFAULT_DRIFT_TOLERANCE`); with a baseline of 0 any
non-zero value has drifted (``relative_change`` is then null). A quantity present on one side
only has drifted too. A design requirement whose status (met, not_met, indeterminate) differs
from the baseline's, or that is stated on one side only, has drifted whatever the figures did.

Beside the drift, a finished batch counts the verdicts of its succeeded runs
(``verdicts``): a run whose calculation failed a check is never summed up as within tolerance.
"""

from __future__ import annotations

import logging
import math
import uuid
from typing import Any

from sqlalchemy import and_, bindparam, case, exists, func, or_, select
from sqlalchemy.orm import Session, aliased

from service import audit
from service.errors import NotFound, ValidationFailed
from service.store import Store
from service.store.models import (
    FINISHED_STATES,
    RUN_STATES,
    UNFINISHED_STATES,
    Batch,
    Case,
    CaseTag,
    Decision,
    Run,
    RunStatus,
    Signoff,
    utc_now,
)
from service.store.run_writer import insert_queued_runs

logger = logging.getLogger(__name__)

#: Relative tolerance of drift when a case gives no ``tolerances.cross_check``.
DEFAULT_DRIFT_TOLERANCE = 1e-6
#: The batch summary when every run succeeded, passed every check and nothing drifted.
WITHIN_TOLERANCE = "all re-verified figures within tolerance"
VERSION_KEYS = ("engine_version", "schema_version", "python", "numpy", "scipy", "pint")


def _selector(tag: str | None, all_cases: bool) -> dict[str, Any]:
    if bool(tag) == bool(all_cases):
        raise ValidationFailed("Give exactly one of tag and all.",
                               errors=[{"path": "", "message":
                                        "expected {\"tag\": <tag>} or {\"all\": true}"}])
    return {"tag": tag} if tag else {"all": True}


def start_batch(store: Store, *, actor: str, tag: str | None = None,
                all_cases: bool = False) -> dict[str, Any]:
    """Create a batch and one queued run per selected case; return {batch_id, run_ids}.

    The caller dispatches the run ids after this returns (after the commit).
    """
    selector = _selector(tag, all_cases)
    with store.transaction() as session:
        query = select(Case.id, Case.sha256).order_by(Case.created_at, Case.id)
        if tag:
            query = query.where(Case.id.in_(select(CaseTag.case_id).where(CaseTag.tag == tag)))
        cases = session.execute(query).all()
        batch = Batch(id=str(uuid.uuid4()), selector=selector, status="queued",
                      created_by=actor, created_at=utc_now())
        session.add(batch)
        session.flush()
        audit.append_event(session, actor=actor, kind="batch.started", subject=batch.id,
                           payload={"selector": selector, "cases": len(cases)})
        run_ids = insert_queued_runs(session, cases, actor, batch_id=batch.id)
        if not cases:
            _mark_finished(session, batch)
        return {"batch_id": batch.id, "run_ids": run_ids, "status": batch.status}


def _counts(session: Session, batch_id: str) -> dict[str, int]:
    counts = dict.fromkeys(RUN_STATES, 0)
    rows = session.execute(
        select(Run.status, func.count()).where(Run.batch_id == batch_id).group_by(Run.status)
    ).all()
    for status, number in rows:
        counts[status] = number
    return counts


def _derived_status(counts: dict[str, int]) -> str:
    total = sum(counts.values())
    finished = sum(counts[s] for s in FINISHED_STATES)
    if finished == total:
        return "finished"
    if counts[RunStatus.QUEUED] == total:
        return "queued"
    return "running"


def _mark_finished(session: Session, batch: Batch) -> None:
    batch.status = "finished"
    batch.finished_at = utc_now()
    batch.drift = compute_drift(session, batch.id)
    counts = _counts(session, batch.id)
    audit.append_event(session, actor="service", kind="batch.finished", subject=batch.id,
                       payload={"counts": counts, "drifted": len(batch.drift)})


_RUNS = Run.__table__
#: Is any run of the batch still unfinished? (Answered from the (batch_id, status) index.)
_ANY_UNFINISHED = select(exists().where(_RUNS.c.batch_id == bindparam("batch_id"),
                                        _RUNS.c.status.in_(UNFINISHED_STATES)))
_BATCHES = Batch.__table__
_LOCK_BATCH = (select(_BATCHES.c.status).where(_BATCHES.c.id == bindparam("batch_id"))
               .with_for_update())


def close_batch_if_done(store: Store, batch_id: str) -> bool:
    """Close the batch when none of its runs is left unfinished; True when this call closed it.

    Called *after* the transaction that stored a batch run's outcome has committed, never
    inside it, so runs of one batch finishing at the same moment do not queue for the batch
    row. The last run to commit is sure to close the batch: its question comes after every
    other run's commit, so it sees them all finished. Two callers that both see that are made
    to take turns by the batch-row lock, and the second finds the batch finished and does
    nothing. Should a worker die between its commit and this call, :func:`get_batch` and the
    upkeep sweep (:func:`close_finished_batches`) close the batch instead.
    """
    if store.read_scalar(_ANY_UNFINISHED, {"batch_id": batch_id}):
        return False
    with store.transaction() as session:
        status = session.execute(_LOCK_BATCH, {"batch_id": batch_id}).scalar_one_or_none()
        if status is None or status == "finished":
            return False
        batch = session.get(Batch, batch_id)
        assert batch is not None
        _mark_finished(session, batch)
        return True


def close_batch_after_run(store: Store, batch_id: str | None) -> None:
    """After a run's outcome is committed: close its batch if this was the batch's last
    unfinished run (:func:`close_batch_if_done`). A failure here loses nothing: the outcome is
    stored, and the batch is closed by the next reader or the upkeep sweep."""
    if batch_id is None:
        return
    try:
        close_batch_if_done(store, batch_id)
    except Exception:  # noqa: BLE001 - see the docstring
        logger.exception("run's batch %s could not be closed now; it is closed later", batch_id)


def close_finished_batches(store: Store) -> list[str]:
    """Close every batch that is still open although all its runs are finished (upkeep)."""
    with store.transaction() as session:
        open_ids = list(session.execute(
            select(Batch.id).where(Batch.status != "finished").order_by(Batch.created_at)
        ).scalars())
    return [batch_id for batch_id in open_ids if close_batch_if_done(store, batch_id)]


def _scalar_quantities(record: dict[str, Any] | None) -> dict[str, float | None]:
    result: dict[str, float | None] = {}
    for name, quantity in ((record or {}).get("quantities") or {}).items():
        value = quantity.get("value") if isinstance(quantity, dict) else quantity
        if value is None or (isinstance(value, (int, float)) and not isinstance(value, bool)):
            result[name] = None if value is None else float(value)
    return result


def _versions(record: dict[str, Any] | None) -> dict[str, Any]:
    provenance = (record or {}).get("provenance") or {}
    return {key: provenance.get(key) for key in VERSION_KEYS if key in provenance}


def drift_tolerance(document: dict[str, Any]) -> float:
    """The relative change beyond which a figure counts as drifted: the case's own
    ``tolerances.cross_check`` when it sets a positive one, else ``DEFAULT_DRIFT_TOLERANCE``."""
    value = (document.get("tolerances") or {}).get("cross_check")
    if isinstance(value, (int, float)) and not isinstance(value, bool) and math.isfinite(value) \
            and value > 0:
        return float(value)
    return DEFAULT_DRIFT_TOLERANCE


def compare_quantities(baseline: dict[str, Any] | None, now: dict[str, Any] | None,
                       tolerance: float) -> list[dict[str, Any]]:
    """The scalar quantities of two records that differ beyond ``tolerance`` (relative)."""
    before, after = _scalar_quantities(baseline), _scalar_quantities(now)
    moved = []
    for name in sorted(set(before) | set(after)):
        old, new = before.get(name), after.get(name)
        if old is None and new is None:
            continue
        if old is None or new is None:
            moved.append({"name": name, "baseline": old, "now": new, "relative_change": None})
            continue
        if old == 0.0:
            if new != 0.0:
                moved.append({"name": name, "baseline": old, "now": new,
                              "relative_change": None})
            continue
        change = abs(new - old) / abs(old)
        if change > tolerance:
            moved.append({"name": name, "baseline": old, "now": new, "relative_change": change})
    return moved


def _requirement_statuses(record: dict[str, Any] | None) -> dict[str, str | None]:
    design = (record or {}).get("design") or {}
    return {str(entry.get("id")): entry.get("status")
            for entry in design.get("requirements") or [] if isinstance(entry, dict)}


def compare_requirements(baseline: dict[str, Any] | None, now: dict[str, Any] | None
                         ) -> list[dict[str, Any]]:
    """The design requirements of two records whose status differs (one side's status is None
    where the requirement is stated on the other side only), by id."""
    before, after = _requirement_statuses(baseline), _requirement_statuses(now)
    return [{"id": rid, "baseline": before.get(rid), "now": after.get(rid)}
            for rid in sorted(set(before) | set(after)) if before.get(rid) != after.get(rid)]


def _runs_with_baselines(session: Session, batch_id: str) -> list[Any]:
    """Every succeeded run of the batch with its baseline (see module notes), in one query.

    Rows of (run_id, case_id, record, case document, baseline_run_id, baseline record),
    oldest run first; runs with no baseline are left out. The baseline of a run is, among the
    case's succeeded runs created before it and outside the batch, the newest approved one,
    else the newest one: the rank below orders approved runs first, then newest first.
    """
    now = aliased(Run, name="now_run")
    earlier = aliased(Run, name="earlier_run")
    approved = case((Signoff.id.is_not(None), 1), else_=0)
    ranked = (
        select(now.id.label("run_id"), earlier.id.label("baseline_id"),
               func.row_number().over(partition_by=now.id,
                                      order_by=(approved.desc(), earlier.created_at.desc(),
                                                earlier.id.desc())).label("rank"))
        .join(earlier, and_(earlier.case_id == now.case_id,
                            earlier.status == RunStatus.SUCCEEDED.value,
                            earlier.created_at < now.created_at,
                            or_(earlier.batch_id.is_(None), earlier.batch_id != now.batch_id)))
        .outerjoin(Signoff, and_(Signoff.run_id == earlier.id,
                                 Signoff.decision == Decision.APPROVED.value))
        .where(now.batch_id == batch_id, now.status == RunStatus.SUCCEEDED.value)
        .subquery()
    )
    baseline = aliased(Run, name="baseline_run")
    return list(session.execute(
        select(now.id, now.case_id, now.record, Case.document, baseline.id, baseline.record)
        .join(ranked, and_(ranked.c.run_id == now.id, ranked.c.rank == 1))
        .join(baseline, baseline.id == ranked.c.baseline_id)
        .join(Case, Case.id == now.case_id)
        .order_by(now.created_at, now.id)
    ).all())


def compute_drift(session: Session, batch_id: str) -> list[dict[str, Any]]:
    """Drift of every succeeded run of the batch against its baseline (see module notes)."""
    drifted = []
    for run_id, case_id, record, document, baseline_id, baseline_record in \
            _runs_with_baselines(session, batch_id):
        moved = compare_quantities(baseline_record, record, drift_tolerance(document))
        changed = compare_requirements(baseline_record, record)
        if moved or changed:
            drifted.append({"case_id": case_id, "run_id": run_id,
                            "baseline_run_id": baseline_id, "quantities": moved,
                            "requirements": changed,
                            "baseline_versions": _versions(baseline_record),
                            "now_versions": _versions(record)})
    return drifted


def _verdict_counts(session: Session, batch_id: str) -> dict[str, int]:
    """How many succeeded runs of the batch passed every check, and how many failed one."""
    verdict = Run.record["verdict"].as_string()
    rows = session.execute(select(verdict, func.count())
                           .where(Run.batch_id == batch_id,
                                  Run.status == RunStatus.SUCCEEDED.value)
                           .group_by(verdict)).all()
    counts = {"pass": 0, "fail": 0}
    for name, number in rows:
        counts["pass" if name == "pass" else "fail"] += number
    return counts


def batch_summary(document: dict[str, Any]) -> str:
    """The batch in one sentence; "within tolerance" only when every run succeeded, passed
    every check and nothing drifted."""
    failed = document["counts"].get(RunStatus.FAILED.value, 0)
    unverified = (document.get("verdicts") or {}).get("fail", 0)
    drifted = len(document.get("drifted") or [])
    design = sum(1 for d in document.get("drifted") or [] if d.get("requirements"))
    if document["status"] != "finished":
        return "not finished"
    if not (failed or unverified or drifted):
        return WITHIN_TOLERANCE
    parts = [f"{failed} run(s) failed", f"{drifted} case(s) drifted"]
    if design:
        parts.append(f"{design} of them with a changed design requirement status")
    parts.append(f"{unverified} run(s) failed a check")
    return ", ".join(parts)


def get_batch(store: Store, batch_id: str) -> dict[str, Any]:
    document, due = _read_batch(store, batch_id)
    if due:  # its last worker died between its commit and closing the batch
        close_batch_if_done(store, batch_id)
        document, _due = _read_batch(store, batch_id)
    return document


def _read_batch(store: Store, batch_id: str) -> tuple[dict[str, Any], bool]:
    """The batch document, and whether the batch is due to be closed (every run finished, the
    row not yet)."""
    with store.transaction() as session:
        batch = session.get(Batch, batch_id)
        if batch is None:
            raise NotFound(f"There is no batch with id {batch_id!r}.")
        counts = _counts(session, batch_id)
        derived = _derived_status(counts)  # "finished" for a batch of no runs, too
        status = "finished" if batch.status == "finished" else derived
        run_ids = list(session.execute(select(Run.id).where(Run.batch_id == batch_id)
                                       .order_by(Run.created_at, Run.id)).scalars())
        document = {
            "batch_id": batch.id, "status": status, "selector": batch.selector,
            "created_by": batch.created_by, "created_at": batch.created_at.isoformat(),
            "finished_at": batch.finished_at.isoformat() if batch.finished_at else None,
            "counts": counts, "verdicts": _verdict_counts(session, batch_id),
            "run_ids": run_ids,
            "drifted": list(batch.drift or []) if status == "finished" else []}
        return document, batch.status != "finished" and derived == "finished"
