"""Batches: re-verification of stored cases, derived status, drift against the baseline."""

from __future__ import annotations

import pytest

from tests.api.support import SIGN, bearer, make_case


def store_cases(client, tokens, specs):
    ids = []
    for title, tags in specs:
        ids.append(client.post("/v1/runs", json={"case": make_case(title=title, tags=tags)},
                               headers=bearer(tokens["engineer"])).get_json())
    return ids


def test_batch_by_tag_reruns_only_tagged_cases(client, tokens, controlled_engine):
    store_cases(client, tokens, [("a", ["nightly"]), ("b", ["nightly"]), ("c", ["other"])])
    response = client.post("/v1/batches", json={"tag": "nightly"},
                           headers=bearer(tokens["admin"]))
    assert response.status_code == 202
    body = response.get_json()
    assert body["runs"] == 2
    assert response.headers["Location"] == f"/v1/batches/{body['batch_id']}"
    batch = client.get(f"/v1/batches/{body['batch_id']}",
                       headers=bearer(tokens["auditor"])).get_json()
    assert batch["status"] == "finished"
    assert batch["counts"] == {"queued": 0, "running": 0, "succeeded": 2, "failed": 0}
    assert batch["drifted"] == []  # same engine, same figures
    assert batch["selector"] == {"tag": "nightly"}


def test_drift_is_reported_against_the_last_approved_record(client, tokens,
                                                            controlled_engine):
    first = store_cases(client, tokens, [("drifting", ["d"])])[0]
    approved_value = 2.0e-6
    # Second, later record that is not approved: the approved one stays the baseline.
    controlled_engine.quantities = {"flux_outer": approved_value, "flux_inner": 1.0}
    client.post(f"/v1/runs/{first['run_id']}/signoffs",
                json={"decision": "approved", **SIGN, "comment": "baseline"},
                headers=bearer(tokens["reviewer"]))
    controlled_engine.quantities = {"flux_outer": 9.0e-6, "flux_inner": 1.0}
    client.post("/v1/runs", json={"case_id": first["case_id"]},
                headers=bearer(tokens["engineer"]))
    controlled_engine.quantities = {"flux_outer": 2.5e-6, "flux_inner": 2.0e-6}
    batch_id = client.post("/v1/batches", json={"all": True},
                           headers=bearer(tokens["admin"])).get_json()["batch_id"]
    batch = client.get(f"/v1/batches/{batch_id}", headers=bearer(tokens["auditor"])).get_json()
    assert batch["status"] == "finished"
    [drift] = batch["drifted"]
    assert drift["case_id"] == first["case_id"]
    assert drift["baseline_run_id"] == first["run_id"]
    by_name = {q["name"]: q for q in drift["quantities"]}
    assert set(by_name) == {"flux_outer"}  # flux_inner is 2e-6 in both
    assert by_name["flux_outer"]["baseline"] == approved_value
    assert by_name["flux_outer"]["now"] == 2.5e-6
    assert by_name["flux_outer"]["relative_change"] == pytest.approx(0.25)
    assert drift["baseline_versions"]["engine_version"] == "test"


def test_without_approval_the_last_record_is_the_baseline(client, tokens, controlled_engine):
    store_cases(client, tokens, [("x", ["t"])])
    controlled_engine.quantities = {"flux_outer": 3.0e-6, "flux_inner": 2.0e-6}
    second = client.post("/v1/runs", json={"case": make_case(title="x", tags=["t"])},
                         headers=bearer(tokens["engineer"])).get_json()
    batch_id = client.post("/v1/batches", json={"tag": "t"},
                           headers=bearer(tokens["admin"])).get_json()["batch_id"]
    batch = client.get(f"/v1/batches/{batch_id}", headers=bearer(tokens["auditor"])).get_json()
    assert batch["drifted"] == []
    assert second["run_id"] not in batch["run_ids"]


def test_change_within_the_case_tolerance_is_not_drift(client, tokens, controlled_engine):
    case = make_case(title="tolerant", tolerances={"cross_check": 1e-2})
    client.post("/v1/runs", json={"case": case}, headers=bearer(tokens["engineer"]))
    controlled_engine.quantities = {"flux_outer": 2.0e-6 * (1 + 5e-3), "flux_inner": 2.0e-6}
    batch_id = client.post("/v1/batches", json={"all": True},
                           headers=bearer(tokens["admin"])).get_json()["batch_id"]
    batch = client.get(f"/v1/batches/{batch_id}", headers=bearer(tokens["auditor"])).get_json()
    assert batch["drifted"] == []


@pytest.mark.parametrize("dispatch_mode", ["embedded"])
def test_batch_status_moves_from_queued_to_finished(app, client, tokens, controlled_engine):
    import threading

    gate = threading.Event()
    original = type(controlled_engine).__call__

    def slow(self, case):
        gate.wait(10)
        return original(self, case)

    type(controlled_engine).__call__ = slow
    try:
        client.post("/v1/cases", json=make_case(title="slow"), headers=bearer(tokens["engineer"]))
        batch_id = client.post("/v1/batches", json={"all": True},
                               headers=bearer(tokens["admin"])).get_json()["batch_id"]
        batch = client.get(f"/v1/batches/{batch_id}", headers=bearer(tokens["auditor"]))
        assert batch.get_json()["status"] in ("queued", "running")
        assert batch.get_json()["drifted"] == []
    finally:
        gate.set()
        type(controlled_engine).__call__ = original
    app.extensions["fluxproof"].dispatcher.wait_idle(10)
    batch = client.get(f"/v1/batches/{batch_id}", headers=bearer(tokens["auditor"])).get_json()
    assert batch["status"] == "finished"
    assert batch["counts"]["succeeded"] == 1


def test_empty_batch_is_finished_at_once(client, tokens):
    body = client.post("/v1/batches", json={"tag": "nothing-has-this"},
                       headers=bearer(tokens["admin"])).get_json()
    assert body["runs"] == 0
    batch = client.get(f"/v1/batches/{body['batch_id']}",
                       headers=bearer(tokens["admin"])).get_json()
    assert batch["status"] == "finished" and sum(batch["counts"].values()) == 0


@pytest.mark.parametrize("body", [{}, {"tag": "a", "all": True}, {"all": False},
                                  {"all": True, "when": "now"}, {"tag": ""}])
def test_batch_request_is_validated(client, tokens, body):
    response = client.post("/v1/batches", json=body, headers=bearer(tokens["admin"]))
    assert response.status_code == 422
    assert response.mimetype == "application/problem+json"
