"""Celery configuration (limits, visibility timeout, nightly schedule), tasks sent by name, and
the one direction of the layers: the service never imports the workers' app or tasks."""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

from service.celery_client import celery_config
from service.settings import DEFAULTS, parse_nightly_at
from worker.celery_app import make_celery

SERVICE_DIR = Path(__file__).resolve().parents[3] / "service"


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


def _imported_modules(path: Path) -> set[str]:
    """Every module an ``import`` or ``from ... import`` names in ``path``, at any depth
    (function-local imports included)."""
    names: set[str] = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            names.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module:
            names.add(node.module)
            names.update(f"{node.module}.{alias.name}" for alias in node.names)
    return names


WORKER_GLUE = ("worker.tasks", "worker.celery_app")


def _imports_of_the_worker_glue(path: Path) -> set[str]:
    return {name for name in _imported_modules(path)
            if any(name == glue or name.startswith(glue + ".") for glue in WORKER_GLUE)}


def test_no_service_module_imports_the_workers_app_or_tasks():
    files = sorted(SERVICE_DIR.rglob("*.py"))
    assert SERVICE_DIR / "dispatch.py" in files, f"no service modules found in {SERVICE_DIR}"
    offenders = {str(path.relative_to(SERVICE_DIR)): found
                 for path in files if (found := _imports_of_the_worker_glue(path))}
    assert offenders == {}


def test_the_import_scan_sees_a_function_local_import_of_the_tasks(tmp_path):
    sample = tmp_path / "sample.py"
    sample.write_text("def f():\n    from worker.tasks import execute_run\n")
    assert _imports_of_the_worker_glue(sample) == {"worker.tasks", "worker.tasks.execute_run"}
    sample.write_text("import worker.celery_app\nfrom worker import units\n")
    assert _imports_of_the_worker_glue(sample) == {"worker.celery_app"}


def test_every_task_name_the_service_sends_is_a_task_the_workers_register():
    import worker.tasks
    from service import task_names

    registered = make_celery({**DEFAULTS, "BROKER_URL": "memory://"})
    registered.loader.import_default_modules()
    names = {task_names.EXECUTE_RUN_TASK, task_names.REVERIFY_ALL_TASK,
             task_names.RECOVER_LOST_RUNS_TASK}
    assert names <= set(registered.tasks)
    assert worker.tasks.execute_run.name == task_names.EXECUTE_RUN_TASK
    config = celery_config(DEFAULTS)
    assert {entry["task"] for entry in config["beat_schedule"].values()} <= names
    assert set(config["task_routes"]) <= names


def test_the_service_client_sends_a_run_by_name_without_the_task_code():
    """Through Celery's in-memory transport: each message names the task and carries its run id
    (the service imports no task code: see the import scan above)."""
    from service.dispatch import CeleryDispatcher
    from service.task_names import EXECUTE_RUN_TASK, RUN_QUEUE

    dispatcher = CeleryDispatcher({**DEFAULTS, "BROKER_URL": "memory://"})
    dispatcher.send(["run-a", "run-b"])
    received = []
    with dispatcher.celery.connection_for_read() as connection:
        queue = connection.SimpleQueue(RUN_QUEUE)
        while len(received) < 2:
            message = queue.get(timeout=5)
            received.append((message.headers["task"], message.headers["argsrepr"]))
            message.ack()
        queue.close()
    assert received == [(EXECUTE_RUN_TASK, "['run-a']"), (EXECUTE_RUN_TASK, "['run-b']")]
    dispatcher.shutdown()


def test_fluxproof_worker_starts_the_workers_app_loaded_by_name(monkeypatch):
    from celery.app.utils import find_app
    from celery.bin.celery import celery as celery_command

    import service.celery_client
    import worker.celery_app

    seen = []
    monkeypatch.setattr(celery_command, "main",
                        lambda **kwargs: seen.append(kwargs))
    service.celery_client.run_worker(["--loglevel=INFO", "--beat"])
    assert seen[0]["args"] == ["--app", "worker.celery_app", "worker", "--loglevel=INFO",
                               "--beat"]
    assert find_app(service.celery_client.WORKER_APP) is worker.celery_app.celery_app
