"""A solve that hangs: the worker's time limits end the run ``failed`` with the reason.

The worker is a real Celery worker process started from :mod:`tests.faults.hang_app` (the real
app and tasks, with a solve that never returns), on a PostgreSQL schema and a Redis database of
the test's own, with limits of 3 s (soft) and 6 s (hard).

* A solve that can be interrupted: the soft limit stops it; the run ends ``failed`` with
  "soft time limit" in its error, after one attempt.
* A solve that ignores the soft limit: the hard limit kills the pool process. Celery counts
  the task as failed and drops its message, so the row stays ``running``; the recovery sweep
  (beat inside this worker, every 2 s, rows older than 8 s) finds a running row that no worker
  holds and sends it again. After ``MAX_RUN_ATTEMPTS`` (3) such deliveries the next one ends
  the run ``failed``, saying it gave up.
"""

from __future__ import annotations

import re
import subprocess
import sys
import time
import uuid

import pytest

from tests.faults.processes import wait_until
from tests.integration.invented_cases import single_layer_case
from tests.integration.support import TEST_SIGNING_KEY_FILE
from tests.integration.worker_processes import REPO_ROOT, clean_environment

SOFT_S, HARD_S = 3, 6
READY_PATTERN = re.compile(r"@\S+ ready\.")


@pytest.fixture
def hang_worker(tmp_path, pg_schema, migrated_store, redis_lease, request):
    mode = request.param
    log_path = tmp_path / f"hang-{mode}.log"
    env = clean_environment({
        "FLUXPROOF_DATABASE_URL": pg_schema.url, "FLUXPROOF_BROKER_URL": redis_lease.url,
        "FLUXPROOF_AUTO_MIGRATE": "false", "FLUXPROOF_TASK_SOFT_TIME_LIMIT": str(SOFT_S),
        "FLUXPROOF_TASK_TIME_LIMIT": str(HARD_S), "FAULT_TEST_HANG": mode,
        "FLUXPROOF_RECOVERY_INTERVAL": "2", "FLUXPROOF_RECOVERY_AFTER": "8",
        "FLUXPROOF_SIGNING_KEY_FILE": TEST_SIGNING_KEY_FILE})
    with log_path.open("ab") as log:
        process = subprocess.Popen(
            [sys.executable, "-m", "celery", "-A", "tests.faults.hang_app", "worker",
             "--concurrency=1", "--loglevel=INFO", f"--hostname=hang-{uuid.uuid4().hex[:6]}@%h",
             "--beat", f"--schedule={tmp_path / 'beat-schedule'}"],
            cwd=REPO_ROOT, env=env, stdout=log, stderr=subprocess.STDOUT,
            start_new_session=True)
    try:
        wait_until(lambda: READY_PATTERN.search(log_path.read_text(errors="replace"))
                   or process.poll() is not None, 60, message="hang worker ready")
        assert process.poll() is None, log_path.read_text()[-3000:]
        yield log_path
    finally:
        process.terminate()
        try:
            process.wait(timeout=20)
        except subprocess.TimeoutExpired:
            import os
            import signal

            os.killpg(process.pid, signal.SIGKILL)
            process.wait(timeout=10)


def _submit(store, redis_lease) -> str:
    from service.runs import create_run
    from service.settings import DEFAULTS
    from worker.celery_app import make_celery

    case = single_layer_case(33.0, 1.7e-10, tags=[f"fault-hang-{uuid.uuid4().hex[:8]}"])
    run_id = create_run(store, actor="fenna.fault-engineer", document=case)["run_id"]
    celery = make_celery({**DEFAULTS, "BROKER_URL": redis_lease.url})
    try:
        celery.send_task("fluxproof.execute_run", args=[run_id])
    finally:
        celery.close()
    return run_id


def _finished(store, run_id: str):
    from service.store.models import Run

    with store.transaction() as session:
        run = session.get(Run, run_id)
        if run.status in ("succeeded", "failed"):
            return {"status": run.status, "error": run.error, "attempts": run.attempts,
                    "record": run.record}
    return None


def _finished_events(store, run_id: str) -> int:
    from sqlalchemy import func, select

    from service.store.models import AuditEvent

    with store.transaction() as session:
        return session.execute(select(func.count()).select_from(AuditEvent).where(
            AuditEvent.subject == run_id, AuditEvent.kind == "run.finished")).scalar_one()


@pytest.mark.parametrize("hang_worker", ["sleeps"], indirect=True)
def test_a_hanging_solve_is_ended_failed_by_the_soft_time_limit(
        hang_worker, migrated_store, redis_lease):
    started = time.monotonic()
    run_id = _submit(migrated_store, redis_lease)
    wait_until(lambda: _finished(migrated_store, run_id), 60, message="the run ended")
    took = time.monotonic() - started
    result = _finished(migrated_store, run_id)
    assert result["status"] == "failed"
    assert result["error"] == "the solve ran past the worker's soft time limit and was stopped"
    assert result["attempts"] == 1 and result["record"] is None
    assert _finished_events(migrated_store, run_id) == 1
    assert "SoftTimeLimitExceeded" in hang_worker.read_text() or "soft time limit" in \
        hang_worker.read_text().lower()
    print(f"\nFAULT hanging solve (soft limit {SOFT_S} s): failed with the reason after "
          f"{took:.1f} s, one attempt")


@pytest.mark.parametrize("hang_worker", ["ignores_soft_limit"], indirect=True)
def test_a_solve_that_ignores_the_soft_limit_is_killed_and_given_up(
        hang_worker, migrated_store, redis_lease):
    started = time.monotonic()
    run_id = _submit(migrated_store, redis_lease)
    wait_until(lambda: _finished(migrated_store, run_id), 150, message="the run ended")
    took = time.monotonic() - started
    result = _finished(migrated_store, run_id)
    assert result["status"] == "failed"
    assert result["error"].startswith("gave up after 3 deliveries that did not finish")
    assert "hard time limit" in result["error"]
    assert result["attempts"] == 3 and result["record"] is None
    assert _finished_events(migrated_store, run_id) == 1
    log = hang_worker.read_text()
    assert "TimeLimitExceeded" in log, log[-3000:]
    print(f"\nFAULT solve ignoring the soft limit (hard limit {HARD_S} s): killed 3 times, "
          f"ended failed with the reason after {took:.1f} s")
