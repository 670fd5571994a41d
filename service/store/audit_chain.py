"""The audit chain's writing side: the outbox, and the one place events are hashed and chained.

Each event's hash is ``HMAC-SHA256(K, prev_hash + canonical JSON of {seq, at, actor, kind,
subject, payload})`` (hex), with ``prev_hash`` the previous event's hash (64 zeros before the
first) and ``K`` the chain key derived from the server's signing key; events chained before
revision 0007 (below ``audit_head.keyed_from``) keep their plain SHA-256 of the same text (see
:mod:`service.store.audit_seal`, which also writes the anchor file's checkpoint after each
chaining). :func:`event_hash` is the only code that computes it; :mod:`service.audit` verifies
with it.

Two steps, on both databases:

1. **Outbox.** A change and its events are written in one transaction: the events go
   unchained into ``audit_pending`` (:func:`pend_events`), which takes no lock. A session's
   events are queued with :func:`append_event` and written by a ``before_commit`` hook after
   the session's other changes; the run writers of :mod:`service.store.run_writer` put theirs
   into ``audit_pending`` in the same statement as the change.
2. **Chain.** The head and every pending event are read in ``id`` order, numbered, timed and
   hashed in Python (:func:`event_hash`), inserted into ``audit_events``, the head moved on
   and the chained events deleted from the outbox.

When and how the second step runs is the store's choice (:meth:`Store.chain_audit
<service.store.session.Store.chain_audit>`):

* SQLite (:func:`chain_pending`): in the writing transaction itself, just before its commit.
  That transaction holds the database write lock from ``BEGIN IMMEDIATE``, so the head cannot
  move and nothing is ever left pending.
* PostgreSQL (:func:`chain_pending_concurrently`): right after the writer's commit, in two
  self-committing statements: one read of the head and the outbox, then one write that applies
  only if the head has not moved meanwhile (else read again). No lock is held across a round
  trip to the client, writers never hold the chain while they change data, and concurrent
  writers produce one linear chain; a writer returns once its events are on the chain (it
  chained them, or the chainer that moved the head before it did). One exception: a run's
  claim leaves its ``run.started`` for the chaining after the run's outcome
  (:class:`service.store.run_writer.PostgresqlRunWriter`).
  An event whose writer died between its commit and the chaining stays pending until the next
  chaining: any later writer's, any session's read of ``audit_events`` (a ``do_orm_execute``
  hook below chains first, so that a change seen committed has its events on the chain),
  :func:`service.audit.list_events` and :func:`service.audit.verify_chain`, or the upkeep
  sweep (:func:`service.recovery.recover_lost_runs`).

Events of one transaction keep their order (outbox ids grow within it); an event's ``at`` is
the moment it is chained, after the head it follows was read, so times follow the chain's
order. A rolled-back transaction leaves nothing in the outbox.

The canonical JSON is frozen with the chain format (sorted keys, no spaces, UTF-8, no NaN) and
deliberately independent of the case canonicalisation, so old chains stay verifiable.
"""

from __future__ import annotations

import functools
import hashlib
import hmac
import json
from dataclasses import dataclass
from typing import Any

from sqlalchemy import (
    JSON,
    BigInteger,
    Connection,
    Integer,
    Text,
    any_,
    bindparam,
    cast,
    delete,
    event,
    exists,
    func,
    insert,
    select,
    true,
    update,
)
from sqlalchemy.dialects.postgresql import ARRAY
from sqlalchemy.orm import ORMExecuteState, Session
from sqlalchemy.sql.util import find_tables

from service.store.audit_seal import AuditSeal, ChainHead
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
    "user.created",
    "user.changed",
    "user.disabled",
    "auth.signed_in",
    "auth.signed_out",
    "auth.failed",
    "batch.started",
    "batch.finished",
)


def chain_json(value: Any) -> str:
    """Canonical JSON of the audit chain (frozen: changing it breaks every stored chain)."""
    return json.dumps(value, sort_keys=True, separators=(",", ":"), ensure_ascii=False,
                      allow_nan=False)


def event_hash(prev_hash: str, seq: int, at: str, actor: str, kind: str, subject: str,
               payload: dict[str, Any], key: bytes | None = None) -> str:
    """The chain hash of one event (hex): HMAC-SHA256 keyed with ``key`` (the chain key of
    :mod:`service.store.audit_seal`, every event from ``audit_head.keyed_from`` on), or plain
    SHA-256 without one (events chained before revision 0007)."""
    body = chain_json(
        {"seq": seq, "at": at, "actor": actor, "kind": kind, "subject": subject,
         "payload": payload}
    )
    message = (prev_hash + body).encode("utf-8")
    if key is None:
        return hashlib.sha256(message).hexdigest()
    keyed = _keyed_hmac(key).copy()
    keyed.update(message)
    return keyed.hexdigest()


@functools.lru_cache(maxsize=4)
def _keyed_hmac(key: bytes) -> hmac.HMAC:
    """An HMAC-SHA256 object with ``key`` absorbed, copied for each event (half the cost of
    keying a new one each time)."""
    return hmac.new(key, digestmod=hashlib.sha256)


PENDING_KEY = "fluxproof.audit.pending"
#: Set on a session's ``info`` when its transaction put events into the outbox.
PENDED_KEY = "fluxproof.audit.pended"
#: On a session's ``info`` (the store's sessions carry it): a callable returning the
#: :class:`~service.store.audit_seal.AuditSeal` that keys the chain and writes checkpoints.
SEAL_KEY = "fluxproof.audit.seal"
#: Set on a session's ``info`` when its transaction chained events: the head to checkpoint
#: once the transaction is committed.
CHAINED_KEY = "fluxproof.audit.chained"


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
_HEAD = AuditHead.__table__
_EVENTS = AuditEvent.__table__
_EVENT_COLUMNS = ["seq", "at", "actor", "kind", "subject", "payload", "prev_hash", "hash"]
_READ_HEAD_AND_PENDING = (
    select(_HEAD.c.seq, _HEAD.c.hash, _HEAD.c.chain_id, _HEAD.c.keyed_from, _PENDING.c.id,
           _PENDING.c.actor, _PENDING.c.kind, _PENDING.c.subject, _PENDING.c.payload)
    .select_from(_HEAD.outerjoin(_PENDING, true())).where(_HEAD.c.id == HEAD_ROW_ID)
    .order_by(_PENDING.c.id))
_INSERT_EVENTS = insert(_EVENTS)
_MOVE_HEAD = (update(_HEAD).where(_HEAD.c.id == HEAD_ROW_ID)
              .values(seq=bindparam("head_seq"), hash=bindparam("head_hash")))
#: By id, not by "up to the last id": an outbox id is drawn at insert, so a transaction that
#: commits after this chaining read the outbox can hold a smaller id than the ones it read.
_DELETE_CHAINED = delete(_PENDING).where(_PENDING.c.id.in_(bindparam("ids", expanding=True)))
ANY_PENDING = select(_PENDING.c.id).limit(1)


def _pg_chain_if_head_unmoved() -> Any:
    """PostgreSQL: move the head from ``old_seq`` on, insert the chained events and delete
    them from the outbox, in one self-committing statement that does nothing unless the head
    is still at ``old_seq`` (another chainer came first: read again and retry)."""
    moved = (update(_HEAD)
             .where(_HEAD.c.id == HEAD_ROW_ID, _HEAD.c.seq == bindparam("old_seq"))
             .values(seq=bindparam("head_seq"), hash=bindparam("head_hash"))
             .returning(_HEAD.c.id).cte("moved"))
    head_moved = exists(select(moved.c.id))
    rows = func.unnest(*[bindparam(f"{name}s", type_=ARRAY(Integer if name == "seq" else Text))
                         for name in _EVENT_COLUMNS]
                       ).table_valued(*_EVENT_COLUMNS).render_derived()
    inserted = insert(_EVENTS).from_select(_EVENT_COLUMNS, select(
        *[cast(rows.c[name], JSON) if name == "payload" else rows.c[name]
          for name in _EVENT_COLUMNS]).where(head_moved)).cte("inserted")
    deleted = delete(_PENDING).where(
        _PENDING.c.id == any_(bindparam("ids", type_=ARRAY(BigInteger))), head_moved
    ).cte("deleted")
    return select(func.count()).select_from(moved).add_cte(inserted, deleted)


_PG_CHAIN_IF_HEAD_UNMOVED = _pg_chain_if_head_unmoved()


def _chained(head: ChainHead, pending: list[Any], key: bytes) -> list[dict[str, Any]]:
    """The outbox rows ``pending`` as chain events after ``head``: numbered, timed now and
    hashed with the chain key (:func:`event_hash`), in order."""
    events, seq, prev_hash = [], head.seq, head.hash
    for row in pending:
        seq += 1
        at = utc_now().isoformat(timespec="microseconds")
        digest = event_hash(prev_hash, seq, at, row.actor, row.kind, row.subject, row.payload,
                            key)
        events.append({"seq": seq, "at": at, "actor": row.actor, "kind": row.kind,
                       "subject": row.subject, "payload": row.payload,
                       "prev_hash": prev_hash, "hash": digest})
        prev_hash = digest
    return events


def _read_outbox(connection: Connection | Session) -> tuple[ChainHead, list[Any]]:
    """The chain head and the outbox in order, in one statement."""
    rows = connection.execute(_READ_HEAD_AND_PENDING).all()
    head = ChainHead(chain=rows[0].chain_id, seq=rows[0].seq, hash=rows[0].hash,
                     keyed_from=rows[0].keyed_from)
    return head, [row for row in rows if row.id is not None]


def _moved(head: ChainHead, events: list[dict[str, Any]]) -> ChainHead:
    return ChainHead(chain=head.chain, seq=events[-1]["seq"], hash=events[-1]["hash"],
                     keyed_from=head.keyed_from)


def chain_pending(connection: Connection | Session, seal: AuditSeal
                  ) -> tuple[int, ChainHead | None]:
    """Chain every event in the outbox on ``connection``'s transaction, which must hold the
    database's write lock (SQLite's ``BEGIN IMMEDIATE``); how many were chained and the new
    head (None when none were), which the caller checkpoints once the transaction is
    committed (:meth:`AuditSeal.write_checkpoint`)."""
    head, pending = _read_outbox(connection)
    if not pending:
        return 0, None
    events = _chained(head, pending, seal.chain_key)
    connection.execute(_INSERT_EVENTS, events)
    connection.execute(_MOVE_HEAD, {"head_seq": events[-1]["seq"],
                                    "head_hash": events[-1]["hash"]})
    connection.execute(_DELETE_CHAINED, {"ids": [row.id for row in pending]})
    return len(events), _moved(head, events)


def chain_pending_concurrently(connection: Connection, seal: AuditSeal) -> int:
    """PostgreSQL: chain every event in the outbox, on an autocommit connection, while other
    processes may be doing the same; how many this call chained.

    Optimistic, so that no lock is held across a round trip to the client: read the head and
    the outbox (one statement), hash in Python, then write everything in one statement that
    applies only if the head has not moved meanwhile (the head row's update waits for a
    concurrent one and then sees its result). A chainer that finds the head moved reads again:
    whoever moved it chained every event committed before its read, so what is left is newer.
    """
    while True:
        head, pending = _read_outbox(connection)
        if not pending:
            return 0
        if try_chaining(connection, head, pending, seal):
            return len(pending)


def try_chaining(connection: Connection, head: ChainHead, pending: list[Any],
                 seal: AuditSeal) -> bool:
    """PostgreSQL: chain the outbox rows ``pending`` (rows with ``id``, ``actor``, ``kind``,
    ``subject``, ``payload``, in outbox order) after ``head`` as read, in one self-committing
    statement, and checkpoint the new head in the anchor file; False, with nothing written,
    when the head has moved since (see :func:`chain_pending_concurrently`)."""
    events = _chained(head, pending, seal.chain_key)
    params: dict[str, Any] = {f"{name}s": [e[name] for e in events]
                              for name in _EVENT_COLUMNS if name != "payload"}
    params["payloads"] = [chain_json(e["payload"]) for e in events]
    params.update(old_seq=head.seq, head_seq=events[-1]["seq"],
                  head_hash=events[-1]["hash"], ids=[row.id for row in pending])
    if not connection.execute(_PG_CHAIN_IF_HEAD_UNMOVED, params).scalar_one():
        return False
    seal.write_checkpoint(_moved(head, events))
    return True


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
        _count, head = chain_pending(session, session_seal(session))
        session.info[CHAINED_KEY] = head
        session.info.pop(PENDED_KEY, None)


@event.listens_for(Session, "after_commit")
def _checkpoint_after_commit(session: Session) -> None:
    head = session.info.pop(CHAINED_KEY, None)
    if head is not None:
        session_seal(session).write_checkpoint(head)


def session_seal(session: Session) -> AuditSeal:
    """The seal of the store that made ``session`` (see :data:`SEAL_KEY`)."""
    provider = session.info.get(SEAL_KEY)
    if provider is None:
        raise RuntimeError("audit events need the store's seal: open sessions with "
                           "Store.transaction(), not a bare Session")
    seal: AuditSeal = provider()
    return seal


@event.listens_for(Session, "after_soft_rollback")
def _drop_pending_on_rollback(session: Session, _previous_transaction: Any) -> None:
    session.info.pop(PENDING_KEY, None)
    session.info.pop(PENDED_KEY, None)
    session.info.pop(CHAINED_KEY, None)


_AUDIT_EVENTS_TABLE = AuditEvent.__table__


@event.listens_for(Session, "do_orm_execute")
def _chain_before_reading_the_chain(state: ORMExecuteState) -> None:
    """PostgreSQL: a session's read of ``audit_events`` chains what waits in the outbox first,
    so that a change seen committed always has its events on the chain (a writer chains right
    after its commit; a reader in between would otherwise miss them)."""
    if not state.is_select:
        return
    bind = state.session.get_bind()
    if bind.dialect.name != "postgresql" or \
            _AUDIT_EVENTS_TABLE not in find_tables(state.statement, include_crud=False):
        return
    with bind.connect().execution_options(isolation_level="AUTOCOMMIT") as connection:
        chain_pending_concurrently(connection, session_seal(state.session))
