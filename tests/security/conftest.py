"""Fixtures of the security tests: the app on a fresh SQLite store, a token for every role,
and one stored case, run (signed off) and batch, so that ids in paths are real."""

from __future__ import annotations

import pytest

from tests.api.support import BASE_CASE, fresh_app

ROLE_NAMES = {"engineer": "sela.sec-engineer", "reviewer": "remi.sec-reviewer",
              "auditor": "aya.sec-auditor", "admin": "arvo.sec-admin"}


@pytest.fixture
def sec_app(tmp_path, monkeypatch):
    yield from fresh_app(tmp_path, monkeypatch, SECRET_KEY="security-test-secret-0123456789")


@pytest.fixture
def sec_store(sec_app):
    return sec_app.extensions["fluxproof"].store


@pytest.fixture
def sec_tokens(sec_store) -> dict[str, str]:
    from service.tokens import create_token

    return {role: create_token(sec_store, role=role, name=name)[1]
            for role, name in ROLE_NAMES.items()}


def bearer(token: str) -> dict[str, str]:
    return {"Authorization": f"Bearer {token}"}


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
