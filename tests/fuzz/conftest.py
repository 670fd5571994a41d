"""Fixtures of the fuzz tests: the app on a fresh SQLite store, a token for every role."""

from __future__ import annotations

import pytest

from tests.api.support import fresh_app

ROLE_NAMES = {"engineer": "fabio.fuzz-engineer", "reviewer": "rosa.fuzz-reviewer",
              "auditor": "arne.fuzz-auditor", "admin": "ines.fuzz-admin"}


@pytest.fixture
def fuzz_app(tmp_path, monkeypatch):
    yield from fresh_app(tmp_path, monkeypatch)


@pytest.fixture
def fuzz_tokens(fuzz_app) -> dict[str, str]:
    from service.tokens import create_token

    store = fuzz_app.extensions["fluxproof"].store
    return {role: create_token(store, role=role, name=name)[1]
            for role, name in ROLE_NAMES.items()}
