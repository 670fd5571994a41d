"""Executing a run: claim it, check its case with the engine, store the outcome.

``execute_run`` is what every executor calls (a Celery worker, the embedded thread pool): it is
idempotent by run id, so a second delivery of a finished run changes nothing, and it keeps the
store consistent whatever the engine does (an engine exception is a ``failed`` run, recorded).
Transient store errors propagate, so that the Celery task can retry them. The writes go through
the store's run writer (``store.runs``, :mod:`service.store.run_writer`).
"""

from __future__ import annotations

import logging
import secrets
import socket
from typing import Any

import schemas
import worker.engine
from service.batches import close_batch_after_run
from service.case_intake import intake_budgets
from service.runs.finite import non_finite_paths_of_record
from service.runs.waves import BlockSharing, WaveScheduler
from service.store import Store, default_store
from service.store.blocks import delete_blocks, fix_seed
from service.store.models import RunStatus
from worker.engine.cost import DEFAULT_BUDGETS
from worker.engine.design.request import LAW_OF_PROPAGATION

logger = logging.getLogger(__name__)

DEFAULT_MAX_ATTEMPTS = 3

try:  # Celery's soft time limit, raised inside the solve; absent when Celery is not installed.
    from celery.exceptions import SoftTimeLimitExceeded
except ImportError:  # pragma: no cover - celery is a service dependency
    class SoftTimeLimitExceeded(Exception):  # type: ignore[no-redef]
        """Stand-in so that the except clause below stays valid without Celery."""


def failure_reason(exc: BaseException) -> str:
    """The ``error`` of a run whose check raised ``exc``."""
    if isinstance(exc, SoftTimeLimitExceeded):
        return "the solve ran past the worker's soft time limit and was stopped"
    if isinstance(exc, schemas.CaseError):
        details = "; ".join(f"{e.get('path')}: {e.get('message')}" for e in exc.errors)
        return f"the stored case no longer passes validation: {details}"
    return f"engine error: {type(exc).__name__}: {exc}"


def execute_run(run_id: str, store: Store | None = None, *,
                max_attempts: int = DEFAULT_MAX_ATTEMPTS, actor: str | None = None,
                sharing: BlockSharing | None = None) -> str:
    """Execute one run: claim it, solve its case with the engine, store the record.

    Idempotent by ``run_id``: a finished run is left exactly as it is. A run that was started
    ``max_attempts`` times already (its worker lost or killed each time) is ended ``failed``.
    Returns the run's status afterwards ("missing" when there is no such run).

    Two writes, each with its audit event: the claim (``running``, one more attempt,
    ``run.started``) before the solve, so that a lost worker's attempt counts; and the outcome
    (``run.finished``). Then, for a batch run, the batch is closed when this was its last
    unfinished run (:func:`service.batches.close_batch_after_run`).

    A case with ``uncertainty`` has its Monte Carlo blocks shared as ``sharing`` says
    (:mod:`service.runs.waves`; None: computed here, still stored block by block so that a
    re-execution reuses them).
    """
    store = store or default_store()
    actor = actor or f"worker@{socket.gethostname()}"
    claim = store.runs.claim(run_id, max_attempts, actor)
    if claim is None:
        status, batch_id = store.runs.give_up(run_id, actor)
        if status == "missing":
            logger.warning("execute_run: no run %s", run_id)
        close_batch_after_run(store, batch_id)
        return status
    sharing = sharing or BlockSharing()
    status, record, error = check_outcome(run_id, claim.case_id, claim.document,
                                          monte_carlo=(store, sharing))
    stored, batch_id = store.runs.store_outcome(run_id, status=status, record=record,
                                                error=error, actor=actor)
    if stored and claim.document.get("uncertainty") and not sharing.keep_blocks:
        delete_blocks(store, run_id)  # the record holds what they gave
    if not stored:
        # Another delivery finished first (or the run is gone); keep what it stored.
        found = store.runs.status_of(run_id)
        return "missing" if found is None else found
    close_batch_after_run(store, batch_id)
    return status


def monte_carlo_options(store: Store, run_id: str, document: dict[str, Any],
                        sharing: BlockSharing) -> dict[str, Any]:
    """``check_case``'s Monte Carlo arguments for a run: its fixed seed (drawn and stored once
    when the case states none) and the wave scheduler; none for a case without uncertainty or
    whose uncertainty takes the law of propagation."""
    uncertainty = document.get("uncertainty")
    if not isinstance(uncertainty, dict) or uncertainty.get("method") == LAW_OF_PROPAGATION:
        return {}  # no trials: neither a seed nor blocks
    seed = uncertainty.get("seed")
    if not isinstance(seed, int) or isinstance(seed, bool):
        seed = fix_seed(store, run_id, secrets.randbits(62))
    return {"seed": seed, "scheduler": WaveScheduler(store, run_id, sharing)}


def check_outcome(run_id: str, case_id: str, document: dict[str, Any], *,
                  monte_carlo: tuple[Store, BlockSharing] | None = None
                  ) -> tuple[str, dict[str, Any] | None, str | None]:
    """Check the case with the engine: (status, record, error) of the run. ``monte_carlo``:
    the store and the sharing of the run's Monte Carlo blocks (else computed in this thread
    with a fresh seed)."""
    record: dict[str, Any] | None = None
    error: str | None = None
    try:
        options = ({} if monte_carlo is None
                   else monte_carlo_options(monte_carlo[0], run_id, document, monte_carlo[1]))
        # check_case validates the stored case again (CaseError when it no longer passes).
        budgets = intake_budgets()
        if budgets != DEFAULT_BUDGETS:  # a scaled budget; check_case holds the default itself
            options["budgets"] = budgets
        result = worker.engine.check_case(document, **options)
        record = dict(result)
        record["run_id"] = run_id
        record["case_id"] = case_id
        status = (RunStatus.SUCCEEDED.value if record.get("status") == RunStatus.SUCCEEDED
                  else RunStatus.FAILED.value)
        if status == RunStatus.FAILED:
            error = str(record.get("error") or "the engine reported failure without a reason")
        record["status"] = status
        bad = non_finite_paths_of_record(record)
        if bad:
            record, status = None, RunStatus.FAILED.value
            error = ("the engine returned non-finite numbers (NaN or infinity), which a check "
                     f"record cannot hold, at: {', '.join(bad[:10])}")
    except Exception as exc:  # noqa: BLE001 - any engine failure is a recorded result
        logger.warning("run %s failed: %s", run_id, exc)
        status, error = RunStatus.FAILED.value, failure_reason(exc)
    return status, record, error
