"""Choosing where runs execute: Celery workers (broker set) or the embedded thread pool.

Every dispatcher takes run ids whose rows are already committed, and every executor calls the
same :func:`service.runs.execute_run`. The API behaves the same either way (202, then poll).

* ``CeleryDispatcher``: publishes :data:`~service.task_names.EXECUTE_RUN_TASK` by name through
  the service's Celery client (:mod:`service.celery_client`, no task code in this process);
  workers run it (:mod:`worker.tasks`, a thin task around :func:`service.runs.execute_run`).
* ``EmbeddedDispatcher``: ``EMBEDDED_WORKERS`` supervising threads in the service process, each
  with a run process of its own (:mod:`service.run_processes`): the workers' soft and hard time
  limits and memory limit hold there too, and a run past them is ended ``failed`` with the
  reason. A run's Monte Carlo blocks go to a thread pool inside its process
  (``MONTE_CARLO_WAVE`` threads, :mod:`service.runs.waves`). ``EMBEDDED_ISOLATION=thread``
  (tests that replace the engine in-process; an in-memory SQLite store) runs them in the
  service's own threads instead, with no limits.
* ``InlineDispatcher``: runs at once in the caller's thread (tests and command-line tools).
"""

from __future__ import annotations

import logging
import queue
from collections.abc import Iterable
from concurrent.futures import Future, ThreadPoolExecutor, wait
from typing import Any, Protocol

from service.celery_client import make_celery_app
from service.errors import ServiceUnavailable
from service.run_processes import RunProcess, RunProcessConfig, end_stopped_run
from service.runs import execute_run
from service.runs.waves import BlockSharing, PoolBlockSender
from service.settings import embedded_isolation, monte_carlo_wave, worker_memory_limit_bytes
from service.store import Store
from service.task_names import send_execute_run

logger = logging.getLogger(__name__)


class Dispatcher(Protocol):
    mode: str

    def send(self, run_ids: Iterable[str]) -> None: ...

    def state(self) -> dict[str, Any]: ...

    def shutdown(self) -> None: ...


class InlineDispatcher:
    mode = "inline"

    def __init__(self, store: Store, max_attempts: int) -> None:
        self.store = store
        self.max_attempts = max_attempts

    def send(self, run_ids: Iterable[str]) -> None:
        for run_id in run_ids:
            execute_run(run_id, self.store, max_attempts=self.max_attempts)

    def state(self) -> dict[str, Any]:
        return {"state": "ok", "mode": self.mode}

    def shutdown(self) -> None:
        return None


class EmbeddedDispatcher:
    mode = "embedded"

    def __init__(self, store: Store, max_attempts: int, workers: int = 2, *,
                 wave: int = 4, keep_blocks: bool = False,
                 processes: RunProcessConfig | None = None) -> None:
        self.store = store
        self.max_attempts = max_attempts
        self.keep_blocks = keep_blocks
        workers = max(1, int(workers))
        self._pool = ThreadPoolExecutor(max_workers=workers, thread_name_prefix="fluxproof-run")
        self._block_pool = ThreadPoolExecutor(max_workers=max(1, wave),
                                              thread_name_prefix="fluxproof-block")
        self.sharing = BlockSharing(PoolBlockSender(store, self._block_pool), wave, keep_blocks)
        self._futures: set[Future[str]] = set()
        self.isolation = "thread" if processes is None else "process"
        self._processes: queue.Queue[RunProcess] = queue.Queue()
        self._all_processes: list[RunProcess] = []
        if processes is not None:
            for _ in range(workers):
                process = RunProcess(processes)
                self._all_processes.append(process)
                self._processes.put(process)

    def _run(self, run_id: str) -> str:
        if self.isolation == "process":
            return self._run_in_process(run_id)
        try:
            return execute_run(run_id, self.store, max_attempts=self.max_attempts,
                               sharing=self.sharing)
        except Exception:
            logger.exception("embedded execution of run %s failed; it stays unfinished",
                             run_id)
            raise

    def _run_in_process(self, run_id: str) -> str:
        process = self._processes.get()
        try:
            status, stopped = process.execute(run_id)
        finally:
            self._processes.put(process)
        if stopped is not None:
            logger.warning("embedded run %s: %s", run_id, stopped)
            return end_stopped_run(self.store, run_id, stopped, self.keep_blocks)
        assert status is not None
        return status

    def send(self, run_ids: Iterable[str]) -> None:
        for run_id in run_ids:
            future = self._pool.submit(self._run, run_id)
            self._futures.add(future)
            future.add_done_callback(self._futures.discard)

    def wait_idle(self, timeout: float | None = None) -> None:
        """Block until every run sent so far has been executed (tests, shutdown)."""
        wait(list(self._futures), timeout=timeout)

    def state(self) -> dict[str, Any]:
        return {"state": "ok", "mode": self.mode, "pending": len(self._futures),
                "isolation": self.isolation}

    def shutdown(self) -> None:
        self._pool.shutdown(wait=True, cancel_futures=False)
        self._block_pool.shutdown(wait=True, cancel_futures=True)
        for process in self._all_processes:
            process.stop()


class CeleryDispatcher:
    mode = "celery"

    def __init__(self, settings: dict[str, Any]) -> None:
        self.celery = make_celery_app(settings)  # a client: it sends tasks by name only

    def send(self, run_ids: Iterable[str]) -> None:
        """Publish one message per run, all through one producer (one broker connection
        acquired once, not once per message)."""
        pending = list(run_ids)
        sent = 0
        try:
            with self.celery.producer_or_acquire() as producer:
                for run_id in pending:
                    send_execute_run(self.celery, run_id, producer)
                    sent += 1
        except Exception as exc:
            unsent = pending[sent:]
            raise ServiceUnavailable(
                "The broker could not be reached. The runs are stored as queued and will run "
                "once they are sent again (fluxproof serve re-sends unfinished runs at start).",
                extra={"unsent_run_ids": unsent, "broker_error": str(exc)}) from exc

    def state(self) -> dict[str, Any]:
        try:
            with self.celery.connection_for_write() as connection:
                connection.ensure_connection(max_retries=1, timeout=2)
            return {"state": "ok", "mode": self.mode}
        except Exception as exc:
            return {"state": "unavailable", "mode": self.mode, "detail": str(exc)}

    def shutdown(self) -> None:
        self.celery.close()


def make_dispatcher(mode: str, store: Store, settings: dict[str, Any]) -> Dispatcher:
    attempts = int(settings.get("MAX_RUN_ATTEMPTS") or 3)
    if mode == "celery":
        if not settings.get("BROKER_URL"):
            raise ValueError("DISPATCH=celery needs FLUXPROOF_BROKER_URL")
        return CeleryDispatcher(settings)
    if mode == "inline":
        return InlineDispatcher(store, attempts)
    wave = monte_carlo_wave(settings)
    keep_blocks = bool(settings.get("MONTE_CARLO_KEEP_BLOCKS"))
    processes = None
    if embedded_isolation(settings, store.url) == "process":
        processes = RunProcessConfig(
            database_url=store.url, max_attempts=attempts, wave=wave, keep_blocks=keep_blocks,
            soft_time_limit=float(settings.get("TASK_SOFT_TIME_LIMIT") or 300),
            time_limit=float(settings.get("TASK_TIME_LIMIT") or 360),
            memory_limit=worker_memory_limit_bytes(settings))
    return EmbeddedDispatcher(store, attempts, int(settings.get("EMBEDDED_WORKERS") or 2),
                              wave=wave, keep_blocks=keep_blocks, processes=processes)
