"""People, server-side browser sessions, expiring tokens, electronic signatures.

``users``: login (unique by its NFKC case-folded form), printed name, role, argon2id password
hash, disabled flag. ``tokens`` gain ``user_id`` (the person a token belongs to; tokens made
before this revision belong to nobody and are refused) and ``expires_at``.
``browser_sessions``: the server side of a browser session (the cookie carries only a random
id; the SHA-256 of it is stored). ``signoffs`` gain the electronic signature: meaning, printed
name, justification, the signed record's SHA-256, the signed payload's SHA-256, the Ed25519
signature and the id of the key that made it.

Revision ID: 0006_people_sessions_signatures
Revises: 0005_monte_carlo_blocks
Create Date: 2026-12-05
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0006_people_sessions_signatures"
down_revision = "0005_monte_carlo_blocks"
branch_labels = None
depends_on = None

SIGNATURE_COLUMNS = (
    ("meaning", sa.String(16)),
    ("signer_name", sa.String(200)),
    ("justification", sa.Text()),
    ("record_sha256", sa.String(64)),
    ("payload_sha256", sa.String(64)),
    ("signature", sa.String(200)),
    ("key_id", sa.String(32)),
)


def upgrade() -> None:
    op.create_table(
        "users",
        sa.Column("id", sa.String(32), primary_key=True),
        sa.Column("login", sa.String(200), nullable=False),
        sa.Column("login_key", sa.String(200), nullable=False, unique=True),
        sa.Column("name", sa.String(200), nullable=False),
        sa.Column("role", sa.String(16), nullable=False),
        sa.Column("password_hash", sa.String(200), nullable=True),
        sa.Column("disabled", sa.Boolean(), nullable=False),
        sa.Column("created_at", sa.DateTime(), nullable=False),
        sa.Column("created_by", sa.String(200), nullable=False),
        sa.Column("changed_at", sa.DateTime(), nullable=True),
    )
    with op.batch_alter_table("tokens") as batch:
        batch.add_column(sa.Column("user_id", sa.String(32), nullable=True))
        batch.add_column(sa.Column("expires_at", sa.DateTime(), nullable=True))
        batch.create_foreign_key("fk_tokens_user_id_users", "users", ["user_id"], ["id"])
    op.create_table(
        "browser_sessions",
        sa.Column("id_sha256", sa.String(64), primary_key=True),
        sa.Column("user_id", sa.String(32), sa.ForeignKey("users.id"), nullable=True),
        sa.Column("data", sa.JSON(), nullable=False),
        sa.Column("created_at", sa.DateTime(), nullable=False),
        sa.Column("signed_in_at", sa.DateTime(), nullable=True),
        sa.Column("last_seen_at", sa.DateTime(), nullable=False),
        sa.Column("ended_at", sa.DateTime(), nullable=True),
        sa.Column("end_reason", sa.String(40), nullable=True),
    )
    op.create_index("ix_browser_sessions_user_id", "browser_sessions", ["user_id"])
    op.create_index("ix_browser_sessions_last_seen_at", "browser_sessions", ["last_seen_at"])
    # Plain ADD COLUMN (no table copy): the seal triggers of 0004 stay on signoffs.
    for name, type_ in SIGNATURE_COLUMNS:
        op.add_column("signoffs", sa.Column(name, type_, nullable=True))


def downgrade() -> None:
    # DROP COLUMN on SQLite rebuilds nothing here only when no trigger names the column.
    for name, _type in reversed(SIGNATURE_COLUMNS):
        op.drop_column("signoffs", name)
    op.drop_index("ix_browser_sessions_last_seen_at", table_name="browser_sessions")
    op.drop_index("ix_browser_sessions_user_id", table_name="browser_sessions")
    op.drop_table("browser_sessions")
    with op.batch_alter_table("tokens") as batch:
        batch.drop_constraint("fk_tokens_user_id_users", type_="foreignkey")
        batch.drop_column("expires_at")
        batch.drop_column("user_id")
    op.drop_table("users")
