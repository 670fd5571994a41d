"""A run's claim and its outcome on PostgreSQL: each one statement, its own transaction.

On PostgreSQL the two writes of :func:`service.runs.execute_run` that every run makes are sent
as single data-modifying statements on an autocommit connection: the ``UPDATE`` of the run and
the ``INSERT`` of its audit event into ``audit_pending`` in one ``WITH`` statement, which is
atomic and commits by itself, and whose event the server chains at that commit (migration
0003). One round trip each, where a session transaction took four (``BEGIN``, the update, the
event, ``COMMIT``). The events' payloads hold the run's attempt count, which only the
``UPDATE`` knows, so their canonical JSON is joined in SQL from pieces made in Python
(:func:`service.audit.chain_json`) around that integer; the chain is verified in Python as
always. Everything else (SQLite, and the rare paths: a run missing, finished or out of
attempts) goes through the session code in :mod:`service.runs`.
"""

from __future__ import annotations

import json
import uuid
from typing import Any

from sqlalchemy import JSON, Integer, String, bindparam, text

from service import audit
from service.cases import stored_case_fields
from service.store import Store
from service.store.models import UtcDateTime

#: Claim: running, one more attempt, started now; plus its ``run.started`` event.
#: Payload ``{"attempt": N}``.
_CLAIM = text("""
WITH claimed AS (
    UPDATE runs SET status = 'running', started_at = :now, attempts = attempts + 1
    WHERE id = :run_id AND status IN ('queued', 'running') AND attempts < :max_attempts
    RETURNING attempts, case_id
), pended AS (
    INSERT INTO audit_pending (actor, kind, subject, payload, before_at, before_seq, after_seq)
    SELECT :actor, 'run.started', :run_id, '{"attempt":' || attempts || '}', :before_at,
           :before_payload || '{"attempt":' || attempts || '}' || :after_payload, :after_seq
    FROM claimed
)
SELECT claimed.attempts, claimed.case_id, cases.document
FROM claimed JOIN cases ON cases.id = claimed.case_id
""").bindparams(bindparam("now", type_=UtcDateTime())).columns(
    attempts=Integer, case_id=String, document=JSON)

#: Outcome of an unfinished run; plus its ``run.finished`` event.
#: Payload ``{"attempts": N, "error": ..., "status": ..., "verdict": ...}`` (keys sorted).
_STORE_OUTCOME = text("""
WITH done AS (
    UPDATE runs SET status = :status, record = CAST(:record AS json), error = :error,
                    finished_at = :now
    WHERE id = :run_id AND status IN ('queued', 'running')
    RETURNING attempts, batch_id
), pended AS (
    INSERT INTO audit_pending (actor, kind, subject, payload, before_at, before_seq, after_seq)
    SELECT :actor, 'run.finished', :run_id, '{"attempts":' || attempts || :payload_rest,
           :before_at, :before_payload || '{"attempts":' || attempts || :payload_rest
           || :after_payload, :after_seq
    FROM done
)
SELECT attempts, batch_id FROM done
""").bindparams(bindparam("now", type_=UtcDateTime())).columns(
    attempts=Integer, batch_id=String)


def _pieces(actor: str, kind: str, subject: str) -> dict[str, str]:
    """The event's body pieces around its time, payload and number
    (:func:`service.audit.payload_pieces`), as statement parameters."""
    before_at, before_payload, after_payload, after_seq = audit.payload_pieces(
        actor, kind, subject)
    return {"before_at": before_at, "before_payload": before_payload,
            "after_payload": after_payload, "after_seq": after_seq}


def _autocommit(store: Store):
    return store.engine.connect().execution_options(isolation_level="AUTOCOMMIT")


def claim(store: Store, run_id: str, max_attempts: int, actor: str, now: Any
          ) -> tuple[int, str, Any] | None:
    """Claim the run and write ``run.started`` in one statement; (attempt, case_id, document)
    or None when the run is not claimable (missing, finished or out of attempts)."""
    with _autocommit(store) as connection:
        row = connection.execute(_CLAIM, {
            "run_id": run_id, "max_attempts": max_attempts, "now": now, "actor": actor,
            **_pieces(actor, "run.started", run_id)}).one_or_none()
    return None if row is None else (row.attempts, row.case_id, row.document)


def store_outcome(store: Store, run_id: str, *, status: str, record: dict[str, Any] | None,
                  error: str | None, actor: str, now: Any) -> tuple[bool, str | None]:
    """Store the outcome of an unfinished run and write ``run.finished`` in one statement;
    (stored, batch_id), ``stored`` False when the run was finished already or is missing."""
    verdict = (record or {}).get("verdict")
    payload_rest = (f',"error":{audit.chain_json(error)},"status":{audit.chain_json(status)},'
                    f'"verdict":{audit.chain_json(verdict)}}}')
    with _autocommit(store) as connection:
        row = connection.execute(_STORE_OUTCOME, {
            "run_id": run_id, "status": status, "error": error, "now": now, "actor": actor,
            "record": None if record is None else json.dumps(record),
            "payload_rest": payload_rest,
            **_pieces(actor, "run.finished", run_id)}).one_or_none()
    return (False, None) if row is None else (True, row.batch_id)


#: POST /v1/runs with a case document: store the case unless its content is stored already,
#: queue a run of it, and write ``case.stored`` (only for a new case) then ``run.queued``.
#: ``the_case`` is the new row or the stored one (the snapshot of the statement's start); when
#: another transaction stored the same content after that snapshot there is no row, and the
#: caller takes the session path instead. The two events go in one INSERT, ordered, so the
#: chain lists the case before its run. (A backslash keeps the JSON colon before null from
#: reading as a bound parameter.)
_QUEUE_NEW_CASE_RUN = text("""
WITH new_case AS (
    INSERT INTO cases (id, sha256, document, title, tags, created_at, created_by)
    VALUES (:case_id, :sha256, CAST(:document AS json), :title, CAST(:tags_json AS json), :now,
            :actor)
    ON CONFLICT (sha256) DO NOTHING
    RETURNING id
), the_case AS (
    SELECT id FROM new_case
    UNION ALL
    SELECT id FROM cases WHERE sha256 = :sha256
), new_tags AS (
    INSERT INTO case_tags (case_id, tag)
    SELECT new_case.id, tag FROM new_case, unnest(CAST(:tags AS text[])) AS tag
), new_run AS (
    INSERT INTO runs (id, case_id, status, submitted_by, created_at, attempts)
    SELECT :run_id, id, 'queued', :actor, :now, 0 FROM the_case LIMIT 1
    RETURNING case_id
), events AS (
    INSERT INTO audit_pending (actor, kind, subject, payload, before_at, before_seq, after_seq)
    SELECT actor, kind, subject, payload, before_at, before_seq, after_seq FROM (
        SELECT 1 AS ord, CAST(:actor AS text) AS actor, CAST('case.stored' AS text) AS kind,
               CAST(:case_id AS text) AS subject, CAST(:case_payload AS text) AS payload,
               CAST(:case_before_at AS text) AS before_at,
               CAST(:case_before_seq AS text) AS before_seq,
               CAST(:case_after_seq AS text) AS after_seq
        FROM new_case
        UNION ALL
        SELECT 2, :actor, 'run.queued', :run_id, run_payload, :run_before_at,
               :run_before_payload || run_payload || :run_after_payload, :run_after_seq
        FROM (SELECT '{"batch_id"\\:null,"case_id":' || to_json(case_id)::text
                     || ',"case_sha256":' || :sha256_json || '}' AS run_payload
              FROM new_run) AS queued
    ) AS pending ORDER BY ord
)
SELECT new_run.case_id, EXISTS (SELECT 1 FROM new_case) AS created FROM new_run
""").bindparams(bindparam("now", type_=UtcDateTime())).columns(case_id=String)


def queue_new_case_run(store: Store, document: dict[str, Any], actor: str, now: Any
                       ) -> tuple[str, str] | None:
    """Store a validated case (unless stored already) and queue a run of it, in one statement;
    (run_id, case_id), or None when a concurrent writer stored the same content meanwhile."""
    fields = stored_case_fields(document)
    sha256, title, tags = fields["sha256"], fields["title"], fields["tags"]
    case_id, run_id = str(uuid.uuid4()), str(uuid.uuid4())
    case_pieces = audit.body_pieces(actor, "case.stored", case_id, fields)
    run_at, run_before_payload, run_after_payload, run_after_seq = audit.payload_pieces(
        actor, "run.queued", run_id)
    with _autocommit(store) as connection:
        row = connection.execute(_QUEUE_NEW_CASE_RUN, {
            "case_id": case_id, "run_id": run_id, "sha256": sha256,
            "sha256_json": audit.chain_json(sha256), "document": json.dumps(document),
            "title": title, "tags": tags, "tags_json": json.dumps(tags), "now": now,
            "actor": actor,
            "case_payload": audit.chain_json(fields),
            "case_before_at": case_pieces[0], "case_before_seq": case_pieces[1],
            "case_after_seq": case_pieces[2], "run_before_at": run_at,
            "run_before_payload": run_before_payload, "run_after_payload": run_after_payload,
            "run_after_seq": run_after_seq}).one_or_none()
    return None if row is None else (run_id, row.case_id)
