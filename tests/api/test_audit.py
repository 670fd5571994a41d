"""The audit trail over HTTP: events of every change, verification, tampering."""

from __future__ import annotations

from sqlalchemy import text

from tests.api.support import SIGN, bearer, make_case
from tests.tampering import owner_edit


def test_every_change_leaves_an_event(client, tokens, controlled_engine):
    run = client.post("/v1/runs", json={"case": make_case()},
                      headers=bearer(tokens["engineer"])).get_json()
    client.post(f"/v1/runs/{run['run_id']}/signoffs",
                json={"decision": "approved", **SIGN, "comment": "ok"},
                headers=bearer(tokens["reviewer"]))
    client.post("/v1/batches", json={"all": True}, headers=bearer(tokens["admin"]))
    events = client.get("/v1/audit?limit=500", headers=bearer(tokens["auditor"])).get_json()
    kinds = [e["kind"] for e in events["items"]]
    assert kinds[:8] == ["user.created", "token.created"] * 4
    assert kinds[8:] == ["case.stored", "run.queued", "run.started", "run.finished",
                         "signoff.recorded", "batch.started", "run.queued", "run.started",
                         "run.finished", "batch.finished"]
    seqs = [e["seq"] for e in events["items"]]
    assert seqs == list(range(1, len(seqs) + 1))
    for before, after in zip(events["items"], events["items"][1:], strict=False):
        assert after["prev_hash"] == before["hash"]
    only_runs = client.get(f"/v1/audit?subject={run['run_id']}",
                           headers=bearer(tokens["admin"])).get_json()
    assert [e["kind"] for e in only_runs["items"]] == ["run.queued", "run.started",
                                                       "run.finished", "signoff.recorded"]
    page = client.get("/v1/audit?limit=3&offset=3", headers=bearer(tokens["admin"])).get_json()
    assert [e["seq"] for e in page["items"]] == [4, 5, 6]
    creations = [e for e in events["items"] if e["kind"] in ("user.created", "token.created")]
    assert {e["actor"] for e in creations} == {"os:test"}  # the acting person, never "cli"


def test_verify_accepts_an_intact_chain(client, tokens):
    client.post("/v1/cases", json=make_case(), headers=bearer(tokens["engineer"]))
    result = client.get("/v1/audit/verify", headers=bearer(tokens["auditor"])).get_json()
    assert {k: result[k] for k in ("ok", "events", "head_seq", "first_broken", "findings")} \
        == {"ok": True, "events": 9, "head_seq": 9, "first_broken": None, "findings": []}
    assert result["anchor"]["seq"] == 9 and result["anchor"]["checkpoints"] >= 1
    assert result["compared"]["cases"] == 1


def test_verify_names_the_edited_event(client, store, tokens):
    for i in range(3):
        client.post("/v1/cases", json=make_case(title=f"t{i}"), headers=bearer(tokens["engineer"]))
    with owner_edit(store, "audit_events") as connection:
        connection.execute(text("UPDATE audit_events SET payload = :p WHERE seq = 6"),
                           {"p": '{"sha256": "forged", "title": "t1", "tags": []}'})
    result = client.get("/v1/audit/verify", headers=bearer(tokens["auditor"])).get_json()
    assert result["ok"] is False
    assert result["first_broken"]["seq"] == 6
    assert "changed" in result["first_broken"]["reason"]


def test_verify_names_a_removed_event(client, store, tokens):
    for i in range(3):
        client.post("/v1/cases", json=make_case(title=f"t{i}"), headers=bearer(tokens["engineer"]))
    with owner_edit(store, "audit_events") as connection:
        connection.execute(text("DELETE FROM audit_events WHERE seq = 5"))
    result = client.get("/v1/audit/verify", headers=bearer(tokens["auditor"])).get_json()
    assert result["first_broken"]["seq"] == 5
    assert "missing" in result["first_broken"]["reason"]


def test_verify_notices_a_truncated_tail(client, store, tokens):
    client.post("/v1/cases", json=make_case(), headers=bearer(tokens["engineer"]))
    with owner_edit(store, "audit_events") as connection:
        connection.execute(text("DELETE FROM audit_events WHERE seq = 9"))
    result = client.get("/v1/audit/verify", headers=bearer(tokens["auditor"])).get_json()
    assert result["ok"] is False and result["first_broken"]["seq"] == 9
    assert "head" in result["first_broken"]["reason"]
