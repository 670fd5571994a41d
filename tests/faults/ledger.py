"""Reading the store the way an auditor would after a fault: runs, records, finished events."""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass
from typing import Any

from sqlalchemy import func, select


@dataclass(frozen=True)
class Ledger:
    """What the store says about a set of runs."""

    statuses: Counter
    records: int
    finished_events: Counter
    queued_events: Counter
    attempts: dict[str, int]

    def finished_exactly_once(self, run_ids: list[str]) -> list[str]:
        """Run ids that do NOT have exactly one ``run.finished`` event."""
        return [r for r in run_ids if self.finished_events.get(r, 0) != 1]


def store_batch_cases(store: Any, count: int, tag: str) -> list[str]:
    """Store ``count`` distinct invented cases with ``tag`` in one transaction; their ids."""
    from service.cases import store_case_in
    from tests.integration.invented_cases import distinct_steady_cases

    ids = []
    with store.transaction() as session:
        for document in distinct_steady_cases(count, tags=[tag]):
            case, created = store_case_in(session, document, "fenna.fault-engineer")
            assert created
            ids.append(case.id)
    return ids


def batch_run_ids(store: Any, batch_id: str) -> list[str]:
    from service.store.models import Run

    with store.transaction() as session:
        return list(session.execute(select(Run.id).where(Run.batch_id == batch_id)).scalars())


def unfinished_count(store: Any, batch_id: str) -> int:
    from service.store.models import Run

    with store.transaction() as session:
        return session.execute(
            select(func.count()).select_from(Run).where(
                Run.batch_id == batch_id, Run.status.in_(("queued", "running")))).scalar_one()


def finished_count(store: Any, batch_id: str) -> int:
    from service.store.models import Run

    with store.transaction() as session:
        return session.execute(
            select(func.count()).select_from(Run).where(
                Run.batch_id == batch_id, Run.status.in_(("succeeded", "failed")))).scalar_one()


def read_ledger(store: Any, run_ids: list[str]) -> Ledger:
    from service.store.models import AuditEvent, Run

    wanted = set(run_ids)
    with store.transaction() as session:
        rows = session.execute(select(Run.id, Run.status, Run.record, Run.attempts)).all()
        events = session.execute(
            select(AuditEvent.subject, AuditEvent.kind)
            .where(AuditEvent.kind.in_(("run.finished", "run.queued")))).all()
    statuses: Counter = Counter()
    records = 0
    attempts = {}
    for run_id, status, record, tries in rows:
        if run_id in wanted:
            statuses[status] += 1
            records += record is not None
            attempts[run_id] = tries
    finished = Counter(s for s, k in events if k == "run.finished" and s in wanted)
    queued = Counter(s for s, k in events if k == "run.queued" and s in wanted)
    return Ledger(statuses, records, finished, queued, attempts)
