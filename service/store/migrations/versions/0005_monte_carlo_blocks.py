"""Monte Carlo blocks shared by workers: the blocks table, the run's seed and its progress.

``run_blocks`` holds one row per (run, block index): the block's statistics as JSON
(``worker.engine.design.monte_carlo.BlockResult.as_dict``), the seed it was drawn with, and
which process computed it. Rows are written once (an insert that does nothing when the row
exists), so a redelivered block task writes nothing new and a re-executed run reads the
blocks already there.

``runs.monte_carlo_seed`` is the seed drawn for a run whose case states none, stored before
any block is sent, so that every worker and a re-execution draw the same trials.
``runs.progress`` is how far a running Monte Carlo run has got (trials, blocks and their
largest numbers), written as blocks are merged.

Revision ID: 0005_monte_carlo_blocks
Revises: 0004_audit_outbox_and_seals
Create Date: 2026-12-06
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0005_monte_carlo_blocks"
down_revision = "0004_audit_outbox_and_seals"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.add_column("runs", sa.Column("monte_carlo_seed", sa.BigInteger(), nullable=True))
    op.add_column("runs", sa.Column("progress", sa.JSON(), nullable=True))
    op.create_table(
        "run_blocks",
        sa.Column("run_id", sa.String(36), sa.ForeignKey("runs.id"), primary_key=True),
        sa.Column("block_index", sa.Integer(), primary_key=True, autoincrement=False),
        sa.Column("seed", sa.BigInteger(), nullable=False),
        sa.Column("result", sa.JSON(), nullable=False),
        sa.Column("computed_by", sa.String(200), nullable=False),
        sa.Column("computed_at", sa.DateTime(), nullable=False),
    )


def downgrade() -> None:
    op.drop_table("run_blocks")
    op.drop_column("runs", "progress")
    op.drop_column("runs", "monte_carlo_seed")
