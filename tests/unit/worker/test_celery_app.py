"""Celery configuration: limits, visibility timeout, nightly schedule."""

from __future__ import annotations

import pytest

from service.settings import DEFAULTS, parse_nightly_at
from worker.celery_app import celery_config, make_celery


def test_visibility_timeout_exceeds_the_hard_limit_by_default():
    config = celery_config(DEFAULTS)
    assert config["broker_transport_options"]["visibility_timeout"] > config["task_time_limit"]
    assert config["task_soft_time_limit"] < config["task_time_limit"]
    # Reserving messages ahead is safe only because they are acknowledged late.
    assert config["task_acks_late"] and config["task_reject_on_worker_lost"]
    assert config["worker_prefetch_multiplier"] == DEFAULTS["WORKER_PREFETCH_MULTIPLIER"] >= 1
    assert config["result_backend"] is None


def test_settings_that_would_run_long_solves_twice_are_refused():
    with pytest.raises(ValueError, match="VISIBILITY_TIMEOUT"):
        celery_config({**DEFAULTS, "BROKER_VISIBILITY_TIMEOUT": 100, "TASK_TIME_LIMIT": 360})
    with pytest.raises(ValueError, match="SOFT_TIME_LIMIT"):
        celery_config({**DEFAULTS, "TASK_SOFT_TIME_LIMIT": 400})


@pytest.mark.parametrize("value", [0, -2, "many", 2.5, True])
def test_a_prefetch_multiplier_that_is_not_a_whole_number_of_at_least_one_is_refused(value):
    with pytest.raises(ValueError, match="FLUXPROOF_WORKER_PREFETCH_MULTIPLIER"):
        celery_config({**DEFAULTS, "WORKER_PREFETCH_MULTIPLIER": value})


@pytest.mark.parametrize("value", [-1, 20, "low", 2.5, True])
def test_a_worker_nice_outside_0_to_19_is_refused(value):
    with pytest.raises(ValueError, match="FLUXPROOF_WORKER_NICE"):
        celery_config({**DEFAULTS, "WORKER_NICE": value})


@pytest.mark.parametrize(("setting", "calls"), [(None, [10]), ("4", [4]), ("0", [])])
def test_each_pool_process_lowers_its_priority_by_the_setting(monkeypatch, setting, calls):
    import worker.celery_app

    monkeypatch.delenv("FLUXPROOF_WORKER_NICE", raising=False)
    if setting is not None:
        monkeypatch.setenv("FLUXPROOF_WORKER_NICE", setting)
    seen = []
    monkeypatch.setattr(worker.celery_app.os, "nice", seen.append)
    worker.celery_app.lower_pool_process_priority()
    assert seen == calls


def test_the_prefetch_multiplier_follows_the_setting():
    assert celery_config({**DEFAULTS, "WORKER_PREFETCH_MULTIPLIER": 3}
                         )["worker_prefetch_multiplier"] == 3


def test_nightly_schedule_follows_the_setting():
    app = make_celery({**DEFAULTS, "NIGHTLY_AT": "04:05", "BROKER_URL": "redis://x:1/0"})
    entry = app.conf.beat_schedule["nightly-reverify"]
    assert entry["task"] == "fluxproof.reverify_all"
    assert entry["schedule"].hour == {4} and entry["schedule"].minute == {5}
    assert app.conf.broker_url == "redis://x:1/0"


@pytest.mark.parametrize("text", ["2:3:0", "25:00", "02:60", "late", ""])
def test_bad_nightly_time_is_named(text):
    with pytest.raises(ValueError, match="FLUXPROOF_NIGHTLY_AT"):
        parse_nightly_at(text)


def test_good_nightly_time():
    assert parse_nightly_at("23:59") == (23, 59)


def test_the_warm_up_case_is_a_case_the_engine_checks_and_it_runs_before_the_pool_forks():
    from celery.signals import celeryd_after_setup

    import schemas.checking
    import worker.celery_app
    import worker.warmup
    from worker.engine import check_case
    from worker.warmup import ENGINE_MODULES, WARM_UP_CASE, warm_up_engine

    record = check_case(dict(WARM_UP_CASE))
    assert record["status"] == "succeeded" and record["verdict"] == "pass", record["checks"]
    imported, checked = [], []
    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(worker.warmup.importlib, "import_module", imported.append)
        patch.setattr(schemas.checking, "check_case",
                      lambda case: checked.append(case) or {"status": "succeeded"})
        warm_up_engine()
    assert imported == list(ENGINE_MODULES) and checked == [WARM_UP_CASE]
    receivers = [ref() for _key, ref in celeryd_after_setup.receivers]
    assert worker.celery_app.warm_up_before_forking in receivers
