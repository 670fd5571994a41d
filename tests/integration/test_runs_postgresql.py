"""Runs on PostgreSQL, written by its run writer (service.store.run_writer.PostgresqlRunWriter:
the claim, the outcome and POST /v1/runs each one self-committing statement, events chained
after it): the events carry the payloads the interface promises, the same as the SQLite
writer's for the same operations, and the chain verifies."""

from __future__ import annotations

import uuid

from sqlalchemy import select

from schemas.canonical import document_sha256
from service import audit
from service.runs import create_run, execute_run
from tests.integration.invented_cases import single_layer_case


def assert_verifies(store, *subjects, allowed=()):
    """The chain and anchor hold, and nothing is found about ``subjects`` other than the
    findings naming an ``allowed`` fragment. (The session's schema holds other tests' events
    about objects they never stored, so the whole store is not asked to be clean.)"""
    report = audit.verify_chain(store)
    assert report.chain_intact, report.findings
    about = [f.message for f in report.findings if f.subject in subjects
             and not any(fragment in f.message for fragment in allowed)]
    assert about == [], about


def _events(live_store, run_id):
    from service.store.models import AuditEvent

    with live_store.transaction() as session:
        return [(e.kind, e.actor, e.payload) for e in session.execute(
            select(AuditEvent).where(AuditEvent.subject == run_id).order_by(AuditEvent.seq)
        ).scalars()]


def _document():
    return single_layer_case(20.0 + uuid.uuid4().int % 1000 / 100.0, 1.0e-10,
                             tags=[f"it-pg-{uuid.uuid4().hex[:8]}"])


def test_a_run_on_postgresql_writes_its_events_with_their_payloads_and_the_chain_verifies(
        live_store, controlled_engine):  # noqa: F811
    from service.store.models import Case, Run

    assert live_store.dialect == "postgresql"
    queued = create_run(live_store, actor="pia.engineer", document=_document())
    run_id = queued["run_id"]
    assert execute_run(run_id, live_store, actor='worker "quoted" ü') == "succeeded"
    assert execute_run(run_id, live_store, actor="second delivery") == "succeeded"
    assert controlled_engine.calls == 1
    with live_store.transaction() as session:
        case_sha256 = session.get(Case, queued["case_id"]).sha256
        record_sha256 = document_sha256(session.get(Run, run_id).record)
    assert _events(live_store, run_id) == [
        ("run.queued", "pia.engineer",
         {"case_id": queued["case_id"], "case_sha256": case_sha256, "batch_id": None}),
        ("run.started", 'worker "quoted" ü', {"attempt": 1}),
        ("run.finished", 'worker "quoted" ü',
         {"status": "succeeded", "verdict": "pass", "error": None, "attempts": 1,
          "record_sha256": record_sha256}),
    ]
    with live_store.transaction() as session:
        run = session.get(Run, run_id)
        assert (run.status, run.attempts, run.record["run_id"]) == ("succeeded", 1, run_id)
        assert run.started_at is not None and run.finished_at >= run.started_at
    assert_verifies(live_store, run_id, queued["case_id"])


def test_a_failed_run_with_an_awkward_reason_verifies_and_out_of_attempts_ends_failed(
        live_store, controlled_engine):  # noqa: F811
    from service.store.models import Run

    controlled_engine.status = "failed"
    run_id = create_run(live_store, actor="pia.engineer", document=_document())["run_id"]
    assert execute_run(run_id, live_store, actor="w") == "failed"
    finished = _events(live_store, run_id)[-1]
    assert finished[0] == "run.finished" and finished[2]["status"] == "failed"
    assert finished[2]["error"] == "controlled failure" and finished[2]["attempts"] == 1

    stuck = create_run(live_store, actor="pia.engineer", document=_document())["run_id"]
    with live_store.transaction() as session:  # as if three deliveries were lost mid-solve
        run = session.get(Run, stuck)
        run.status, run.attempts = "running", 3
    assert execute_run(stuck, live_store, max_attempts=3, actor="w") == "failed"
    assert "gave up after 3 deliveries" in _events(live_store, stuck)[-1][2]["error"]
    # The test set the stuck run's attempts in the database: verification says so.
    assert_verifies(live_store, run_id, stuck, allowed=[f"run {stuck} attempts: stored 3"])


def test_posting_a_new_case_and_the_same_case_again_stores_it_once_with_its_events(live_store):
    from service.store.models import Case, CaseTag, Run

    document = _document()
    document["tags"] = ["zeta", "alpha", "zeta"]
    first = create_run(live_store, actor="pia.engineer", document=document)
    again = create_run(live_store, actor="olli.engineer", document=dict(document))
    assert again["case_id"] == first["case_id"] and again["run_id"] != first["run_id"]
    case_id = first["case_id"]
    with live_store.transaction() as session:
        case = session.get(Case, case_id)
        assert case.document == document and case.tags == ["alpha", "zeta"]
        assert case.created_by == "pia.engineer"
        tags = session.execute(select(CaseTag.tag).where(CaseTag.case_id == case_id)
                               .order_by(CaseTag.tag)).scalars().all()
        assert tags == ["alpha", "zeta"]
        runs = {r.id: r for r in session.execute(
            select(Run).where(Run.case_id == case_id)).scalars()}
        assert {r.status for r in runs.values()} == {"queued"}
        assert runs[again["run_id"]].submitted_by == "olli.engineer"
    assert _events(live_store, case_id) == [("case.stored", "pia.engineer", {
        "sha256": case.sha256, "title": document["title"], "tags": ["alpha", "zeta"]})]
    for run_id, actor in ((first["run_id"], "pia.engineer"), (again["run_id"], "olli.engineer")):
        assert _events(live_store, run_id) == [("run.queued", actor, {
            "case_id": case_id, "case_sha256": case.sha256, "batch_id": None})]
    from service.store.models import AuditEvent

    with live_store.transaction() as session:
        order = session.execute(select(AuditEvent.kind).where(
            AuditEvent.subject.in_([case_id, first["run_id"]])).order_by(AuditEvent.seq)
        ).scalars().all()
    assert order == ["case.stored", "run.queued"]  # the chain lists the case before its run
    assert_verifies(live_store, case_id, first["run_id"], again["run_id"])


def _operations(live_store, engine, documents) -> list[tuple]:
    """The same operations through the run writer interface; their events, ids replaced by
    their order of appearance (ids are random)."""
    from service.store.models import Run

    names: dict[str, str] = {}

    def name(value):
        return names.setdefault(value, f"id{len(names)}") if isinstance(value, str) else value

    document, other = documents
    queued = create_run(live_store, actor="eng", document=document)
    again = create_run(live_store, actor="eng2", document=dict(document))
    assert execute_run(queued["run_id"], live_store, actor="w") == "succeeded"
    assert execute_run(queued["run_id"], live_store, actor="w2") == "succeeded"
    engine.status = "failed"
    assert execute_run(again["run_id"], live_store, actor="w") == "failed"
    stuck = create_run(live_store, actor="eng", document=other)["run_id"]
    with live_store.transaction() as session:
        session.get(Run, stuck).attempts = 3
    assert execute_run(stuck, live_store, max_attempts=3, actor="w") == "failed"
    events = []
    for run_id in (queued["case_id"], queued["run_id"], again["run_id"], stuck):
        for kind, actor, payload in _events(live_store, run_id):
            payload = {k: (name(v) if k in ("case_id", "case_sha256", "sha256",
                                            "record_sha256") else v)
                       for k, v in payload.items()}
            events.append((name(run_id), kind, actor, payload))
    return events


def test_both_run_writers_write_the_same_events_for_the_same_operations(
        live_store, controlled_engine, tmp_path):  # noqa: F811
    from service.store import Store
    from service.store.migrate import upgrade
    from service.store.run_writer import PostgresqlRunWriter, SessionRunWriter

    sqlite = Store(f"sqlite:///{tmp_path / 'same.sqlite3'}")
    try:
        upgrade(sqlite)
        assert type(live_store.runs) is PostgresqlRunWriter
        assert type(sqlite.runs) is SessionRunWriter
        documents = (_document(), _document())
        on_postgresql = _operations(live_store, controlled_engine, documents)
        controlled_engine.status = "succeeded"
        on_sqlite = _operations(sqlite, controlled_engine, documents)
        assert on_postgresql == on_sqlite
        assert len(on_postgresql) == 9
        report = audit.verify_chain(sqlite)
        assert report.chain_intact and [f.message for f in report.findings] == [
            message for message in (f.message for f in report.findings)
            if "attempts: stored 3" in message], report.findings  # set by _operations
    finally:
        sqlite.dispose()
    assert audit.verify_chain(live_store).chain_intact


def test_the_outcome_chains_the_outbox_it_read_and_retries_when_the_head_moved(
        live_store, controlled_engine, monkeypatch):  # noqa: F811
    """The outcome statement returns the head and the outbox (the run's queued events, a
    leftover, the claim's event and its own) for the chaining; when another chainer moved the
    head meanwhile, it reads again."""
    from sqlalchemy import text

    from service.store import run_writer
    from service.store.audit_chain import checked_event, pend_events

    run_id = create_run(live_store, actor="eng", document=_document())["run_id"]
    with live_store.engine.begin() as connection:  # a leftover, committed and not chained
        pend_events(connection, [checked_event("gone", "token.created", "leftover")])
    attempts = []

    def head_moved_once(connection, head, pending, seal):
        attempts.append([row.kind for row in pending])
        if len(attempts) == 1:
            live_store.chain_audit()  # another chainer comes first
            return False
        raise AssertionError("only the first try goes through here")

    monkeypatch.setattr(run_writer, "try_chaining", head_moved_once)
    assert execute_run(run_id, live_store, actor="w") == "succeeded"
    assert attempts == [["case.stored", "run.queued", "token.created", "run.started",
                         "run.finished"]]
    assert live_store.read_scalar(text("SELECT count(*) FROM audit_pending")) == 0
    assert [kind for kind, _actor, _payload in _events(live_store, run_id)] == [
        "run.queued", "run.started", "run.finished"]
    assert_verifies(live_store, run_id)
