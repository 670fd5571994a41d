"""PostgreSQL: audit events chained by the server as the transaction commits (no change on
SQLite).

A transaction that writes audit events inserts them into ``audit_pending``, which takes no
lock. A deferred constraint trigger on that table runs at ``COMMIT``, inside the server: for
each pending event, in insertion order, it locks the chain head, gives the event its sequence
number and its time, hashes it onto the chain, inserts it into ``audit_events``, moves the head
and deletes the pending row. The chain-head lock is therefore held only from the first
trigger to the end of the commit, with no round trip to the client in between (before, the
lock was held across a client round trip and the ``COMMIT`` that followed, and a client that
was descheduled held every other writer up).

The hash is the chain's own (``service.audit.event_hash``): SHA-256 of the previous hash
followed by the canonical JSON of ``{actor, at, kind, payload, seq, subject}``. The client
stores that JSON in three pieces around the two values only the server knows under the lock
(the time and the sequence number), so the canonical form stays defined in one place, Python,
which also verifies every chain.

Revision ID: 0003_audit_chained_at_commit
Revises: 0002_runs_batch_status_index
Create Date: 2026-12-02
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0003_audit_chained_at_commit"
down_revision = "0002_runs_batch_status_index"
branch_labels = None
depends_on = None

CHAIN_FUNCTION = r"""
CREATE OR REPLACE FUNCTION fluxproof_chain_pending_event() RETURNS trigger
LANGUAGE plpgsql AS $$
DECLARE
    head_seq integer;
    head_hash text;
    stamp text;
    digest text;
BEGIN
    SELECT seq, hash INTO head_seq, head_hash FROM audit_head WHERE id = 1 FOR UPDATE;
    head_seq := head_seq + 1;
    -- the text Python's datetime.isoformat(timespec="microseconds") gives for UTC
    stamp := to_char(clock_timestamp() AT TIME ZONE 'UTC', 'YYYY-MM-DD"T"HH24:MI:SS.US"+00:00"');
    digest := encode(sha256(convert_to(
        head_hash || NEW.before_at || stamp || NEW.before_seq || head_seq::text || NEW.after_seq,
        'UTF8')), 'hex');
    INSERT INTO audit_events (seq, at, actor, kind, subject, payload, prev_hash, hash)
    VALUES (head_seq, stamp, NEW.actor, NEW.kind, NEW.subject, NEW.payload::json, head_hash,
            digest);
    UPDATE audit_head SET seq = head_seq, hash = digest WHERE id = 1;
    DELETE FROM audit_pending WHERE id = NEW.id;
    RETURN NULL;
END
$$;
"""

CHAIN_TRIGGER = """
CREATE CONSTRAINT TRIGGER audit_pending_chained_at_commit
AFTER INSERT ON audit_pending DEFERRABLE INITIALLY DEFERRED
FOR EACH ROW EXECUTE FUNCTION fluxproof_chain_pending_event();
"""


def upgrade() -> None:
    if op.get_bind().dialect.name != "postgresql":
        return
    op.create_table(
        "audit_pending",
        sa.Column("id", sa.BigInteger(), sa.Identity(), primary_key=True),
        sa.Column("actor", sa.String(200), nullable=False),
        sa.Column("kind", sa.String(40), nullable=False),
        sa.Column("subject", sa.String(200), nullable=False),
        sa.Column("payload", sa.Text(), nullable=False),
        sa.Column("before_at", sa.Text(), nullable=False),
        sa.Column("before_seq", sa.Text(), nullable=False),
        sa.Column("after_seq", sa.Text(), nullable=False),
    )
    op.execute(CHAIN_FUNCTION)
    op.execute(CHAIN_TRIGGER)


def downgrade() -> None:
    if op.get_bind().dialect.name != "postgresql":
        return
    op.execute("DROP TRIGGER audit_pending_chained_at_commit ON audit_pending")
    op.execute("DROP FUNCTION fluxproof_chain_pending_event()")
    op.drop_table("audit_pending")
