"""The audit chain stays linear and verifiable while two worker processes and the API write."""

from __future__ import annotations

import uuid
from concurrent.futures import ThreadPoolExecutor

import pytest
from sqlalchemy import select, text

from tests.api.support import bearer
from tests.integration.invented_cases import distinct_steady_cases
from tests.integration.support import wait_finished
from tests.integration.worker_processes import parent_of

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
        event.actor = original + " (edited)"
    try:
        report = verify_chain(live_store)
        assert report.ok is False
        assert report.first_broken_seq == seq
    finally:
        with live_store.transaction() as session:
            session.get(AuditEvent, seq).actor = original
    assert verify_chain(live_store).ok is True


AWKWARD_TEXT = ['quote " and backslash \\ and slash /', "tab\tnewline\nreturn\r", "ü ß é ñ 中文",
                "emoji 🧪 and U+2028 \u2028 and NUL-free control \u0001", ""]


def test_the_server_side_append_hashes_what_python_verifies(live_store):
    """On PostgreSQL the server chains the events as the transaction commits (migration 0003);
    the Python verifier must accept what it wrote for text and payloads that JSON escapes, the
    time it stamps must be the text Python's isoformat gives, and nothing stays pending."""
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
    report = audit.verify_chain(live_store)
    assert report.ok, report
    with live_store.transaction() as session:
        written = session.execute(select(AuditEvent).order_by(AuditEvent.seq.desc())
                                  .limit(len(AWKWARD_TEXT))).scalars().all()
    assert sorted(e.subject for e in written) == sorted(AWKWARD_TEXT)
    for event in written:
        assert re.fullmatch(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d\.\d{6}\+00:00", event.at), event.at
        assert event.hash == audit.event_hash(event.prev_hash, event.seq, event.at, event.actor,
                                              event.kind, event.subject, event.payload)
    times = [e.at for e in sorted(written, key=lambda e: e.seq)]
    assert times == sorted(times)
    assert live_store.read_scalar(text("SELECT count(*) FROM audit_pending")) == 0


def test_a_rolled_back_transaction_leaves_no_event_pending_or_chained(live_store):
    from service import audit

    assert live_store.dialect == "postgresql"
    head_before = audit.verify_chain(live_store).head_seq
    with pytest.raises(RuntimeError, match="change refused"):
        with live_store.transaction() as session:
            audit.append_event(session, actor="nobody", kind="token.created", subject="x")
            session.flush()
            audit.write_pending_events(session)  # handed to the server, then rolled back
            raise RuntimeError("change refused")
    assert live_store.read_scalar(text("SELECT count(*) FROM audit_pending")) == 0
    report = audit.verify_chain(live_store)
    assert report.ok and report.head_seq == head_before
