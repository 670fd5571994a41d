"""A worker process SIGKILLed in the middle of a batch of 1,000 runs: every run still ends
``succeeded`` exactly once (one record, one ``run.finished`` event each).

The stack is ``deploy/local-stack.sh`` (gunicorn API, two Celery worker nodes of one pool
process each, beat) on a PostgreSQL schema and a Redis database of this test's own. The pool
process that is executing a run is killed with SIGKILL, twice (once on each node); Celery
gives the unacknowledged message back (acks late, reject on worker lost) and the run is
executed again, idempotently.

The waits are generous bounds against a hang on a busy machine, not speed targets.
"""

from __future__ import annotations

import re
import time
import uuid

import requests

from tests.api.support import bearer
from tests.faults.ledger import (
    batch_run_ids,
    finished_count,
    read_ledger,
    store_batch_cases,
    unfinished_count,
)
from tests.faults.processes import kill_pid, wait_until
from tests.faults.support import create_tokens, make_stack
from tests.integration.worker_processes import pid_alive

BATCH_SIZE = 1000
WORKER_LOST = re.compile(r"WorkerLostError|exited with 'signal 9 \(SIGKILL\)'")


def _kill_a_busy_pool_process(stack, node: str, store, batch_id: str) -> int:
    """SIGKILL the pool process of ``node`` while it runs a task; retry (up to 5 kills) until
    the node's log shows the lost task. Returns the number of kills."""
    for kills in range(1, 6):
        before = len(WORKER_LOST.findall(stack.log(node)))
        pool = stack.pool_pids(node)
        assert len(pool) == 1, f"{node} should have one pool process, has {pool}"
        kill_pid(pool[0])
        wait_until(lambda pid=pool[0]: not pid_alive(pid), 10, message=f"{node} pool process gone")
        try:
            wait_until(lambda seen=before: len(WORKER_LOST.findall(stack.log(node))) > seen, 10,
                       message=f"{node} reporting the lost task")
            wait_until(lambda: len(stack.pool_pids(node)) == 1, 30,
                       message=f"{node} replacing its pool process")
            return kills
        except AssertionError:
            if unfinished_count(store, batch_id) == 0:
                raise
            time.sleep(0.2)
    raise AssertionError(f"no kill of {node}'s pool process hit a running task in 5 tries")


def test_sigkilled_worker_mid_batch_every_run_succeeds_exactly_once(
        tmp_path, pg_schema, migrated_store, redis_lease):
    store = migrated_store
    tag = f"fault-kill-{uuid.uuid4().hex[:8]}"
    store_batch_cases(store, BATCH_SIZE, tag)
    tokens = create_tokens(store)
    stack = make_stack(tmp_path, pg_schema, redis_lease.url, redis_lease.owner,
                       FLUXPROOF_RECOVERY_INTERVAL="5", FLUXPROOF_RECOVERY_AFTER="30")
    stack.start()
    try:
        started = time.monotonic()
        response = requests.post(f"{stack.base_url}/v1/batches", json={"tag": tag},
                                 headers=bearer(tokens["admin"]), timeout=60)
        assert response.status_code == 202, response.text
        batch_id = response.json()["batch_id"]
        assert response.json()["runs"] == BATCH_SIZE
        run_ids = batch_run_ids(store, batch_id)
        assert len(run_ids) == BATCH_SIZE

        wait_until(lambda: finished_count(store, batch_id) >= BATCH_SIZE // 5, 300,
                   message="a fifth of the batch finished")
        lost_before = sum(len(WORKER_LOST.findall(stack.log(n))) for n in stack.worker_names())
        first_kills = _kill_a_busy_pool_process(stack, "worker-1", store, batch_id)
        wait_until(lambda: finished_count(store, batch_id) >= BATCH_SIZE // 2, 300,
                   message="half of the batch finished")
        second_kills = _kill_a_busy_pool_process(stack, "worker-2", store, batch_id)

        wait_until(lambda: unfinished_count(store, batch_id) == 0, 600, interval=0.5,
                   message="every run of the batch finished")
        elapsed = time.monotonic() - started

        lost = sum(len(WORKER_LOST.findall(stack.log(n))) for n in stack.worker_names())
        assert lost - lost_before >= 2, "both nodes should have logged a lost task"
        ledger = read_ledger(store, run_ids)
        assert dict(ledger.statuses) == {"succeeded": BATCH_SIZE}
        assert ledger.records == BATCH_SIZE
        assert ledger.finished_exactly_once(run_ids) == []
        assert all(ledger.queued_events[r] == 1 for r in run_ids)
        # Each kill hit a task (the node logged it lost); a run killed before its record was
        # committed was started again (attempts 2); one killed after it is left as it was.
        retried = [r for r, n in ledger.attempts.items() if n > 1]
        assert max(ledger.attempts.values()) <= 3

        batch = requests.get(f"{stack.base_url}/v1/batches/{batch_id}",
                             headers=bearer(tokens["auditor"]), timeout=30).json()
        assert batch["status"] == "finished"
        assert batch["counts"]["succeeded"] == BATCH_SIZE
        assert batch["counts"]["failed"] == 0
        chain = requests.get(f"{stack.base_url}/v1/audit/verify",
                             headers=bearer(tokens["auditor"]), timeout=60).json()
        assert chain["ok"] is True, chain
        print(f"\nFAULT worker SIGKILL: {BATCH_SIZE} runs, {first_kills + second_kills} "
              f"SIGKILLs, {len(retried)} runs started twice, all succeeded once, "
              f"batch wall time {elapsed:.1f} s")
    finally:
        stopped = stack.stop()
        assert stopped.returncode == 0, stopped.stdout + stopped.stderr
