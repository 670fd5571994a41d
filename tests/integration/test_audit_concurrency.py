"""The audit chain stays linear and verifiable while two worker processes and the API write."""

from __future__ import annotations

import uuid
from concurrent.futures import ThreadPoolExecutor

import pytest
from sqlalchemy import select, text

from service.store.guards import SealedRecordError
from tests.api.support import bearer
from tests.integration.invented_cases import distinct_steady_cases
from tests.integration.support import wait_finished
from tests.integration.worker_processes import parent_of
from tests.tampering import owner_edit

RUNS = 16


def test_chain_verifies_after_concurrent_appends_from_two_workers(live_app, live_store, live_tokens,
                                                                   live_workers):
    from service.store.models import AuditEvent

    tag = f"it-audit-{uuid.uuid4().hex[:8]}"
    cases = distinct_steady_cases(RUNS, tags=[tag])
    engineer = live_tokens["engineer"]

    def submit(case: dict) -> str:
        # Each thread its own test client: the API appends run.queued / case.stored events
        # while the workers append run.started / run.finished ones.
        response = live_app.test_client().post("/v1/runs", json={"case": case},
                                          headers=bearer(engineer))
        assert response.status_code == 202, response.get_json()
        return response.get_json()["run_id"]

    with ThreadPoolExecutor(max_workers=4) as pool:
        run_ids = list(pool.map(submit, cases))
    client = live_app.test_client()
    records = [wait_finished(client, engineer, run_id, timeout=90) for run_id in run_ids]
    assert {r["status"] for r in records} == {"succeeded"}

    # Both worker processes took part (each ran at least one of the runs).
    parents = {parent_of(int(r["provenance"]["worker"].rsplit(":", 1)[1])) for r in records}
    assert parents == {w.pid for w in live_workers}

    response = client.get("/v1/audit/verify", headers=bearer(live_tokens["auditor"]))
    assert response.status_code == 200, response.get_json()
    report = response.get_json()
    assert report["ok"] is True, report
    assert report["first_broken"] is None

    with live_store.transaction() as session:
        seqs = list(session.execute(select(AuditEvent.seq).order_by(AuditEvent.seq)).scalars())
        ours = session.execute(
            select(AuditEvent.kind).where(AuditEvent.subject.in_(run_ids))).scalars().all()
    assert seqs == list(range(1, len(seqs) + 1))  # no gap, no duplicate
    assert report["events"] == len(seqs)
    assert sorted(ours) == sorted(["run.queued", "run.started", "run.finished"] * RUNS)


def test_verify_detects_an_event_changed_behind_the_service(live_app, live_store, live_tokens,
                                                            live_workers):
    """The same check on the same PostgreSQL chain fails once an event is altered (and passes
    again when it is put back), so the check above is one that can fail."""
    from service.audit import verify_chain
    from service.store.models import AuditEvent

    with live_store.transaction() as session:
        event = session.execute(select(AuditEvent).order_by(AuditEvent.seq.desc())
                                .limit(1)).scalar_one()
        seq, original = event.seq, event.actor
    with pytest.raises(SealedRecordError):  # the trigger of migration 0007
        with live_store.transaction() as session:
            session.get(AuditEvent, seq).actor = original + " (edited)"
    edit = text("UPDATE audit_events SET actor = :actor WHERE seq = :seq")
    with owner_edit(live_store, "audit_events") as connection:  # the owner drops the guard
        connection.execute(edit, {"actor": original + " (edited)", "seq": seq})
    try:
        report = verify_chain(live_store)
        assert report.ok is False
        assert report.first_broken_seq == seq
    finally:
        with owner_edit(live_store, "audit_events") as connection:
            connection.execute(edit, {"actor": original, "seq": seq})
    assert verify_chain(live_store).ok is True


AWKWARD_TEXT = ['quote " and backslash \\ and slash /', "tab\tnewline\nreturn\r", "ü ß é ñ 中文",
                "emoji 🧪 and U+2028 \u2028 and NUL-free control \u0001", ""]


def test_events_with_awkward_text_chain_and_verify_and_nothing_stays_pending(live_store):
    """On PostgreSQL a transaction's events wait in the outbox and are chained right after its
    commit (service.store.audit_chain); the chain must verify for text and payloads that JSON
    escapes, times must be the text Python's isoformat gives, and nothing stays pending."""
    import re

    from service import audit
    from service.store.models import AuditEvent

    assert live_store.dialect == "postgresql"
    with live_store.transaction() as session:
        for text_value in AWKWARD_TEXT:
            audit.append_event(session, actor=text_value or "nobody", kind="token.created",
                               subject=text_value, payload={
                                   "text": text_value, "nested": {"list": [1, 2.5, -0.0, None,
                                                                           True, 1e300]},
                                   text_value: "as a key"})
    assert live_store.read_scalar(text("SELECT count(*) FROM audit_pending")) == 0
    report = audit.verify_chain(live_store)
    assert report.chain_intact, report
    with live_store.transaction() as session:
        written = session.execute(select(AuditEvent).order_by(AuditEvent.seq.desc())
                                  .limit(len(AWKWARD_TEXT))).scalars().all()
    assert sorted(e.subject for e in written) == sorted(AWKWARD_TEXT)
    for event in written:
        assert re.fullmatch(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d\.\d{6}\+00:00", event.at), event.at
        assert event.hash == audit.event_hash(event.prev_hash, event.seq, event.at, event.actor,
                                              event.kind, event.subject, event.payload,
                                              live_store.seal().chain_key)
    times = [e.at for e in sorted(written, key=lambda e: e.seq)]
    assert times == sorted(times)


def test_a_rolled_back_transaction_leaves_no_event_pending_or_chained(live_store):
    from service import audit

    assert live_store.dialect == "postgresql"
    head_before = audit.verify_chain(live_store).head_seq
    with pytest.raises(RuntimeError, match="change refused"):
        with live_store.transaction() as session:
            audit.append_event(session, actor="nobody", kind="token.created", subject="x")
            session.flush()
            audit.write_pending_events(session)  # in the outbox, then rolled back
            raise RuntimeError("change refused")
    assert live_store.read_scalar(text("SELECT count(*) FROM audit_pending")) == 0
    report = audit.verify_chain(live_store)
    assert report.chain_intact and report.head_seq == head_before


def test_events_left_in_the_outbox_are_chained_by_the_next_reader(live_store):
    """A writer that dies between its commit and the chaining leaves its events pending; the
    listing (and verification, and the upkeep sweep) chain them first, in outbox order."""
    from service import audit
    from service.store.audit_chain import checked_event, pend_events

    assert live_store.dialect == "postgresql"
    subjects = [f"left-{uuid.uuid4().hex[:8]}-{n}" for n in range(3)]
    with live_store.engine.begin() as connection:  # the writer's commit, and no chaining after it
        pend_events(connection, [checked_event("gone", "token.created", s, {"n": n})
                                 for n, s in enumerate(subjects)])
    assert live_store.read_scalar(text("SELECT count(*) FROM audit_pending")) == 3
    listed = audit.list_events(live_store, kind="token.created", limit=1000)["items"]
    assert [e["subject"] for e in listed if e["subject"] in subjects] == subjects
    assert live_store.read_scalar(text("SELECT count(*) FROM audit_pending")) == 0
    assert audit.verify_chain(live_store).chain_intact


def test_many_writers_at_once_make_one_chain(live_store):
    """Threads writing runs and plain events concurrently, each chaining after its commit:
    one linear chain, every event on it once, nothing pending."""
    from service import audit
    from service.runs import create_run

    cases = distinct_steady_cases(24, tags=[f"it-many-{uuid.uuid4().hex[:8]}"])
    head_before = audit.verify_chain(live_store).head_seq

    def write(case: dict) -> str:
        run_id = create_run(live_store, actor="many", document=case)["run_id"]
        with live_store.transaction() as session:
            audit.append_event(session, actor="many", kind="token.created", subject=run_id)
        return run_id

    with ThreadPoolExecutor(max_workers=6) as pool:
        run_ids = list(pool.map(write, cases))
    assert live_store.read_scalar(text("SELECT count(*) FROM audit_pending")) == 0
    report = audit.verify_chain(live_store)
    assert report.chain_intact, report
    events = audit.list_events(live_store, limit=1000, offset=head_before)["items"]
    by_run = {run_id: sorted(e["kind"] for e in events if e["subject"] == run_id)
              for run_id in run_ids}
    assert all(kinds == ["run.queued", "token.created"] for kinds in by_run.values()), by_run
    assert sum(e["kind"] == "case.stored" for e in events) == len(cases)
    assert report.head_seq == head_before + 3 * len(cases)


def test_a_session_reading_the_chain_chains_the_outbox_first(live_store):
    """A change is visible as committed a moment before its writer chains its events; a
    session's read of audit_events chains first, so it never misses them."""
    from service.store.audit_chain import checked_event, pend_events
    from service.store.models import AuditEvent

    assert live_store.dialect == "postgresql"
    subject = f"read-{uuid.uuid4().hex[:8]}"
    with live_store.engine.begin() as connection:  # committed, not yet chained
        pend_events(connection, [checked_event("w", "token.created", subject)])
    with live_store.transaction() as session:
        kinds = session.execute(select(AuditEvent.kind).where(AuditEvent.subject == subject)
                                ).scalars().all()
    assert kinds == ["token.created"]
    assert live_store.read_scalar(text("SELECT count(*) FROM audit_pending")) == 0
