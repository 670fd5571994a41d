"""Finding runs whose task messages were lost, and sending them again.

A run row is committed before its message is published, so the store always knows every run;
the broker does not. A message can be lost when the broker restarts without its data (Redis
with no persistence), when the API cannot reach the broker at submission (the run stays
``queued``, see :class:`service.dispatch.CeleryDispatcher`), or when a whole worker node is
killed while it holds unacknowledged messages (Redis gives them back only after the visibility
timeout, an hour by default).

:func:`recover_lost_runs` takes the unfinished rows (``queued`` or ``running``) older than a
threshold, subtracts every run the broker or a live worker still knows about (the queue, the
transport's unacknowledged set, and each worker's active and reserved tasks), and sends the rest
again. A second delivery of a run that is in fact still alive is harmless: ``execute_run`` is
idempotent by run id, so a run ends with one record and one ``run.finished`` event whatever
number of messages name it.

The snapshot is taken in the order queue, unacknowledged set, workers: a message moves from the
queue to a worker, never back, so reading the queue first can only make a run look alive twice,
not lost.

The sweep runs wherever runs are served, so that no deployment strands a run: a thread of the
API process (:class:`SweepTimer`, started by ``create_app`` when runs go to Celery), a timer in
every Celery worker (``worker.celery_app``), and the beat-scheduled task
``fluxproof.recover_lost_runs`` where beat runs. Every
``FLUXPROOF_RECOVERY_INTERVAL`` seconds each calls it with rows older than
``FLUXPROOF_RECOVERY_AFTER`` seconds; the sweeps take turns by a lease in the database
(:mod:`service.store.leases`), so one sweeps at a time however many processes try.
"""

from __future__ import annotations

import base64
import json
import logging
import threading
from collections.abc import Iterable, Iterator, Mapping
from contextlib import contextmanager
from dataclasses import dataclass, field
from datetime import datetime, timedelta
from typing import Any

from sqlalchemy import and_, or_, select

from service.store import Store
from service.store.leases import held_lease
from service.store.models import UNFINISHED_STATES, Run, RunStatus, utc_now
from service.task_names import EXECUTE_RUN_TASK, RUN_QUEUE, send_execute_run

logger = logging.getLogger(__name__)

#: Seconds between two sweeps (beat schedule).
DEFAULT_INTERVAL_S = 30.0
#: Age in seconds (since queued, or since started for a running row) before a run the broker
#: does not know about counts as lost. Covers the moment between the commit and the publish.
DEFAULT_AFTER_S = 60.0
#: Seconds to wait for workers to answer the active/reserved inspection.
INSPECT_TIMEOUT_S = 1.0
#: The database lease that makes sweeps take turns (two overlapping sweeps would each send what
#: the other is sending). It expires by itself should a sweep die holding it.
LEASE_NAME = "recovery-sweep"
LEASE_SECONDS = 120
#: Largest number of runs sent again in one sweep (the next sweep takes the rest).
MAX_PER_SWEEP = 5000


class BrokerUnreadable(RuntimeError):
    """The broker's queues could not be read, so lost runs cannot be told from live ones."""


@dataclass
class RecoveryReport:
    """What one sweep saw and did."""

    unfinished: int = 0
    known_to_broker: int = 0
    skipped: bool = False
    redispatched: list[str] = field(default_factory=list)
    unsent: list[str] = field(default_factory=list)

    def to_dict(self) -> dict[str, Any]:
        return {"skipped": self.skipped, "unfinished": self.unfinished,
                "known_to_broker": self.known_to_broker,
                "redispatched": len(self.redispatched), "unsent": len(self.unsent)}


def recovery_settings(settings: Mapping[str, Any]) -> tuple[float, float]:
    """(interval, after) in seconds from ``RECOVERY_INTERVAL`` and ``RECOVERY_AFTER``."""
    values = []
    for key, default in (("RECOVERY_INTERVAL", DEFAULT_INTERVAL_S),
                         ("RECOVERY_AFTER", DEFAULT_AFTER_S)):
        raw = settings.get(key)
        try:
            value = float(default if raw in (None, "") else raw)
        except (TypeError, ValueError) as exc:
            raise ValueError(f"FLUXPROOF_{key}: expected a number of seconds, got {raw!r}"
                             ) from exc
        if not value > 0:
            raise ValueError(f"FLUXPROOF_{key}: expected a positive number of seconds, "
                             f"got {raw!r}")
        values.append(value)
    return values[0], values[1]


def stale_unfinished_runs(store: Store, older_than_s: float,
                          now: datetime | None = None) -> list[str]:
    """Ids of ``queued`` runs created, and ``running`` runs started, more than
    ``older_than_s`` seconds before ``now``, oldest first."""
    cutoff = (now or utc_now()) - timedelta(seconds=older_than_s)
    with store.transaction() as session:
        return list(session.execute(
            select(Run.id).where(or_(
                and_(Run.status == RunStatus.QUEUED.value, Run.created_at < cutoff),
                and_(Run.status == RunStatus.RUNNING.value,
                     or_(Run.started_at < cutoff,
                         and_(Run.started_at.is_(None), Run.created_at < cutoff))),
            )).order_by(Run.created_at).limit(MAX_PER_SWEEP)
        ).scalars())


def still_unfinished(store: Store, run_ids: list[str]) -> list[str]:
    """The ids of ``run_ids`` (order kept) whose rows are still queued or running."""
    if not run_ids:
        return []
    unfinished: set[str] = set()
    with store.transaction() as session:
        for start in range(0, len(run_ids), 500):
            chunk = run_ids[start:start + 500]
            unfinished.update(session.execute(
                select(Run.id).where(Run.id.in_(chunk),
                                     Run.status.in_(UNFINISHED_STATES))).scalars())
    return [run_id for run_id in run_ids if run_id in unfinished]


def _run_id_of_body(body: Any) -> str | None:
    """The run id argument of an ``execute_run`` message body (protocol 2: [args, kwargs,
    embed])."""
    if isinstance(body, list) and body and isinstance(body[0], list) and body[0]:
        first = body[0][0]
        return first if isinstance(first, str) else None
    return None


def run_id_of_message(raw: bytes | str) -> str | None:
    """The run id named by one raw message of the Redis transport, None for other tasks."""
    try:
        envelope = json.loads(raw)
        if isinstance(envelope, list):  # an entry of the unacknowledged hash
            envelope = envelope[0]
        if envelope.get("headers", {}).get("task") != EXECUTE_RUN_TASK:
            return None
        body = envelope.get("body")
        if envelope.get("properties", {}).get("body_encoding") == "base64":
            body = base64.b64decode(body).decode("utf-8")
        return _run_id_of_body(json.loads(body))
    except (ValueError, TypeError, KeyError, AttributeError, IndexError):
        logger.warning("recovery: a broker message could not be read; ignored")
        return None


def queued_run_ids(celery_app: Any, queues: Iterable[str] = (RUN_QUEUE,)) -> set[str]:
    """Run ids in the broker's queues and in its unacknowledged set (Redis transport)."""
    found: set[str] = set()
    try:
        with celery_app.connection_for_read() as connection:
            channel = connection.default_channel
            client = channel.client
            keys = [channel._q_for_pri(queue, priority) for queue in queues
                    for priority in channel.priority_steps]
            for key in dict.fromkeys(keys):
                for raw in client.lrange(key, 0, -1):
                    run_id = run_id_of_message(raw)
                    if run_id:
                        found.add(run_id)
            for raw in client.hvals(channel.unacked_key):
                run_id = run_id_of_message(raw)
                if run_id:
                    found.add(run_id)
    except Exception as exc:  # noqa: BLE001 - any failure means we cannot tell lost from live
        raise BrokerUnreadable(f"the broker's queues could not be read: {exc}") from exc
    return found


def worker_run_ids(celery_app: Any, timeout: float = INSPECT_TIMEOUT_S) -> set[str]:
    """Run ids that live workers are executing or hold reserved (prefetched)."""
    found: set[str] = set()
    inspector = celery_app.control.inspect(timeout=timeout)
    for reply in (inspector.active() or {}, inspector.reserved() or {}):
        for tasks in reply.values():
            for task in tasks or []:
                if task.get("name") != EXECUTE_RUN_TASK:
                    continue
                args = task.get("args")
                if isinstance(args, (list, tuple)) and args and isinstance(args[0], str):
                    found.add(args[0])
    return found


@contextmanager
def sweep_lease(store: Store, seconds: float = LEASE_SECONDS) -> Iterator[bool]:
    """Hold the sweep's database lease while the block runs; yields False when another
    process's sweep holds it."""
    with held_lease(store, LEASE_NAME, seconds) as taken:
        yield taken


def recover_lost_runs(store: Store, celery_app: Any, *, older_than_s: float = DEFAULT_AFTER_S,
                      queues: Iterable[str] = (RUN_QUEUE,),
                      now: datetime | None = None) -> RecoveryReport:
    """Send again every unfinished run older than ``older_than_s`` that neither the broker nor
    a live worker knows about. Raises :class:`BrokerUnreadable` when the broker cannot be read
    (nothing is sent then). Returns a report with ``skipped`` set when another process's sweep
    holds the lease."""
    # Audit events whose writer died between its commit and their chaining (PostgreSQL).
    store.chain_audit(only_if_pending=True)
    with sweep_lease(store) as taken:
        if not taken:
            return RecoveryReport(skipped=True)
        return _sweep(store, celery_app, older_than_s=older_than_s, queues=queues, now=now)


def _sweep(store: Store, celery_app: Any, *, older_than_s: float, queues: Iterable[str],
           now: datetime | None) -> RecoveryReport:
    report = RecoveryReport()
    candidates = stale_unfinished_runs(store, older_than_s, now)
    report.unfinished = len(candidates)
    if not candidates:
        return report
    known = queued_run_ids(celery_app, queues)
    known |= worker_run_ids(celery_app)
    lost = [run_id for run_id in candidates if run_id not in known]
    report.known_to_broker = len(candidates) - len(lost)
    # A run that finished while the broker was read is no longer lost.
    lost = still_unfinished(store, lost)
    for index, run_id in enumerate(lost):
        try:
            send_execute_run(celery_app, run_id)
        except Exception as exc:  # noqa: BLE001 - the rest waits for the next sweep
            report.unsent = lost[index:]
            logger.warning("recovery: the broker refused a send (%s); %d runs wait for the "
                           "next sweep", exc, len(report.unsent))
            break
        report.redispatched.append(run_id)
    if report.redispatched or report.unsent:
        logger.warning("recovery: %d unfinished runs older than %g s, %d known to the broker, "
                       "%d sent again, %d unsent", report.unfinished, older_than_s,
                       report.known_to_broker, len(report.redispatched), len(report.unsent))
    return report


class SweepTimer:
    """Runs :func:`recover_lost_runs` every ``interval`` seconds in a daemon thread of this
    process (the API process or a Celery worker), so that a deployment without beat still
    re-sends the runs a broker lost. The sweeps of all processes take turns by the lease; a
    sweep that fails (broker or store unreachable) is logged and tried again next time."""

    def __init__(self, store: Store, celery_app: Any, *, interval: float = DEFAULT_INTERVAL_S,
                 older_than_s: float = DEFAULT_AFTER_S, name: str = "fluxproof-recovery"
                 ) -> None:
        self.store = store
        self.celery_app = celery_app
        self.interval = interval
        self.older_than_s = older_than_s
        self.sweeps = 0
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._loop, name=name, daemon=True)

    def start(self) -> SweepTimer:
        self._thread.start()
        return self

    def stop(self, timeout: float | None = 5.0) -> None:
        self._stop.set()
        if self._thread.is_alive():
            self._thread.join(timeout)

    def sweep_once(self) -> RecoveryReport | None:
        """One sweep; None when it failed (logged)."""
        try:
            report = recover_lost_runs(self.store, self.celery_app,
                                       older_than_s=self.older_than_s)
        except Exception:  # noqa: BLE001 - the next sweep tries again
            logger.warning("recovery: the sweep failed; trying again in %g s", self.interval,
                           exc_info=True)
            return None
        finally:
            self.sweeps += 1
        return report

    def _loop(self) -> None:
        while not self._stop.wait(self.interval):
            self.sweep_once()
