"""The installation's secret in use: the app takes it from ``installation_secret``, a deployment
with its own database and no strong secret refuses to start, and a session cookie forged with
the old documented default secret opens nothing (the finding: anyone knowing a token's id
could forge a reviewer's session)."""

from __future__ import annotations

import stat
import time

import pytest
from click.testing import CliRunner
from flask.sessions import SecureCookieSessionInterface

from service.app import create_app, shutdown_app
from service.cli import main
from service.server_keys import PLACEHOLDER_SECRET, SECRET_FILE, SecretError
from tests.api.support import clear_fluxproof_env, person_token


def test_the_embedded_app_uses_the_installation_secret_file(tmp_path, monkeypatch):
    clear_fluxproof_env(monkeypatch)
    app = create_app({"TESTING": True, "DATA_DIR": str(tmp_path), "DISPATCH": "inline"})
    try:
        secret_file = tmp_path / SECRET_FILE
        assert app.secret_key == secret_file.read_text().strip()
        assert app.secret_key != PLACEHOLDER_SECRET and len(app.secret_key) >= 32
        assert stat.S_IMODE(secret_file.stat().st_mode) == 0o600
    finally:
        shutdown_app(app)


@pytest.mark.parametrize("secret", [None, PLACEHOLDER_SECRET, "short"])
def test_an_app_with_its_own_database_refuses_to_start_without_a_strong_secret(
        tmp_path, monkeypatch, secret):
    clear_fluxproof_env(monkeypatch)
    config = {"TESTING": True, "DATA_DIR": str(tmp_path), "DISPATCH": "inline",
              "DATABASE_URL": f"sqlite:///{tmp_path / 'own.sqlite3'}",
              "SIGNING_KEY_FILE": str(tmp_path / "key.pem")}
    if secret is not None:
        config["SECRET_KEY"] = secret
    with pytest.raises(SecretError, match="FLUXPROOF_SECRET_KEY"):
        create_app(config)


def test_serve_refuses_to_start_naming_the_setting(tmp_path, monkeypatch):
    clear_fluxproof_env(monkeypatch)
    monkeypatch.setenv("FLUXPROOF_DATABASE_URL", f"sqlite:///{tmp_path / 'own.sqlite3'}")
    monkeypatch.setenv("FLUXPROOF_SIGNING_KEY_FILE", str(tmp_path / "key.pem"))
    result = CliRunner().invoke(main, ["serve", "--port", "0"])
    assert result.exit_code == 1
    assert "refusing to start" in result.output and "FLUXPROOF_SECRET_KEY" in result.output


def test_a_session_forged_with_the_old_default_secret_opens_nothing(tmp_path, monkeypatch):
    clear_fluxproof_env(monkeypatch)
    app = create_app({"TESTING": True, "DATA_DIR": str(tmp_path), "DISPATCH": "inline"})
    try:
        store = app.extensions["fluxproof"].store
        token = person_token(store, "reviewer", "rita.reviewer")
        token_id = token.split("_")[1]
        # What main accepted: Flask's signed cookie with the token's id, signed with the
        # documented default secret.
        forger = SecureCookieSessionInterface().get_signing_serializer(
            type("Forger", (), {"secret_key": PLACEHOLDER_SECRET, "config": app.config})())
        forged = forger.dumps({"token_id": token_id, "signed_in_at": int(time.time())})
        client = app.test_client()
        client.set_cookie("fluxproof_session", forged, path="/ui")
        assert client.get("/ui/runs").status_code == 303  # to the sign-in form
        client.set_cookie("fluxproof_session", token_id, path="/ui")
        assert client.get("/ui/runs").status_code == 303
    finally:
        shutdown_app(app)


@pytest.mark.parametrize("setting,value,expected", [
    ("SESSION_IDLE_MINUTES", 0, "FLUXPROOF_SESSION_IDLE_MINUTES"),
    ("SESSION_MAX_HOURS", "eight", "FLUXPROOF_SESSION_MAX_HOURS"),
    ("SESSION_COOKIE_SECURE", "sometimes", "FLUXPROOF_SESSION_COOKIE_SECURE"),
    ("PROXY_FIX_HOPS", -1, "FLUXPROOF_PROXY_FIX_HOPS"),
])
def test_bad_session_settings_are_refused_at_start_naming_them(tmp_path, monkeypatch, setting,
                                                               value, expected):
    clear_fluxproof_env(monkeypatch)
    with pytest.raises(ValueError, match=expected):
        create_app({"TESTING": True, "DATA_DIR": str(tmp_path), "DISPATCH": "inline",
                    setting: value})
