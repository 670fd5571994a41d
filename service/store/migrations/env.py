"""Alembic environment: runs on the engine handed over in ``config.attributes["engine"]``."""

from __future__ import annotations

from alembic import context
from sqlalchemy import text

from service.store.models import Base

target_metadata = Base.metadata
MIGRATION_LOCK_KEY = 74_310_211  # arbitrary constant: pg advisory lock held while migrating


def run_migrations_online() -> None:
    engine = context.config.attributes["engine"]
    with engine.connect() as connection:
        context.configure(connection=connection, target_metadata=target_metadata)
        with context.begin_transaction():
            if connection.dialect.name == "postgresql":
                # Several processes may start at once; only one migrates at a time.
                connection.execute(text(f"SELECT pg_advisory_xact_lock({MIGRATION_LOCK_KEY})"))
            context.run_migrations()


if context.is_offline_mode():
    raise RuntimeError("offline (SQL script) migrations are not supported")
run_migrations_online()
