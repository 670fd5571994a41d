"""The recovery sweep on a real Redis broker database (no worker consumes it): which runs it
calls lost, what it sends, and that two sweeps take turns."""

from __future__ import annotations

from datetime import timedelta

import pytest

from service.recovery import (
    LEASE_NAME,
    queued_run_ids,
    recover_lost_runs,
    recovery_settings,
    sweep_lease,
)
from service.settings import DEFAULTS
from service.store.models import ServiceLease
from tests.integration.invented_cases import distinct_steady_cases


@pytest.fixture
def sqlite_store(tmp_path):
    from service.store import Store
    from service.store.migrate import upgrade

    store = Store(f"sqlite:///{tmp_path / 'sweep.sqlite3'}")
    upgrade(store)
    yield store
    store.dispose()


@pytest.fixture
def idle_celery(redis_lease):
    from worker.celery_app import make_celery

    app = make_celery({**DEFAULTS, "BROKER_URL": redis_lease.url})
    yield app
    app.close()


def _queue_runs(store, count: int, tag: str) -> list[str]:
    from service.runs import create_run

    return [create_run(store, actor="fenna.fault-engineer", document=document)["run_id"]
            for document in distinct_steady_cases(count, tags=[tag])]


def _set_state(store, run_id: str, status: str, age_s: float) -> None:
    from service.store.models import Run, utc_now

    with store.transaction() as session:
        run = session.get(Run, run_id)
        run.status = status
        run.created_at = utc_now() - timedelta(seconds=age_s)
        if status == "running":
            run.started_at = utc_now() - timedelta(seconds=age_s)


def test_only_old_unfinished_runs_unknown_to_the_broker_are_sent_again(
        sqlite_store, idle_celery, redis_lease):
    store = sqlite_store
    queued_old, queued_young, running_old, finished_old, in_queue_old = _queue_runs(
        store, 5, "sweep")
    for run_id in (queued_old, in_queue_old):
        _set_state(store, run_id, "queued", 600)
    _set_state(store, queued_young, "queued", 5)
    _set_state(store, running_old, "running", 600)
    _set_state(store, finished_old, "succeeded", 600)
    idle_celery.send_task("fluxproof.execute_run", args=[in_queue_old])
    assert queued_run_ids(idle_celery) == {in_queue_old}

    report = recover_lost_runs(store, idle_celery, older_than_s=60)

    assert report.skipped is False
    assert report.unfinished == 3  # queued_old, running_old, in_queue_old
    assert report.known_to_broker == 1
    assert sorted(report.redispatched) == sorted([queued_old, running_old])
    messages = [m["decoded_body"][0][0] for m in redis_lease.queued_messages()]
    assert sorted(messages) == sorted([in_queue_old, queued_old, running_old])

    # The next sweep finds them in the queue: nothing is sent twice.
    again = recover_lost_runs(store, idle_celery, older_than_s=60)
    assert again.redispatched == [] and again.known_to_broker == 3


def test_a_sweep_under_way_makes_the_next_one_skip(sqlite_store, idle_celery, redis_lease):
    (run_id,) = _queue_runs(sqlite_store, 1, "sweep-lock")
    _set_state(sqlite_store, run_id, "queued", 600)
    with sweep_lease(sqlite_store) as taken:
        assert taken is True
        report = recover_lost_runs(sqlite_store, idle_celery, older_than_s=60)
        assert report.skipped is True and report.redispatched == []
    with sqlite_store.transaction() as session:
        assert session.get(ServiceLease, LEASE_NAME) is None  # released
    assert recover_lost_runs(sqlite_store, idle_celery, older_than_s=60).redispatched == [run_id]


def test_recovery_settings_name_the_variable():
    assert recovery_settings({}) == (30.0, 60.0)
    assert recovery_settings({"RECOVERY_INTERVAL": "5", "RECOVERY_AFTER": 20}) == (5.0, 20.0)
    with pytest.raises(ValueError, match="FLUXPROOF_RECOVERY_AFTER"):
        recovery_settings({"RECOVERY_AFTER": "soon"})
    with pytest.raises(ValueError, match="FLUXPROOF_RECOVERY_INTERVAL"):
        recovery_settings({"RECOVERY_INTERVAL": 0})
