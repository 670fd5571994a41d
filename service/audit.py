"""The append-only, hash-chained audit trail.

Each event's hash is ``sha256(prev_hash + canonical JSON of {seq, at, actor, kind, subject,
payload})`` (hex), with ``prev_hash`` the previous event's hash (64 zeros before the first).
Events are appended inside the transaction of the change they describe, so a change and its
event are committed together or not at all. :func:`append_event` only queues the event on the
session; when the transaction commits, the session's other changes are flushed first and then
every queued event is written in one append, as the last statement(s) before the commit.

* PostgreSQL: one statement puts the events into ``audit_pending``, which takes no lock; a
  deferred trigger (migration 0003) chains them inside the server as the transaction commits:
  it locks the single chain-head row (``SELECT ... FOR UPDATE``), numbers, times and hashes
  each event, inserts it and moves the head. The lock is held from that trigger to the end of
  the commit, with no round trip to the client in between. The client sends each event's
  canonical JSON in pieces around the time and the number (:func:`body_pieces`); the server
  only joins them and hashes.
  The single self-committing statements of :mod:`service.runs_postgresql` put their events
  into ``audit_pending`` themselves, in the same statement as the change.
* SQLite: the transaction holds the database write lock from ``BEGIN IMMEDIATE``; the client
  reads the head, hashes, inserts the events and moves the head (three statements).

The commit releases the lock. Concurrent writers therefore queue only for that last step and the
commit, and the chain stays linear. A rolled-back transaction writes none of its queued events.
An event's ``at`` is the moment it is written, under the lock, so times follow the chain's
order. Whoever wrote them, every chain is verified by :func:`verify_chain` here, in Python.

The canonical JSON here is frozen with the chain format (sorted keys, no spaces, UTF-8, no NaN)
and deliberately independent of the case canonicalisation, so old chains stay verifiable.
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass
from typing import Any

from sqlalchemy import bindparam, event, func, insert, select, text, update
from sqlalchemy.orm import Session

from service.store import Store
from service.store.models import AuditEvent, AuditHead, utc_now

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


@dataclass(frozen=True)
class PendingEvent:
    """An event queued on a session, written when its transaction commits."""

    actor: str
    kind: str
    subject: str
    payload: dict[str, Any]


def append_event(session: Session, *, actor: str, kind: str, subject: str,
                 payload: dict[str, Any] | None = None) -> PendingEvent:
    """Queue one event in the caller's transaction; it is written as the transaction commits.

    The kind and the payload are checked now (``ValueError`` for an unknown kind or a payload
    that the chain's JSON cannot hold), so that a bad event fails the change it describes.
    """
    if kind not in EVENT_KINDS:
        raise ValueError(f"unknown audit event kind {kind!r}; expected one of {EVENT_KINDS}")
    pending = PendingEvent(actor=actor, kind=kind, subject=subject, payload=dict(payload or {}))
    chain_json(pending.payload)
    session.info.setdefault(PENDING_KEY, []).append(pending)
    return pending


#: Statements of the append, built once: a statement object rebuilt (and so compiled again) on
#: every append cost more CPU than the rest of a run's bookkeeping together.
_LOCK_HEAD = (select(AuditHead.seq, AuditHead.hash).where(AuditHead.id == HEAD_ROW_ID)
              .with_for_update())
_INSERT_EVENTS = insert(AuditEvent.__table__)
_MOVE_HEAD = (update(AuditHead.__table__).where(AuditHead.__table__.c.id == HEAD_ROW_ID)
              .values(seq=bindparam("head_seq"), hash=bindparam("head_hash")))
#: PostgreSQL: the events go to ``audit_pending`` (no lock), one fixed statement whatever their
#: number; the server chains them as the transaction commits (migration 0003).
_PEND_POSTGRESQL = text(
    "INSERT INTO audit_pending (actor, kind, subject, payload, before_at, before_seq, "
    "after_seq) SELECT actor, kind, subject, payload, before_at, before_seq, after_seq "
    "FROM unnest(CAST(:actors AS text[]), CAST(:kinds AS text[]), "
    "CAST(:subjects AS text[]), CAST(:payloads AS text[]), CAST(:before_at AS text[]), "
    "CAST(:before_seq AS text[]), CAST(:after_seq AS text[])) WITH ORDINALITY AS e("
    "actor, kind, subject, payload, before_at, before_seq, after_seq, n) ORDER BY n"
)


def payload_pieces(actor: str, kind: str, subject: str) -> tuple[str, str, str, str]:
    """The canonical JSON of an event's hashed body in four pieces around its time, its
    payload and its sequence number: ``before_at + at + before_payload + <payload JSON> +
    after_payload + str(seq) + after_seq`` equals ``chain_json({seq, at, actor, kind, subject,
    payload})`` (keys sorted: actor, at, kind, payload, seq, subject; an ISO time needs no JSON
    escaping)."""
    return (f'{{"actor":{chain_json(actor)},"at":"', f'","kind":{chain_json(kind)},"payload":',
            ',"seq":', f',"subject":{chain_json(subject)}}}')


def body_pieces(actor: str, kind: str, subject: str, payload: dict[str, Any]
                ) -> tuple[str, str, str]:
    """The body in three pieces around its time and its sequence number (see
    :func:`payload_pieces`): ``before_at + at + before_seq + str(seq) + after_seq``.
    PostgreSQL's commit-time trigger fills in the two values it assigns under the chain-head
    lock."""
    before_at, before_payload, after_payload, after_seq = payload_pieces(actor, kind, subject)
    return before_at, before_payload + chain_json(payload) + after_payload, after_seq


def write_pending_events(session: Session) -> int:
    """Write every event queued on ``session`` in one append; return how many were written.

    Called by the ``before_commit`` hook below after the session's other changes are flushed.
    On SQLite the events are chained here, as the last statements of the transaction; on
    PostgreSQL they are handed to the server, which chains them at the commit itself.
    """
    pending: list[PendingEvent] = session.info.pop(PENDING_KEY, [])
    if not pending:
        return 0
    if session.get_bind().dialect.name == "postgresql":
        pieces = [body_pieces(p.actor, p.kind, p.subject, p.payload) for p in pending]
        session.execute(_PEND_POSTGRESQL, {
            "actors": [p.actor for p in pending], "kinds": [p.kind for p in pending],
            "subjects": [p.subject for p in pending],
            "payloads": [chain_json(p.payload) for p in pending],
            "before_at": [piece[0] for piece in pieces],
            "before_seq": [piece[1] for piece in pieces],
            "after_seq": [piece[2] for piece in pieces]})
        return len(pending)
    seq, prev_hash = session.execute(_LOCK_HEAD).one()
    rows = []
    for item in pending:
        seq += 1
        at = utc_now().isoformat(timespec="microseconds")
        digest = event_hash(prev_hash, seq, at, item.actor, item.kind, item.subject,
                            item.payload)
        rows.append({"seq": seq, "at": at, "actor": item.actor, "kind": item.kind,
                     "subject": item.subject, "payload": item.payload,
                     "prev_hash": prev_hash, "hash": digest})
        prev_hash = digest
    session.execute(_INSERT_EVENTS, rows)
    session.execute(_MOVE_HEAD, {"head_seq": seq, "head_hash": prev_hash})
    return len(rows)


@event.listens_for(Session, "before_commit")
def _append_pending_at_commit(session: Session) -> None:
    if session.info.get(PENDING_KEY):
        session.flush()
        write_pending_events(session)


@event.listens_for(Session, "after_soft_rollback")
def _drop_pending_on_rollback(session: Session, _previous_transaction: Any) -> None:
    session.info.pop(PENDING_KEY, None)


def event_to_dict(event: AuditEvent) -> dict[str, Any]:
    return {"seq": event.seq, "at": event.at, "actor": event.actor, "kind": event.kind,
            "subject": event.subject, "payload": event.payload, "prev_hash": event.prev_hash,
            "hash": event.hash}


def list_events(store: Store, *, limit: int = 100, offset: int = 0, kind: str | None = None,
                subject: str | None = None) -> dict[str, Any]:
    """A page of events in chain order, optionally filtered by kind and subject."""
    with store.transaction() as session:
        query = select(AuditEvent)
        count = select(func.count()).select_from(AuditEvent)
        if kind:
            query = query.where(AuditEvent.kind == kind)
            count = count.where(AuditEvent.kind == kind)
        if subject:
            query = query.where(AuditEvent.subject == subject)
            count = count.where(AuditEvent.subject == subject)
        total = session.execute(count).scalar_one()
        rows = session.execute(
            query.order_by(AuditEvent.seq).limit(limit).offset(offset)
        ).scalars()
        items = [event_to_dict(e) for e in rows]
    return {"items": items, "total": total, "limit": limit, "offset": offset}


@dataclass(frozen=True)
class ChainReport:
    """Result of verifying the chain: ``ok``, events checked, and the first broken event."""

    ok: bool
    events: int
    head_seq: int
    first_broken_seq: int | None = None
    reason: str | None = None

    def to_dict(self) -> dict[str, Any]:
        broken = None
        if not self.ok:
            broken = {"seq": self.first_broken_seq, "reason": self.reason}
        return {"ok": self.ok, "events": self.events, "head_seq": self.head_seq,
                "first_broken": broken}


VERIFY_PAGE = 1000


def verify_chain(store: Store) -> ChainReport:
    """Recompute every hash in order; report the first event that does not fit."""
    expected_seq = 1
    prev_hash = GENESIS_HASH
    checked = 0
    with store.transaction() as session:
        head = session.execute(select(AuditHead).where(AuditHead.id == HEAD_ROW_ID)).scalar_one()
        head_seq, head_hash = head.seq, head.hash
        last_seq = 0
        while True:
            page = session.execute(
                select(AuditEvent).where(AuditEvent.seq > last_seq)
                .order_by(AuditEvent.seq).limit(VERIFY_PAGE)
            ).scalars().all()
            if not page:
                break
            for event in page:
                if event.seq != expected_seq:
                    return ChainReport(False, checked, head_seq, expected_seq,
                                       f"event seq {expected_seq} is missing (next stored seq is "
                                       f"{event.seq})")
                if event.prev_hash != prev_hash:
                    return ChainReport(False, checked, head_seq, event.seq,
                                       "prev_hash does not equal the hash of the event before it")
                recomputed = event_hash(prev_hash, event.seq, event.at, event.actor, event.kind,
                                        event.subject, event.payload)
                if recomputed != event.hash:
                    return ChainReport(False, checked, head_seq, event.seq,
                                       "stored hash does not match the recomputed hash: the "
                                       "event's content was changed after it was written")
                prev_hash = event.hash
                expected_seq += 1
                checked += 1
                last_seq = event.seq
    if head_seq != checked or head_hash != prev_hash:
        return ChainReport(False, checked, head_seq, checked + 1 if head_seq > checked else
                           head_seq, f"chain head records seq {head_seq} but the stored events "
                           f"end at seq {checked}: events were removed or the head was altered")
    return ChainReport(True, checked, head_seq)
