"""PostgreSQL: migration 0006 (people, sessions, token owners and expiry, signature columns)
goes down and up again; logins stay unique after normalisation; a sign-off with its signature
is sealed like any other."""

from __future__ import annotations

import pytest
from sqlalchemy import inspect, text

from service.errors import Conflict
from service.people import create_user
from service.tokens import create_token, identify


@pytest.fixture
def pg_store(real_services):
    from service.store import Store
    from service.store.migrate import upgrade
    from tests.integration.real_services import PostgresSchema

    schema = PostgresSchema.create(prefix="fluxproof_it_people")
    store = Store(schema.url)
    try:
        upgrade(store)
        yield store
    finally:
        store.dispose()
        schema.drop()


def test_the_people_migration_goes_down_and_up_on_postgresql(pg_store):
    from alembic import command

    from service.store.migrate import alembic_config, head_revision, upgrade

    command.downgrade(alembic_config(pg_store), "0005_monte_carlo_blocks")
    assert {"users", "browser_sessions"}.isdisjoint(inspect(pg_store.engine).get_table_names())
    assert upgrade(pg_store) == head_revision()
    columns = {c["name"] for c in inspect(pg_store.engine).get_columns("signoffs")}
    assert {"meaning", "signer_name", "signature", "key_id", "record_sha256"} <= columns


def test_people_and_their_tokens_on_postgresql(pg_store):
    create_user(pg_store, login="engineer-1", name="Erin Engineer", role="engineer",
                password=None, actor="os:test")
    with pytest.raises(Conflict):
        create_user(pg_store, login="Engineer-1", name="Someone", role="reviewer",
                    password=None, actor="os:test")
    _, token = create_token(pg_store, login="ENGINEER-1", actor="os:test")
    identity = identify(pg_store, token)
    assert (identity.login, identity.name, identity.role) == ("engineer-1", "Erin Engineer",
                                                              "engineer")
    with pg_store.engine.connect() as connection:
        assert connection.execute(text("SELECT count(*) FROM users")).scalar() == 1
