"""PostgreSQL: the seal triggers of migration 0004, and a chain written by revision 0003's
server-side trigger verifying after the upgrade."""

from __future__ import annotations

import pytest

from tests.store_checks import (
    OLD_REVISION,
    check_an_old_chain_verifies_after_the_upgrade,
    check_direct_changes_of_a_signed_run_are_refused,
)


def test_direct_changes_of_a_signed_run_or_its_signoff_are_refused_on_postgresql(live_store):
    assert live_store.dialect == "postgresql"
    check_direct_changes_of_a_signed_run_are_refused(live_store)


@pytest.fixture
def old_schema_store(real_services):
    from service.store import Store
    from service.store.migrate import upgrade
    from tests.integration.real_services import PostgresSchema

    schema = PostgresSchema.create(prefix="fluxproof_it_old")
    store = Store(schema.url)
    try:
        upgrade(store, OLD_REVISION)
        yield store
    finally:
        store.dispose()
        schema.drop()


def test_a_chain_written_by_the_server_trigger_verifies_after_the_upgrade(old_schema_store):
    check_an_old_chain_verifies_after_the_upgrade(old_schema_store)
