"""Runs: queueing a check of a stored case, executing it, and reading its record.

``execute_run`` is what every executor calls (a Celery worker, the embedded thread pool): it is
idempotent by run id, so a second delivery of a finished run changes nothing, and it keeps the
store consistent whatever the engine does (an engine exception is a ``failed`` run, recorded).
Transient store errors propagate, so that the Celery task can retry them.
"""

from __future__ import annotations

import json
import logging
import math
import socket
import uuid
from typing import Any

from sqlalchemy import bindparam, insert, select, update
from sqlalchemy.orm import Session, joinedload

from service import audit, runs_postgresql
from service.errors import NotFound, ValidationFailed
from service.store import Store, default_store
from service.store.models import FINISHED_STATES, Case, Run, utc_now

logger = logging.getLogger(__name__)

DEFAULT_MAX_ATTEMPTS = 3

try:  # Celery's soft time limit, raised inside the solve; absent when Celery is not installed.
    from celery.exceptions import SoftTimeLimitExceeded
except ImportError:  # pragma: no cover - celery is a service dependency
    class SoftTimeLimitExceeded(Exception):  # type: ignore[no-redef]
        """Stand-in so that the except clause below stays valid without Celery."""


def _iso(value: Any) -> str | None:
    return None if value is None else value.isoformat()


def signoff_to_dict(signoff: Any) -> dict[str, Any]:
    return {"reviewer": signoff.reviewer, "decision": signoff.decision,
            "comment": signoff.comment, "at": _iso(signoff.at)}


def run_summary(run: Run) -> dict[str, Any]:
    """The run's state without the record body (for lists and histories)."""
    record = run.record or {}
    return {
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


def record_of(run: Run) -> dict[str, Any]:
    """The full record: the engine's result document plus the run's own fields."""
    record = dict(run.record or {})
    record.update(run_summary(run))
    return record


_INSERT_RUN = insert(Run.__table__)


def queue_run_in(session: Session, case: Any, actor: str, batch_id: str | None = None) -> str:
    """Add a queued run of ``case`` (anything with ``id`` and ``sha256``: a stored case) in the
    caller's transaction and return its id (dispatch it after the commit)."""
    run_id = str(uuid.uuid4())
    session.execute(_INSERT_RUN, {"id": run_id, "case_id": case.id, "status": "queued",
                                  "submitted_by": actor, "batch_id": batch_id,
                                  "created_at": utc_now(), "attempts": 0})
    audit.append_event(session, actor=actor, kind="run.queued", subject=run_id,
                       payload={"case_id": case.id, "case_sha256": case.sha256,
                                "batch_id": batch_id})
    return run_id


def queue_runs_in(session: Session, cases: Any, actor: str, batch_id: str | None = None
                  ) -> list[str]:
    """Add one queued run per ``(case_id, case_sha256)`` pair in the caller's transaction.

    The runs go in as one multi-row insert and their ``run.queued`` events as one audit append
    (at the commit), one event per run, in the order of ``cases``. Returns the run ids in that
    order; the caller dispatches them after the commit.
    """
    rows = []
    for case_id, case_sha256 in cases:
        run_id = str(uuid.uuid4())
        rows.append({"id": run_id, "case_id": case_id, "status": "queued",
                     "submitted_by": actor, "batch_id": batch_id, "created_at": utc_now(),
                     "attempts": 0})
        audit.append_event(session, actor=actor, kind="run.queued", subject=run_id,
                           payload={"case_id": case_id, "case_sha256": case_sha256,
                                    "batch_id": batch_id})
    if rows:
        session.execute(insert(Run), rows)
    return [row["id"] for row in rows]


def create_run(store: Store, *, actor: str, case_id: str | None = None,
               document: dict[str, Any] | None = None) -> dict[str, Any]:
    """Queue a run of a stored case (``case_id``) or of a new case (``document``, stored first).

    Returns ``{run_id, status, case_id}``; the caller dispatches ``run_id`` after this returns.
    """
    from service.cases import store_case_in, validate_document

    if (case_id is None) == (document is None):
        raise ValidationFailed("Give exactly one of case_id and case.",
                               errors=[{"path": "", "message": "expected exactly one of "
                                        "'case_id' or 'case'"}])
    if document is not None:
        validate_document(document)
        if store.dialect == "postgresql":
            queued = runs_postgresql.queue_new_case_run(store, document, actor, utc_now())
            if queued is not None:
                return {"run_id": queued[0], "status": "queued", "case_id": queued[1]}
    with store.transaction() as session:
        if document is not None:
            case, _created = store_case_in(session, document, actor)
        else:
            case = session.get(Case, case_id)
            if case is None:
                raise ValidationFailed("The case_id names no stored case.",
                                       errors=[{"path": "case_id", "message":
                                                f"no stored case with id {case_id!r}"}])
        run_id = queue_run_in(session, case, actor)
        return {"run_id": run_id, "status": "queued", "case_id": case.id}


def get_record(store: Store, run_id: str) -> dict[str, Any]:
    with store.transaction() as session:
        run = session.get(Run, run_id)
        if run is None:
            raise NotFound(f"There is no run with id {run_id!r}.")
        return record_of(run)


def get_run_and_case(store: Store, run_id: str) -> tuple[dict[str, Any], dict[str, Any]]:
    """The record and the stored case document of one run (for the report)."""
    with store.transaction() as session:
        run = session.get(Run, run_id)
        if run is None:
            raise NotFound(f"There is no run with id {run_id!r}.")
        case = session.get(Case, run.case_id)
        assert case is not None
        return record_of(run), dict(case.document)


def non_finite_paths(value: Any, path: str = "") -> list[str]:
    """Paths of every NaN or infinite float in a JSON-like document."""
    if isinstance(value, float):
        return [] if math.isfinite(value) else [path or "(document)"]
    if isinstance(value, dict):
        return [p for key, item in value.items()
                for p in non_finite_paths(item, f"{path}.{key}" if path else str(key))]
    if isinstance(value, (list, tuple)):
        return [p for index, item in enumerate(value)
                for p in non_finite_paths(item, f"{path}[{index}]")]
    return []


def _non_finite_paths_of_record(record: dict[str, Any]) -> list[str]:
    """:func:`non_finite_paths` of a record, asked of the C JSON encoder first (a record holds
    hundreds of numbers; walking them in Python was a tenth of a run's bookkeeping)."""
    try:
        json.dumps(record, allow_nan=False)
    except ValueError:
        bad = non_finite_paths(record)
        if bad:
            return bad
        raise
    return []


def _lock_run(session: Session, run_id: str) -> Run | None:
    """The run, row-locked, with its sign-offs loaded in the same statement (the seal checks
    read them; a separate lazy load would be one more round trip)."""
    return session.execute(
        select(Run).where(Run.id == run_id).options(joinedload(Run.signoffs))
        .with_for_update(of=Run)
    ).unique().scalar_one_or_none()


def _failure_reason(exc: BaseException) -> str:
    import schemas

    if isinstance(exc, SoftTimeLimitExceeded):
        return "the solve ran past the worker's soft time limit and was stopped"
    if isinstance(exc, schemas.CaseError):
        details = "; ".join(f"{e.get('path')}: {e.get('message')}" for e in exc.errors)
        return f"the stored case no longer passes validation: {details}"
    return f"engine error: {type(exc).__name__}: {exc}"


def _finish(session: Session, run: Run, *, status: str, record: dict[str, Any] | None,
            error: str | None, actor: str) -> None:
    if run.signoffs:
        from service.store.guards import SealedRecordError

        raise SealedRecordError(f"run {run.id} is signed off; its record never changes")
    run.status = status
    run.record = record
    run.error = error
    run.finished_at = utc_now()
    verdict = (record or {}).get("verdict")
    audit.append_event(session, actor=actor, kind="run.finished", subject=run.id,
                       payload={"status": status, "verdict": verdict, "error": error,
                                "attempts": run.attempts})


UNFINISHED_STATES = ("queued", "running")


_RUNS = Run.__table__
_CASES = Case.__table__
#: The claim and the outcome as statements built once (see :func:`_claim`, :func:`_store_finish`).
_CLAIM = (
    update(_RUNS)
    .where(_RUNS.c.id == bindparam("run_id"), _RUNS.c.status.in_(UNFINISHED_STATES),
           _RUNS.c.attempts < bindparam("max_attempts"))
    .values(status="running", started_at=bindparam("now"), attempts=_RUNS.c.attempts + 1)
    .returning(_RUNS.c.attempts, _RUNS.c.case_id,
               select(_CASES.c.document).where(_CASES.c.id == _RUNS.c.case_id)
               .scalar_subquery())
)
_STATUS_OF = select(_RUNS.c.status).where(_RUNS.c.id == bindparam("run_id"))
_STORE_OUTCOME = (
    update(_RUNS)
    .where(_RUNS.c.id == bindparam("run_id"), _RUNS.c.status.in_(UNFINISHED_STATES))
    .values(status=bindparam("status"), record=bindparam("record"), error=bindparam("error"),
            finished_at=bindparam("now"))
    .returning(_RUNS.c.attempts, _RUNS.c.batch_id)
)


def _claim(session: Session, run_id: str, max_attempts: int) -> tuple[int, str, Any] | None:
    """Mark a claimable run ``running`` in one statement; return (attempt, case_id, document).

    Claimable: not finished and started fewer than ``max_attempts`` times. The ``UPDATE``
    returns the case document (a subquery), so the claim is one statement. None when the run
    is missing, finished or out of attempts (the caller then reads it to tell which). A
    signed-off run is always finished, so this never touches one.
    """
    row = session.execute(_CLAIM, {"run_id": run_id, "max_attempts": max_attempts,
                                   "now": utc_now()}).one_or_none()
    return None if row is None else (row[0], row[1], row[2])


def _store_finish(session: Session, run_id: str, *, status: str, record: dict[str, Any] | None,
                  error: str | None, actor: str) -> tuple[bool, str | None]:
    """Store the outcome of an unfinished run in one statement; return (stored, batch_id).

    ``stored`` is False when the run is finished already (another delivery stored its outcome
    first) or missing. A signed-off run is always finished, so this never touches one.
    """
    row = session.execute(_STORE_OUTCOME, {"run_id": run_id, "status": status, "record": record,
                                           "error": error, "now": utc_now()}).one_or_none()
    if row is None:
        return False, None
    attempts, batch_id = row
    verdict = (record or {}).get("verdict")
    audit.append_event(session, actor=actor, kind="run.finished", subject=run_id,
                       payload={"status": status, "verdict": verdict, "error": error,
                                "attempts": attempts})
    return True, batch_id


def execute_run(run_id: str, store: Store | None = None, *,
                max_attempts: int = DEFAULT_MAX_ATTEMPTS, actor: str | None = None) -> str:
    """Execute one run: claim it, solve its case with the engine, store the record.

    Idempotent by ``run_id``: a finished run is left exactly as it is. A run that was started
    ``max_attempts`` times already (its worker lost or killed each time) is ended ``failed``.
    Returns the run's status afterwards ("missing" when there is no such run).

    Two short transactions, each ending with its audit event: the claim (``running``, one more
    attempt, ``run.started``) before the solve, so that a lost worker's attempt counts; and the
    outcome (``run.finished``). Then, for a batch run, a third that closes the batch when this
    was its last unfinished run. On PostgreSQL the claim and the outcome are each one
    statement that commits by itself (:mod:`service.runs_postgresql`).
    """
    store = store or default_store()
    actor = actor or f"worker@{socket.gethostname()}"
    on_postgresql = store.dialect == "postgresql"
    claimed = (runs_postgresql.claim(store, run_id, max_attempts, actor, utc_now())
               if on_postgresql else _claim_with_event(store, run_id, max_attempts, actor))
    if claimed is None:
        return _settle_unclaimable(store, run_id, actor)
    _attempt, case_id, document = claimed
    return _solve_and_store(store, run_id, case_id, dict(document), actor, on_postgresql)


def _claim_with_event(store: Store, run_id: str, max_attempts: int, actor: str
                      ) -> tuple[int, str, Any] | None:
    """The session path of the claim: :func:`_claim` and its ``run.started`` event in one
    transaction; (attempt, case_id, document), or None when the run is not claimable."""
    with store.transaction() as session:
        claimed = _claim(session, run_id, max_attempts)
        if claimed is not None:
            audit.append_event(session, actor=actor, kind="run.started", subject=run_id,
                               payload={"attempt": claimed[0]})
    return claimed


def _settle_unclaimable(store: Store, run_id: str, actor: str) -> str:
    """A run that could not be claimed: "missing", its finished status, or, when it is out of
    attempts, ended "failed" (and its batch closed if that was its last run)."""
    with store.transaction() as session:
        found = _lock_run(session, run_id)
        if found is None:
            logger.warning("execute_run: no run %s", run_id)
            return "missing"
        if found.status in FINISHED_STATES:
            return found.status
        _finish(session, found, status="failed", record=None, actor=actor,
                error=f"gave up after {found.attempts} deliveries that did not finish "
                      "(worker lost, killed or past its hard time limit)")
        batch_id = found.batch_id
    _close_batch_after_commit(store, batch_id)
    return "failed"


def _solve_and_store(store: Store, run_id: str, case_id: str, document: dict[str, Any],
                     actor: str, on_postgresql: bool) -> str:
    """Check the claimed run's case with the engine and store the outcome; its status."""
    import worker.engine

    record: dict[str, Any] | None = None
    error: str | None = None
    try:
        # check_case validates the stored case again (CaseError when it no longer passes).
        result = worker.engine.check_case(document)
        record = dict(result)
        record["run_id"] = run_id
        record["case_id"] = case_id
        status = "succeeded" if record.get("status") == "succeeded" else "failed"
        if status == "failed":
            error = str(record.get("error") or "the engine reported failure without a reason")
        record["status"] = status
        bad = _non_finite_paths_of_record(record)
        if bad:
            record, status = None, "failed"
            error = ("the engine returned non-finite numbers (NaN or infinity), which a check "
                     f"record cannot hold, at: {', '.join(bad[:10])}")
    except Exception as exc:  # noqa: BLE001 - any engine failure is a recorded result
        logger.warning("run %s failed: %s", run_id, exc)
        status, error = "failed", _failure_reason(exc)

    if on_postgresql:
        stored, batch_id = runs_postgresql.store_outcome(
            store, run_id, status=status, record=record, error=error, actor=actor,
            now=utc_now())
    else:
        with store.transaction() as session:
            stored, batch_id = _store_finish(session, run_id, status=status, record=record,
                                             error=error, actor=actor)
    if not stored:
        # Another delivery finished first (or the run is gone); keep what it stored.
        found = store.read_scalar(_STATUS_OF, {"run_id": run_id})
        return "missing" if found is None else found
    _close_batch_after_commit(store, batch_id)
    return status


def _close_batch_after_commit(store: Store, batch_id: str | None) -> None:
    """Close the run's batch if this was its last unfinished run (after the outcome's commit,
    see :func:`service.batches.close_batch_if_done`). A failure here loses nothing: the
    outcome is stored, and the batch is closed by the next reader or the upkeep sweep."""
    if batch_id is None:
        return
    from service.batches import close_batch_if_done

    try:
        close_batch_if_done(store, batch_id)
    except Exception:  # noqa: BLE001 - see the docstring
        logger.exception("run's batch %s could not be closed now; it is closed later", batch_id)


def pending_run_ids(store: Store) -> list[str]:
    """Runs not finished (queued or running), oldest first: for re-sending after a restart."""
    with store.transaction() as session:
        return list(session.execute(
            select(Run.id).where(Run.status.in_(("queued", "running"))).order_by(Run.created_at)
        ).scalars())
