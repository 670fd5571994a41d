"""Named leases in the database (service/store/leases.py) and the recovery sweep that takes
turns by one (service/recovery.py): one holder at a time, released or expired, and a sweep
that runs on its own timer in any process, with no beat."""

from __future__ import annotations

import threading
import time

from service import recovery
from service.recovery import LEASE_NAME, SweepTimer, recover_lost_runs, sweep_lease
from service.store.leases import held_lease, release_lease, take_lease


def test_one_holder_at_a_time(store):
    assert take_lease(store, "test", "a", 60) is True
    assert take_lease(store, "test", "b", 60) is False
    assert take_lease(store, "test", "a", 60) is True  # its holder renews it
    release_lease(store, "test", "b")  # not b's to release
    assert take_lease(store, "test", "b", 60) is False
    release_lease(store, "test", "a")
    assert take_lease(store, "test", "b", 60) is True


def test_an_expired_lease_is_taken_over(store):
    assert take_lease(store, "test", "a", 0.05) is True
    assert take_lease(store, "test", "b", 60) is False
    time.sleep(0.1)
    assert take_lease(store, "test", "b", 60) is True


def test_racing_threads_take_it_once(store):
    results: list[bool] = []
    barrier = threading.Barrier(4)

    def race(name: str) -> None:
        barrier.wait()
        results.append(take_lease(store, "race", name, 60))

    threads = [threading.Thread(target=race, args=(f"t{i}",)) for i in range(4)]
    for thread in threads:
        thread.start()
    for thread in threads:
        thread.join()
    assert sorted(results) == [False, False, False, True]


def test_held_lease_releases_after_the_block(store):
    with held_lease(store, "test", 60) as first:
        with held_lease(store, "test", 60) as second:
            assert (first, second) == (True, False)
    with held_lease(store, "test", 60) as again:
        assert again is True


def test_a_sweep_skips_while_another_holds_the_lease(store):
    with sweep_lease(store) as taken:
        assert taken is True
        report = recover_lost_runs(store, celery_app=None, older_than_s=60)
    assert report.skipped is True
    assert take_lease(store, LEASE_NAME, "x", 1) is True  # released after the block


def test_the_sweep_timer_sweeps_on_its_own_without_beat(store, monkeypatch):
    seen = threading.Event()
    calls: list[float] = []

    def fake_recover(store_arg, celery_app, *, older_than_s):
        calls.append(older_than_s)
        seen.set()
        return recovery.RecoveryReport()

    monkeypatch.setattr(recovery, "recover_lost_runs", fake_recover)
    timer = SweepTimer(store, object(), interval=0.02, older_than_s=7.0).start()
    try:
        assert seen.wait(5)
    finally:
        timer.stop()
    assert calls[0] == 7.0
    assert timer.sweeps >= 1


def test_a_failing_sweep_is_tried_again(store, monkeypatch):
    attempts: list[int] = []

    def broken(*_args, **_kwargs):
        attempts.append(1)
        raise recovery.BrokerUnreadable("no broker")

    monkeypatch.setattr(recovery, "recover_lost_runs", broken)
    timer = SweepTimer(store, object(), interval=0.01)
    assert timer.sweep_once() is None
    assert timer.sweep_once() is None
    assert len(attempts) == 2
