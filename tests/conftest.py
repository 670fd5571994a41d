"""The fixtures of the whole test tree, grouped by the folders that use them.

* Service tests (``api``, ``ui``, ``unit/service``): ``app``, ``client``, ``store``, ``tokens``,
  ``runner``. Every test gets a fresh SQLite store, copied from one migrated template
  (migrations run once per session), and a token for each role. With
  ``FLUXPROOF_TEST_DATABASE_URL`` set (e.g. ``postgresql+psycopg://postgres@127.0.0.1:5432/test``)
  the same tests run on that database instead: migrated once, every table emptied before each
  test. Runs execute inline after their commit unless a test asks for the embedded thread pool
  (``dispatch_mode``). ``controlled_engine`` replaces the engine by one whose figures the test
  chooses.
* Integration tests (``integration``): real Redis, real PostgreSQL, real worker processes.
  ``shared_pg_schema`` is a migrated PostgreSQL schema for the session; ``live_broker`` a leased
  Redis database that two ``fluxproof worker`` processes consume (``live_workers``);
  ``idle_broker`` a second one that no worker reads, so that queued messages stay where a test
  can look at them. ``live_app``, ``live_client``, ``live_store``, ``live_tokens``: the Flask app
  on that schema, dispatching to the live broker; ``idle_app`` dispatches to the idle one.
* Fault tests (``faults``): ``pg_schema``, a PostgreSQL schema of the test's own (dropped
  afterwards), ``migrated_store`` on it, ``redis_lease``, ``own_redis`` (a redis-server of the
  test's own).
* Fuzz and security tests: ``fuzz_app``, ``fuzz_tokens``; ``sec_app``, ``sec_store``,
  ``sec_tokens``, ``seeded`` (a stored case, a signed-off run and a batch).

Tests in ``integration`` are marked ``integration``; tests in ``faults`` ``integration`` and
``slow``. When Redis or PostgreSQL cannot be reached (``real_services``), those tests FAIL if the
environment variable ``CI`` is set and are skipped with the reason otherwise.
"""

from __future__ import annotations

import os
import shutil
from collections.abc import Iterator
from pathlib import Path

import pytest
from click.testing import CliRunner
from flask import Flask

from service.app import create_app, shutdown_app
from service.settings import SQLITE_FILE_NAME
from service.store import Store, reset_default_store
from service.store.migrate import upgrade
from tests.api.support import (
    BASE_CASE,
    ROLE_NAMES,
    TEST_DATABASE_URL,
    app_keys,
    bearer,
    clear_fluxproof_env,
    copy_template_db,
    empty_database,
    fresh_app,
    person_token,
)
from tests.faults.processes import OwnRedis
from tests.faults.support import clean_upkeep_keys
from tests.integration.real_services import PostgresSchema, RedisLease
from tests.integration.service_gate import require_real_services, unavailable
from tests.integration.support import (
    TEST_SIGNING_KEY_FILE,
    create_tokens,
    make_app,
    worker_settings,
)
from tests.integration.worker_processes import WorkerProcess, stop_all

TESTS_DIR = Path(__file__).parent
INTEGRATION_DIR = TESTS_DIR / "integration"
FAULTS_DIR = TESTS_DIR / "faults"

FUZZ_ROLE_NAMES = {"engineer": "fabio.fuzz-engineer", "reviewer": "rosa.fuzz-reviewer",
                   "auditor": "arne.fuzz-auditor", "admin": "ines.fuzz-admin"}
SECURITY_ROLE_NAMES = {"engineer": "sela.sec-engineer", "reviewer": "remi.sec-reviewer",
                       "auditor": "aya.sec-auditor", "admin": "arvo.sec-admin"}


def pytest_collection_modifyitems(config: pytest.Config, items: list[pytest.Item]) -> None:
    for item in items:
        folders = Path(str(item.fspath)).parents
        if INTEGRATION_DIR in folders:
            item.add_marker(pytest.mark.integration)
        if FAULTS_DIR in folders:
            item.add_marker(pytest.mark.integration)
            item.add_marker(pytest.mark.slow)


# --- service tests: a fresh SQLite store per test (api, ui, unit/service) -----------------------


@pytest.fixture(autouse=True)
def cheap_password_hash(monkeypatch: pytest.MonkeyPatch) -> None:
    """argon2id with the smallest cost, so that the many people the tests create cost little
    time; a hash records its parameters, so verification is the same code as in service."""
    import argon2

    import service.people

    monkeypatch.setattr(service.people, "HASHER",
                        argon2.PasswordHasher(time_cost=1, memory_cost=8, parallelism=1))


@pytest.fixture(scope="session")
def migrated_template(tmp_path_factory: pytest.TempPathFactory) -> Path:
    directory = tmp_path_factory.mktemp("template")
    store = Store(f"sqlite:///{directory / SQLITE_FILE_NAME}")
    upgrade(store)
    store.dispose()
    return directory / SQLITE_FILE_NAME


@pytest.fixture
def data_dir(tmp_path: Path, migrated_template: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    clear_fluxproof_env(monkeypatch)
    directory = tmp_path / "data"
    if TEST_DATABASE_URL:
        empty_database(TEST_DATABASE_URL)
        monkeypatch.setenv("FLUXPROOF_DATABASE_URL", TEST_DATABASE_URL)
        monkeypatch.setenv("FLUXPROOF_SIGNING_KEY_FILE", str(directory / "signing_key.pem"))
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
    # Embedded runs in the test's own threads: the controlled engine replaces the engine in
    # this process (the run processes are tested in tests/unit/service/test_run_processes.py).
    application = create_app({"TESTING": True, "DATA_DIR": str(data_dir),
                              "DATABASE_URL": TEST_DATABASE_URL, "DISPATCH": dispatch_mode,
                              "EMBEDDED_ISOLATION": "thread", **app_keys(data_dir)})
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
    return {role: person_token(store, role, name)
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

        def __call__(self, case: dict, **_monte_carlo: object) -> dict:
            # seed and scheduler, which the service passes for a case with uncertainty
            import schemas

            schemas.validate_case(case)  # as the real check_case does first (CaseError)
            self.calls += 1
            return controlled_result(case, dict(self.quantities), status=self.status,
                                     verdict="pass" if self.status == "succeeded" else "fail")

    engine = Controlled()
    monkeypatch.setattr(worker.engine, "check_case", engine)
    # It replaces the engine in this process: an embedded app must run its runs here too.
    monkeypatch.setenv("FLUXPROOF_EMBEDDED_ISOLATION", "thread")
    return engine


# --- real services (integration, faults) --------------------------------------------------------


@pytest.fixture(scope="session")
def real_services() -> str:
    """Check Redis and PostgreSQL once; return the PostgreSQL user that works. Stores built on
    PostgreSQL from a URL alone then find the tests' signing key in the environment."""
    os.environ.setdefault("FLUXPROOF_SIGNING_KEY_FILE", TEST_SIGNING_KEY_FILE)
    return require_real_services("integration or fault")


# --- integration tests: one migrated schema and two worker processes for the session ------------


@pytest.fixture(scope="session")
def shared_pg_schema(real_services: str) -> Iterator[PostgresSchema]:
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


@pytest.fixture(scope="session")
def live_workers(shared_pg_schema: PostgresSchema, live_broker: RedisLease,
                 tmp_path_factory: pytest.TempPathFactory) -> Iterator[list[WorkerProcess]]:
    """Two worker processes (one pool process each) on the live broker, for the session."""
    logs = tmp_path_factory.mktemp("worker-logs")
    settings = worker_settings(shared_pg_schema, live_broker)
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


@pytest.fixture
def live_app(clean_fluxproof_env: None, shared_pg_schema: PostgresSchema,
             live_broker: RedisLease, live_workers: list[WorkerProcess]):
    application = make_app(shared_pg_schema, live_broker)
    yield application
    shutdown_app(application)


@pytest.fixture
def idle_app(clean_fluxproof_env: None, shared_pg_schema: PostgresSchema,
             idle_broker: RedisLease):
    """The app dispatching to a broker database that no worker consumes."""
    application = make_app(shared_pg_schema, idle_broker)
    yield application
    shutdown_app(application)
    idle_broker.clean()


@pytest.fixture
def live_store(live_app):
    return live_app.extensions["fluxproof"].store


@pytest.fixture
def live_client(live_app):
    return live_app.test_client()


@pytest.fixture
def live_tokens(live_store) -> dict[str, str]:
    return create_tokens(live_store)


# --- fault tests: a schema, a Redis lease or a redis-server of each test's own -------------------


@pytest.fixture
def pg_schema(real_services: str) -> Iterator[PostgresSchema]:
    schema = PostgresSchema.create(prefix="fluxproof_fault")
    yield schema
    schema.drop()


@pytest.fixture
def migrated_store(pg_schema: PostgresSchema):
    store = Store(pg_schema.url, {"DATABASE_URL": pg_schema.url,
                                  "SIGNING_KEY_FILE": TEST_SIGNING_KEY_FILE})
    upgrade(store)
    yield store
    store.dispose()


@pytest.fixture
def redis_lease(real_services: str) -> Iterator[RedisLease]:
    lease = RedisLease.take()
    yield lease
    clean_upkeep_keys(lease.client())
    lease.release()


@pytest.fixture
def own_redis(tmp_path: Path) -> Iterator[OwnRedis]:
    if shutil.which("redis-server") is None:
        unavailable("the redis-server program is not on PATH", "fault")
    server = OwnRedis(tmp_path / "own-redis").start()
    yield server
    server.stop()


# --- fuzz tests -----------------------------------------------------------------------------------


@pytest.fixture
def fuzz_app(tmp_path, monkeypatch):
    yield from fresh_app(tmp_path, monkeypatch)


@pytest.fixture
def fuzz_tokens(fuzz_app) -> dict[str, str]:
    store = fuzz_app.extensions["fluxproof"].store
    return {role: person_token(store, role, name)
            for role, name in FUZZ_ROLE_NAMES.items()}


# --- security tests: ids in paths are real ------------------------------------------------------


@pytest.fixture
def sec_app(tmp_path, monkeypatch):
    yield from fresh_app(tmp_path, monkeypatch, SECRET_KEY="security-test-secret-0123456789abcdef")


@pytest.fixture
def sec_store(sec_app):
    return sec_app.extensions["fluxproof"].store


@pytest.fixture
def sec_tokens(sec_store) -> dict[str, str]:
    return {role: person_token(sec_store, role, name)
            for role, name in SECURITY_ROLE_NAMES.items()}


@pytest.fixture
def seeded(sec_app, sec_tokens) -> dict[str, str]:
    """Ids of a stored case, a finished run of it and a batch."""
    client = sec_app.test_client()
    run = client.post("/v1/runs", json={"case": BASE_CASE}, headers=bearer(sec_tokens["engineer"]))
    assert run.status_code == 202, run.get_json()
    run_id = run.get_json()["run_id"]
    case_id = client.get(f"/v1/runs/{run_id}",
                         headers=bearer(sec_tokens["engineer"])).get_json()["case_id"]
    batch = client.post("/v1/batches", json={"all": True}, headers=bearer(sec_tokens["admin"]))
    assert batch.status_code == 202, batch.get_json()
    return {"case_id": case_id, "run_id": run_id, "batch_id": batch.get_json()["batch_id"]}
