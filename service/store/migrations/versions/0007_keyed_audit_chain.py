"""The audit chain keyed with the server key and anchored outside the database; audit rows
refuse change on PostgreSQL.

``audit_head`` gains ``chain_id`` (a random UUID: the chain's name in the anchor file) and
``keyed_from`` (the head's sequence number + 1 at this upgrade). Events from ``keyed_from`` on
are hashed with HMAC-SHA256 under the chain key derived from the server's signing key; the
events already stored keep their plain SHA-256 and are verified by that rule
(:mod:`service.store.audit_seal`). No stored event is rewritten: re-hashing them now would
vouch for whatever the database holds today.

PostgreSQL: a trigger refuses any ``UPDATE`` or ``DELETE`` of an ``audit_events`` row (message
``sealed record: ...``, as the seals of 0004). Like those, it stops the application's role and
anyone who does not own the table; an owner who drops it is caught by verification instead.

Revision ID: 0007_keyed_audit_chain
Revises: 0006_people_sessions_signatures
Create Date: 2026-12-05
"""

from __future__ import annotations

import uuid

import sqlalchemy as sa
from alembic import op

revision = "0007_keyed_audit_chain"
down_revision = "0006_people_sessions_signatures"
branch_labels = None
depends_on = None

POSTGRESQL_AUDIT_SEAL = [
    """
CREATE FUNCTION fluxproof_refuse_audit_change() RETURNS trigger
LANGUAGE plpgsql AS $$
BEGIN
    RAISE EXCEPTION 'sealed record: audit event % never changes', OLD.seq
        USING ERRCODE = 'integrity_constraint_violation';
END
$$;
""",
    """
CREATE TRIGGER audit_events_never_change BEFORE UPDATE OR DELETE ON audit_events
FOR EACH ROW EXECUTE FUNCTION fluxproof_refuse_audit_change();
""",
]


def upgrade() -> None:
    with op.batch_alter_table("audit_head") as batch:
        batch.add_column(sa.Column("chain_id", sa.String(36), nullable=True))
        batch.add_column(sa.Column("keyed_from", sa.Integer(), nullable=True))
    op.get_bind().execute(sa.text("UPDATE audit_head SET chain_id = :chain, "
                                  "keyed_from = seq + 1"), {"chain": str(uuid.uuid4())})
    with op.batch_alter_table("audit_head") as batch:
        batch.alter_column("chain_id", existing_type=sa.String(36), nullable=False)
        batch.alter_column("keyed_from", existing_type=sa.Integer(), nullable=False)
    if op.get_bind().dialect.name == "postgresql":
        for statement in POSTGRESQL_AUDIT_SEAL:
            op.execute(statement)


def downgrade() -> None:
    if op.get_bind().dialect.name == "postgresql":
        op.execute("DROP TRIGGER audit_events_never_change ON audit_events")
        op.execute("DROP FUNCTION fluxproof_refuse_audit_change()")
    with op.batch_alter_table("audit_head") as batch:
        batch.drop_column("keyed_from")
        batch.drop_column("chain_id")
