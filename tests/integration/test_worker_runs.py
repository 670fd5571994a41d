"""A case submitted over the API is solved by a real worker process and stored on PostgreSQL."""

from __future__ import annotations

import socket
import uuid

from sqlalchemy import select

from service.settings import DEFAULTS
from tests.api.support import bearer
from tests.integration.invented_cases import single_layer_case
from tests.integration.support import wait_finished
from tests.integration.worker_processes import parent_of


def _niceness(pid: int) -> int:
    """The nice value of a process (field 19 of /proc/<pid>/stat)."""
    with open(f"/proc/{pid}/stat") as stat:
        return int(stat.read().rsplit(")", 1)[1].split()[16])


def test_submitted_case_is_solved_by_a_worker_process_and_stored(live_app, live_client,
                                                                  live_store, live_tokens,
                                                                  live_workers):
    from service.store.models import AuditEvent, Run

    tag = f"it-{uuid.uuid4().hex[:8]}"
    case = single_layer_case(35.0, 1.2e-10, tags=[tag])
    response = live_client.post("/v1/runs", json={"case": case},
                                headers=bearer(live_tokens["engineer"]))
    assert response.status_code == 202, response.get_json()
    run_id = response.get_json()["run_id"]
    assert response.headers["Location"] == f"/v1/runs/{run_id}"

    record = wait_finished(live_client, live_tokens["engineer"], run_id)

    assert record["status"] == "succeeded", record.get("error")
    assert record["verdict"] in ("pass", "fail")
    assert record["run_id"] == run_id
    assert record["quantities"]["flux_outer"]["value"] > 0  # solute leaves through the outer face
    # provenance.worker is "<host>:<pid>" of the pool process that ran the task; that process is
    # a child of one of the worker processes this test session started.
    host, pid = record["provenance"]["worker"].rsplit(":", 1)
    assert host == socket.gethostname()
    assert parent_of(int(pid)) in {w.pid for w in live_workers}, (
        f"pid {pid} is not a pool process of the workers {[w.pid for w in live_workers]}")
    # Each worker loaded the engine before forking its pool (no cold first run mid-batch).
    assert all("engine warmed up in" in w.log_text() for w in live_workers)
    # Solving yields the CPU to the API: the pool process is FLUXPROOF_WORKER_NICE nicer.
    assert _niceness(int(pid)) - _niceness(parent_of(int(pid))) == DEFAULTS["WORKER_NICE"] > 0

    # The row on PostgreSQL holds the same record, and the audit trail names the worker.
    assert live_store.dialect == "postgresql"
    with live_store.transaction() as session:
        run = session.get(Run, run_id)
        assert run.status == "succeeded" and run.attempts == 1
        assert run.record["provenance"]["worker"] == record["provenance"]["worker"]
        kinds = [e.kind for e in session.execute(
            select(AuditEvent).where(AuditEvent.subject == run_id).order_by(AuditEvent.seq)
        ).scalars()]
        actors = {e.actor for e in session.execute(
            select(AuditEvent).where(AuditEvent.subject == run_id,
                                     AuditEvent.kind == "run.finished")).scalars()}
    assert kinds == ["run.queued", "run.started", "run.finished"]
    assert actors == {f"worker@{socket.gethostname()}"}


def test_invalid_case_is_refused_and_nothing_is_stored(live_app, live_client, live_store,
                                                       live_tokens):
    from sqlalchemy import func

    from service.store.models import Case, Run

    def rows() -> tuple[int, int]:
        with live_store.transaction() as session:
            return (session.execute(select(func.count()).select_from(Case)).scalar_one(),
                    session.execute(select(func.count()).select_from(Run)).scalar_one())

    case = single_layer_case(35.0, 1.2e-10, tags=["it-invalid"])
    case["layers"][0]["diffusivity"] = "1.2e-10 m/s"  # wrong dimension
    before = rows()
    response = live_client.post("/v1/runs", json={"case": case},
                                headers=bearer(live_tokens["engineer"]))
    assert response.status_code == 422
    assert response.headers["Content-Type"].startswith("application/problem+json")
    paths = [e["path"] for e in response.get_json()["errors"]]
    assert any("diffusivity" in p for p in paths), paths
    assert rows() == before
