"""The Celery application of fluxproof workers.

Broker: ``FLUXPROOF_BROKER_URL`` (Redis, e.g. ``redis://127.0.0.1:6379/0``). No result backend:
results are rows in the store. Tasks are acknowledged late and are idempotent by run id.

Redis re-delivers a message that is not acknowledged within its *visibility timeout*; with late
acknowledgement a long solve would then run twice. The timeout
(``FLUXPROOF_BROKER_VISIBILITY_TIMEOUT``, default 3600 s) must therefore exceed the hard task
time limit (``FLUXPROOF_TASK_TIME_LIMIT``, default 360 s); :func:`make_celery` refuses settings
that break this.

The beat schedule runs ``fluxproof.reverify_all`` every night at ``FLUXPROOF_NIGHTLY_AT``
(``HH:MM``, UTC, default 02:30): ``celery -A worker.celery_app beat``. It also runs
``fluxproof.recover_lost_runs`` every ``FLUXPROOF_RECOVERY_INTERVAL`` seconds (default 30; see
:mod:`service.recovery`) on a queue of its own (``fluxproof.upkeep``), which every worker also
consumes, so that a sweep never waits behind a long queue of runs.

The main process loads the engine before it forks the pool (:mod:`worker.warmup`), so that no
pool process pays the first check's imports in the middle of a batch. Each pool process lowers
its own CPU priority by ``FLUXPROOF_WORKER_NICE`` (default 10) as it
starts: solving is background work and yields to the API where both share a host.
"""

from __future__ import annotations

import logging
import os
from collections.abc import Mapping
from typing import Any

from celery import Celery
from celery.schedules import crontab
from celery.signals import celeryd_after_setup, worker_process_init
from kombu import Exchange, Queue

from service.recovery import recovery_settings
from service.settings import parse_nightly_at, settings_from_env, worker_nice

UPKEEP_QUEUE = "fluxproof.upkeep"
logger = logging.getLogger(__name__)


def celery_config(settings: Mapping[str, Any]) -> dict[str, Any]:
    """Celery configuration from fluxproof settings (see module notes)."""
    hard = int(settings["TASK_TIME_LIMIT"])
    soft = int(settings["TASK_SOFT_TIME_LIMIT"])
    visibility = int(settings["BROKER_VISIBILITY_TIMEOUT"])
    if not soft < hard:
        raise ValueError(f"FLUXPROOF_TASK_SOFT_TIME_LIMIT ({soft} s) must be below "
                         f"FLUXPROOF_TASK_TIME_LIMIT ({hard} s)")
    if not visibility > hard:
        raise ValueError(f"FLUXPROOF_BROKER_VISIBILITY_TIMEOUT ({visibility} s) must exceed "
                         f"FLUXPROOF_TASK_TIME_LIMIT ({hard} s), or long solves run twice")
    prefetch = settings["WORKER_PREFETCH_MULTIPLIER"]
    if isinstance(prefetch, bool) or not isinstance(prefetch, int) or prefetch < 1:
        raise ValueError("FLUXPROOF_WORKER_PREFETCH_MULTIPLIER: expected a whole number of at "
                         f"least 1, got {prefetch!r}")
    worker_nice(settings)  # refuse a bad value before any worker starts
    hour, minute = parse_nightly_at(settings["NIGHTLY_AT"])
    recovery_interval, _recovery_after = recovery_settings(settings)
    return {
        "broker_url": settings.get("BROKER_URL"),
        "result_backend": None,
        "task_ignore_result": True,
        "task_acks_late": True,
        "task_reject_on_worker_lost": True,
        "task_soft_time_limit": soft,
        "task_time_limit": hard,
        # Messages each pool process reserves ahead. With late acknowledgement a reserved
        # message stays unacknowledged until its run is done, so a lost worker loses nothing
        # (Redis delivers it again); reserving ahead hides the broker round trip per run.
        "worker_prefetch_multiplier": prefetch,
        "broker_transport_options": {"visibility_timeout": visibility},
        "broker_connection_retry_on_startup": True,
        "task_serializer": "json",
        "accept_content": ["json"],
        "timezone": "UTC",
        "enable_utc": True,
        "task_default_queue": "celery",
        # Each queue with its own exchange and routing key: a queue declared without them
        # would be bound to the default key too and receive a copy of every run's message.
        "task_queues": (Queue("celery", Exchange("celery", type="direct"), routing_key="celery"),
                        Queue(UPKEEP_QUEUE, Exchange(UPKEEP_QUEUE, type="direct"),
                              routing_key=UPKEEP_QUEUE)),
        "task_routes": {"fluxproof.recover_lost_runs": {"queue": UPKEEP_QUEUE}},
        "beat_schedule": {
            "nightly-reverify": {
                "task": "fluxproof.reverify_all",
                "schedule": crontab(hour=hour, minute=minute),
            },
            "recover-lost-runs": {
                "task": "fluxproof.recover_lost_runs",
                "schedule": recovery_interval,
                "options": {"expires": recovery_interval},
            },
        },
    }


def make_celery(settings: Mapping[str, Any] | None = None) -> Celery:
    """A Celery app configured from ``settings`` (default: the environment)."""
    settings = settings_from_env() if settings is None else settings
    app = Celery("fluxproof", include=["worker.tasks"])
    app.conf.update(celery_config(settings))
    return app


@celeryd_after_setup.connect
def warm_up_before_forking(**_signal: Any) -> None:
    """In the worker's main process, before it forks the pool: load the engine
    (:mod:`worker.warmup`), so that every pool process starts warm."""
    from worker.warmup import warm_up_engine

    logger.info("engine warmed up in %.2f s", warm_up_engine())


@worker_process_init.connect
def lower_pool_process_priority(**_signal: Any) -> None:
    """In each new pool process: add ``FLUXPROOF_WORKER_NICE`` to its niceness (see
    :mod:`service.settings`), so that solving yields the CPU to the API on a shared host."""
    increment = worker_nice(settings_from_env())
    if increment:
        os.nice(increment)


celery_app = make_celery()
