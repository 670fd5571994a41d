"""Helpers shared by the service tests of every folder (fixtures live in ``tests/conftest.py``)."""

from __future__ import annotations

import copy
import os
import shutil
import time
import uuid
from pathlib import Path
from typing import Any

from service.settings import ENV_PREFIX, SQLITE_FILE_NAME

ROLE_NAMES = {
    "engineer": "erin.engineer",
    "reviewer": "rafael.reviewer",
    "auditor": "ana.auditor",
    "admin": "adi.admin",
}

# An invented test scenario (not a check value): a one-layer planar membrane between two
# fixed concentrations. Only its validity and its identity matter to the service tests.
BASE_CASE: dict[str, Any] = {
    "schema_version": 1,
    "title": "Service test: planar membrane between two reservoirs",
    "reference": "service test fixture",
    "tags": ["service-test", "membrane"],
    "geometry": "slab",
    "inner": "0 m",
    "area": "2 cm^2",
    "layers": [{"name": "membrane", "thickness": "50 um", "diffusivity": "1e-10 m^2/s",
                "partition": 1.0}],
    "inner_boundary": {"kind": "concentration", "value": "1 mol/m^3"},
    "outer_boundary": {"kind": "concentration", "value": "0 mol/m^3"},
    "regime": {"kind": "steady"},
}


def make_case(**changes: Any) -> dict[str, Any]:
    """A copy of BASE_CASE with top-level fields replaced."""
    case = copy.deepcopy(BASE_CASE)
    case.update(changes)
    return case


def uncertain_case(max_trials: int = 80_000, seed: int | None = 7, **changes: Any
                   ) -> dict[str, Any]:
    """BASE_CASE with an invented input uncertainty that runs to ``max_trials`` (blocks of
    10,000 trials: three significant digits are not reached sooner), for the tests of how a
    run's Monte Carlo blocks are shared. An input, never a check value."""
    uncertainty: dict[str, Any] = {
        "inputs": [{"field": "layers[0].diffusivity", "distribution": "lognormal",
                    "relative_sd": 0.3},
                   {"field": "layers[0].partition", "distribution": "normal",
                    "relative_sd": 0.1}],
        "significant_digits": 3, "max_trials": max_trials}
    if seed is not None:
        uncertainty["seed"] = seed
    return make_case(uncertainty=uncertainty, **changes)


def clear_fluxproof_env(monkeypatch: Any) -> None:
    for key in list(os.environ):
        if key.startswith(ENV_PREFIX):
            monkeypatch.delenv(key)


def copy_template_db(template: Path, data_dir: Path) -> None:
    data_dir.mkdir(parents=True, exist_ok=True)
    shutil.copyfile(template, data_dir / SQLITE_FILE_NAME)


def app_keys(directory: Path) -> dict[str, str]:
    """The secret and the signing key file a test app needs when it has its own database (the
    embedded default makes both in its data directory)."""
    return {"SECRET_KEY": "test-installation-secret-0123456789abcdef",
            "SIGNING_KEY_FILE": str(Path(directory) / "signing_key.pem")}


#: The password of every person the test helpers create (an input, never a check value).
TEST_PASSWORD = "correct horse battery staple"


def person_token(store: Any, role: str, login: str, *, password: str | None = TEST_PASSWORD,
                 name: str | None = None, lifetime_days: float | None = None) -> str:
    """A bearer token of the person ``login`` (created with ``role`` and ``password`` when
    missing; printed name ``name`` or the login)."""
    from service.people import create_user, person_by_login
    from service.tokens import create_token

    if person_by_login(store, login) is None:
        create_user(store, login=login, name=name or login, role=role, password=password,
                    actor="os:test")
    return create_token(store, login=login, actor="os:test", lifetime_days=lifetime_days)[1]


#: The signature fields of a sign-off by one of the helpers' persons.
SIGN = {"meaning": "approval", "password": TEST_PASSWORD}


def signoff_body(decision: str = "approved", comment: str = "checked", *,
                 meaning: str = "approval", password: str = TEST_PASSWORD,
                 **more: Any) -> dict[str, Any]:
    """A sign-off request body (the helpers' persons' password)."""
    return {"decision": decision, "comment": comment, "meaning": meaning, "password": password,
            **more}


def bearer(token: str) -> dict[str, str]:
    return {"Authorization": f"Bearer {token}"}


def wait_for_run(client: Any, token: str, run_id: str, timeout: float = 30.0,
                 interval: float = 0.02) -> dict[str, Any]:
    """Poll GET /v1/runs/{id} every ``interval`` s until the run is succeeded or failed."""
    deadline = time.monotonic() + timeout
    while True:
        response = client.get(f"/v1/runs/{run_id}", headers=bearer(token))
        assert response.status_code == 200, response.get_json()
        record = response.get_json()
        if record["status"] in ("succeeded", "failed"):
            return record
        if time.monotonic() > deadline:
            raise AssertionError(f"run {run_id} still {record['status']} after {timeout} s")
        time.sleep(interval)


def count_rows(store: Any) -> dict[str, int]:
    """Rows in every table (to show that a refused request stored nothing)."""
    from sqlalchemy import func, select

    from service.store.models import Base

    with store.transaction() as session:
        return {name: session.execute(select(func.count()).select_from(table)).scalar_one()
                for name, table in Base.metadata.tables.items()}


def controlled_result(case: dict[str, Any], quantities: dict[str, float],
                      *, status: str = "succeeded", verdict: str = "pass") -> dict[str, Any]:
    """A result document with chosen quantities, for tests of the service's own logic (drift,
    sealing) that must not depend on what the engine computes."""
    import schemas

    return {
        "case_sha256": schemas.case_sha256(case),
        "status": status,
        "verdict": verdict,
        "error": None if status == "succeeded" else "controlled failure",
        "quantities": {k: {"value": v, "unit": "mol/(m^2*s)"} for k, v in quantities.items()},
        "series": {},
        "methods": [{"role": "primary", "name": "controlled", "reference": "test"}],
        "checks": [{"name": "controlled", "value": 0.0, "limit": 1.0, "passed": True,
                    "detail": "test"}],
        "warnings": [],
        "provenance": {"engine_version": "test", "numpy": "x", "scipy": "y"},
        "caution": "test caution",
    }


def fresh_app(tmp_path: Path, monkeypatch, **overrides: Any):
    """Yield the app on a fresh SQLite store under ``tmp_path`` with no ``FLUXPROOF_*`` setting
    from the environment, runs executed inline; shut down afterwards (a fixture body)."""
    from service.app import create_app, shutdown_app
    from service.store import reset_default_store

    for key in list(os.environ):
        if key.startswith(ENV_PREFIX):
            monkeypatch.delenv(key)
    monkeypatch.setenv(f"{ENV_PREFIX}DATA_DIR", str(tmp_path / "data"))
    reset_default_store()
    app = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "data"), "DISPATCH": "inline",
                      **overrides})
    yield app
    shutdown_app(app)
    reset_default_store()


# With this set (e.g. ``postgresql+psycopg://postgres@127.0.0.1:5432/test``) the API tests run on
# that database instead of a SQLite copy: migrated once, every table emptied before each test.
TEST_DATABASE_URL = os.environ.get("FLUXPROOF_TEST_DATABASE_URL")


def empty_database(url: str) -> None:
    """Migrate the database at ``url`` and empty every table, the audit head back at genesis."""
    from sqlalchemy import text

    from service.audit import GENESIS_HASH
    from service.store import Store
    from service.store.migrate import upgrade
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
            # A new chain: its own id in the anchor file, keyed from its first event.
            connection.execute(text("UPDATE audit_head SET seq = 0, hash = :h, chain_id = :c, "
                                    "keyed_from = 1"), {"h": GENESIS_HASH,
                                                        "c": str(uuid.uuid4())})
    finally:
        store.dispose()
