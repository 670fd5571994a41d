"""How runs are written: one interface, a SQLite and a PostgreSQL implementation.

The store picks the implementation once, when it is built (:func:`run_writer_for`, kept as
``Store.runs``); the domain code (:mod:`service.runs`) calls only the interface. Every write of
a run and its audit events goes through here, so there is one path per operation:

* queueing runs in a caller's transaction (a batch): Core inserts, events to the outbox
  (both databases, :func:`insert_queued_runs`);
* storing a case and queueing a run of it (``POST /v1/runs``), claiming a run, storing its
  outcome: one session transaction each on SQLite (:class:`SessionRunWriter`), one
  self-committing ``WITH`` statement each on PostgreSQL (:class:`PostgresqlRunWriter`);
* giving up a run out of attempts: one session transaction, the row locked (both).

Both are SQLAlchemy; the PostgreSQL statements are Core ``WITH`` statements built once at
import (data-modifying CTEs: the change and its events in one self-committing statement, one
round trip), their event payloads built by the server's ``json_build_object`` from the values
only the ``UPDATE`` knows (the attempt count). Events go into the audit outbox; the store
chains them (:mod:`service.store.audit_chain`), on PostgreSQL with the run's outcome: the
events of ``POST /v1/runs`` (``case.stored``, ``run.queued``) and of the claim
(``run.started``) wait in the outbox and are chained with the outcome's ``run.finished`` (or by
any chaining before that: a reader of the log, another writer, the upkeep sweep), one chaining
per run. The outcome
statement also returns the chain head and the outbox it saw (with its own event), so that
chaining costs one more statement (two when another chainer moved the head meanwhile).
"""

from __future__ import annotations

import uuid
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Protocol

from sqlalchemy import (
    JSON,
    Integer,
    String,
    Text,
    bindparam,
    cast,
    exists,
    func,
    insert,
    literal,
    null,
    select,
    true,
    union_all,
    update,
)
from sqlalchemy.dialects.postgresql import ARRAY
from sqlalchemy.dialects.postgresql import insert as pg_insert
from sqlalchemy.exc import SQLAlchemyError
from sqlalchemy.orm import Session

from schemas.canonical import document_sha256
from service.store.audit_chain import HEAD_ROW_ID, append_event, try_chaining
from service.store.audit_seal import ChainHead
from service.store.models import (
    FINISHED_STATES,
    UNFINISHED_STATES,
    AuditHead,
    AuditPending,
    Case,
    CaseTag,
    Run,
    RunStatus,
    UtcDateTime,
    utc_now,
)

if TYPE_CHECKING:
    from service.store.session import Store


@dataclass(frozen=True)
class StoredCase:
    """The address of a stored case: its id and the SHA-256 of its canonical JSON."""

    id: str
    sha256: str


@dataclass(frozen=True)
class Claim:
    """A claimed run: the attempt it is on, its case and the case document."""

    attempt: int
    case_id: str
    document: dict[str, Any]


_RUNS = Run.__table__
_CASES = Case.__table__
_TAGS = CaseTag.__table__
_PENDING = AuditPending.__table__
_HEAD = AuditHead.__table__

#: Statements of the session path, built once (they run on every run).
_CASE_BY_SHA = select(_CASES.c.id, _CASES.c.sha256).where(_CASES.c.sha256 == bindparam("sha256"))
_INSERT_CASE = insert(_CASES)
_INSERT_TAGS = insert(_TAGS)
_INSERT_RUN = insert(_RUNS)
_CLAIM = (
    update(_RUNS)
    .where(_RUNS.c.id == bindparam("run_id"), _RUNS.c.status.in_(UNFINISHED_STATES),
           _RUNS.c.attempts < bindparam("max_attempts"))
    .values(status=RunStatus.RUNNING.value, started_at=bindparam("now"),
            attempts=_RUNS.c.attempts + 1)
    .returning(_RUNS.c.attempts, _RUNS.c.case_id,
               select(_CASES.c.document).where(_CASES.c.id == _RUNS.c.case_id)
               .scalar_subquery())
)
_STORE_OUTCOME = (
    update(_RUNS)
    .where(_RUNS.c.id == bindparam("run_id"), _RUNS.c.status.in_(UNFINISHED_STATES))
    .values(status=bindparam("status"), record=bindparam("record"), error=bindparam("error"),
            finished_at=bindparam("now"))
    .returning(_RUNS.c.attempts, _RUNS.c.batch_id)
)
_LOCK_RUN = (select(_RUNS.c.status, _RUNS.c.attempts, _RUNS.c.batch_id)
             .where(_RUNS.c.id == bindparam("run_id")).with_for_update())
_GIVE_UP = (update(_RUNS).where(_RUNS.c.id == bindparam("run_id"))
            .values(status=RunStatus.FAILED.value, record=None, error=bindparam("error"),
                    finished_at=bindparam("now")))
_STATUS_OF = select(_RUNS.c.status).where(_RUNS.c.id == bindparam("run_id"))


def record_sha256(record: dict[str, Any] | None) -> str | None:
    """SHA-256 of a stored record's canonical JSON (None for a run without one): what its
    ``run.finished`` event pins, and what verification recomputes from the stored row."""
    return None if record is None else document_sha256(record)


def finished_payload(status: str, record: dict[str, Any] | None, error: str | None,
                     attempts: int) -> dict[str, Any]:
    """The payload of a ``run.finished`` event (``record_sha256`` from revision 0007 on)."""
    return {"status": status, "verdict": (record or {}).get("verdict"), "error": error,
            "attempts": attempts, "record_sha256": record_sha256(record)}


def find_case(session: Session, sha256: str) -> StoredCase | None:
    """The stored case with content address ``sha256``, if any."""
    row = session.execute(_CASE_BY_SHA, {"sha256": sha256}).first()
    return None if row is None else StoredCase(id=row.id, sha256=row.sha256)


def insert_case(session: Session, document: dict[str, Any], fields: dict[str, Any],
                actor: str) -> tuple[StoredCase, bool]:
    """Store a validated case under ``fields`` (sha256, title, tags; also its ``case.stored``
    payload) in the caller's transaction, unless its content is stored; (case, created)."""
    existing = find_case(session, fields["sha256"])
    if existing is not None:
        return existing, False
    case_id = str(uuid.uuid4())
    session.execute(_INSERT_CASE, {"id": case_id, "sha256": fields["sha256"],
                                   "document": document, "title": fields["title"],
                                   "tags": fields["tags"], "created_at": utc_now(),
                                   "created_by": actor})
    if fields["tags"]:
        session.execute(_INSERT_TAGS, [{"case_id": case_id, "tag": tag}
                                       for tag in fields["tags"]])
    append_event(session, actor=actor, kind="case.stored", subject=case_id, payload=fields)
    return StoredCase(id=case_id, sha256=fields["sha256"]), True


def insert_queued_runs(session: Session, cases: Any, actor: str, batch_id: str | None = None
                       ) -> list[str]:
    """One queued run per ``(case_id, case_sha256)`` pair, in the caller's transaction: one
    multi-row insert, one ``run.queued`` event per run in the order of ``cases``. The run ids
    in that order (dispatch them after the commit)."""
    rows = []
    for case_id, case_sha256 in cases:
        run_id = str(uuid.uuid4())
        rows.append({"id": run_id, "case_id": case_id, "status": RunStatus.QUEUED.value,
                     "submitted_by": actor, "batch_id": batch_id, "created_at": utc_now(),
                     "attempts": 0})
        append_event(session, actor=actor, kind="run.queued", subject=run_id,
                     payload={"case_id": case_id, "case_sha256": case_sha256,
                              "batch_id": batch_id})
    if rows:
        session.execute(_INSERT_RUN, rows)
    return [row["id"] for row in rows]


class RunWriter(Protocol):
    """The run-persistence interface (``Store.runs``). Each operation writes its audit events
    in the same transaction as its change (see the methods of :class:`SessionRunWriter`)."""

    def queue_new_case_run(self, document: dict[str, Any], fields: dict[str, Any], actor: str
                           ) -> tuple[str, str]: ...

    def claim(self, run_id: str, max_attempts: int, actor: str) -> Claim | None: ...

    def store_outcome(self, run_id: str, *, status: str, record: dict[str, Any] | None,
                      error: str | None, actor: str) -> tuple[bool, str | None]: ...

    def give_up(self, run_id: str, actor: str) -> tuple[str, str | None]: ...

    def status_of(self, run_id: str) -> str | None: ...


class SessionRunWriter:
    """Runs written in session transactions (Core statements); every operation on SQLite, and
    the rare ones (giving up a run) on PostgreSQL."""

    def __init__(self, store: Store) -> None:
        self._store = store

    def queue_new_case_run(self, document: dict[str, Any], fields: dict[str, Any], actor: str
                           ) -> tuple[str, str]:
        """Store a validated case (unless its content is stored) and queue a run of it;
        (run_id, case_id). ``fields`` as for :func:`insert_case`."""
        with self._store.transaction() as session:
            case, _created = insert_case(session, document, fields, actor)
            (run_id,) = insert_queued_runs(session, [(case.id, case.sha256)], actor)
        return run_id, case.id

    def claim(self, run_id: str, max_attempts: int, actor: str) -> Claim | None:
        """Mark a claimable run ``running`` (one more attempt) and write ``run.started``.

        Claimable: not finished and started fewer than ``max_attempts`` times. None when the
        run is missing, finished or out of attempts (see :meth:`give_up`).
        """
        with self._store.transaction() as session:
            row = session.execute(_CLAIM, {"run_id": run_id, "max_attempts": max_attempts,
                                           "now": utc_now()}).one_or_none()
            if row is None:
                return None
            append_event(session, actor=actor, kind="run.started", subject=run_id,
                         payload={"attempt": row[0]})
        return Claim(row[0], row[1], dict(row[2]))

    def store_outcome(self, run_id: str, *, status: str, record: dict[str, Any] | None,
                      error: str | None, actor: str) -> tuple[bool, str | None]:
        """Store the outcome of an unfinished run and write ``run.finished``; (stored,
        batch_id), ``stored`` False when the run is finished already or missing."""
        with self._store.transaction() as session:
            row = session.execute(_STORE_OUTCOME, {
                "run_id": run_id, "status": status, "record": record, "error": error,
                "now": utc_now()}).one_or_none()
            if row is None:
                return False, None
            append_event(session, actor=actor, kind="run.finished", subject=run_id,
                         payload=finished_payload(status, record, error, row.attempts))
        return True, row.batch_id

    def give_up(self, run_id: str, actor: str) -> tuple[str, str | None]:
        """End an unclaimable run: ("missing", None), (its finished status, None), or, when it
        is out of attempts, ("failed", batch_id) after ending it ``failed``."""
        with self._store.transaction() as session:
            found = session.execute(_LOCK_RUN, {"run_id": run_id}).one_or_none()
            if found is None:
                return "missing", None
            if found.status in FINISHED_STATES:
                return found.status, None
            error = (f"gave up after {found.attempts} deliveries that did not finish "
                     "(worker lost, killed or past its hard time limit)")
            session.execute(_GIVE_UP, {"run_id": run_id, "error": error, "now": utc_now()})
            append_event(session, actor=actor, kind="run.finished", subject=run_id,
                         payload=finished_payload(RunStatus.FAILED.value, None, error,
                                                  found.attempts))
        return RunStatus.FAILED.value, found.batch_id

    def status_of(self, run_id: str) -> str | None:
        """The run's status (None when there is no such run), outside any transaction."""
        return self._store.read_scalar(_STATUS_OF, {"run_id": run_id})


# PostgreSQL's single statements. Bound parameters shared by several places in one statement
# are one object each, so that they are sent once.
_P_RUN_ID = bindparam("run_id", type_=String)
_P_ACTOR = bindparam("actor", type_=String)
_P_NOW = bindparam("now", type_=UtcDateTime())
_P_STATUS = bindparam("status", type_=String)
_P_ERROR = bindparam("error", type_=Text)
_P_SHA256 = bindparam("sha256", type_=String)
_P_CASE_ID = bindparam("case_id", type_=String)
_EVENT_COLUMNS = ["actor", "kind", "subject", "payload"]


def _pg_claim() -> Any:
    claimed = (
        update(_RUNS)
        .where(_RUNS.c.id == _P_RUN_ID, _RUNS.c.status.in_(UNFINISHED_STATES),
               _RUNS.c.attempts < bindparam("max_attempts", type_=Integer))
        .values(status=RunStatus.RUNNING.value, started_at=_P_NOW,
                attempts=_RUNS.c.attempts + 1)
        .returning(_RUNS.c.attempts, _RUNS.c.case_id)
        .cte("claimed"))
    pended = insert(_PENDING).from_select(_EVENT_COLUMNS, select(
        _P_ACTOR, literal("run.started"), _P_RUN_ID,
        func.json_build_object(literal("attempt"), claimed.c.attempts))).cte("pended")
    return (select(claimed.c.attempts, claimed.c.case_id, _CASES.c.document)
            .join_from(claimed, _CASES, _CASES.c.id == claimed.c.case_id).add_cte(pended))


def _pg_store_outcome() -> Any:
    done = (
        update(_RUNS)
        .where(_RUNS.c.id == _P_RUN_ID, _RUNS.c.status.in_(UNFINISHED_STATES))
        .values(status=_P_STATUS, record=bindparam("record", type_=JSON(none_as_null=True)),
                error=_P_ERROR, finished_at=_P_NOW)
        .returning(_RUNS.c.attempts, _RUNS.c.batch_id)
        .cte("done"))
    pended = insert(_PENDING).from_select(_EVENT_COLUMNS, select(
        _P_ACTOR, literal("run.finished"), _P_RUN_ID,
        func.json_build_object(literal("attempts"), done.c.attempts, literal("error"),
                               _P_ERROR, literal("record_sha256"),
                               bindparam("record_sha256", type_=Text), literal("status"),
                               _P_STATUS, literal("verdict"), bindparam("verdict", type_=Text)))
    ).returning(*_outbox_columns(_PENDING)).cte("pended")
    # What the chaining reads, in the same round trip: the head and the outbox as of the
    # statement's start, and this statement's own event (a statement does not see its own
    # inserts).
    outbox = union_all(select(*_outbox_columns(_PENDING)),
                       select(*_outbox_columns(pended))).subquery("outbox")
    return (select(done.c.attempts, done.c.batch_id, _HEAD.c.seq.label("head_seq"),
                   _HEAD.c.hash.label("head_hash"), _HEAD.c.chain_id.label("head_chain"),
                   _HEAD.c.keyed_from.label("head_keyed_from"), *_outbox_columns(outbox))
            .select_from(done.join(_HEAD, _HEAD.c.id == HEAD_ROW_ID)
                         .outerjoin(outbox, true()))
            .order_by(outbox.c.id))


def _outbox_columns(source: Any) -> list[Any]:
    """The outbox columns the chaining reads, of ``source``."""
    return [source.c.id, source.c.actor, source.c.kind, source.c.subject, source.c.payload]


def _pg_queue_new_case_run() -> Any:
    """Store the case unless its content is stored already (``ON CONFLICT DO NOTHING``),
    queue a run of it, and write ``case.stored`` (only for a new case) then ``run.queued``.
    ``the_case`` is the new row or the stored one as of the statement's start: when another
    transaction stored the same content after that, there is no row (see the caller)."""
    new_case = (pg_insert(_CASES).values(
        id=_P_CASE_ID, sha256=_P_SHA256, document=bindparam("document", type_=JSON),
        title=bindparam("title", type_=String), tags=bindparam("tags_json", type_=JSON),
        created_at=_P_NOW, created_by=_P_ACTOR)
        .on_conflict_do_nothing(index_elements=[_CASES.c.sha256])
        .returning(_CASES.c.id).cte("new_case"))
    the_case = union_all(select(new_case.c.id),
                         select(_CASES.c.id).where(_CASES.c.sha256 == _P_SHA256)
                         ).cte("the_case")
    tag = func.unnest(bindparam("tags", type_=ARRAY(Text))).table_valued("tag").alias("tag")
    new_tags = insert(_TAGS).from_select(
        ["case_id", "tag"],
        select(new_case.c.id, tag.c.tag).select_from(new_case).join(tag, true())
    ).cte("new_tags")
    new_run = insert(_RUNS).from_select(
        ["id", "case_id", "status", "submitted_by", "created_at", "attempts"],
        select(_P_RUN_ID, the_case.c.id, literal(RunStatus.QUEUED.value), _P_ACTOR, _P_NOW,
               literal(0)).limit(1)
    ).returning(_RUNS.c.case_id).cte("new_run")
    ordered = union_all(
        select(literal(1).label("ord"), _P_ACTOR.label("actor"),
               literal("case.stored").label("kind"), _P_CASE_ID.label("subject"),
               cast(bindparam("case_payload", type_=JSON), JSON).label("payload"))
        .select_from(new_case),
        select(literal(2), _P_ACTOR, literal("run.queued"), _P_RUN_ID,
               func.json_build_object(literal("batch_id"), null(), literal("case_id"),
                                      new_run.c.case_id, literal("case_sha256"), _P_SHA256))
        .select_from(new_run),
    ).subquery("ordered")
    events = insert(_PENDING).from_select(
        _EVENT_COLUMNS,
        select(ordered.c.actor, ordered.c.kind, ordered.c.subject, ordered.c.payload)
        .order_by(ordered.c.ord)).cte("events")
    return (select(new_run.c.case_id, exists(select(new_case.c.id)).label("created"))
            .add_cte(new_tags, events))


class PostgresqlRunWriter(SessionRunWriter):
    """The hot paths as single self-committing ``WITH`` statements on an autocommit
    connection; their events are chained with the run's outcome (see the module notes)."""

    _CLAIM = _pg_claim()
    _STORE_OUTCOME = _pg_store_outcome()
    _QUEUE_NEW_CASE_RUN = _pg_queue_new_case_run()

    def _execute_one(self, statement: Any, params: dict[str, Any]) -> Any:
        with self._store.autocommit() as connection:
            return connection.execute(statement, params).one_or_none()

    def queue_new_case_run(self, document: dict[str, Any], fields: dict[str, Any], actor: str
                           ) -> tuple[str, str]:
        case_id, run_id = str(uuid.uuid4()), str(uuid.uuid4())
        # Its case.stored and run.queued wait in the outbox, as a claim's run.started does:
        # the run's outcome (or any chaining before it) puts them on the chain, so the request
        # path makes one round trip and never waits on the chain head.
        row = self._execute_one(self._QUEUE_NEW_CASE_RUN, {
            "case_id": case_id, "run_id": run_id, "sha256": fields["sha256"],
            "document": document, "title": fields["title"], "tags": fields["tags"],
            "tags_json": fields["tags"], "now": utc_now(), "actor": actor,
            "case_payload": fields})
        if row is None:  # a concurrent writer stored the same content meanwhile
            return super().queue_new_case_run(document, fields, actor)
        return run_id, row.case_id

    def claim(self, run_id: str, max_attempts: int, actor: str) -> Claim | None:
        # The run.started event waits in the outbox during the solve: the outcome's chaining
        # (or any other) puts it on the chain, one chaining per run instead of two.
        row = self._execute_one(self._CLAIM, {
            "run_id": run_id, "max_attempts": max_attempts, "now": utc_now(),
            "actor": actor})
        return None if row is None else Claim(row.attempts, row.case_id, dict(row.document))

    def store_outcome(self, run_id: str, *, status: str, record: dict[str, Any] | None,
                      error: str | None, actor: str) -> tuple[bool, str | None]:
        with self._store.autocommit() as connection:
            rows = connection.execute(self._STORE_OUTCOME, {
                "run_id": run_id, "status": status, "record": record, "error": error,
                "verdict": (record or {}).get("verdict"),
                "record_sha256": record_sha256(record), "now": utc_now(),
                "actor": actor}).all()
        if not rows:
            return False, None
        # Chain with what the statement read; should the head have moved since, read again.
        try:
            head = ChainHead(chain=rows[0].head_chain, seq=rows[0].head_seq,
                             hash=rows[0].head_hash, keyed_from=rows[0].head_keyed_from)
            with self._store.autocommit() as connection:
                chained = try_chaining(connection, head, rows, self._store.seal())
        except SQLAlchemyError:
            chained = False
        if not chained:
            self._store.chain_audit_after_commit()
        return True, rows[0].batch_id


def run_writer_for(store: Store) -> RunWriter:
    """The run writer of ``store``'s database (chosen once, when the store is built)."""
    if store.dialect == "postgresql":
        return PostgresqlRunWriter(store)
    return SessionRunWriter(store)
