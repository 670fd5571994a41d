"""The append-only, hash-chained audit trail: appending, listing and verifying.

Events are appended inside the transaction of the change they describe (:func:`append_event`),
so a change and its event are committed together or not at all; they are written to the audit
outbox and chained in order, in Python, by :mod:`service.store.audit_chain`, which holds the
hash and the canonical JSON (re-exported here). Reading and verifying chain what waits in the
outbox first, so an event whose writer died between its commit and its chaining is never
missing from what they show. :func:`verify_chain` recomputes every hash.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from sqlalchemy import func, select

from service.store import Store
from service.store.audit_chain import (
    EVENT_KINDS,
    GENESIS_HASH,
    HEAD_ROW_ID,
    PendingEvent,
    append_event,
    chain_json,
    event_hash,
    write_pending_events,
)
from service.store.models import AuditEvent, AuditHead

__all__ = ["EVENT_KINDS", "GENESIS_HASH", "ChainReport", "PendingEvent", "append_event",
           "chain_json", "event_hash", "list_events", "verify_chain", "write_pending_events"]


def event_to_dict(event: AuditEvent) -> dict[str, Any]:
    return {"seq": event.seq, "at": event.at, "actor": event.actor, "kind": event.kind,
            "subject": event.subject, "payload": event.payload, "prev_hash": event.prev_hash,
            "hash": event.hash}


def list_events(store: Store, *, limit: int = 100, offset: int = 0, kind: str | None = None,
                subject: str | None = None) -> dict[str, Any]:
    """A page of events in chain order, optionally filtered by kind and subject."""
    store.chain_audit(only_if_pending=True)
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
    store.chain_audit(only_if_pending=True)
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
