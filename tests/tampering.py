"""Tampering as someone with database access would do it, for the tests of tamper evidence.

On PostgreSQL audit rows refuse change by trigger (migration 0007); a table owner can switch
that trigger off, and these helpers do so around the edit, as such an attacker would, so that
what verification catches is tested apart from what the trigger refuses.
"""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from typing import Any

from sqlalchemy import text

AUDIT_TRIGGER = "audit_events_never_change"
SEAL_TRIGGERS = {"runs": "runs_sealed_when_signed", "signoffs": "signoffs_never_change"}
SQLITE_SEAL_TRIGGERS = {"runs": ("runs_sealed_on_update", "runs_sealed_on_delete"),
                        "signoffs": ("signoffs_never_update", "signoffs_never_delete")}


@contextmanager
def owner_edit(store: Any, *tables: str) -> Iterator[Any]:
    """A connection on which ``tables`` (audit_events, runs, signoffs) can be edited whatever
    their triggers say: PostgreSQL disables the triggers for the transaction's length;
    SQLite drops the seal triggers and puts them back afterwards."""
    with store.engine.begin() as connection:
        if store.dialect == "postgresql":
            for table in tables:
                trigger = AUDIT_TRIGGER if table == "audit_events" else SEAL_TRIGGERS[table]
                connection.execute(text(f"ALTER TABLE {table} DISABLE TRIGGER {trigger}"))
            yield connection
            for table in tables:
                trigger = AUDIT_TRIGGER if table == "audit_events" else SEAL_TRIGGERS[table]
                connection.execute(text(f"ALTER TABLE {table} ENABLE TRIGGER {trigger}"))
            return
        saved = []
        for table in tables:
            for name in SQLITE_SEAL_TRIGGERS.get(table, ()):
                sql = connection.execute(text("SELECT sql FROM sqlite_master WHERE type = "
                                              "'trigger' AND name = :n"), {"n": name}).scalar()
                if sql:
                    saved.append(sql)
                    connection.execute(text(f"DROP TRIGGER {name}"))
        yield connection
        for sql in saved:
            connection.execute(text(sql))
