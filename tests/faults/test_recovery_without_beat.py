"""Recovery without beat, on the real Redis and PostgreSQL: a run whose message the broker
lost (its row is queued, no message names it) is sent again by the sweep of a plain
``fluxproof worker`` (no beat, no API) and executed, and by the sweep thread of an API process
dispatching to Celery (no worker, no beat). The sweeps take turns by the database lease, which
racing threads take once on PostgreSQL. On main only beat swept: these runs stayed queued."""

from __future__ import annotations

import threading
from datetime import timedelta

from service.recovery import queued_run_ids
from service.runs import create_run
from service.store.leases import take_lease
from service.store.models import Run, utc_now
from tests.faults.processes import wait_until
from tests.integration.invented_cases import distinct_steady_cases
from tests.integration.support import TEST_SIGNING_KEY_FILE
from tests.integration.worker_processes import WorkerProcess


def _lost_run(store) -> str:
    """A queued run ten minutes old that no message names (as after a broker lost it)."""
    (document,) = distinct_steady_cases(1, tags=["lost-without-beat"])
    run_id = create_run(store, actor="fenna.fault-engineer", document=document)["run_id"]
    with store.transaction() as session:
        session.get(Run, run_id).created_at = utc_now() - timedelta(seconds=600)
    return run_id


def _status(store, run_id: str) -> str:
    with store.transaction() as session:
        return session.get(Run, run_id).status


def test_a_plain_worker_sends_a_lost_run_again_and_runs_it(migrated_store, pg_schema,
                                                           redis_lease, tmp_path):
    run_id = _lost_run(migrated_store)
    settings = {"FLUXPROOF_DATABASE_URL": pg_schema.url, "FLUXPROOF_BROKER_URL": redis_lease.url,
                "FLUXPROOF_AUTO_MIGRATE": "false", "FLUXPROOF_RECOVERY_INTERVAL": "1",
                "FLUXPROOF_RECOVERY_AFTER": "60",
                "FLUXPROOF_SIGNING_KEY_FILE": TEST_SIGNING_KEY_FILE}
    worker = WorkerProcess(settings, tmp_path / "worker.log").start()
    try:
        worker.wait_ready()
        wait_until(lambda: _status(migrated_store, run_id) == "succeeded", timeout=120,
                   message=f"run {run_id} sent again and executed without beat")
    finally:
        worker.stop()
    assert "recovery: 1 unfinished runs" in worker.log_text()


def test_the_api_process_sends_a_lost_run_again(migrated_store, pg_schema, redis_lease,
                                                monkeypatch):
    from service.app import create_app, shutdown_app

    for key in ("FLUXPROOF_BROKER_URL", "FLUXPROOF_DATABASE_URL", "FLUXPROOF_DISPATCH"):
        monkeypatch.delenv(key, raising=False)
    run_id = _lost_run(migrated_store)
    app = create_app({"DATABASE_URL": pg_schema.url, "BROKER_URL": redis_lease.url,
                      "DISPATCH": "celery", "AUTO_MIGRATE": False,
                      "SECRET_KEY": "fault-test-secret-0123456789abcdef",
                      "RECOVERY_INTERVAL": 0.3, "RECOVERY_AFTER": 60})
    try:
        celery = app.extensions["fluxproof"].dispatcher.celery
        wait_until(lambda: run_id in queued_run_ids(celery), timeout=30,
                   message=f"run {run_id} in the broker's queue again")
    finally:
        shutdown_app(app)
    assert _status(migrated_store, run_id) == "queued"  # no worker: sent, not executed


def test_racing_processes_take_the_lease_once_on_postgresql(migrated_store):
    results: list[bool] = []
    barrier = threading.Barrier(6)

    def race(holder: str) -> None:
        barrier.wait()
        results.append(take_lease(migrated_store, "race", holder, 60))

    threads = [threading.Thread(target=race, args=(f"h{i}",)) for i in range(6)]
    for thread in threads:
        thread.start()
    for thread in threads:
        thread.join()
    assert sorted(results) == [False] * 5 + [True]
