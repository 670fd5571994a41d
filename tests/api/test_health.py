"""Health: no token, names the store and the executor."""

from __future__ import annotations

import pytest


def test_health_needs_no_token(client, store):
    response = client.get("/v1/health")
    assert response.status_code == 200
    body = response.get_json()
    assert body["service"] == "ok"
    assert body["store"] == {"state": "ok", "mode": store.dialect}
    assert body["broker"]["mode"] == "inline"


@pytest.mark.parametrize("dispatch_mode", ["embedded"])
def test_health_in_embedded_mode(client):
    assert client.get("/v1/health").get_json()["broker"]["mode"] == "embedded"


def test_health_with_an_unreachable_broker_is_503(data_dir):
    from service.app import create_app, shutdown_app

    app = create_app({"DATA_DIR": str(data_dir), "BROKER_URL": "redis://127.0.0.1:1/0"})
    try:
        response = app.test_client().get("/v1/health")
        assert response.status_code == 503
        body = response.get_json()
        assert body["broker"]["state"] == "unavailable" and body["broker"]["mode"] == "celery"
    finally:
        shutdown_app(app)
