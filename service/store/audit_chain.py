"""The audit chain's writing side: the outbox, and the one place events are hashed and chained.

Each event's hash is ``sha256(prev_hash + canonical JSON of {seq, at, actor, kind, subject,
payload})`` (hex), with ``prev_hash`` the previous event's hash (64 zeros before the first).
:func:`event_hash` is the only code that computes it; :mod:`service.audit` verifies with it.

Two steps, on both databases:

1. **Outbox.** A change and its events are written in one transaction: the events go
   unchained into ``audit_pending`` (:func:`pend_events`), which takes no lock. A session's
   events are queued with :func:`append_event` and written by a ``before_commit`` hook after
   the session's other changes; the run writers of :mod:`service.store.run_writer` put theirs
   into ``audit_pending`` in the same statement as the change.
2. **Chain.** :func:`chain_pending` locks the single chain-head row, reads every pending event
   in ``id`` order, numbers, times and hashes each in Python, inserts them into
   ``audit_events``, moves the head and deletes them from the outbox, in one transaction.

When the second step runs is the store's choice (:class:`service.store.session.Store`):

* SQLite: in the writing transaction itself, just before its commit. That transaction holds
  the database write lock from ``BEGIN IMMEDIATE``, so nothing is ever left pending.
* PostgreSQL: in a short transaction of its own right after the writer's commit. Writers
  therefore never hold the chain lock while they change data, and concurrent writers produce
  one linear chain: whoever holds the head lock chains everything committed so far, in outbox
  order; a writer waits for the lock, so its own events are on the chain when it returns.
  An event whose writer died between the two steps stays pending until the next chaining:
  any later writer's, :func:`service.audit.list_events` and :func:`service.audit.verify_chain`
  (which chain first), or the upkeep sweep (:func:`service.recovery.recover_lost_runs`).

Events of one transaction keep their order (outbox ids grow within it); an event's ``at`` is
the moment it is chained, under the lock, so times follow the chain's order. A rolled-back
transaction leaves nothing in the outbox.

The canonical JSON is frozen with the chain format (sorted keys, no spaces, UTF-8, no NaN) and
deliberately independent of the case canonicalisation, so old chains stay verifiable.
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass
from typing import Any

from sqlalchemy import Connection, bindparam, delete, event, insert, select, update
from sqlalchemy.orm import Session

from service.store.models import AuditEvent, AuditHead, AuditPending, utc_now

GENESIS_HASH = "0" * 64
HEAD_ROW_ID = 1

#: Every kind of event the service writes.
EVENT_KINDS = (
    "case.stored",
    "run.queued",
    "run.started",
    "run.finished",
    "signoff.recorded",
    "token.created",
    "token.revoked",
    "batch.started",
    "batch.finished",
)


def chain_json(value: Any) -> str:
    """Canonical JSON of the audit chain (frozen: changing it breaks every stored chain)."""
    return json.dumps(value, sort_keys=True, separators=(",", ":"), ensure_ascii=False,
                      allow_nan=False)


def event_hash(prev_hash: str, seq: int, at: str, actor: str, kind: str, subject: str,
               payload: dict[str, Any]) -> str:
    """The chain hash of one event (hex SHA-256)."""
    body = chain_json(
        {"seq": seq, "at": at, "actor": actor, "kind": kind, "subject": subject,
         "payload": payload}
    )
    return hashlib.sha256((prev_hash + body).encode("utf-8")).hexdigest()


PENDING_KEY = "fluxproof.audit.pending"
#: Set on a session's ``info`` when its transaction put events into the outbox.
PENDED_KEY = "fluxproof.audit.pended"


@dataclass(frozen=True)
class PendingEvent:
    """An event queued on a session, written to the outbox when its transaction commits."""

    actor: str
    kind: str
    subject: str
    payload: dict[str, Any]


def checked_event(actor: str, kind: str, subject: str,
                  payload: dict[str, Any] | None = None) -> PendingEvent:
    """An event whose kind and payload are checked now (``ValueError`` for an unknown kind or
    a payload the chain's JSON cannot hold), so that a bad event fails the change it
    describes."""
    if kind not in EVENT_KINDS:
        raise ValueError(f"unknown audit event kind {kind!r}; expected one of {EVENT_KINDS}")
    pending = PendingEvent(actor=actor, kind=kind, subject=subject, payload=dict(payload or {}))
    chain_json(pending.payload)
    return pending


def append_event(session: Session, *, actor: str, kind: str, subject: str,
                 payload: dict[str, Any] | None = None) -> PendingEvent:
    """Queue one event in the caller's transaction; it reaches the outbox as it commits."""
    pending = checked_event(actor, kind, subject, payload)
    session.info.setdefault(PENDING_KEY, []).append(pending)
    return pending


_PENDING = AuditPending.__table__
_INSERT_PENDING = insert(_PENDING)


def pend_events(connection: Connection | Session, events: list[PendingEvent]) -> int:
    """Put ``events`` into the outbox (in order) on ``connection``'s transaction."""
    if events:
        connection.execute(_INSERT_PENDING, [
            {"actor": e.actor, "kind": e.kind, "subject": e.subject, "payload": e.payload}
            for e in events])
    return len(events)


#: Statements of the chaining, built once (compiling them per call cost more than running).
_LOCK_HEAD = (select(AuditHead.seq, AuditHead.hash).where(AuditHead.id == HEAD_ROW_ID)
              .with_for_update())
_READ_PENDING = select(_PENDING.c.id, _PENDING.c.actor, _PENDING.c.kind, _PENDING.c.subject,
                       _PENDING.c.payload).order_by(_PENDING.c.id)
_INSERT_EVENTS = insert(AuditEvent.__table__)
_MOVE_HEAD = (update(AuditHead.__table__).where(AuditHead.__table__.c.id == HEAD_ROW_ID)
              .values(seq=bindparam("head_seq"), hash=bindparam("head_hash")))
#: By id, not by "up to the last id": an outbox id is drawn at insert, so a transaction that
#: commits after this chaining read the outbox can hold a smaller id than the ones it read.
_DELETE_CHAINED = delete(_PENDING).where(_PENDING.c.id.in_(bindparam("ids", expanding=True)))
ANY_PENDING = select(_PENDING.c.id).limit(1)


def chain_pending(connection: Connection | Session) -> int:
    """Chain every event in the outbox, in outbox order, on ``connection``'s transaction;
    return how many were chained. Takes the chain-head lock first, so chainers take turns and
    each sees everything the one before it left."""
    seq, prev_hash = connection.execute(_LOCK_HEAD).one()
    pending = connection.execute(_READ_PENDING).all()
    if not pending:
        return 0
    rows = []
    for row in pending:
        seq += 1
        at = utc_now().isoformat(timespec="microseconds")
        digest = event_hash(prev_hash, seq, at, row.actor, row.kind, row.subject, row.payload)
        rows.append({"seq": seq, "at": at, "actor": row.actor, "kind": row.kind,
                     "subject": row.subject, "payload": row.payload, "prev_hash": prev_hash,
                     "hash": digest})
        prev_hash = digest
    connection.execute(_INSERT_EVENTS, rows)
    connection.execute(_MOVE_HEAD, {"head_seq": seq, "head_hash": prev_hash})
    connection.execute(_DELETE_CHAINED, {"ids": [row.id for row in pending]})
    return len(rows)


def write_pending_events(session: Session) -> int:
    """Put every event queued on ``session`` into the outbox; return how many.

    Called by the ``before_commit`` hook below after the session's other changes are flushed;
    the store then chains them (see the module notes).
    """
    pending: list[PendingEvent] = session.info.pop(PENDING_KEY, [])
    if pending:
        pend_events(session, pending)
        session.info[PENDED_KEY] = True
    return len(pending)


@event.listens_for(Session, "before_commit")
def _write_pending_at_commit(session: Session) -> None:
    if session.info.get(PENDING_KEY):
        session.flush()
        write_pending_events(session)
    if session.info.get(PENDED_KEY) and session.get_bind().dialect.name == "sqlite":
        # SQLite: the write lock is held since BEGIN IMMEDIATE; chain before the commit.
        chain_pending(session)
        session.info.pop(PENDED_KEY, None)


@event.listens_for(Session, "after_soft_rollback")
def _drop_pending_on_rollback(session: Session, _previous_transaction: Any) -> None:
    session.info.pop(PENDING_KEY, None)
    session.info.pop(PENDED_KEY, None)
