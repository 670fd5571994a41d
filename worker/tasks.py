"""Celery tasks: thin wrappers that call the service's domain functions, each registered under
its name from :mod:`service.task_names` (the service sends them by that name).

``execute_run`` re-reads its run, re-validates the case, calls the engine and stores the record
(:func:`service.runs.execute_run`, idempotent by run id; the embedded dispatcher calls the same
function in a thread). Only named transient errors of the store or the broker are retried;
invalid input and solver failures are results, recorded.
"""

from __future__ import annotations

import logging

import kombu.exceptions
import redis.exceptions
import sqlalchemy.exc
from celery import current_app, shared_task

from service import runs
from service.batches import close_finished_batches, start_batch
from service.dispatch import CeleryDispatcher
from service.recovery import recover_lost_runs as recover
from service.recovery import recovery_settings
from service.runs.waves import BlockSharing, CeleryBlockSender, compute_and_store_block
from service.settings import monte_carlo_wave, settings_from_env
from service.store import default_store
from service.task_names import (
    EXECUTE_RUN_TASK,
    MONTE_CARLO_BLOCK_TASK,
    RECOVER_LOST_RUNS_TASK,
    REVERIFY_ALL_TASK,
)

_SETTINGS = settings_from_env()
logger = logging.getLogger(__name__)

#: Errors worth another try: the store or the broker was briefly unreachable or locked.
TRANSIENT_ERRORS = (
    sqlalchemy.exc.OperationalError,
    sqlalchemy.exc.InterfaceError,
    redis.exceptions.ConnectionError,
    redis.exceptions.TimeoutError,
    kombu.exceptions.OperationalError,
)

RETRY_OPTIONS = {
    "autoretry_for": TRANSIENT_ERRORS,
    "retry_backoff": True,
    "retry_backoff_max": 120,
    "retry_jitter": True,
    "max_retries": 5,
}


@shared_task(name=EXECUTE_RUN_TASK, acks_late=True, reject_on_worker_lost=True,
             ignore_result=True, soft_time_limit=int(_SETTINGS["TASK_SOFT_TIME_LIMIT"]),
             time_limit=int(_SETTINGS["TASK_TIME_LIMIT"]), **RETRY_OPTIONS)
def execute_run(run_id: str) -> str:
    """Execute run ``run_id`` (see :func:`service.runs.execute_run`); returns its status. Its
    Monte Carlo blocks are shared with the other workers as block tasks."""
    sharing = BlockSharing(CeleryBlockSender(current_app), monte_carlo_wave(_SETTINGS),
                           bool(_SETTINGS.get("MONTE_CARLO_KEEP_BLOCKS")))
    return runs.execute_run(run_id, max_attempts=int(_SETTINGS["MAX_RUN_ATTEMPTS"]),
                            sharing=sharing)


@shared_task(name=MONTE_CARLO_BLOCK_TASK, acks_late=True, reject_on_worker_lost=True,
             ignore_result=True, soft_time_limit=int(_SETTINGS["TASK_SOFT_TIME_LIMIT"]),
             time_limit=int(_SETTINGS["TASK_TIME_LIMIT"]), **RETRY_OPTIONS)
def monte_carlo_block(run_id: str, index: int, seed: int) -> str:
    """Compute block ``index`` of run ``run_id``'s Monte Carlo with ``seed`` and store it once
    (:func:`service.runs.waves.compute_and_store_block`); a redelivered message writes nothing
    new. An engine error is logged and left to the run's own worker, which computes any block
    nobody stored (and records the error there)."""
    try:
        return compute_and_store_block(default_store(), run_id, index, seed)
    except TRANSIENT_ERRORS:
        raise
    except Exception as exc:  # noqa: BLE001 - the coordinator computes and records it
        logger.warning("block %d of run %s not computed: %s", index, run_id, exc)
        return f"not computed: {type(exc).__name__}"


@shared_task(name=REVERIFY_ALL_TASK, acks_late=True, ignore_result=True, **RETRY_OPTIONS)
def reverify_all() -> str:
    """Nightly: start a batch re-verifying every stored case; returns the batch id."""
    batch = start_batch(default_store(), actor="nightly", all_cases=True)
    dispatcher = CeleryDispatcher(_SETTINGS)
    try:
        dispatcher.send(batch["run_ids"])
    finally:
        dispatcher.shutdown()  # its client app and broker pool, made for this one batch
    return batch["batch_id"]


@shared_task(name=RECOVER_LOST_RUNS_TASK, ignore_result=True)
def recover_lost_runs() -> dict:
    """Every few seconds (beat): send again the runs whose messages were lost
    (:func:`service.recovery.recover_lost_runs`) and close any batch whose runs are all
    finished but whose last worker died before closing it
    (:func:`service.batches.close_finished_batches`); returns what the sweep saw and did."""
    _interval, after = recovery_settings(_SETTINGS)
    store = default_store()
    report = recover(store, current_app, older_than_s=after).to_dict()
    report["batches_closed"] = len(close_finished_batches(store))
    return report
