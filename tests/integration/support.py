"""Helpers of the integration tests (their fixtures live in ``tests/conftest.py``)."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path
from typing import Any

from tests.api.support import wait_for_run
from tests.integration.real_services import PostgresSchema, RedisLease

ROLE_NAMES = {"engineer": "ivo.integration-engineer", "reviewer": "rhea.integration-reviewer",
              "auditor": "aurel.integration-auditor", "admin": "ada.integration-admin"}


#: The signing key every process of the PostgreSQL tests shares (a deployment with its own
#: database names one file for the API and every worker; it also keys the audit chain). The
#: anchor file is each process's default (``./var/audit_anchor.jsonl`` of the repository, the
#: working directory of the tests and their workers); each schema is a chain of its own.
TEST_SIGNING_KEY_FILE = str(Path(tempfile.gettempdir()) / f"fluxproof-test-{os.getuid()}"
                            / "signing_key.pem")


def worker_settings(schema: PostgresSchema, broker: RedisLease) -> dict[str, str]:
    return {"FLUXPROOF_DATABASE_URL": schema.url, "FLUXPROOF_BROKER_URL": broker.url,
            "FLUXPROOF_AUTO_MIGRATE": "false",
            "FLUXPROOF_SIGNING_KEY_FILE": TEST_SIGNING_KEY_FILE}


def make_app(schema: PostgresSchema, broker: RedisLease):
    from service.app import create_app
    from tests.api.support import app_keys

    return create_app({"TESTING": True, "DATABASE_URL": schema.url, "BROKER_URL": broker.url,
                       "DISPATCH": "celery", **app_keys(Path(TEST_SIGNING_KEY_FILE).parent)})


def create_tokens(store: Any) -> dict[str, str]:
    """role -> a fresh bearer token (each role's own person)."""
    from tests.api.support import person_token

    return {role: person_token(store, role, name)
            for role, name in ROLE_NAMES.items()}


def wait_finished(client: Any, token: str, run_id: str, timeout: float = 60.0) -> dict:
    """Poll ``GET /v1/runs/{run_id}`` until the run is succeeded or failed (worker processes)."""
    return wait_for_run(client, token, run_id, timeout=timeout, interval=0.05)
