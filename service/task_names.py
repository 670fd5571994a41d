"""The names of fluxproof's Celery tasks and queues, defined once.

The service publishes messages naming these tasks (:mod:`service.celery_client`,
:mod:`service.recovery`); the workers register their task code under the same names
(:mod:`worker.tasks`). Nothing else here, so that any module may import it.
"""

from __future__ import annotations

from typing import Any

#: Execute one run (argument: the run id); see :func:`service.runs.execute_run`.
EXECUTE_RUN_TASK = "fluxproof.execute_run"
#: Compute and store one Monte Carlo block of a run (arguments: run id, block index, seed); see
#: :func:`service.runs.waves.compute_and_store_block`.
MONTE_CARLO_BLOCK_TASK = "fluxproof.monte_carlo_block"
#: Start a batch re-verifying every stored case (nightly, from beat).
REVERIFY_ALL_TASK = "fluxproof.reverify_all"
#: Send again the runs whose messages were lost and close finished batches (beat, every few s).
RECOVER_LOST_RUNS_TASK = "fluxproof.recover_lost_runs"

#: The queue of runs, and the queue of the upkeep sweep (which every worker also consumes).
RUN_QUEUE = "celery"
UPKEEP_QUEUE = "fluxproof.upkeep"

#: How hard a publisher retries one message before the broker counts as unavailable.
SEND_RETRY_POLICY = {"max_retries": 2, "interval_start": 0.2, "interval_step": 0.5}


def send_execute_run(celery_app: Any, run_id: str, producer: Any = None) -> None:
    """Publish one :data:`EXECUTE_RUN_TASK` message for ``run_id`` (through ``producer`` when
    the caller holds one for many messages)."""
    celery_app.send_task(EXECUTE_RUN_TASK, args=[run_id], retry=True,
                         retry_policy=SEND_RETRY_POLICY, producer=producer)


def send_monte_carlo_block(celery_app: Any, run_id: str, index: int, seed: int,
                           producer: Any = None) -> None:
    """Publish one :data:`MONTE_CARLO_BLOCK_TASK` message (block ``index`` of run ``run_id``
    drawn with ``seed``), on the queue of runs as :func:`send_execute_run` does."""
    celery_app.send_task(MONTE_CARLO_BLOCK_TASK, args=[run_id, index, seed], retry=True,
                         retry_policy=SEND_RETRY_POLICY, producer=producer)
