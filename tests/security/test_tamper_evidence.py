"""Tamper evidence against someone with database access (issue #13, part 4).

Each test edits the store directly, as someone holding the database (and its owner's rights,
so the triggers are no obstacle: ``tests.tampering.owner_edit``) but neither the server's key
nor the anchor file would, and requires both ``GET /v1/audit/verify`` and ``fluxproof audit
verify`` to fail with a message naming what differs. Before revision 0007 every one of these
edits passed verification: the events' hashes were never compared with the stored rows, and
the chain was unkeyed and anchored nowhere. Both databases: SQLite always, PostgreSQL at
127.0.0.1:5432 (database ``test``, a schema of the test's own; skipped when it is missing,
a failure when ``CI`` is set).
"""

from __future__ import annotations

import json
import threading
from collections.abc import Iterator
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path
from typing import Any

import pytest
from click.testing import CliRunner
from sqlalchemy import text

from service.app import create_app, shutdown_app
from service.audit import event_hash
from service.cli import main
from service.store import reset_default_store
from service.store.guards import SealedRecordError
from tests.api.support import BASE_CASE, app_keys, bearer, make_case, person_token, signoff_body
from tests.integration.real_services import PostgresSchema, ServiceMissing, postgres_user
from tests.integration.service_gate import unavailable
from tests.tampering import owner_edit

NAMES = {"engineer": "tess.tamper-engineer", "reviewer": "rory.tamper-reviewer",
         "auditor": "ada.tamper-auditor"}


@pytest.fixture(params=["sqlite", "postgresql"])
def installation(request, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
                 ) -> Iterator[dict[str, Any]]:
    """An app with a signed-off run, an unsigned run and their case, on either database; the
    command line sees the same installation through the environment."""
    for key in list(__import__("os").environ):
        if key.startswith("FLUXPROOF_"):
            monkeypatch.delenv(key)
    data = tmp_path / "data"
    config: dict[str, Any] = {"TESTING": True, "DATA_DIR": str(data), "DISPATCH": "inline"}
    schema = None
    if request.param == "postgresql":
        try:
            postgres_user()
        except (ServiceMissing, ImportError) as exc:
            unavailable(str(exc), "PostgreSQL")
        schema = PostgresSchema.create(prefix="fluxproof_tamper")
        config.update(DATABASE_URL=schema.url, **app_keys(tmp_path))
    for name, value in config.items():
        if name != "TESTING":
            monkeypatch.setenv(f"FLUXPROOF_{name}", str(value))
    reset_default_store()
    app = create_app(config)
    store = app.extensions["fluxproof"].store
    tokens = {role: person_token(store, role, name) for role, name in NAMES.items()}
    client = app.test_client()
    signed = client.post("/v1/runs", json={"case": BASE_CASE},
                         headers=bearer(tokens["engineer"])).get_json()["run_id"]
    unsigned = client.post("/v1/runs", json={"case": make_case(title="second")},
                           headers=bearer(tokens["engineer"])).get_json()["run_id"]
    answer = client.post(f"/v1/runs/{signed}/signoffs", json=signoff_body("approved"),
                         headers=bearer(tokens["reviewer"]))
    assert answer.status_code == 201, answer.get_json()
    case_id = client.get(f"/v1/runs/{signed}", headers=bearer(tokens["engineer"])
                         ).get_json()["case_id"]
    try:
        yield {"app": app, "store": store, "tokens": tokens, "signed": signed,
               "unsigned": unsigned, "case_id": case_id, "backend": request.param}
    finally:
        shutdown_app(app)
        reset_default_store()
        if schema is not None:
            schema.drop()


def verify_both(installation: dict[str, Any]) -> tuple[dict[str, Any], Any]:
    """The answer of ``GET /v1/audit/verify`` and the result of ``fluxproof audit verify``."""
    response = installation["app"].test_client().get(
        "/v1/audit/verify", headers=bearer(installation["tokens"]["auditor"]))
    assert response.status_code == 200
    reset_default_store()
    cli = CliRunner().invoke(main, ["audit", "verify"])
    return response.get_json(), cli


def assert_caught(installation: dict[str, Any], *fragments: str) -> dict[str, Any]:
    """Both interfaces report the store broken, one finding containing every fragment."""
    answer, cli = verify_both(installation)
    assert answer["ok"] is False, answer
    messages = [f["message"] for f in answer["findings"]]
    assert any(all(fragment in m for fragment in fragments) for m in messages), messages
    assert cli.exit_code == 1, cli.output
    assert any(all(fragment in line for fragment in fragments)
               for line in cli.output.splitlines()), cli.output
    return answer


def test_an_untouched_store_verifies_against_its_anchor(installation):
    answer, cli = verify_both(installation)
    assert answer["ok"] is True and answer["findings"] == [], answer
    assert answer["compared"] == {"cases": 2, "runs": 2, "records": 2,
                                  "records_without_hash": 0, "signoffs": 1}
    anchor = answer["anchor"]
    assert anchor["seq"] == answer["head_seq"] and anchor["checkpoints"] >= 1
    assert cli.exit_code == 0, cli.output
    assert f"latest seq {anchor['seq']}" in cli.output and anchor["file"] in cli.output
    assert "audit chain intact" in cli.output


def _record_with_changed_figure(store, run_id: str) -> str:
    with store.engine.begin() as connection:
        record = connection.execute(text("SELECT record FROM runs WHERE id = :r"),
                                    {"r": run_id}).scalar_one()
    record = json.loads(record) if isinstance(record, str) else record
    name = next(iter(record["quantities"]))
    record["quantities"][name]["value"] *= 1.5
    return json.dumps(record)


def test_a_records_figures_edited_in_the_database(installation):
    store, run_id = installation["store"], installation["unsigned"]
    edited = _record_with_changed_figure(store, run_id)
    with store.engine.begin() as connection:
        connection.execute(text("UPDATE runs SET record = :rec WHERE id = :r"),
                           {"rec": edited, "r": run_id})
    assert_caught(installation, f"run {run_id} record sha256", "changed after it was stored")


def test_a_signed_records_figures_edited_with_the_seal_switched_off(installation):
    store, run_id = installation["store"], installation["signed"]
    edited = _record_with_changed_figure(store, run_id)
    with pytest.raises(SealedRecordError):
        with store.transaction() as session:
            session.execute(text("UPDATE runs SET record = :rec WHERE id = :r"),
                            {"rec": edited, "r": run_id})
    with owner_edit(store, "runs") as connection:
        connection.execute(text("UPDATE runs SET record = :rec WHERE id = :r"),
                           {"rec": edited, "r": run_id})
    assert_caught(installation, f"sealed record of run {run_id}",
                  "changed after it was signed off")


def test_a_signoffs_decision_edited(installation):
    store, run_id = installation["store"], installation["signed"]
    with owner_edit(store, "signoffs") as connection:
        connection.execute(text("UPDATE signoffs SET decision = 'rejected' WHERE run_id = :r"),
                           {"r": run_id})
    assert_caught(installation, f"sign-off of run {run_id} decision", "'rejected'",
                  "'approved'")


def test_a_case_document_edited(installation):
    store, case_id = installation["store"], installation["case_id"]
    document = json.loads(json.dumps(BASE_CASE))
    document["layers"][0]["thickness"] = "500 um"
    with store.engine.begin() as connection:
        connection.execute(text("UPDATE cases SET document = :d WHERE id = :c"),
                           {"d": json.dumps(document), "c": case_id})
    assert_caught(installation, f"case {case_id} document sha256",
                  "changed after it was stored")


def _events(connection) -> list[Any]:
    return list(connection.execute(text(
        "SELECT seq, at, actor, kind, subject, payload, prev_hash, hash FROM audit_events "
        "ORDER BY seq")))


def _payload(value: Any) -> dict[str, Any]:
    return json.loads(value) if isinstance(value, str) else value


def test_the_last_events_deleted_and_the_head_moved_back(installation):
    store = installation["store"]
    with owner_edit(store, "audit_events") as connection:
        events = _events(connection)
        keep = events[-3]
        connection.execute(text("DELETE FROM audit_events WHERE seq > :s"), {"s": keep.seq})
        connection.execute(text("UPDATE audit_head SET seq = :s, hash = :h"),
                           {"s": keep.seq, "h": keep.hash})
    answer = assert_caught(installation, f"anchor records {events[-1].seq} events",
                           f"ends at seq {keep.seq}", "deleted or the head moved back")
    assert answer["anchor"]["seq"] == events[-1].seq


@pytest.mark.parametrize("claim_legacy", [False, True],
                         ids=["rehashed", "rehashed-as-if-before-0007"])
def test_a_whole_chain_rewritten_without_the_key(installation, claim_legacy):
    """The sign-off's decision changed in its row and in its event, and every hash recomputed
    (plain SHA-256: the key is not in the database); optionally ``keyed_from`` moved past the
    head so that the whole chain claims to predate the keyed rule."""
    store, run_id = installation["store"], installation["signed"]
    with owner_edit(store, "audit_events", "signoffs") as connection:
        connection.execute(text("UPDATE signoffs SET decision = 'rejected' WHERE run_id = :r"),
                           {"r": run_id})
        prev = "0" * 64
        for event in _events(connection):
            payload = _payload(event.payload)
            if event.kind == "signoff.recorded" and event.subject == run_id:
                payload["decision"] = "rejected"
            digest = event_hash(prev, event.seq, event.at, event.actor, event.kind,
                                event.subject, payload)
            connection.execute(text("UPDATE audit_events SET payload = :p, prev_hash = :v, "
                                    "hash = :h WHERE seq = :s"),
                               {"p": json.dumps(payload), "v": prev, "h": digest,
                                "s": event.seq})
            prev, last = digest, event.seq
        connection.execute(text("UPDATE audit_head SET hash = :h" + (
            ", keyed_from = :k" if claim_legacy else "")), {"h": prev, "k": last + 1})
    if claim_legacy:
        answer = assert_caught(installation, "anchor checkpoint", "the chain was rewritten")
        assert any("keyed from seq" in f["message"] for f in answer["findings"])
    else:
        assert_caught(installation, "event seq 1", "not the server key's HMAC",
                      "re-hashed without the key")


def test_a_checkpoint_edited_in_the_anchor_file(installation):
    """The anchor file's own lines are signed: moving a checkpoint back is caught too."""
    path = Path(installation["app"].extensions["fluxproof"].store.seal().anchor)
    lines = path.read_text().splitlines()
    last = json.loads(lines[-1])
    last["seq"] -= 1
    path.write_text("\n".join([*lines[:-1], json.dumps(last)]) + "\n")
    assert_caught(installation, "its signature is not the server key's")


def test_audit_rows_refuse_update_and_delete_on_postgresql(installation):
    if installation["backend"] != "postgresql":
        pytest.skip("the audit rows' trigger is PostgreSQL's (migration 0007)")
    store = installation["store"]
    for statement in ("UPDATE audit_events SET actor = 'mallory' WHERE seq = 1",
                      "DELETE FROM audit_events WHERE seq = (SELECT max(seq) FROM audit_events)"):
        with pytest.raises(SealedRecordError, match="audit event"):
            with store.transaction() as session:
                session.execute(text(statement))
    assert verify_both(installation)[0]["ok"] is True


def test_a_run_deleted_and_a_run_forged(installation):
    """Completeness both ways: an event whose run is gone, a run that no event announced."""
    store, gone = installation["store"], installation["unsigned"]
    with store.engine.begin() as connection:
        connection.execute(text("DELETE FROM run_blocks WHERE run_id = :r"), {"r": gone})
        connection.execute(text("DELETE FROM runs WHERE id = :r"), {"r": gone})
        connection.execute(text(
            "INSERT INTO runs (id, case_id, status, submitted_by, created_at, attempts) "
            "VALUES ('forged-run', :c, 'queued', 'mallory', :t, 0)"),
            {"c": installation["case_id"], "t": "2026-12-05 00:00:00"})
    assert_caught(installation, f"is about run {gone}, which is not stored")
    assert_caught(installation, "run forged-run has no run.queued event")


def test_verification_while_runs_are_written_finds_nothing(installation):
    """Writers carrying on during a verification cause no false finding: the database is
    read in one snapshot, events committed but not chained yet count, and the anchor file is
    read first (a checkpoint written meanwhile is never ahead of what is read)."""
    from service import audit
    from service.runs import create_run, execute_run

    store, reports, done = installation["store"], [], threading.Event()

    def write(n: int) -> None:
        run_id = create_run(store, actor=NAMES["engineer"],
                            document=make_case(title=f"concurrent {n}"))["run_id"]
        execute_run(run_id, store, actor="worker")

    def verify() -> None:
        while not done.is_set():
            reports.append(audit.verify_chain(store))

    checker = threading.Thread(target=verify)
    checker.start()
    try:
        with ThreadPoolExecutor(max_workers=3) as pool:
            list(pool.map(write, range(9)))
    finally:
        done.set()
        checker.join()
    reports.append(audit.verify_chain(store))
    assert len(reports) >= 2
    assert [f.message for r in reports for f in r.findings] == []
    assert reports[-1].compared["runs"] == 11
