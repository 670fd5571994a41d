"""The append-only, hash-chained audit trail: appending, listing and verifying.

Events are appended inside the transaction of the change they describe (:func:`append_event`),
so a change and its event are committed together or not at all; they are written to the audit
outbox and chained in order, in Python, by :mod:`service.store.audit_chain`, which holds the
hash and the canonical JSON (re-exported here). Reading and verifying chain what waits in the
outbox first, so an event whose writer died between its commit and its chaining is never
missing from what they show.

:func:`verify_chain` checks three things and names every difference it finds:

1. the chain: every event's hash recomputed (HMAC under the chain key from
   ``audit_head.keyed_from`` on, plain SHA-256 before; :mod:`service.store.audit_seal`), each
   linked to the one before, the head row at the last event;
2. the anchor file outside the database: every checkpoint of this chain signed by the
   server's key and matching the stored event at its sequence number, none beyond the stored
   head (truncation), the same ``keyed_from``;
3. the stored objects against their events (:mod:`service.audit_records`): every case, run,
   record and sign-off, and completeness both ways.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from sqlalchemy import func, select
from sqlalchemy.orm import Session

from service.audit_records import EventIndex, Finding, IndexedEvent, compare_stored_objects
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
from service.store.audit_seal import AnchorError, AuditSeal, read_all_checkpoints
from service.store.models import AuditEvent, AuditHead, AuditPending

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
    """Result of verifying: ``ok``, events checked, the first broken event of the chain, every
    finding (chain, anchor, stored objects), the anchor verified against and what was
    compared."""

    ok: bool
    events: int
    head_seq: int
    first_broken_seq: int | None = None
    reason: str | None = None
    findings: tuple[Finding, ...] = ()
    anchor: dict[str, Any] | None = None
    compared: dict[str, int] = field(default_factory=dict)

    @property
    def chain_intact(self) -> bool:
        """True when the chain and the anchor hold, whatever the stored objects say (for
        events written without their objects, as the store's own tests do)."""
        return not any(f.kind in ("event", "anchor") for f in self.findings)

    def to_dict(self) -> dict[str, Any]:
        broken = None
        if not self.ok:
            broken = {"seq": self.first_broken_seq, "reason": self.reason}
        return {"ok": self.ok, "events": self.events, "head_seq": self.head_seq,
                "first_broken": broken, "findings": [f.to_dict() for f in self.findings],
                "anchor": self.anchor, "compared": dict(self.compared)}


VERIFY_PAGE = 1000


@dataclass
class _Walk:
    """The chain as walked: how far it held, the last stored seq, the hashes of the anchored
    events, the index of events."""

    checked: int = 0
    last_hash: str = GENESIS_HASH
    stored_last: int = 0
    hashes: dict[int, str] = field(default_factory=dict)
    index: EventIndex = field(default_factory=EventIndex)
    findings: list[Finding] = field(default_factory=list)


def _walk_chain(session: Session, keyed_from: int, key: bytes, anchored: set[int]) -> _Walk:
    """Recompute every hash in order; the first event that does not fit is a finding and ends
    the hash check (later events are still indexed for the object comparison). The stored
    hashes of the ``anchored`` sequence numbers are kept for the anchor's check."""
    walk = _Walk()
    expected_seq, prev_hash, broken = 1, GENESIS_HASH, False
    last_seq = 0
    while True:
        page = session.execute(
            select(AuditEvent).where(AuditEvent.seq > last_seq)
            .order_by(AuditEvent.seq).limit(VERIFY_PAGE)
        ).scalars().all()
        if not page:
            break
        for event in page:
            last_seq = walk.stored_last = event.seq
            if event.seq in anchored:
                walk.hashes[event.seq] = event.hash
            walk.index.add(IndexedEvent(event.seq, event.actor, event.kind, event.subject,
                                        event.payload))
            if broken:
                continue
            reason = _event_fault(event, expected_seq, prev_hash, keyed_from, key)
            if reason is not None:
                walk.findings.append(Finding("event", event.subject, min(event.seq,
                                                                         expected_seq), reason))
                broken = True
                continue
            prev_hash = event.hash
            expected_seq += 1
            walk.checked += 1
        session.expunge_all()
    walk.last_hash = prev_hash
    return walk


def _event_fault(event: AuditEvent, expected_seq: int, prev_hash: str, keyed_from: int,
                 key: bytes) -> str | None:
    if event.seq != expected_seq:
        return f"event seq {expected_seq} is missing (next stored seq is {event.seq})"
    if event.prev_hash != prev_hash:
        return (f"event seq {event.seq}: prev_hash does not equal the hash of the event before "
                "it")
    keyed = event.seq >= keyed_from
    recomputed = event_hash(prev_hash, event.seq, event.at, event.actor, event.kind,
                            event.subject, event.payload, key if keyed else None)
    if recomputed == event.hash:
        return None
    if keyed:
        return (f"event seq {event.seq} ({event.kind} {event.subject}): its hash is not the "
                "server key's HMAC of its content: the event was changed, or the chain "
                "re-hashed without the key (or a process chained with a key file other than "
                "this one's)")
    return (f"event seq {event.seq} ({event.kind} {event.subject}): stored hash does not "
            "match the recomputed hash: the event's content was changed after it was written")


def _check_anchor(seal: AuditSeal, chain: str, keyed_from: int, walk: _Walk, stored_last: int,
                  checkpoints: list[dict[str, Any]], error: AnchorError | None
                  ) -> tuple[dict[str, Any], list[Finding]]:
    """Every checkpoint of ``chain`` in the anchor file against the stored chain."""
    shown: dict[str, Any] = {"file": str(seal.anchor), "chain": chain, "checkpoints": 0,
                             "seq": None, "hash": None, "at": None, "key_id": None}
    if error is not None:
        return shown, [Finding("anchor", str(seal.anchor), None, str(error))]
    findings = []
    for point in checkpoints:
        where = f"anchor checkpoint (line {point['line']}, seq {point['seq']}, {point.get('at')})"
        if not seal.signature_valid(point):
            findings.append(Finding("anchor", chain, point["seq"],
                                    f"{where}: its signature is not the server key's "
                                    f"(key {seal.key_id}): the anchor file was edited"))
            continue
        if point.get("keyed_from") != keyed_from:
            findings.append(Finding("anchor", chain, point["seq"],
                                    f"{where}: keyed from seq {point.get('keyed_from')}, but "
                                    f"the database says {keyed_from}: the chain's keyed part "
                                    "was moved"))
        if point["seq"] > stored_last:
            findings.append(Finding("anchor", chain, point["seq"],
                                    f"{where}: the anchor records {point['seq']} events but "
                                    f"the stored chain ends at seq {stored_last}: events were "
                                    "deleted or the head moved back"))
        elif walk.hashes.get(point["seq"]) != point.get("hash"):
            findings.append(Finding("anchor", chain, point["seq"],
                                    f"{where}: hash {str(point.get('hash'))[:12]}… differs "
                                    f"from the stored event's "
                                    f"{str(walk.hashes.get(point['seq']))[:12]}…: the chain "
                                    "was rewritten"))
    findings = _first_of_each(findings)
    valid = [p for p in checkpoints if seal.signature_valid(p)]
    if valid:
        latest = max(valid, key=lambda p: p["seq"])
        shown.update(checkpoints=len(checkpoints), seq=latest["seq"], hash=latest["hash"],
                     at=latest.get("at"), key_id=latest.get("key_id"))
    elif stored_last >= keyed_from:
        findings.append(Finding("anchor", chain, None,
                                f"the anchor file {seal.anchor} holds no checkpoint of chain "
                                f"{chain}, which has keyed events up to seq {stored_last}: "
                                "the chain's id was changed or this is not the installation's "
                                "anchor file"))
    return shown, findings


def _first_of_each(findings: list[Finding]) -> list[Finding]:
    """One finding per kind of anchor mismatch (the latest checkpoint showing it), with how
    many earlier checkpoints show the same."""
    groups: dict[str, list[Finding]] = {}
    for finding in findings:
        groups.setdefault(finding.message.rsplit(": ", 1)[-1], []).append(finding)
    kept = []
    for alike in groups.values():
        first = max(alike, key=lambda f: f.seq or 0)
        more = f" (and {len(alike) - 1} earlier checkpoints alike)" if len(alike) > 1 else ""
        kept.append(Finding(first.kind, first.subject, first.seq, first.message + more))
    return kept


def _read_anchor(seal: AuditSeal) -> tuple[dict[str, Any] | None, AnchorError | None]:
    """Every checkpoint in the anchor file by chain (read before the database, so that each
    was written after a commit the database's snapshot then holds)."""
    try:
        return read_all_checkpoints(seal.anchor), None
    except AnchorError as exc:
        return None, exc


def _index_outbox(session: Session, index: EventIndex) -> None:
    """Events committed with their change but not chained yet (PostgreSQL) join the
    comparison of stored objects, unnumbered."""
    for row in session.execute(select(AuditPending).order_by(AuditPending.id)).scalars():
        index.add(IndexedEvent(None, row.actor, row.kind, row.subject, row.payload))


def verify_chain(store: Store) -> ChainReport:
    """Verify the chain, the anchor and the stored objects (see the module notes); ``ok``
    only when nothing differs.

    The database is read in one snapshot (PostgreSQL: a repeatable-read, read-only
    transaction; SQLite: the write lock), so that writers carrying on meanwhile cause no
    false finding; the anchor file is read before it.
    """
    store.chain_audit(only_if_pending=True)
    seal = store.seal()
    anchored, anchor_error = _read_anchor(seal)
    with store.transaction() as session:
        if store.dialect == "postgresql":
            session.connection(execution_options={"isolation_level": "REPEATABLE READ",
                                                  "postgresql_readonly": True})
        head = session.execute(select(AuditHead).where(AuditHead.id == HEAD_ROW_ID)).scalar_one()
        head_seq, head_hash = head.seq, head.hash
        chain, keyed_from = head.chain_id, head.keyed_from
        checkpoints = [] if anchored is None else anchored.get(chain, [])
        walk = _walk_chain(session, keyed_from, seal.chain_key,
                           {point["seq"] for point in checkpoints})
        _index_outbox(session, walk.index)
        objects = compare_stored_objects(session, walk.index)
    stored_last = walk.stored_last
    findings = list(walk.findings)
    if not findings and head_seq != walk.checked:
        findings.append(Finding("event", None, min(head_seq, walk.checked + 1),
                                f"chain head records seq {head_seq} but the stored events end "
                                f"at seq {walk.checked}: events were removed or the head was "
                                "altered"))
    elif not findings and head_hash != walk.last_hash:
        findings.append(Finding("event", None, head_seq or None,
                                f"chain head hash {head_hash[:12]}… differs from the last "
                                f"stored event's {walk.last_hash[:12]}…: the head was altered"))
    anchor, anchor_findings = _check_anchor(seal, chain, keyed_from, walk, stored_last,
                                            checkpoints, anchor_error)
    findings += anchor_findings + objects.findings
    first = findings[0] if findings else None
    return ChainReport(ok=not findings, events=walk.checked, head_seq=head_seq,
                       first_broken_seq=None if first is None else first.seq,
                       reason=None if first is None else first.message,
                       findings=tuple(findings), anchor=anchor, compared=objects.counts())
