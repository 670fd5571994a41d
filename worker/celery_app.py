"""The Celery application of fluxproof workers: the service's configuration
(:func:`service.celery_client.celery_config`) with the task modules included.

Run it with ``fluxproof worker`` or ``celery -A worker.celery_app worker`` (``beat`` for the
schedule). The main process loads the engine before it forks the pool (:mod:`worker.warmup`),
so that no pool process pays the first check's imports in the middle of a batch. Each pool
process lowers its own CPU priority by ``FLUXPROOF_WORKER_NICE`` (default 10) as it starts:
solving is background work and yields to the API where both share a host, and limits its
address space to ``FLUXPROOF_WORKER_MEMORY_LIMIT_MB`` (a solve that needs more fails with a
memory error recorded on its run). The main process runs the recovery sweep on a timer
(:mod:`service.recovery`), so that no deployment needs beat for it.
"""

from __future__ import annotations

import logging
import os
from collections.abc import Mapping
from typing import Any

from celery import Celery
from celery.signals import celeryd_after_setup, worker_process_init, worker_ready, worker_shutdown

from service.celery_client import make_celery_app
from service.process_limits import limit_address_space
from service.recovery import SweepTimer, recovery_settings
from service.settings import database_url, settings_from_env, worker_memory_limit_bytes, worker_nice
from service.store import Store, default_store
from worker.warmup import warm_up_engine

#: Modules whose tasks the workers register (each under a name of :mod:`service.task_names`).
TASK_MODULES = ("worker.tasks",)

logger = logging.getLogger(__name__)


def make_celery(settings: Mapping[str, Any] | None = None) -> Celery:
    """The workers' Celery app configured from ``settings`` (default: the environment)."""
    settings = settings_from_env() if settings is None else settings
    return make_celery_app(settings, include=TASK_MODULES)


@celeryd_after_setup.connect
def warm_up_before_forking(**_signal: Any) -> None:
    """In the worker's main process, before it forks the pool: load the engine
    (:mod:`worker.warmup`), so that every pool process starts warm, and the store's audit
    seal (no connection is opened), so that a worker without the installation's signing key or
    a writable anchor file (``FLUXPROOF_SIGNING_KEY_FILE``, ``FLUXPROOF_AUDIT_ANCHOR_FILE``)
    says so in its log at start, naming them, before any run's chaining fails on it."""
    logger.info("engine warmed up in %.2f s", warm_up_engine())
    seal = default_store().seal()
    logger.info("audit chain keyed with key %s, anchored in %s", seal.key_id, seal.anchor)


@worker_process_init.connect
def lower_pool_process_priority(**_signal: Any) -> None:
    """In each new pool process: add ``FLUXPROOF_WORKER_NICE`` to its niceness (see
    :mod:`service.settings`), so that solving yields the CPU to the API on a shared host."""
    settings = settings_from_env()
    increment = worker_nice(settings)
    if increment:
        os.nice(increment)
    limit_address_space(worker_memory_limit_bytes(settings))


_SWEEP_TIMERS: list[SweepTimer] = []


@worker_ready.connect
def start_recovery_sweep(sender: Any = None, **_signal: Any) -> None:
    """In the worker's main process once it consumes: the recovery sweep every
    ``FLUXPROOF_RECOVERY_INTERVAL`` seconds (:class:`service.recovery.SweepTimer`), so that a
    deployment without beat re-sends the runs a broker lost; the sweeps of every worker and
    the API take turns by a lease in the database."""
    settings = settings_from_env()
    interval, after = recovery_settings(settings)
    app = getattr(sender, "app", None) or celery_app
    # Its own store: pool processes forked later must not share its connections.
    store = Store(database_url(settings), settings)
    _SWEEP_TIMERS.append(SweepTimer(store, app, interval=interval, older_than_s=after,
                                    name="fluxproof-worker-recovery").start())


@worker_shutdown.connect
def stop_recovery_sweep(**_signal: Any) -> None:
    while _SWEEP_TIMERS:
        _SWEEP_TIMERS.pop().stop()


celery_app = make_celery()
