"""Checks of the store shared by the SQLite (unit) and PostgreSQL (integration) tests: the
seal triggers of migration 0004, and chains written before it verifying after it."""

from __future__ import annotations

import json
import uuid
from datetime import UTC, datetime

import pytest
from sqlalchemy import text
from sqlalchemy.exc import DBAPIError

from tests.tampering import owner_edit

#: Revision before the outbox and the seal triggers.
OLD_REVISION = "0003_audit_chained_at_commit"

DIRECT_CHANGES = [
    ("UPDATE runs SET record = :record WHERE id = :run_id", {"record": '{"edited": true}'}),
    ("UPDATE runs SET status = 'failed' WHERE id = :run_id", {}),
    ("UPDATE signoffs SET comment = 'edited later' WHERE run_id = :run_id", {}),
    ("DELETE FROM signoffs WHERE run_id = :run_id", {}),
    ("DELETE FROM runs WHERE id = :run_id", {}),
]


def insert_run(store, *, signed: bool) -> str:
    """A succeeded run of a new case, with a sign-off when ``signed``; its id (plain SQL, so
    that nothing of the service's own code stands between the test and the database)."""
    case_id, run_id = str(uuid.uuid4()), str(uuid.uuid4())
    now = datetime.now(UTC).replace(tzinfo=None)
    with store.engine.begin() as connection:
        connection.execute(text(
            "INSERT INTO cases (id, sha256, document, title, tags, created_at, created_by) "
            "VALUES (:id, :sha, '{}', 't', '[]', :now, 'x')"),
            {"id": case_id, "sha": uuid.uuid4().hex * 2, "now": now})
        connection.execute(text(
            "INSERT INTO runs (id, case_id, status, record, submitted_by, created_at, "
            "attempts) VALUES (:id, :case_id, 'succeeded', '{\"verdict\": \"pass\"}', 'eng', "
            ":now, 1)"), {"id": run_id, "case_id": case_id, "now": now})
        if signed:
            connection.execute(text(
                "INSERT INTO signoffs (run_id, reviewer, decision, comment, at) "
                "VALUES (:run_id, 'rev', 'approved', 'ok', :now)"),
                {"run_id": run_id, "now": now})
    return run_id


def check_direct_changes_of_a_signed_run_are_refused(store) -> None:
    """Every direct UPDATE/DELETE of a signed-off run or its sign-off raises, through a plain
    connection and through a store transaction (as SealedRecordError), and changes nothing;
    the same statements on an unsigned run go through (so the refusal is the seal's)."""
    from service.store.guards import SealedRecordError

    run_id = insert_run(store, signed=True)
    before = _row(store, run_id)
    for statement, params in DIRECT_CHANGES:
        with pytest.raises(DBAPIError, match="sealed record"):
            with store.engine.begin() as connection:
                connection.execute(text(statement), {"run_id": run_id, **params})
        with pytest.raises(SealedRecordError):
            with store.transaction() as session:
                session.execute(text(statement), {"run_id": run_id, **params})
    assert _row(store, run_id) == before

    unsigned = insert_run(store, signed=False)
    for statement, params in DIRECT_CHANGES[:2] + DIRECT_CHANGES[-1:]:
        with store.engine.begin() as connection:
            connection.execute(text(statement), {"run_id": unsigned, **params})
    assert _row(store, unsigned) == (None, None)


def _row(store, run_id: str):
    with store.engine.connect() as connection:
        run = connection.execute(text("SELECT status, record FROM runs WHERE id = :id"),
                                 {"id": run_id}).first()
        signoff = connection.execute(text("SELECT comment FROM signoffs WHERE run_id = :id"),
                                     {"id": run_id}).first()
    return (None if run is None else (run[0], str(run[1])),
            None if signoff is None else signoff[0])


def write_old_chain(store, events: int) -> None:
    """Write ``events`` events the way revision 0003 did: on PostgreSQL into its
    ``audit_pending`` with the body pieces, chained by its server trigger; on SQLite straight
    into ``audit_events``, hashed by the client."""
    from service.audit import chain_json, event_hash

    with store.engine.begin() as connection:
        for n in range(events):
            actor, kind, subject = f'old "writer" ü {n}', "token.created", f"old-{n}"
            payload = {"n": n, "text": "tab\there", "nested": [1.5, None, True]}
            if store.dialect == "postgresql":
                # Revision 0003's wire format: the canonical body in three pieces around the
                # time and the number, which its trigger filled in under the head lock.
                connection.execute(text(
                    "INSERT INTO audit_pending (actor, kind, subject, payload, before_at, "
                    "before_seq, after_seq) VALUES (:actor, :kind, :subject, :payload, "
                    ":before_at, :before_seq, :after_seq)"), {
                        "actor": actor, "kind": kind, "subject": subject,
                        "payload": chain_json(payload),
                        "before_at": f'{{"actor":{chain_json(actor)},"at":"',
                        "before_seq": f'","kind":{chain_json(kind)},"payload":'
                                      f'{chain_json(payload)},"seq":',
                        "after_seq": f',"subject":{chain_json(subject)}}}'})
                continue
            seq, prev = connection.execute(text("SELECT seq, hash FROM audit_head")).one()
            at = datetime.now(UTC).isoformat(timespec="microseconds")
            digest = event_hash(prev, seq + 1, at, actor, kind, subject, payload)
            connection.execute(text(
                "INSERT INTO audit_events (seq, at, actor, kind, subject, payload, prev_hash, "
                "hash) VALUES (:seq, :at, :actor, :kind, :subject, :payload, :prev, :hash)"),
                {"seq": seq + 1, "at": at, "actor": actor, "kind": kind, "subject": subject,
                 "payload": json.dumps(payload), "prev": prev, "hash": digest})
            connection.execute(text("UPDATE audit_head SET seq = :seq, hash = :hash"),
                               {"seq": seq + 1, "hash": digest})


def check_an_old_chain_verifies_after_the_upgrade(store) -> None:
    """``store`` is at :data:`OLD_REVISION`: a chain written then verifies after the upgrade,
    and new events continue it."""
    from service import audit
    from service.store.migrate import current_revision, head_revision, upgrade

    assert current_revision(store) == OLD_REVISION
    write_old_chain(store, 4)
    upgrade(store)
    assert current_revision(store) == head_revision()
    report = audit.verify_chain(store)
    assert report.chain_intact and report.events == 4, report
    with store.transaction() as session:
        audit.append_event(session, actor="new", kind="token.created", subject="new-0",
                           payload={"after": "upgrade"})
    report = audit.verify_chain(store)
    assert report.chain_intact and report.events == 5, report
    # The same chain with an old event changed does not verify (the check can fail).
    with owner_edit(store, "audit_events") as connection:
        connection.execute(text("UPDATE audit_events SET actor = 'edited' WHERE seq = 2"))
    report = audit.verify_chain(store)
    assert not report.ok and report.first_broken_seq == 2
