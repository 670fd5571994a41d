"""Apply the Alembic migrations programmatically (``fluxproof db upgrade``, app start)."""

from __future__ import annotations

from pathlib import Path

from alembic import command
from alembic.config import Config
from alembic.runtime.migration import MigrationContext
from alembic.script import ScriptDirectory

from service.store.session import Store

MIGRATIONS_DIR = Path(__file__).with_name("migrations")


def alembic_config(store: Store) -> Config:
    """An Alembic config pointing at our migrations and the store's engine."""
    config = Config()
    config.set_main_option("script_location", str(MIGRATIONS_DIR))
    config.attributes["engine"] = store.engine
    return config


def head_revision() -> str:
    """The newest migration revision in the code."""
    script = ScriptDirectory(str(MIGRATIONS_DIR))
    head = script.get_current_head()
    assert head is not None
    return head


def current_revision(store: Store) -> str | None:
    """The revision the database is at (None for an empty database)."""
    with store.engine.connect() as connection:
        return MigrationContext.configure(connection).get_current_revision()


def upgrade(store: Store, revision: str = "head") -> str | None:
    """Bring the database to ``revision``; a no-op when it is there already. Returns the result."""
    if revision == "head" and current_revision(store) == head_revision():
        return current_revision(store)
    command.upgrade(alembic_config(store), revision)
    return current_revision(store)
