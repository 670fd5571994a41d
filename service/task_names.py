"""The names of fluxproof's Celery tasks and queues, defined once.

The service publishes messages naming these tasks (:mod:`service.celery_client`,
:mod:`service.recovery`); the workers register their task code under the same names
(:mod:`worker.tasks`). Nothing else here, so that any module may import it.
"""

from __future__ import annotations

#: Execute one run (argument: the run id); see :func:`service.runs.execute_run`.
EXECUTE_RUN_TASK = "fluxproof.execute_run"
#: Start a batch re-verifying every stored case (nightly, from beat).
REVERIFY_ALL_TASK = "fluxproof.reverify_all"
#: Send again the runs whose messages were lost and close finished batches (beat, every few s).
RECOVER_LOST_RUNS_TASK = "fluxproof.recover_lost_runs"

#: The queue of runs, and the queue of the upkeep sweep (which every worker also consumes).
RUN_QUEUE = "celery"
UPKEEP_QUEUE = "fluxproof.upkeep"
