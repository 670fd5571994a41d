"""Audit events written at commit: one append per transaction, as its last statements; a
batch's runs and events created in bulk keep one ``run.queued`` event per run and a verifiable
chain."""

from __future__ import annotations

import hashlib
import json

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from sqlalchemy import event, func, select

from service import audit
from service.batches import start_batch
from service.runs import create_run, execute_run
from service.store.models import AuditEvent, Run
from tests.api.support import make_case


@pytest.fixture
def store(data_dir):  # noqa: F811
    from service.store import default_store

    return default_store()


class StatementLog:
    """The SQL text of every statement the store's engine sends, in order."""

    def __init__(self, engine) -> None:
        self.statements: list[str] = []
        self._engine = engine
        event.listen(engine, "before_cursor_execute", self._record)

    def _record(self, _conn, _cursor, statement, *_rest) -> None:
        self.statements.append(" ".join(statement.split()).upper())

    def close(self) -> None:
        event.remove(self._engine, "before_cursor_execute", self._record)


def _chain(store) -> list[AuditEvent]:
    with store.transaction() as session:
        return list(session.execute(select(AuditEvent).order_by(AuditEvent.seq)).scalars())


def test_a_bulk_batch_has_one_queued_event_per_run_and_the_chain_verifies(store):
    titles = [f"bulk case {n}" for n in range(7)]
    case_ids = [create_run(store, actor="eng", document=make_case(title=t, tags=["bulk"])
                           )["case_id"] for t in titles]
    before = len(_chain(store))
    batch = start_batch(store, actor="admin", tag="bulk")
    assert len(batch["run_ids"]) == len(set(batch["run_ids"])) == 7

    new_events = _chain(store)[before:]
    assert [e.kind for e in new_events] == ["batch.started"] + ["run.queued"] * 7
    assert new_events[0].subject == batch["batch_id"]
    assert new_events[0].payload["cases"] == 7
    queued = new_events[1:]
    assert [e.subject for e in queued] == batch["run_ids"]
    assert [e.seq for e in new_events] == list(range(before + 1, before + 9))
    with store.transaction() as session:
        runs = {r.id: r for r in session.execute(
            select(Run).where(Run.batch_id == batch["batch_id"])).scalars()}
    assert set(runs) == set(batch["run_ids"])
    assert {r.status for r in runs.values()} == {"queued"}
    assert {r.attempts for r in runs.values()} == {0}
    assert all(r.record is None and r.error is None and r.started_at is None
               for r in runs.values())
    for item in queued:
        assert item.payload["case_id"] == runs[item.subject].case_id
        assert item.payload["batch_id"] == batch["batch_id"]
    assert {runs[e.subject].case_id for e in queued} == set(case_ids)
    report = audit.verify_chain(store)
    assert report.ok and report.head_seq == before + 8


def test_an_empty_batch_still_writes_its_started_and_finished_events(store):
    batch = start_batch(store, actor="admin", tag="no-such-tag")
    assert batch["run_ids"] == [] and batch["status"] == "finished"
    kinds = [e.kind for e in _chain(store) if e.subject == batch["batch_id"]]
    assert kinds == ["batch.started", "batch.finished"]
    assert audit.verify_chain(store).ok


def test_the_audit_append_is_the_last_thing_each_run_transaction_does(
        store, controlled_engine):  # noqa: F811
    run_id = create_run(store, actor="eng", document=make_case())["run_id"]
    log = StatementLog(store.engine)
    try:
        assert execute_run(run_id, store) == "succeeded"
    finally:
        log.close()
    heads = [i for i, s in enumerate(log.statements) if "FROM AUDIT_HEAD" in s]
    assert len(heads) == 2, log.statements  # one chaining for the claim, one for the finish
    for head in heads:
        # SQLite: the events go to the outbox after the change, then the head and the outbox
        # are read (one statement), the events chained, the head moved on and the outbox
        # emptied, and nothing else before the commit.
        assert log.statements[head - 1].startswith("INSERT INTO AUDIT_PENDING"), log.statements
        tail = log.statements[head:head + 4]
        assert "JOIN AUDIT_PENDING" in tail[0], tail
        assert tail[1].startswith("INSERT INTO AUDIT_EVENTS"), tail
        assert tail[2].startswith("UPDATE AUDIT_HEAD"), tail
        assert tail[3].startswith("DELETE FROM AUDIT_PENDING"), tail
    # Between the two: the finish transaction's own statements, then its events.
    between = log.statements[heads[0] + 4:heads[1] - 1]
    assert any(s.startswith("UPDATE RUNS") for s in between), between
    assert not any("AUDIT" in s for s in between), between
    assert heads[1] + 4 == len(log.statements)
    kinds = [e.kind for e in _chain(store) if e.subject == run_id]
    assert kinds == ["run.queued", "run.started", "run.finished"]


def test_events_of_one_transaction_are_written_together_and_in_order(store):
    with store.transaction() as session:
        for n in range(3):
            audit.append_event(session, actor="x", kind="case.stored", subject=f"c{n}",
                               payload={"n": n})
        # Queued, not yet written: nothing reaches the table before the commit.
        assert session.execute(select(func.count()).select_from(AuditEvent)).scalar_one() == 0
    events = _chain(store)
    assert [(e.subject, e.payload) for e in events] == [(f"c{n}", {"n": n}) for n in range(3)]
    assert [e.seq for e in events] == [1, 2, 3]
    assert events[1].prev_hash == events[0].hash and events[2].prev_hash == events[1].hash
    assert audit.verify_chain(store).chain_intact


def test_a_rolled_back_transaction_leaves_no_queued_event_behind(store):
    with pytest.raises(RuntimeError):
        with store.transaction() as session:
            audit.append_event(session, actor="x", kind="case.stored", subject="gone")
            raise RuntimeError("refused")
    with store.transaction() as session:
        audit.append_event(session, actor="x", kind="case.stored", subject="kept")
    assert [e.subject for e in _chain(store)] == ["kept"]
    assert audit.verify_chain(store).chain_intact


def test_a_payload_the_chain_cannot_hold_is_refused_at_once(store):
    with pytest.raises(ValueError):
        with store.transaction() as session:
            audit.append_event(session, actor="x", kind="case.stored", subject="nan",
                               payload={"value": float("nan")})
    assert _chain(store) == []


_JSON_LEAF = (st.none() | st.booleans() | st.integers(-2**53, 2**53)
              | st.floats(allow_nan=False, allow_infinity=False) | st.text(max_size=12))
_PAYLOAD = st.dictionaries(st.text(max_size=8), st.recursive(
    _JSON_LEAF, lambda inner: st.lists(inner, max_size=3)
    | st.dictionaries(st.text(max_size=5), inner, max_size=3), max_leaves=8), max_size=4)


@settings(max_examples=200, deadline=None)
@given(actor=st.text(max_size=20), kind=st.sampled_from(audit.EVENT_KINDS),
       subject=st.text(max_size=20), payload=_PAYLOAD, seq=st.integers(1, 10**9))
def test_a_payload_hashes_the_same_after_its_round_trip_through_the_store(actor, kind, subject,
                                                                       payload, seq):
    """The chainer hashes the payload it reads back from the outbox, and the verifier the one
    it reads back from the events; the JSON columns store ``json.dumps`` text, so that round
    trip must leave the canonical text, and so the hash, unchanged."""
    at = "2026-12-02T03:26:15.123456+00:00"
    stored = json.loads(json.dumps(payload))
    body = audit.chain_json({"seq": seq, "at": at, "actor": actor, "kind": kind,
                             "subject": subject, "payload": payload})
    prev = "ab" * 32
    assert hashlib.sha256((prev + body).encode("utf-8")).hexdigest() == audit.event_hash(
        prev, seq, at, actor, kind, subject, stored)
