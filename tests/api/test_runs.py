"""Runs: queueing, the record, the report, sign-off, four-eyes, sealed records."""

from __future__ import annotations

import pytest

from service.store.guards import SealedRecordError
from tests.api.support import SIGN, bearer, count_rows, make_case, wait_for_run

RECORD_KEYS = {"case_sha256", "status", "verdict", "quantities", "series", "methods", "checks",
               "warnings", "provenance"}


def submit(client, tokens, case=None):
    response = client.post("/v1/runs", json={"case": case or make_case()},
                           headers=bearer(tokens["engineer"]))
    assert response.status_code == 202, response.get_json()
    return response


def test_submit_returns_202_with_location_and_the_record_follows(client, tokens):
    response = submit(client, tokens)
    body = response.get_json()
    assert body["status"] == "queued"
    assert response.headers["Location"] == f"/v1/runs/{body['run_id']}"
    record = client.get(response.headers["Location"], headers=bearer(tokens["reviewer"]))
    record = record.get_json()
    assert record["run_id"] == body["run_id"]
    assert record["case_id"] == body["case_id"]
    assert record["submitted_by"] == "erin.engineer"
    assert record["status"] in ("succeeded", "failed")
    assert record["finished_at"] and record["created_at"] and record["started_at"]
    assert record["signoffs"] == []


def test_real_engine_record_has_the_result_document(client, tokens):
    """End to end with the real engine: the stored record is the engine's result document."""
    import schemas

    case = make_case()
    run_id = submit(client, tokens, case).get_json()["run_id"]
    record = client.get(f"/v1/runs/{run_id}", headers=bearer(tokens["auditor"])).get_json()
    assert RECORD_KEYS <= set(record)
    assert record["case_sha256"] == schemas.case_sha256(case)
    assert record["status"] == "succeeded", record.get("error")
    assert record["verdict"] in ("pass", "fail")
    assert "flux_outer" in record["quantities"]


def test_run_of_a_stored_case_by_id(client, tokens, controlled_engine):
    stored = client.post("/v1/cases", json=make_case(), headers=bearer(tokens["engineer"]))
    case_id = stored.get_json()["case_id"]
    response = client.post("/v1/runs", json={"case_id": case_id},
                           headers=bearer(tokens["engineer"]))
    assert response.status_code == 202
    assert response.get_json()["case_id"] == case_id
    history = client.get(f"/v1/cases/{case_id}/runs", headers=bearer(tokens["auditor"]))
    assert [r["run_id"] for r in history.get_json()["items"]] == [response.get_json()["run_id"]]
    assert history.get_json()["items"][0]["status"] == "succeeded"


def test_engine_failure_is_a_failed_run_with_the_reason(client, tokens, monkeypatch):
    import worker.engine

    def broken(case):
        raise ZeroDivisionError("solver divided by zero")

    monkeypatch.setattr(worker.engine, "check_case", broken)
    run_id = submit(client, tokens).get_json()["run_id"]
    record = client.get(f"/v1/runs/{run_id}", headers=bearer(tokens["engineer"])).get_json()
    assert record["status"] == "failed"
    assert "ZeroDivisionError: solver divided by zero" in record["error"]


@pytest.mark.parametrize("dispatch_mode", ["embedded"])
def test_embedded_executor_runs_in_the_background(client, tokens, controlled_engine):
    run_ids = [submit(client, tokens, make_case(title=f"embedded {i}")).get_json()["run_id"]
               for i in range(4)]
    for run_id in run_ids:
        record = wait_for_run(client, tokens["engineer"], run_id)
        assert record["status"] == "succeeded"
    assert controlled_engine.calls == 4


def test_report_is_html_with_every_section(client, tokens, controlled_engine):
    case = make_case(title="Report <check> & escaping")
    run_id = submit(client, tokens, case).get_json()["run_id"]
    response = client.get(f"/v1/runs/{run_id}/report", headers=bearer(tokens["auditor"]))
    assert response.status_code == 200
    assert response.mimetype == "text/html"
    html = response.get_data(as_text=True)
    assert "Report &lt;check&gt; &amp; escaping" in html
    assert "<check>" not in html
    for heading in ("Inputs", "Quantities", "Checks", "Methods", "Warnings", "Provenance",
                    "Sign-off"):
        assert f"<h2>{heading}</h2>" in html
    assert "50 um" in html and "5e-05" in html  # as given and in SI
    assert "flux_outer" in html and "test caution" in html
    assert "service test fixture" in html


def test_signoff_by_a_second_person_seals_the_record(client, store, tokens, controlled_engine):
    run_id = submit(client, tokens).get_json()["run_id"]
    response = client.post(f"/v1/runs/{run_id}/signoffs",
                           json={"decision": "approved", **SIGN, "comment": "figures checked"},
                           headers=bearer(tokens["reviewer"]))
    assert response.status_code == 201, response.get_json()
    body = response.get_json()
    assert body["reviewer"] == "rafael.reviewer" and body["decision"] == "approved"
    record = client.get(f"/v1/runs/{run_id}", headers=bearer(tokens["auditor"])).get_json()
    assert record["signoffs"][0]["comment"] == "figures checked"
    again = client.post(f"/v1/runs/{run_id}/signoffs",
                        json={"decision": "rejected", **SIGN, "comment": "changed my mind"},
                        headers=bearer(tokens["reviewer"]))
    assert again.status_code == 409
    assert again.mimetype == "application/problem+json"
    report = client.get(f"/v1/runs/{run_id}/report", headers=bearer(tokens["auditor"]))
    assert "figures checked" in report.get_data(as_text=True)


def test_four_eyes_the_submitter_cannot_sign_off(client, store, tokens, controlled_engine):
    from service.people import change_user

    run_id = submit(client, tokens).get_json()["run_id"]
    # The submitter becomes a reviewer: the same person, whose token now carries that role.
    change_user(store, "erin.engineer", role="reviewer", actor="adi.admin")
    same_person_reviewer = tokens["engineer"]
    before = count_rows(store)
    response = client.post(f"/v1/runs/{run_id}/signoffs",
                           json={"decision": "approved", **SIGN, "comment": "my own work"},
                           headers=bearer(same_person_reviewer))
    assert response.status_code == 403
    assert response.mimetype == "application/problem+json"
    document = response.get_json()
    assert "four-eyes" in document["detail"] and document["type"].endswith("four-eyes")
    assert count_rows(store) == before


def test_only_succeeded_runs_can_be_signed_off(client, store, tokens, controlled_engine):
    controlled_engine.status = "failed"
    run_id = submit(client, tokens).get_json()["run_id"]
    response = client.post(f"/v1/runs/{run_id}/signoffs",
                           json={"decision": "approved", **SIGN, "comment": "x"},
                           headers=bearer(tokens["reviewer"]))
    assert response.status_code == 409
    assert "succeeded" in response.get_json()["detail"]


@pytest.mark.parametrize("body,path", [
    ({"decision": "maybe", **SIGN, "comment": "x"}, "decision"),
    ({"decision": "approved", **SIGN}, "comment"),
    ({"decision": "approved", **SIGN, "comment": "x", "stamp": True}, "stamp"),
])
def test_signoff_body_is_validated(client, store, tokens, controlled_engine, body, path):
    run_id = submit(client, tokens).get_json()["run_id"]
    before = count_rows(store)
    response = client.post(f"/v1/runs/{run_id}/signoffs", json=body,
                           headers=bearer(tokens["reviewer"]))
    assert response.status_code == 422
    assert [e["path"] for e in response.get_json()["errors"]] == [path]
    assert count_rows(store) == before


def test_signed_records_never_change(client, store, tokens, controlled_engine):
    from service.runs import execute_run
    from service.store.models import Run, Signoff

    run_id = submit(client, tokens).get_json()["run_id"]
    client.post(f"/v1/runs/{run_id}/signoffs",
                json={"decision": "approved", **SIGN, "comment": "ok"},
                headers=bearer(tokens["reviewer"]))
    before = client.get(f"/v1/runs/{run_id}", headers=bearer(tokens["auditor"])).get_json()

    # Re-delivery of the run: the domain layer leaves it alone.
    assert execute_run(run_id, store) == "succeeded"
    # Direct edits through the ORM are refused by the store guard, and roll back.
    with pytest.raises(SealedRecordError):
        with store.transaction() as session:
            session.get(Run, run_id).record = {"quantities": {}}
    with pytest.raises(SealedRecordError):
        with store.transaction() as session:
            session.get(Run, run_id).status = "failed"
    with pytest.raises(SealedRecordError):
        with store.transaction() as session:
            signoff = session.query(Signoff).filter_by(run_id=run_id).one()
            signoff.comment = "edited later"
    with pytest.raises(SealedRecordError):
        with store.transaction() as session:
            session.delete(session.query(Signoff).filter_by(run_id=run_id).one())
    after = client.get(f"/v1/runs/{run_id}", headers=bearer(tokens["auditor"])).get_json()
    assert after == before


def test_unsigned_records_can_still_be_finished_by_the_domain(store, client, tokens,
                                                             controlled_engine):
    """The guard does not get in the way of normal execution (the control for the test above)."""
    from service.store.models import Run

    run_id = submit(client, tokens).get_json()["run_id"]
    with store.transaction() as session:
        session.get(Run, run_id).error = "annotated before sign-off"
    record = client.get(f"/v1/runs/{run_id}", headers=bearer(tokens["auditor"])).get_json()
    assert record["error"] == "annotated before sign-off"


def test_a_running_monte_carlo_run_reports_its_progress(client, store, tokens,
                                                        controlled_engine):
    from service.store.blocks import write_progress
    from service.store.models import Run

    run_id = submit(client, tokens).get_json()["run_id"]
    wait_for_run(client, tokens["engineer"], run_id)
    progress = {"trials": 30_000, "blocks": 3, "max_trials": 1_000_000, "max_blocks": 100,
                "updated_at": "2026-12-06T10:00:00+00:00"}
    with store.transaction() as session:  # as while its Monte Carlo blocks are merged
        run = session.get(Run, run_id)
        run.status, run.record, run.finished_at = "running", None, None
    write_progress(store, run_id, progress)

    headers = bearer(tokens["auditor"])
    document = client.get(f"/v1/runs/{run_id}", headers=headers).get_json()
    assert document["status"] == "running"
    assert document["progress"] == progress
    listed = client.get(f"/v1/cases/{document['case_id']}/runs", headers=headers).get_json()
    assert [item.get("progress") for item in listed["items"]] == [progress]

    with store.transaction() as session:  # finished: the record says it all
        session.get(Run, run_id).status = "failed"
    write_progress(store, run_id, dict(progress, blocks=4))  # not written once finished
    document = client.get(f"/v1/runs/{run_id}", headers=headers).get_json()
    assert "progress" not in document
    with store.transaction() as session:
        assert session.get(Run, run_id).progress == progress


def test_the_openapi_document_describes_progress(client):
    schemas = client.get("/v1/openapi.json").get_json()["components"]["schemas"]
    progress = next(s for name, s in schemas.items() if name.startswith("Progress"))
    assert set(progress["required"]) == {"trials", "blocks", "max_trials", "max_blocks",
                                         "updated_at"}
