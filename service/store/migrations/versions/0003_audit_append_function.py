"""PostgreSQL: the audit append as one server-side function (no change on SQLite).

``fluxproof_append_events`` locks the chain head, gives each event its sequence number and its
time, hashes it onto the chain, inserts it and moves the head, all in one call: one round trip
with the chain-head lock held, instead of a locking read, a hash in the client and a second
statement. The hash is the chain's own (``service.audit.event_hash``): SHA-256 of the previous
hash followed by the canonical JSON of ``{actor, at, kind, payload, seq, subject}``. The client
sends that JSON in three pieces around the two values only the server knows under the lock
(the time and the sequence number), so the canonical form stays defined in one place, Python,
which also verifies every chain.

Revision ID: 0003_audit_append_function
Revises: 0002_runs_batch_status_index
Create Date: 2026-12-02
"""

from __future__ import annotations

from alembic import op

revision = "0003_audit_append_function"
down_revision = "0002_runs_batch_status_index"
branch_labels = None
depends_on = None

APPEND_FUNCTION = r"""
CREATE OR REPLACE FUNCTION fluxproof_append_events(
    actors text[], kinds text[], subjects text[], payloads text[],
    before_at text[], before_seq text[], after_seq text[]) RETURNS integer
LANGUAGE plpgsql AS $$
DECLARE
    head_seq integer;
    head_hash text;
    stamp text;
    digest text;
BEGIN
    SELECT seq, hash INTO head_seq, head_hash FROM audit_head WHERE id = 1 FOR UPDATE;
    FOR i IN 1 .. coalesce(array_length(actors, 1), 0) LOOP
        head_seq := head_seq + 1;
        -- the text Python's datetime.isoformat(timespec="microseconds") gives for UTC
        stamp := to_char(clock_timestamp() AT TIME ZONE 'UTC',
                         'YYYY-MM-DD"T"HH24:MI:SS.US"+00:00"');
        digest := encode(sha256(convert_to(
            head_hash || before_at[i] || stamp || before_seq[i] || head_seq::text
            || after_seq[i], 'UTF8')), 'hex');
        INSERT INTO audit_events (seq, at, actor, kind, subject, payload, prev_hash, hash)
        VALUES (head_seq, stamp, actors[i], kinds[i], subjects[i], payloads[i]::json,
                head_hash, digest);
        head_hash := digest;
    END LOOP;
    UPDATE audit_head SET seq = head_seq, hash = head_hash WHERE id = 1;
    RETURN head_seq;
END
$$;
"""


def upgrade() -> None:
    if op.get_bind().dialect.name == "postgresql":
        op.execute(APPEND_FUNCTION)


def downgrade() -> None:
    if op.get_bind().dialect.name == "postgresql":
        op.execute("DROP FUNCTION fluxproof_append_events(text[], text[], text[], text[], "
                   "text[], text[], text[])")
