"""Batch re-verification of stored cases through the worker processes, with drift."""

from __future__ import annotations

import copy
import time
import uuid

import pytest

from tests.api.support import bearer
from tests.integration.invented_cases import single_layer_case, two_layer_case
from tests.integration.support import wait_finished
from tests.integration.worker_processes import parent_of

#: The factor by which the test shifts one stored baseline figure (as if an earlier engine had
#: computed it 1 % higher). The drift the batch must then report is |v - 1.01 v| / (1.01 v).
BASELINE_SHIFT = 1.01


def _wait_batch(client, token: str, batch_id: str, timeout: float = 90.0) -> dict:
    deadline = time.monotonic() + timeout
    while True:
        response = client.get(f"/v1/batches/{batch_id}", headers=bearer(token))
        assert response.status_code == 200, response.get_json()
        batch = response.get_json()
        if batch["status"] == "finished":
            return batch
        if time.monotonic() > deadline:
            raise AssertionError(f"batch {batch_id} still {batch['status']} after {timeout} s: "
                                 f"{batch['counts']}")
        time.sleep(0.1)


def test_batch_reruns_tagged_cases_on_the_workers_and_reports_drift(live_app, live_client,
                                                                    live_store, live_tokens,
                                                                    live_workers):
    from service.store.models import Run

    tag = f"it-batch-{uuid.uuid4().hex[:8]}"
    cases = [single_layer_case(30.0, 1.0e-10, tags=[tag]),
             two_layer_case(30.0, 1.0e-10, tags=[tag]),
             single_layer_case(60.0, 2.0e-10, tags=[tag]),
             two_layer_case(45.0, 0.7e-10, tags=[tag, "it-other"])]
    engineer = live_tokens["engineer"]
    baselines = []
    for case in cases:
        response = live_client.post("/v1/runs", json={"case": case}, headers=bearer(engineer))
        assert response.status_code == 202, response.get_json()
        baselines.append(response.get_json())
    records = [wait_finished(live_client, engineer, b["run_id"]) for b in baselines]
    assert [r["status"] for r in records] == ["succeeded"] * len(cases)

    shifted = records[1]
    original_flux = shifted["quantities"]["flux_outer"]["value"]
    with live_store.transaction() as session:
        run = session.get(Run, shifted["run_id"])
        changed = copy.deepcopy(run.record)
        changed["quantities"]["flux_outer"]["value"] = original_flux * BASELINE_SHIFT
        run.record = changed

    response = live_client.post("/v1/batches", json={"tag": tag},
                                headers=bearer(live_tokens["admin"]))
    assert response.status_code == 202, response.get_json()
    assert response.get_json()["runs"] == len(cases)
    batch = _wait_batch(live_client, live_tokens["admin"], response.get_json()["batch_id"])

    assert batch["counts"] == {"queued": 0, "running": 0, "succeeded": len(cases), "failed": 0}
    assert len(batch["run_ids"]) == len(cases)
    assert not set(batch["run_ids"]) & {b["run_id"] for b in baselines}
    # Only the case whose baseline was shifted has drifted, and only in flux_outer.
    assert [d["case_id"] for d in batch["drifted"]] == [shifted["case_id"]]
    drift = batch["drifted"][0]
    assert drift["baseline_run_id"] == shifted["run_id"]
    assert [q["name"] for q in drift["quantities"]] == ["flux_outer"]
    moved = drift["quantities"][0]
    assert moved["now"] == pytest.approx(original_flux, rel=1e-9)
    assert moved["relative_change"] == pytest.approx((BASELINE_SHIFT - 1) / BASELINE_SHIFT,
                                                     rel=1e-6)

    # Every batch run was executed by a pool process of the session's worker processes.
    worker_pids = {w.pid for w in live_workers}
    for run_id in batch["run_ids"]:
        record = live_client.get(f"/v1/runs/{run_id}", headers=bearer(engineer)).get_json()
        assert record["batch_id"] == batch["batch_id"]
        pid = int(record["provenance"]["worker"].rsplit(":", 1)[1])
        assert parent_of(pid) in worker_pids
