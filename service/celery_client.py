"""fluxproof's one Celery configuration, and the client the service sends tasks with, by name.

The service never imports the task code: it publishes messages that name a task
(:mod:`service.task_names`) through a Celery app that has no tasks of its own
(:func:`make_celery_app` without ``include``). The workers' app (:mod:`worker.celery_app`) is
the same configuration with the task modules included, and :mod:`worker.tasks` registers each
task under the same names, so that sender and worker cannot disagree on one.

Broker: ``FLUXPROOF_BROKER_URL`` (Redis, e.g. ``redis://127.0.0.1:6379/0``). No result backend:
results are rows in the store. Tasks are acknowledged late and are idempotent by run id.

Redis re-delivers a message that is not acknowledged within its *visibility timeout*; with late
acknowledgement a long solve would then run twice. The timeout
(``FLUXPROOF_BROKER_VISIBILITY_TIMEOUT``, default 3600 s) must therefore exceed the hard task
time limit (``FLUXPROOF_TASK_TIME_LIMIT``, default 360 s); :func:`celery_config` refuses settings
that break this.

The beat schedule sends :data:`REVERIFY_ALL_TASK` every night at ``FLUXPROOF_NIGHTLY_AT``
(``HH:MM``, UTC, default 02:30) and :data:`RECOVER_LOST_RUNS_TASK` every
``FLUXPROOF_RECOVERY_INTERVAL`` seconds (default 30; see :mod:`service.recovery`) on a queue of
its own (:data:`UPKEEP_QUEUE`), which every worker also consumes, so that a sweep never waits
behind a long queue of runs.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping, Sequence
from typing import Any

from celery import Celery
from celery.schedules import crontab
from click.exceptions import Exit
from kombu import Exchange, Queue

from service.recovery import recovery_settings
from service.settings import parse_nightly_at, worker_nice
from service.task_names import (
    RECOVER_LOST_RUNS_TASK,
    REVERIFY_ALL_TASK,
    RUN_QUEUE,
    UPKEEP_QUEUE,
)

#: The module Celery loads the workers' app from, by name (``celery --app``).
WORKER_APP = "worker.celery_app"


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
        "task_default_queue": RUN_QUEUE,
        # Each queue with its own exchange and routing key: a queue declared without them
        # would be bound to the default key too and receive a copy of every run's message.
        "task_queues": (Queue(RUN_QUEUE, Exchange(RUN_QUEUE, type="direct"),
                              routing_key=RUN_QUEUE),
                        Queue(UPKEEP_QUEUE, Exchange(UPKEEP_QUEUE, type="direct"),
                              routing_key=UPKEEP_QUEUE)),
        "task_routes": {RECOVER_LOST_RUNS_TASK: {"queue": UPKEEP_QUEUE}},
        "beat_schedule": {
            "nightly-reverify": {
                "task": REVERIFY_ALL_TASK,
                "schedule": crontab(hour=hour, minute=minute),
            },
            "recover-lost-runs": {
                "task": RECOVER_LOST_RUNS_TASK,
                "schedule": recovery_interval,
                "options": {"expires": recovery_interval},
            },
        },
    }


def make_celery_app(settings: Mapping[str, Any], include: Iterable[str] = ()) -> Celery:
    """A Celery app configured from ``settings``. Without ``include`` it only sends tasks by
    name (the service's client); the workers' app includes the task modules."""
    app = Celery("fluxproof", include=list(include))
    app.conf.update(celery_config(settings))
    return app


def run_worker(arguments: Sequence[str]) -> None:
    """Run a Celery worker of the workers' app, loaded by name as ``celery --app`` loads it;
    ``arguments`` follow the ``worker`` sub-command (e.g. ``["--loglevel=INFO"]``)."""
    # Celery's command line is loaded only here: it costs the API process most of a second.
    from celery.bin.celery import celery as celery_command

    try:
        celery_command.main(args=["--app", WORKER_APP, "worker", *arguments],
                            prog_name="celery", standalone_mode=False)
    except Exit:
        return
