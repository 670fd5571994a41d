"""The store: migrations match the models, the SQLite default path, transactions, settings."""

from __future__ import annotations

import threading

import pytest
from alembic.autogenerate import compare_metadata
from alembic.migration import MigrationContext
from sqlalchemy import func, select

from service.settings import SQLITE_FILE_NAME, database_url, settings_from_env
from service.store import Store
from service.store.migrate import current_revision, head_revision, upgrade
from service.store.models import AuditEvent, Base, Case
from tests.api.support import clear_fluxproof_env


def test_migrations_create_exactly_the_models(tmp_path):
    store = Store(f"sqlite:///{tmp_path / 'm.sqlite3'}")
    try:
        assert current_revision(store) is None
        assert upgrade(store) == head_revision()
        with store.engine.connect() as connection:
            differences = compare_metadata(MigrationContext.configure(connection), Base.metadata)
        assert differences == []
        assert upgrade(store) == head_revision()  # second time: nothing to do
    finally:
        store.dispose()


def test_default_store_is_sqlite_under_the_data_dir(tmp_path, monkeypatch):
    from service.app import create_app, shutdown_app

    clear_fluxproof_env(monkeypatch)
    monkeypatch.setenv("FLUXPROOF_DATA_DIR", str(tmp_path / "fresh"))
    assert database_url(settings_from_env()) == \
        f"sqlite:///{(tmp_path / 'fresh' / SQLITE_FILE_NAME).resolve()}"
    app = create_app()
    try:
        assert (tmp_path / "fresh" / SQLITE_FILE_NAME).is_file()
        assert app.test_client().get("/v1/health").get_json()["store"]["state"] == "ok"
        store = app.extensions["fluxproof"].store
        assert current_revision(store) == head_revision()
    finally:
        shutdown_app(app)


def test_environment_overrides_defaults(monkeypatch):
    clear_fluxproof_env(monkeypatch)
    monkeypatch.setenv("FLUXPROOF_MAX_BODY_BYTES", "2048")
    monkeypatch.setenv("FLUXPROOF_DATABASE_URL", "postgresql+psycopg://u@h:5432/d")
    monkeypatch.setenv("FLUXPROOF_NIGHTLY_AT", "03:15")
    settings = settings_from_env()
    assert settings["MAX_BODY_BYTES"] == 2048
    assert database_url(settings) == "postgresql+psycopg://u@h:5432/d"
    assert settings["NIGHTLY_AT"] == "03:15"


def test_bad_body_limit_is_named(tmp_path):
    from service.app import create_app

    with pytest.raises(ValueError, match="FLUXPROOF_MAX_BODY_BYTES"):
        create_app({"DATA_DIR": str(tmp_path), "MAX_BODY_BYTES": "lots"})


def test_in_memory_sqlite_is_refused():
    with pytest.raises(ValueError, match="in-memory"):
        Store("sqlite:///:memory:")


def test_a_failed_transaction_writes_nothing(tmp_path):
    from service import audit
    from service.store.models import utc_now

    store = Store(f"sqlite:///{tmp_path / 't.sqlite3'}")
    upgrade(store)
    try:
        with pytest.raises(RuntimeError):
            with store.transaction() as session:
                session.add(Case(id="c1", sha256="0" * 64, document={}, title="t", tags=[],
                                 created_at=utc_now(), created_by="x"))
                audit.append_event(session, actor="x", kind="case.stored", subject="c1")
                raise RuntimeError("fails after the writes")
        with store.transaction() as session:
            assert session.execute(select(func.count()).select_from(Case)).scalar_one() == 0
            assert session.execute(select(func.count()).select_from(AuditEvent)
                                   ).scalar_one() == 0
        assert audit.verify_chain(store).ok
    finally:
        store.dispose()


def test_concurrent_appends_keep_the_chain_linear(tmp_path):
    """Eight threads appending at once (SQLite, or FLUXPROOF_TEST_DATABASE_URL): one chain, no
    gaps, verifies."""
    from service import audit
    from tests.api.support import TEST_DATABASE_URL, empty_database

    if TEST_DATABASE_URL:
        empty_database(TEST_DATABASE_URL)
        store = Store(TEST_DATABASE_URL, {"DATABASE_URL": TEST_DATABASE_URL, "DATA_DIR":
                                          str(tmp_path), "SIGNING_KEY_FILE":
                                          str(tmp_path / "key.pem")}, pool_size=8)
    else:
        store = Store(f"sqlite:///{tmp_path / 'c.sqlite3'}", pool_size=8)
    upgrade(store)
    errors = []

    def writer(n: int) -> None:
        try:
            for i in range(15):
                with store.transaction() as session:
                    audit.append_event(session, actor=f"t{n}", kind="case.stored",
                                       subject=f"{n}-{i}", payload={"i": i})
        except Exception as exc:  # pragma: no cover - reported below
            errors.append(exc)

    threads = [threading.Thread(target=writer, args=(n,)) for n in range(8)]
    for thread in threads:
        thread.start()
    for thread in threads:
        thread.join()
    try:
        assert errors == []
        report = audit.verify_chain(store)
        assert report.chain_intact and report.events == 120 and report.head_seq == 120
    finally:
        store.dispose()


def test_unknown_event_kind_is_refused(tmp_path):
    from service import audit

    store = Store(f"sqlite:///{tmp_path / 'k.sqlite3'}")
    upgrade(store)
    try:
        with pytest.raises(ValueError, match="unknown audit event kind"):
            with store.transaction() as session:
                audit.append_event(session, actor="x", kind="case.deleted", subject="c")
    finally:
        store.dispose()


def test_the_monte_carlo_blocks_migration_goes_down_and_up_again(tmp_path):
    """Revision 0005 (run_blocks, runs.monte_carlo_seed, runs.progress) is reversible and
    leaves the seal triggers of 0004 in place."""
    from alembic import command
    from sqlalchemy import inspect, text

    from service.store.migrate import alembic_config

    store = Store(f"sqlite:///{tmp_path / 'm.sqlite3'}")
    try:
        upgrade(store)
        command.downgrade(alembic_config(store), "0004_audit_outbox_and_seals")
        inspector = inspect(store.engine)
        assert "run_blocks" not in inspector.get_table_names()
        assert {"monte_carlo_seed", "progress"}.isdisjoint(
            c["name"] for c in inspector.get_columns("runs"))
        assert upgrade(store) == head_revision()
        inspector = inspect(store.engine)
        assert "run_blocks" in inspector.get_table_names()
        with store.engine.connect() as connection:
            triggers = set(connection.execute(text(
                "SELECT name FROM sqlite_master WHERE type = 'trigger'")).scalars())
        assert {"runs_sealed_on_update", "runs_sealed_on_delete"} <= triggers
    finally:
        store.dispose()


def test_the_people_migration_goes_down_and_up_again_keeping_the_seals(tmp_path):
    """Revision 0006 (users, browser_sessions, tokens.user_id/expires_at, the signature columns
    of signoffs) is reversible; a token made before it belongs to nobody; the seal triggers of
    0004 stay on signoffs."""
    from alembic import command
    from sqlalchemy import inspect, text

    from service.store.migrate import alembic_config

    store = Store(f"sqlite:///{tmp_path / 'm.sqlite3'}")
    try:
        upgrade(store)
        command.downgrade(alembic_config(store), "0005_monte_carlo_blocks")
        inspector = inspect(store.engine)
        assert {"users", "browser_sessions"}.isdisjoint(inspector.get_table_names())
        assert "signature" not in {c["name"] for c in inspector.get_columns("signoffs")}
        with store.engine.begin() as connection:
            connection.execute(text(
                "INSERT INTO tokens (id, name, role, sha256, created_at, revoked) VALUES "
                "('t1', 'Engineer-1', 'reviewer', :digest, '2026-01-01', 0)"),
                {"digest": "0" * 64})
        assert upgrade(store) == head_revision()
        inspector = inspect(store.engine)
        assert {"users", "browser_sessions"} <= set(inspector.get_table_names())
        assert {"meaning", "signer_name", "signature", "key_id", "record_sha256",
                "payload_sha256", "justification"} <= {
            c["name"] for c in inspector.get_columns("signoffs")}
        with store.engine.connect() as connection:
            assert connection.execute(text("SELECT user_id, expires_at FROM tokens")).one() == (
                None, None)
            triggers = set(connection.execute(text(
                "SELECT name FROM sqlite_master WHERE type = 'trigger'")).scalars())
        assert {"signoffs_never_update", "signoffs_never_delete"} <= triggers
    finally:
        store.dispose()
