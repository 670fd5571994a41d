"""Fixtures of the fuzz tests: the app on a fresh SQLite store, a token for every role."""

from __future__ import annotations

import pytest

ROLE_NAMES = {"engineer": "fabio.fuzz-engineer", "reviewer": "rosa.fuzz-reviewer",
              "auditor": "arne.fuzz-auditor", "admin": "ines.fuzz-admin"}


@pytest.fixture
def fuzz_app(tmp_path, monkeypatch):
    import os

    from service.app import create_app, shutdown_app
    from service.store import reset_default_store

    for key in list(os.environ):
        if key.startswith("FLUXPROOF_"):
            monkeypatch.delenv(key)
    monkeypatch.setenv("FLUXPROOF_DATA_DIR", str(tmp_path / "data"))
    reset_default_store()
    app = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "data"),
                      "DISPATCH": "inline"})
    yield app
    shutdown_app(app)
    reset_default_store()


@pytest.fixture
def fuzz_tokens(fuzz_app) -> dict[str, str]:
    from service.tokens import create_token

    store = fuzz_app.extensions["fluxproof"].store
    return {role: create_token(store, role=role, name=name)[1]
            for role, name in ROLE_NAMES.items()}
