"""Fixtures of the integration tests: real Redis, real PostgreSQL, real worker processes.

Every test here is marked ``integration``. When Redis or PostgreSQL cannot be reached the
tests FAIL if the environment variable ``CI`` is set (the CI machine must have them), and are
skipped with the reason otherwise.

Session resources (each only ours, see :mod:`tests.integration.real_services`):

* ``pg_schema``: a PostgreSQL schema in database ``test``, migrated, dropped at the end.
* ``live_broker``: a leased Redis database that two ``fluxproof worker`` processes consume
  (``live_workers``); ``idle_broker``: a second one that no worker reads, so that queued
  messages stay where a test can look at them.
* ``app`` / ``client``: the Flask app on that store, dispatching to the live broker.
"""

from __future__ import annotations

import os
import time
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest

from tests.integration.real_services import (
    PostgresSchema,
    RedisLease,
)
from tests.integration.service_gate import require_real_services
from tests.integration.worker_processes import WorkerProcess, stop_all

ROLE_NAMES = {"engineer": "ivo.integration-engineer", "reviewer": "rhea.integration-reviewer",
              "auditor": "aurel.integration-auditor", "admin": "ada.integration-admin"}


def pytest_collection_modifyitems(config: pytest.Config, items: list[pytest.Item]) -> None:
    here = Path(__file__).parent
    for item in items:
        if here in Path(str(item.fspath)).parents:
            item.add_marker(pytest.mark.integration)


@pytest.fixture(scope="session")
def real_services() -> str:
    """Check Redis and PostgreSQL once; return the PostgreSQL user that works."""
    return require_real_services("integration")


@pytest.fixture(scope="session")
def pg_schema(real_services: str) -> Iterator[PostgresSchema]:
    from service.store import Store
    from service.store.migrate import upgrade

    schema = PostgresSchema.create()
    store = Store(schema.url)
    try:
        upgrade(store)
    finally:
        store.dispose()
    yield schema
    schema.drop()


@pytest.fixture(scope="session")
def live_broker(real_services: str) -> Iterator[RedisLease]:
    lease = RedisLease.take()
    yield lease
    lease.release()


@pytest.fixture(scope="session")
def idle_broker(real_services: str, live_broker: RedisLease) -> Iterator[RedisLease]:
    lease = RedisLease.take(exclude=[live_broker.db])
    yield lease
    lease.release()


def worker_settings(schema: PostgresSchema, broker: RedisLease) -> dict[str, str]:
    return {"FLUXPROOF_DATABASE_URL": schema.url, "FLUXPROOF_BROKER_URL": broker.url,
            "FLUXPROOF_AUTO_MIGRATE": "false"}


@pytest.fixture(scope="session")
def live_workers(pg_schema: PostgresSchema, live_broker: RedisLease,
                 tmp_path_factory: pytest.TempPathFactory) -> Iterator[list[WorkerProcess]]:
    """Two worker processes (one pool process each) on the live broker, for the session."""
    logs = tmp_path_factory.mktemp("worker-logs")
    settings = worker_settings(pg_schema, live_broker)
    workers = [WorkerProcess(settings, logs / f"worker-{n}.log", concurrency=1).start()
               for n in (1, 2)]
    try:
        for worker in workers:
            worker.wait_ready()
        yield workers
    finally:
        stop_all(workers)


@pytest.fixture
def clean_fluxproof_env(monkeypatch: pytest.MonkeyPatch) -> None:
    for key in list(os.environ):
        if key.startswith("FLUXPROOF_"):
            monkeypatch.delenv(key)


def make_app(schema: PostgresSchema, broker: RedisLease):
    from service.app import create_app

    return create_app({"TESTING": True, "DATABASE_URL": schema.url, "BROKER_URL": broker.url,
                       "DISPATCH": "celery"})


@pytest.fixture
def app(clean_fluxproof_env: None, pg_schema: PostgresSchema, live_broker: RedisLease,
        live_workers: list[WorkerProcess]):
    from service.app import shutdown_app

    application = make_app(pg_schema, live_broker)
    yield application
    shutdown_app(application)


@pytest.fixture
def idle_app(clean_fluxproof_env: None, pg_schema: PostgresSchema, idle_broker: RedisLease):
    """The app dispatching to a broker database that no worker consumes."""
    from service.app import shutdown_app

    application = make_app(pg_schema, idle_broker)
    yield application
    shutdown_app(application)
    idle_broker.clean()


@pytest.fixture
def store(app):
    return app.extensions["fluxproof"].store


@pytest.fixture
def client(app):
    return app.test_client()


def create_tokens(store: Any) -> dict[str, str]:
    """role -> a fresh bearer token (each role's own person)."""
    from service.tokens import create_token

    return {role: create_token(store, role=role, name=name)[1]
            for role, name in ROLE_NAMES.items()}


@pytest.fixture
def tokens(store) -> dict[str, str]:
    return create_tokens(store)


def bearer(token: str) -> dict[str, str]:
    return {"Authorization": f"Bearer {token}"}


def wait_finished(client: Any, token: str, run_id: str, timeout: float = 60.0) -> dict:
    """Poll ``GET /v1/runs/{run_id}`` until the run is succeeded or failed."""
    deadline = time.monotonic() + timeout
    while True:
        response = client.get(f"/v1/runs/{run_id}", headers=bearer(token))
        assert response.status_code == 200, response.get_json()
        record = response.get_json()
        if record["status"] in ("succeeded", "failed"):
            return record
        if time.monotonic() > deadline:
            raise AssertionError(f"run {run_id} still {record['status']} after {timeout} s")
        time.sleep(0.05)
