"""SQLite: the seal triggers of migration 0004, and a chain written before it verifying after."""

from __future__ import annotations

from service.store import Store
from service.store.migrate import upgrade
from tests.store_checks import (
    OLD_REVISION,
    check_an_old_chain_verifies_after_the_upgrade,
    check_direct_changes_of_a_signed_run_are_refused,
)


def test_direct_changes_of_a_signed_run_or_its_signoff_are_refused_on_sqlite(tmp_path):
    store = Store(f"sqlite:///{tmp_path / 's.sqlite3'}")
    try:
        upgrade(store)
        check_direct_changes_of_a_signed_run_are_refused(store)
    finally:
        store.dispose()


def test_a_chain_written_before_the_outbox_verifies_after_the_upgrade_on_sqlite(tmp_path):
    store = Store(f"sqlite:///{tmp_path / 'o.sqlite3'}")
    try:
        upgrade(store, OLD_REVISION)
        check_an_old_chain_verifies_after_the_upgrade(store)
    finally:
        store.dispose()
