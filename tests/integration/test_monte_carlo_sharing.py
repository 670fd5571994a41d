"""A large Monte Carlo run shared by two real Celery worker processes on PostgreSQL and Redis
(:mod:`service.runs.waves`): each block is stored once, both workers compute blocks, the record's
uncertainty block equals the one the sequential scheduler gives in this process for the same
seed, the run document shows progress while it runs; and with the run's own pool process
SIGKILLed mid-run, no block is lost: the run is executed again, reuses the stored blocks and
ends with the same record.

The check value of each comparison is the engine's sequential scheduler
(``schemas.checking.check_case``) on the same case and seed. The waits are bounds against a
hang on a busy machine, not speed targets.
"""

from __future__ import annotations

import os
import re
import signal
import time
import uuid

import pytest

from schemas.checking import check_case
from service.app import shutdown_app
from service.store.blocks import block_writers
from service.store.models import Run
from tests.api.support import bearer
from tests.integration.invented_cases import uncertain_uptake_case
from tests.integration.support import create_tokens, make_app, wait_finished, worker_settings
from tests.integration.worker_processes import (
    WorkerProcess,
    parent_of,
    pid_alive,
    stop_all,
    wait_for_log,
)

BLOCK_TRIALS = 10_000
WORKER_LOST = re.compile(r"WorkerLostError|exited with 'signal 9 \(SIGKILL\)'")
MERGED = re.compile(r"run (\S+): (\d+) Monte Carlo blocks merged; (\d+) read from the store, "
                    r"(\d+) computed by this process")


@pytest.fixture
def sharing_workers(tmp_path, pg_schema, migrated_store, redis_lease):
    """Two worker processes of one pool process each, keeping the blocks for inspection."""
    settings = {**worker_settings(pg_schema, redis_lease),
                "FLUXPROOF_MONTE_CARLO_KEEP_BLOCKS": "true", "FLUXPROOF_MONTE_CARLO_WAVE": "4"}
    workers = [WorkerProcess(settings, tmp_path / f"worker-{n}.log", concurrency=1).start()
               for n in (1, 2)]
    try:
        for worker in workers:
            worker.wait_ready()
        yield workers
    finally:
        stop_all(workers)


@pytest.fixture
def sharing_app(clean_fluxproof_env, pg_schema, redis_lease, sharing_workers):
    application = make_app(pg_schema, redis_lease)
    yield application
    shutdown_app(application)


def _submit(client, tokens, case) -> str:
    response = client.post("/v1/runs", json={"case": case}, headers=bearer(tokens["engineer"]))
    assert response.status_code == 202, response.get_json()
    return response.get_json()["run_id"]


def _pool_parent(computed_by: str) -> int | None:
    """The worker process whose pool process wrote a block (``host:pid/thread``)."""
    pid = int(computed_by.split(":", 1)[1].split("/", 1)[0])
    return parent_of(pid)


def test_two_workers_share_a_runs_blocks_each_stored_once(sharing_app, sharing_workers,
                                                         migrated_store):
    store = migrated_store
    client = sharing_app.test_client()
    tokens = create_tokens(store)
    case = uncertain_uptake_case(200_000, tags=[f"it-mc-{uuid.uuid4().hex[:8]}"])
    expected = check_case(case)["uncertainty"]  # the sequential scheduler, this process
    assert expected["blocks"] == 20 and expected["stop_reason"] == "max_trials"

    run_id = _submit(client, tokens, case)
    progress = []
    deadline = time.monotonic() + 180
    while time.monotonic() < deadline:
        document = client.get(f"/v1/runs/{run_id}",
                              headers=bearer(tokens["auditor"])).get_json()
        if document["status"] in ("succeeded", "failed"):
            break
        if "progress" in document:
            assert document["status"] == "running"
            progress.append(document["progress"])
        time.sleep(0.05)
    record = wait_finished(client, tokens["engineer"], run_id, timeout=10)

    assert record["status"] == "succeeded", record.get("error")
    assert "progress" not in record
    assert record["uncertainty"] == expected
    writers = block_writers(store, run_id)
    indices = [index for index, _, _ in writers]
    assert indices == list(range(len(indices)))  # each block once, none missing
    assert 20 <= len(indices) <= 20 + 3  # the last wave may run past the stopping point
    parents = {_pool_parent(by) for _, by, _ in writers}
    shares = [sum(1 for _, by, _ in writers if _pool_parent(by) == w.pid)
              for w in sharing_workers]
    print(f"\nMC sharing: {len(indices)} blocks stored once each, per worker {shares}, "
          f"{len(progress)} progress documents seen while running")
    assert parents == {w.pid for w in sharing_workers}, (
        f"blocks written by {parents}, workers {[w.pid for w in sharing_workers]}")
    # Progress was in the run document while it ran, in whole blocks, counting up.
    assert any(0 < p["blocks"] < 20 for p in progress), progress
    assert all(p["trials"] == p["blocks"] * BLOCK_TRIALS for p in progress)
    assert {(p["max_blocks"], p["max_trials"]) for p in progress} == {(20, 20 * BLOCK_TRIALS)}
    assert [p["blocks"] for p in progress] == sorted(p["blocks"] for p in progress)


def _coordinator(workers: list[WorkerProcess], timeout: float = 60.0) -> WorkerProcess:
    """The worker whose pool process took the run's execute_run message."""
    wait_for_log(workers, r"fluxproof\.execute_run\[[^\]]+\] received", timeout=timeout)
    (worker,) = [w for w in workers
                 if re.search(r"fluxproof\.execute_run\[[^\]]+\] received", w.log_text())]
    return worker


def _blocks_merged(store, run_id: str) -> int:
    with store.transaction() as session:
        run = session.get(Run, run_id)
        if run.status in ("succeeded", "failed"):
            return -1
        return int((run.progress or {}).get("blocks", 0))


def test_a_worker_killed_mid_run_loses_no_block(sharing_app, sharing_workers, migrated_store):
    store = migrated_store
    client = sharing_app.test_client()
    tokens = create_tokens(store)
    case = uncertain_uptake_case(300_000, tags=[f"it-mc-kill-{uuid.uuid4().hex[:8]}"])
    expected = check_case(case)["uncertainty"]
    assert expected["blocks"] == 30

    run_id = _submit(client, tokens, case)
    coordinator = _coordinator(sharing_workers)
    deadline = time.monotonic() + 120
    while _blocks_merged(store, run_id) < 4:
        assert time.monotonic() < deadline, "the run merged no 4 blocks in time"
        assert _blocks_merged(store, run_id) != -1, "the run finished before the kill"
        time.sleep(0.02)
    stored_before = {index: (by, at) for index, by, at in block_writers(store, run_id)}
    (pool,) = coordinator.pool_pids()
    lost_before = len(WORKER_LOST.findall(coordinator.log_text()))
    os.kill(pool, signal.SIGKILL)
    deadline = time.monotonic() + 10
    while pid_alive(pool):
        assert time.monotonic() < deadline, "the killed pool process is still alive"
        time.sleep(0.05)

    record = wait_finished(client, tokens["engineer"], run_id, timeout=240)

    assert len(WORKER_LOST.findall(coordinator.log_text())) > lost_before, (
        "the coordinator's worker did not report the lost task")
    assert record["status"] == "succeeded", record.get("error")
    assert record["attempts"] == 2  # executed again after the kill
    assert record["uncertainty"] == expected
    after = {index: (by, at) for index, by, at in block_writers(store, run_id)}
    assert sorted(after) == list(range(len(after)))  # each block once, none missing
    assert 30 <= len(after) <= 30 + 3
    assert all(after[index] == row for index, row in stored_before.items())
    # The second execution read what was stored before the kill instead of computing it.
    merged = [m for w in sharing_workers for m in MERGED.findall(w.log_text())
              if m[0] == run_id]
    assert len(merged) == 1, merged  # the killed execution never got that far
    _, blocks, read, _computed = merged[0]
    assert int(blocks) == 30 and int(read) >= len(stored_before)
    print(f"\nMC worker kill: {len(stored_before)} blocks stored before the SIGKILL, the "
          f"second execution read {read} from the store and computed {_computed}; "
          f"{len(after)} blocks stored once each")
