"""The audit outbox chained in Python on both databases; signed records sealed by triggers.

Audit: events are written unchained into ``audit_pending`` with their change and chained by
``service.store.audit_chain.chain_pending`` (the one place the hash is computed). PostgreSQL
drops the commit-time chaining trigger and function of 0003 and the three text pieces its
rows carried (the client no longer splits the hashed body), and its outbox payload becomes
JSON; SQLite gets the outbox table. The hash and the stored events are unchanged, so chains
written before this revision verify as they did and new events continue them.

Seals: a signed-off run and its sign-off never change, whichever path writes. Triggers refuse
any ``UPDATE`` or ``DELETE`` of a run that has a sign-off and of a sign-off; their message
starts with ``sealed record:`` (``service.store.guards.SEAL_MARKER``).

Revision ID: 0004_audit_outbox_and_seals
Revises: 0003_audit_chained_at_commit
Create Date: 2026-12-04
"""

from __future__ import annotations

import importlib.util
from pathlib import Path
from types import ModuleType

import sqlalchemy as sa
from alembic import op

revision = "0004_audit_outbox_and_seals"
down_revision = "0003_audit_chained_at_commit"
branch_labels = None
depends_on = None

POSTGRESQL_SEALS = [
    """
CREATE FUNCTION fluxproof_refuse_sealed_run() RETURNS trigger
LANGUAGE plpgsql AS $$
BEGIN
    IF EXISTS (SELECT 1 FROM signoffs WHERE run_id = OLD.id) THEN
        RAISE EXCEPTION 'sealed record: run % is signed off; its record never changes', OLD.id
            USING ERRCODE = 'integrity_constraint_violation';
    END IF;
    IF TG_OP = 'DELETE' THEN
        RETURN OLD;
    END IF;
    RETURN NEW;
END
$$;
""",
    """
CREATE TRIGGER runs_sealed_when_signed BEFORE UPDATE OR DELETE ON runs
FOR EACH ROW EXECUTE FUNCTION fluxproof_refuse_sealed_run();
""",
    """
CREATE FUNCTION fluxproof_refuse_signoff_change() RETURNS trigger
LANGUAGE plpgsql AS $$
BEGIN
    RAISE EXCEPTION 'sealed record: the sign-off of run % never changes', OLD.run_id
        USING ERRCODE = 'integrity_constraint_violation';
END
$$;
""",
    """
CREATE TRIGGER signoffs_never_change BEFORE UPDATE OR DELETE ON signoffs
FOR EACH ROW EXECUTE FUNCTION fluxproof_refuse_signoff_change();
""",
]

SQLITE_SEALS = [
    f"""
CREATE TRIGGER runs_sealed_on_{operation.lower()} BEFORE {operation} ON runs
WHEN EXISTS (SELECT 1 FROM signoffs WHERE run_id = OLD.id)
BEGIN
    SELECT RAISE(ABORT, 'sealed record: a signed-off run never changes');
END;
""" for operation in ("UPDATE", "DELETE")
] + [
    f"""
CREATE TRIGGER signoffs_never_{operation.lower()} BEFORE {operation} ON signoffs
BEGIN
    SELECT RAISE(ABORT, 'sealed record: a sign-off never changes');
END;
""" for operation in ("UPDATE", "DELETE")
]

PIECE_COLUMNS = ("before_at", "before_seq", "after_seq")


def _revision_0003() -> ModuleType:
    """Revision 0003's module (its trigger comes back on downgrade)."""
    path = Path(__file__).with_name("0003_audit_chained_at_commit.py")
    spec = importlib.util.spec_from_file_location("fluxproof_revision_0003", path)
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def upgrade() -> None:
    if op.get_bind().dialect.name == "postgresql":
        op.execute("DROP TRIGGER audit_pending_chained_at_commit ON audit_pending")
        op.execute("DROP FUNCTION fluxproof_chain_pending_event()")
        for column in PIECE_COLUMNS:
            op.drop_column("audit_pending", column)
        op.alter_column("audit_pending", "payload", type_=sa.JSON(),
                        postgresql_using="payload::json")
        for statement in POSTGRESQL_SEALS:
            op.execute(statement)
        return
    op.create_table(
        "audit_pending",
        sa.Column("id", sa.Integer(), primary_key=True, autoincrement=True),
        sa.Column("actor", sa.String(200), nullable=False),
        sa.Column("kind", sa.String(40), nullable=False),
        sa.Column("subject", sa.String(200), nullable=False),
        sa.Column("payload", sa.JSON(), nullable=False),
    )
    for statement in SQLITE_SEALS:
        op.execute(statement)


def downgrade() -> None:
    if op.get_bind().dialect.name == "postgresql":
        op.execute("DROP TRIGGER signoffs_never_change ON signoffs")
        op.execute("DROP FUNCTION fluxproof_refuse_signoff_change()")
        op.execute("DROP TRIGGER runs_sealed_when_signed ON runs")
        op.execute("DROP FUNCTION fluxproof_refuse_sealed_run()")
        # Chain what waits (this revision's chainer) before the old trigger takes over: the
        # old rows need the body pieces, which only a chained event no longer needs.
        if op.get_bind().execute(sa.text("SELECT count(*) FROM audit_pending")).scalar():
            raise RuntimeError("audit events are waiting in audit_pending; chain them "
                               "(fluxproof audit verify) before downgrading")
        op.alter_column("audit_pending", "payload", type_=sa.Text(),
                        postgresql_using="payload::text")
        for column in PIECE_COLUMNS:
            op.add_column("audit_pending", sa.Column(column, sa.Text(), nullable=False))
        previous = _revision_0003()
        op.execute(previous.CHAIN_FUNCTION)
        op.execute(previous.CHAIN_TRIGGER)
        return
    for operation in ("update", "delete"):
        op.execute(f"DROP TRIGGER runs_sealed_on_{operation}")
        op.execute(f"DROP TRIGGER signoffs_never_{operation}")
    op.drop_table("audit_pending")
