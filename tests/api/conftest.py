"""Fixtures of the API tests, after Flask's tutorial: ``app``, ``client``, ``runner``.

Every test gets a fresh SQLite store, copied from one migrated template (migrations run once per
session), and a token for each role. With ``FLUXPROOF_TEST_DATABASE_URL`` set (e.g.
``postgresql+psycopg://postgres@127.0.0.1:5432/test``) the same tests run on that database
instead: migrated once, every table emptied before each test. Runs execute inline after their
commit unless a test asks for the embedded thread pool.
"""

from __future__ import annotations

import os
from collections.abc import Iterator
from pathlib import Path

import pytest
from click.testing import CliRunner
from flask import Flask

from service.app import create_app, shutdown_app
from service.settings import SQLITE_FILE_NAME
from service.store import Store, reset_default_store
from service.store.migrate import upgrade
from service.tokens import create_token
from tests.api.support import ROLE_NAMES, clear_fluxproof_env, copy_template_db


@pytest.fixture(scope="session")
def migrated_template(tmp_path_factory: pytest.TempPathFactory) -> Path:
    directory = tmp_path_factory.mktemp("template")
    store = Store(f"sqlite:///{directory / SQLITE_FILE_NAME}")
    upgrade(store)
    store.dispose()
    return directory / SQLITE_FILE_NAME


TEST_DATABASE_URL = os.environ.get("FLUXPROOF_TEST_DATABASE_URL")


def _empty_database(url: str) -> None:
    from sqlalchemy import text

    from service.audit import GENESIS_HASH
    from service.store.models import Base

    store = Store(url)
    try:
        upgrade(store)
        with store.engine.begin() as connection:
            tables = [t for t in reversed(Base.metadata.sorted_tables) if t.name != "audit_head"]
            if store.dialect == "postgresql":
                # TRUNCATE, which the seal triggers (on UPDATE and DELETE) leave alone.
                connection.execute(text("TRUNCATE " + ", ".join(t.name for t in tables)))
            else:
                for table in tables:
                    connection.execute(table.delete())
            connection.execute(text("UPDATE audit_head SET seq = 0, hash = :h"),
                               {"h": GENESIS_HASH})
    finally:
        store.dispose()


@pytest.fixture
def data_dir(tmp_path: Path, migrated_template: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    clear_fluxproof_env(monkeypatch)
    directory = tmp_path / "data"
    if TEST_DATABASE_URL:
        _empty_database(TEST_DATABASE_URL)
        monkeypatch.setenv("FLUXPROOF_DATABASE_URL", TEST_DATABASE_URL)
    else:
        copy_template_db(migrated_template, directory)
    monkeypatch.setenv("FLUXPROOF_DATA_DIR", str(directory))
    reset_default_store()
    yield directory
    reset_default_store()


@pytest.fixture
def dispatch_mode() -> str:
    return "inline"


@pytest.fixture
def app(data_dir: Path, dispatch_mode: str) -> Iterator[Flask]:
    application = create_app({"TESTING": True, "DATA_DIR": str(data_dir),
                              "DATABASE_URL": TEST_DATABASE_URL, "DISPATCH": dispatch_mode})
    yield application
    shutdown_app(application)


@pytest.fixture
def store(app: Flask) -> Store:
    return app.extensions["fluxproof"].store


@pytest.fixture
def client(app: Flask):
    return app.test_client()


@pytest.fixture
def runner(data_dir: Path) -> CliRunner:
    return CliRunner()


@pytest.fixture
def tokens(store: Store) -> dict[str, str]:
    """role -> bearer token; each role's token has its own person's name."""
    return {role: create_token(store, role=role, name=name)[1]
            for role, name in ROLE_NAMES.items()}


@pytest.fixture
def controlled_engine(monkeypatch: pytest.MonkeyPatch):
    """Replace the engine with one whose figures the test chooses, for tests of the service's
    own logic (sign-off, sealing, drift) that must not depend on the engine's numbers.

    Set ``controlled_engine.quantities`` (name -> value) before a run executes.
    """
    import worker.engine
    from tests.api.support import controlled_result

    class Controlled:
        quantities: dict = {"flux_outer": 2.0e-6, "flux_inner": 2.0e-6}
        status = "succeeded"
        calls = 0

        def __call__(self, case: dict) -> dict:
            import schemas

            schemas.validate_case(case)  # as the real check_case does first (CaseError)
            self.calls += 1
            return controlled_result(case, dict(self.quantities), status=self.status,
                                     verdict="pass" if self.status == "succeeded" else "fail")

    engine = Controlled()
    monkeypatch.setattr(worker.engine, "check_case", engine)
    return engine
