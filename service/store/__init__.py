"""The store: SQLAlchemy models, transactions and Alembic migrations.

SQLite under ``FLUXPROOF_DATA_DIR`` by default; PostgreSQL via ``FLUXPROOF_DATABASE_URL``
(``postgresql+psycopg://user@host:5432/db``).
"""

from __future__ import annotations

import threading

from service.settings import database_url, settings_from_env
from service.store.session import Store

_default_store: Store | None = None
_default_lock = threading.Lock()


def default_store() -> Store:
    """The process-wide store built from the environment (used by workers and the CLI)."""
    global _default_store
    with _default_lock:
        if _default_store is None:
            settings = settings_from_env()
            _default_store = Store(database_url(settings), settings)
        return _default_store


def reset_default_store() -> None:
    """Dispose of the process-wide store so that the next call re-reads the environment."""
    global _default_store
    with _default_lock:
        if _default_store is not None:
            _default_store.dispose()
        _default_store = None


__all__ = ["Store", "default_store", "reset_default_store"]
