"""The Celery application of fluxproof workers: the service's configuration
(:func:`service.celery_client.celery_config`) with the task modules included.

Run it with ``fluxproof worker`` or ``celery -A worker.celery_app worker`` (``beat`` for the
schedule). The main process loads the engine before it forks the pool (:mod:`worker.warmup`),
so that no pool process pays the first check's imports in the middle of a batch. Each pool
process lowers its own CPU priority by ``FLUXPROOF_WORKER_NICE`` (default 10) as it starts:
solving is background work and yields to the API where both share a host.
"""

from __future__ import annotations

import logging
import os
from collections.abc import Mapping
from typing import Any

from celery import Celery
from celery.signals import celeryd_after_setup, worker_process_init

from service.celery_client import make_celery_app
from service.settings import settings_from_env, worker_nice
from service.store import default_store
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
    increment = worker_nice(settings_from_env())
    if increment:
        os.nice(increment)


celery_app = make_celery()
