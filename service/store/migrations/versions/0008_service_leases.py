"""Named leases held by one process at a time (the recovery sweep's turn).

``service_leases`` holds one row per lease name: who holds it and until when. A process takes
the lease by inserting the row, or by updating it when it has expired or is its own
(:mod:`service.store.leases`); the database decides between processes on every deployment,
with or without a broker or beat.

Revision ID: 0008_service_leases
Revises: 0007_keyed_audit_chain
Create Date: 2026-12-05
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0008_service_leases"
down_revision = "0007_keyed_audit_chain"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "service_leases",
        sa.Column("name", sa.String(64), primary_key=True),
        sa.Column("holder", sa.String(200), nullable=False),
        sa.Column("expires_at", sa.DateTime(), nullable=False),
    )


def downgrade() -> None:
    op.drop_table("service_leases")
