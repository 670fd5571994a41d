"""What the audit events say about the stored objects, compared with what is stored.

An audit event records what its change wrote: ``case.stored`` the case's content address
(SHA-256 of its canonical JSON), title and tags; ``run.queued`` the run's case, the case's
address and batch; ``run.started`` one per attempt; ``run.finished`` the status, verdict,
error, attempts and (from revision 0007) the SHA-256 of the stored record;
``signoff.recorded`` the decision, comment and the SHA-256 of the record signed. Their actor is
the person who acted. Verification recomputes each of these from the stored rows
(:func:`compare_stored_objects`) and names every difference, and checks completeness: every
case, run, outcome and sign-off has its event, and every event's object exists.

A ``run.finished`` event written before revision 0007 carries no record hash: such a record is
compared through its sign-off's hash when it is signed off, and otherwise only counted
(``records_without_hash``).
"""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Iterable
from dataclasses import dataclass, field
from typing import Any

from sqlalchemy import select
from sqlalchemy.orm import Session

from schemas.canonical import document_sha256
from schemas.result import RunStatus
from service.case_intake import stored_case_fields
from service.store.models import Batch, Case, Run, Signoff, Token
from service.store.run_writer import record_sha256

#: The object each kind of event is about (the table its subject is an id of).
SUBJECT_OBJECT = {"case.stored": "case", "run.queued": "run", "run.started": "run",
                  "run.finished": "run", "signoff.recorded": "run", "token.created": "token",
                  "token.revoked": "token", "batch.started": "batch",
                  "batch.finished": "batch"}
FINISHED = (RunStatus.SUCCEEDED.value, RunStatus.FAILED.value)


@dataclass(frozen=True)
class Finding:
    """One difference: which object (``kind`` and ``subject``), the event it was compared
    with (``seq``, when there is one) and what differs, in words."""

    kind: str
    subject: str | None
    seq: int | None
    message: str

    def to_dict(self) -> dict[str, Any]:
        return {"kind": self.kind, "subject": self.subject, "seq": self.seq,
                "message": self.message}


@dataclass(frozen=True)
class IndexedEvent:
    """An event as compared: ``seq`` None for one committed with its change but still in the
    outbox (PostgreSQL chains right after the commit)."""

    seq: int | None
    actor: str
    kind: str
    subject: str
    payload: dict[str, Any]

    @property
    def where(self) -> str:
        return "not chained yet" if self.seq is None else f"seq {self.seq}"


@dataclass
class ObjectReport:
    """What :func:`compare_stored_objects` compared, and every difference it found."""

    findings: list[Finding] = field(default_factory=list)
    cases: int = 0
    runs: int = 0
    records: int = 0
    records_without_hash: int = 0
    signoffs: int = 0

    def counts(self) -> dict[str, int]:
        return {"cases": self.cases, "runs": self.runs, "records": self.records,
                "records_without_hash": self.records_without_hash, "signoffs": self.signoffs}


def _short(digest: Any) -> str:
    return f"{digest[:12]}…" if isinstance(digest, str) and len(digest) > 12 else repr(digest)


class EventIndex:
    """The chain's events by (kind, subject), filled while the chain is walked."""

    def __init__(self) -> None:
        self._by: dict[tuple[str, str], list[IndexedEvent]] = defaultdict(list)

    def add(self, event: IndexedEvent) -> None:
        if event.kind in SUBJECT_OBJECT:
            self._by[(event.kind, event.subject)].append(event)

    def of(self, kind: str, subject: str) -> list[IndexedEvent]:
        return self._by.get((kind, subject), [])

    def items(self) -> Iterable[tuple[tuple[str, str], list[IndexedEvent]]]:
        return self._by.items()


def _one(report: ObjectReport, events: list[IndexedEvent], what: str, subject: str,
         kind: str) -> IndexedEvent | None:
    """The single event of ``kind`` about ``subject``; a finding when there is none or more."""
    if not events:
        report.findings.append(Finding(what, subject, None,
                                       f"{what} {subject} has no {kind} event"))
        return None
    if len(events) > 1:
        report.findings.append(Finding(
            what, subject, events[1].seq,
            f"{what} {subject} has {len(events)} {kind} events ("
            f"{', '.join(e.where for e in events)}); one was expected"))
    return events[-1]


def _differs(report: ObjectReport, what: str, subject: str, event: IndexedEvent, name: str,
             stored: Any, recorded: Any, consequence: str = "") -> None:
    if stored != recorded:
        shown = (_short(stored), _short(recorded)) if name.endswith("sha256") else (
            repr(stored), repr(recorded))
        report.findings.append(Finding(
            what, subject, event.seq,
            f"{what} {subject} {name}: stored {shown[0]} differs from {shown[1]} in its "
            f"{event.kind} event ({event.where}){consequence}"))


def _compare_cases(session: Session, index: EventIndex, report: ObjectReport) -> dict[str, str]:
    """Each case against its ``case.stored``; the stored case ids and their addresses."""
    addresses = {}
    for case in session.execute(select(Case).order_by(Case.id)).scalars():
        report.cases += 1
        addresses[case.id] = case.sha256
        event = _one(report, index.of("case.stored", case.id), "case", case.id, "case.stored")
        if event is None:
            continue
        recomputed = stored_case_fields(case.document)
        _differs(report, "case", case.id, event, "document sha256", recomputed["sha256"],
                 event.payload.get("sha256"), ": the case document was changed after it was "
                 "stored")
        _differs(report, "case", case.id, event, "sha256 column", case.sha256,
                 event.payload.get("sha256"))
        _differs(report, "case", case.id, event, "title", case.title, event.payload.get("title"))
        _differs(report, "case", case.id, event, "tags", sorted(case.tags or []),
                 event.payload.get("tags"))
        _differs(report, "case", case.id, event, "author", case.created_by, event.actor)
    return addresses


def _compare_signoff(run: Run, signoff: Signoff, index: EventIndex,
                     report: ObjectReport) -> None:
    report.signoffs += 1
    what = "sign-off of run"
    event = _one(report, index.of("signoff.recorded", run.id), what, run.id,
                 "signoff.recorded")
    if event is None:
        return
    _differs(report, what, run.id, event, "reviewer", signoff.reviewer, event.actor)
    for name, recorded in sorted(event.payload.items()):
        if name == "record_sha256":
            _differs(report, "sealed record of run", run.id, event, "record sha256",
                     document_sha256(run.record or {}), recorded,
                     ": the record was changed after it was signed off")
            if signoff.record_sha256 is not None:
                _differs(report, what, run.id, event, "record_sha256 column",
                         signoff.record_sha256, recorded)
        elif name == "printed_name":
            _differs(report, what, run.id, event, "printed name", signoff.signer_name, recorded)
        elif hasattr(Signoff, name) and not name.startswith("_"):
            stored = getattr(signoff, name)
            _differs(report, what, run.id, event, name,
                     stored.isoformat() if hasattr(stored, "isoformat") else stored, recorded)


def _compare_run(run: Run, signoff: Signoff | None, addresses: dict[str, str],
                 index: EventIndex, report: ObjectReport) -> None:
    report.runs += 1
    queued = _one(report, index.of("run.queued", run.id), "run", run.id, "run.queued")
    if queued is not None:
        _differs(report, "run", run.id, queued, "case_id", run.case_id,
                 queued.payload.get("case_id"))
        _differs(report, "run", run.id, queued, "case sha256", addresses.get(run.case_id),
                 queued.payload.get("case_sha256"))
        _differs(report, "run", run.id, queued, "batch_id", run.batch_id,
                 queued.payload.get("batch_id"))
        _differs(report, "run", run.id, queued, "submitter", run.submitted_by, queued.actor)
    started = index.of("run.started", run.id)
    if len(started) != run.attempts:
        report.findings.append(Finding(
            "run", run.id, started[-1].seq if started else None,
            f"run {run.id} attempts: stored {run.attempts} but {len(started)} run.started "
            "events"))
    finished = index.of("run.finished", run.id)
    if run.status in FINISHED:
        event = _one(report, finished, "run", run.id, "run.finished")
        if event is not None:
            _compare_outcome(run, event, report)
    elif finished:
        report.findings.append(Finding(
            "run", run.id, finished[-1].seq,
            f"run {run.id} is stored as {run.status} but its run.finished event ("
            f"{finished[-1].where}) says {finished[-1].payload.get('status')!r}"))
    if signoff is not None:
        _compare_signoff(run, signoff, index, report)
    elif index.of("signoff.recorded", run.id):
        event = index.of("signoff.recorded", run.id)[-1]
        report.findings.append(Finding(
            "sign-off of run", run.id, event.seq,
            f"sign-off of run {run.id}: its signoff.recorded event ({event.where}, "
            f"{event.payload.get('decision')!r} by {event.actor}) has no stored sign-off"))


def _compare_outcome(run: Run, event: IndexedEvent, report: ObjectReport) -> None:
    payload = event.payload
    _differs(report, "run", run.id, event, "status", run.status, payload.get("status"))
    _differs(report, "run", run.id, event, "error", run.error, payload.get("error"))
    _differs(report, "run", run.id, event, "verdict", (run.record or {}).get("verdict"),
             payload.get("verdict"))
    _differs(report, "run", run.id, event, "attempts", run.attempts, payload.get("attempts"))
    if "record_sha256" in payload:
        report.records += 1
        _differs(report, "run", run.id, event, "record sha256", record_sha256(run.record),
                 payload["record_sha256"], ": the record was changed after it was stored")
    elif run.record is not None:
        report.records_without_hash += 1


def _compare_existence(session: Session, index: EventIndex, report: ObjectReport,
                       cases: Iterable[str], runs: Iterable[str]) -> None:
    """Every event's object exists."""
    present = {"case": set(cases), "run": set(runs),
               "token": set(session.execute(select(Token.id)).scalars()),
               "batch": set(session.execute(select(Batch.id)).scalars())}
    for (kind, subject), events in sorted(index.items()):
        table = SUBJECT_OBJECT[kind]
        if subject not in present[table]:
            report.findings.append(Finding(
                table, subject, events[0].seq,
                f"event {events[0].where} ({kind}) is about {table} {subject}, which is not "
                "stored: it was deleted"))


def compare_stored_objects(session: Session, index: EventIndex) -> ObjectReport:
    """Every stored case, run, record and sign-off against its audit events, and every event's
    object against the store (see the module notes)."""
    report = ObjectReport()
    addresses = _compare_cases(session, index, report)
    signoffs = {s.run_id: s for s in session.execute(select(Signoff)).scalars()}
    run_ids = []
    for run in session.execute(select(Run).order_by(Run.id)).scalars():
        run_ids.append(run.id)
        _compare_run(run, signoffs.get(run.id), addresses, index, report)
        session.expunge(run)
    _compare_existence(session, index, report, addresses, run_ids)
    return report
