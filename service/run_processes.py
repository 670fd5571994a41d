"""Embedded runs in processes of their own, so that their time and memory limits hold.

The embedded dispatcher (:mod:`service.dispatch`) keeps a few long-lived run processes
(``spawn``: a fresh interpreter, nothing inherited from the serving process's threads). Each
runs :func:`service.runs.execute_run` for one run id at a time, with its address space limited
(``FLUXPROOF_WORKER_MEMORY_LIMIT_MB``) and a soft time limit (``FLUXPROOF_TASK_SOFT_TIME_LIMIT``:
a timer signal raises Celery's ``SoftTimeLimitExceeded`` in the solve, so the run ends
``failed`` with that reason, as on a worker). A supervising thread of the serving process waits
for the answer up to the hard limit (``FLUXPROOF_TASK_TIME_LIMIT``); past it, or when the
process dies (a memory error it could not survive, a signal), the process is killed and
replaced, and the run is ended ``failed`` with the reason. A run's Monte Carlo blocks go to a
thread pool inside its process (``MONTE_CARLO_WAVE`` threads, :mod:`service.runs.waves`), so
the limits cover them too.
"""

from __future__ import annotations

import logging
import multiprocessing
import signal
import socket
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from multiprocessing.connection import Connection
from typing import Any

from service.batches import close_batch_after_run
from service.process_limits import limit_address_space
from service.runs import execute_run
from service.runs.execution import SoftTimeLimitExceeded, failure_reason
from service.runs.waves import BlockSharing, PoolBlockSender
from service.store import Store
from service.store.blocks import delete_blocks
from service.store.models import RunStatus

logger = logging.getLogger(__name__)

#: Seconds a run process is given to stop after it is asked to at shutdown.
STOP_GRACE_S = 5.0


@dataclass(frozen=True)
class RunProcessConfig:
    """What a run process needs: the store's URL and the limits (seconds, bytes)."""

    database_url: str
    max_attempts: int
    wave: int
    keep_blocks: bool
    soft_time_limit: float
    time_limit: float
    memory_limit: int | None


def _raise_soft_limit(_signum: int, _frame: Any) -> None:
    raise SoftTimeLimitExceeded()


def serve_runs(connection: Connection, config: RunProcessConfig) -> None:
    """A run process's loop: receive a run id, execute it, send its status back; stop on
    None or when the serving process is gone."""
    limit_address_space(config.memory_limit)
    signal.signal(signal.SIGALRM, _raise_soft_limit)
    store = Store(config.database_url)
    blocks = ThreadPoolExecutor(max_workers=max(1, config.wave),
                                thread_name_prefix="fluxproof-block")
    sharing = BlockSharing(PoolBlockSender(store, blocks), config.wave, config.keep_blocks)
    try:
        while True:
            try:
                run_id = connection.recv()
            except (EOFError, OSError):
                break
            if run_id is None:
                break
            signal.setitimer(signal.ITIMER_REAL, config.soft_time_limit)
            try:
                status = execute_run(run_id, store, max_attempts=config.max_attempts,
                                     sharing=sharing)
            except BaseException as exc:  # noqa: BLE001 - the soft limit outside the solve, ...
                signal.setitimer(signal.ITIMER_REAL, 0)
                logger.warning("run process: run %s raised %s", run_id, exc)
                try:
                    status = end_stopped_run(store, run_id, failure_reason(exc),
                                             config.keep_blocks)
                except Exception:  # noqa: BLE001 - the store is unreachable: left unfinished
                    logger.exception("run process: run %s could not be ended", run_id)
                    status = "unfinished"
            finally:
                signal.setitimer(signal.ITIMER_REAL, 0)
            connection.send(status)
    finally:
        blocks.shutdown(wait=False, cancel_futures=True)
        store.dispose()


class RunProcess:
    """One long-lived run process and the pipe to it; replaced when killed or dead."""

    def __init__(self, config: RunProcessConfig) -> None:
        self.config = config
        self._context = multiprocessing.get_context("spawn")
        self._start()

    def _start(self) -> None:
        self._connection, child = self._context.Pipe()
        self.process = self._context.Process(target=serve_runs, args=(child, self.config),
                                             name="fluxproof-run", daemon=True)
        self.process.start()
        child.close()

    def _replace(self) -> None:
        if self.process.is_alive():
            self.process.kill()
        self.process.join(STOP_GRACE_S)
        self._connection.close()
        self._start()

    def execute(self, run_id: str) -> tuple[str | None, str | None]:
        """Execute ``run_id`` in the process: (status, None), or (None, why it was stopped)
        when it ran past the hard time limit or its process died."""
        try:
            self._connection.send(run_id)
            if self._connection.poll(self.config.time_limit):
                return self._connection.recv(), None
            reason = (f"the solve ran past the time limit of {self.config.time_limit:g} s and "
                      "its process was stopped")
        except (EOFError, OSError):
            reason = None
        if reason is None:
            self.process.join(STOP_GRACE_S)
            reason = (f"the run's process ended unexpectedly (exit code "
                      f"{self.process.exitcode}); a memory limit of "
                      f"{self.config.memory_limit or 0} bytes was set")
        self._replace()
        return None, reason

    def stop(self) -> None:
        try:
            self._connection.send(None)
        except (OSError, ValueError):
            pass
        self.process.join(STOP_GRACE_S)
        if self.process.is_alive():
            self.process.kill()
            self.process.join(STOP_GRACE_S)
        self._connection.close()


def end_stopped_run(store: Store, run_id: str, reason: str, keep_blocks: bool) -> str:
    """End a run whose process was stopped: ``failed`` with ``reason`` (nothing changes when it
    finished already); returns its status."""
    actor = f"embedded@{socket.gethostname()}"
    stored, batch_id = store.runs.store_outcome(run_id, status=RunStatus.FAILED.value,
                                                record=None, error=reason, actor=actor)
    if not stored:
        return store.runs.status_of(run_id) or "missing"
    if not keep_blocks:
        delete_blocks(store, run_id)
    close_batch_after_run(store, batch_id)
    return RunStatus.FAILED.value
