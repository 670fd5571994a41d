"""Runs: one index on (batch_id, status) in place of the index on batch_id alone.

A batch run's worker asks, after its outcome is committed, whether any run of the batch is left
unfinished; with status in the index that question touches only the unfinished entries instead
of every run of the batch. The composite index also serves every lookup by batch alone.

Revision ID: 0002_runs_batch_status_index
Revises: 0001_initial
Create Date: 2026-12-02
"""

from __future__ import annotations

from alembic import op

revision = "0002_runs_batch_status_index"
down_revision = "0001_initial"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_index("ix_runs_batch_id_status", "runs", ["batch_id", "status"])
    op.drop_index("ix_runs_batch_id", table_name="runs")


def downgrade() -> None:
    op.create_index("ix_runs_batch_id", "runs", ["batch_id"])
    op.drop_index("ix_runs_batch_id_status", table_name="runs")
