"""Engines and transactions of the store.

Every write goes through :meth:`Store.transaction`: one transaction that commits when the block
ends and rolls back entirely on any exception, so nothing is half-written.

SQLite: each transaction starts with ``BEGIN IMMEDIATE``, taking the database write lock up
front. That serialises writers (threads of the embedded executor, several processes) instead of
letting two deferred transactions deadlock on lock upgrade; a transaction's audit events are
chained just before its commit. PostgreSQL: a transaction's audit events wait in the outbox
and are chained right after its commit, in a short transaction of their own that locks the
chain-head row (see :mod:`service.store.audit_chain`).

The store also picks, once, how runs are written (:attr:`Store.runs`, see
:mod:`service.store.run_writer`), and turns the database's refusal to change a signed-off
record (triggers of migration 0004) into :class:`~service.store.guards.SealedRecordError`.
"""

from __future__ import annotations

import logging
import threading
from collections.abc import Iterator, Mapping
from contextlib import contextmanager
from pathlib import Path
from typing import Any

from sqlalchemy import Engine, create_engine, event, text
from sqlalchemy.exc import DBAPIError, SQLAlchemyError
from sqlalchemy.orm import Session, sessionmaker

from service.settings import settings_from_env
from service.store.audit_chain import (
    ANY_PENDING,
    PENDED_KEY,
    SEAL_KEY,
    chain_pending,
    chain_pending_concurrently,
)
from service.store.audit_seal import AuditSeal
from service.store.guards import sealed_record_error
from service.store.run_writer import RunWriter, run_writer_for

logger = logging.getLogger(__name__)

SQLITE_BUSY_TIMEOUT_S = 30.0
#: Seconds after which a pooled PostgreSQL connection is replaced by a fresh one.
POOL_RECYCLE_S = 1800


def make_engine(url: str, **kwargs: Any) -> Engine:
    """Create an engine for ``url`` with the transaction handling described above."""
    if url.startswith("sqlite"):
        if ":memory:" in url or url.rstrip("/") in ("sqlite:", "sqlite:/"):
            raise ValueError("in-memory SQLite is not supported: give a file path")
        engine = create_engine(
            url,
            connect_args={"timeout": SQLITE_BUSY_TIMEOUT_S, "check_same_thread": False},
            **kwargs,
        )

        @event.listens_for(engine, "connect")
        def _sqlite_connect(dbapi_connection: Any, _record: Any) -> None:
            # Let SQLAlchemy, not the sqlite3 module, decide where transactions begin.
            dbapi_connection.isolation_level = None
            cursor = dbapi_connection.cursor()
            cursor.execute("PRAGMA foreign_keys=ON")
            cursor.close()

        @event.listens_for(engine, "begin")
        def _sqlite_begin(connection: Any) -> None:
            connection.exec_driver_sql("BEGIN IMMEDIATE")

        return engine
    # No ping before each checkout (it was one more round trip per transaction). A connection
    # that went stale (database restarted, connection dropped) fails its first statement; the
    # dialect reports that as a disconnect and the pool then drops every connection older
    # than that moment, so the error costs one transaction per process (a 503 in the API, a
    # retried task in a worker), not one per pooled connection. Connections are also renewed
    # after POOL_RECYCLE_S, before a server or firewall idle timeout can cut them.
    kwargs.setdefault("pool_pre_ping", False)
    kwargs.setdefault("pool_recycle", POOL_RECYCLE_S)
    return create_engine(url, **kwargs)


def seal_settings(url: str, settings: Mapping[str, Any] | None) -> dict[str, Any]:
    """Where the audit seal of a store on ``url`` finds its key and anchor file: ``settings``
    when given (the app's); else the ``FLUXPROOF_*`` environment, a SQLite store keeping them
    in its database file's directory (``DATA_DIR`` of the embedded default) unless
    ``FLUXPROOF_SIGNING_KEY_FILE`` / ``FLUXPROOF_AUDIT_ANCHOR_FILE`` say otherwise."""
    if settings is not None:
        return dict(settings)
    found = settings_from_env()
    if url.startswith("sqlite"):
        found["DATABASE_URL"] = None
        found["DATA_DIR"] = str(Path(url.split("///", 1)[-1]).parent)
    else:
        found["DATABASE_URL"] = url
    return found


class Store:
    """The store of one process: an engine, a session factory and the audit seal (the chain
    key and anchor file of :mod:`service.store.audit_seal`, loaded when first needed from
    ``settings``, see :func:`seal_settings`)."""

    def __init__(self, url: str, settings: Mapping[str, Any] | None = None,
                 **engine_kwargs: Any) -> None:
        self.url = url
        self.engine = make_engine(url, **engine_kwargs)
        self._seal_settings = seal_settings(url, settings)
        self._seal: AuditSeal | None = None
        self._seal_lock = threading.Lock()
        self._sessions = sessionmaker(self.engine, expire_on_commit=False,
                                      info={SEAL_KEY: self.seal})
        #: How runs are written on this database (:mod:`service.store.run_writer`).
        self.runs: RunWriter = run_writer_for(self)

    def seal(self) -> AuditSeal:
        """The audit seal of this store's installation (loaded once)."""
        with self._seal_lock:
            if self._seal is None:
                self._seal = AuditSeal.from_settings(self._seal_settings)
            return self._seal

    @property
    def dialect(self) -> str:
        return self.engine.dialect.name

    @contextmanager
    def transaction(self) -> Iterator[Session]:
        """A session in one transaction: commit on success, roll back on any exception.

        On PostgreSQL the transaction's audit events are chained after its commit.
        """
        try:
            with self._sessions.begin() as session:
                yield session
        except DBAPIError as exc:
            sealed = sealed_record_error(exc)
            if sealed is not None:
                raise sealed from exc
            raise
        if session.info.pop(PENDED_KEY, False):
            self.chain_audit_after_commit()

    def autocommit(self) -> Any:
        """A connection on which every statement commits by itself (one round trip each)."""
        return self.engine.connect().execution_options(isolation_level="AUTOCOMMIT")

    def chain_audit_after_commit(self) -> None:
        """Chain a committed writer's events. Its change is stored whatever happens here, so a
        database error is logged, not raised: the events wait in the outbox for the next
        chaining (any writer's, a listing's, a verification's or the upkeep sweep's)."""
        try:
            self.chain_audit()
        except SQLAlchemyError:
            logger.warning("audit events committed but not chained yet; they stay in the "
                           "outbox until the next chaining", exc_info=True)

    def chain_audit(self, *, only_if_pending: bool = False) -> int:
        """Chain what waits in the audit outbox (its own transaction); how many events.

        ``only_if_pending``: ask first, without a lock, and take none when it is empty (for
        readers, who should not queue behind writers for nothing).
        """
        if only_if_pending and not self.read(ANY_PENDING):
            return 0
        seal = self.seal()
        if self.dialect == "postgresql":
            with self.autocommit() as connection:
                return chain_pending_concurrently(connection, seal)
        with self.engine.begin() as connection:
            count, head = chain_pending(connection, seal)
        if head is not None:
            seal.write_checkpoint(head)
        return count

    def read(self, statement: Any, params: dict[str, Any] | None = None) -> list[Any]:
        """The rows of one read-only statement, asked outside any transaction.

        PostgreSQL: on an autocommit connection, one round trip (no ``BEGIN``/``COMMIT``).
        SQLite: in a short transaction of its own (its connections always begin one).
        """
        if self.dialect == "postgresql":
            with self.engine.connect().execution_options(isolation_level="AUTOCOMMIT") as conn:
                return list(conn.execute(statement, params or {}))
        with self.engine.begin() as connection:
            return list(connection.execute(statement, params or {}))

    def read_scalar(self, statement: Any, params: dict[str, Any] | None = None) -> Any:
        """The first column of the first row of :meth:`read` (None when there is no row)."""
        rows = self.read(statement, params)
        return rows[0][0] if rows else None

    def ping(self) -> None:
        """Raise if the database cannot be reached."""
        with self.engine.connect() as connection:
            connection.execute(text("SELECT 1"))

    def dispose(self) -> None:
        self.engine.dispose()

    def __repr__(self) -> str:
        return f"Store({self.engine.url.render_as_string(hide_password=True)!r})"
