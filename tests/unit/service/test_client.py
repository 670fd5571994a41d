"""The Python client against a live in-process server (real HTTP on 127.0.0.1)."""

from __future__ import annotations

import pytest

from service.app import create_app, shutdown_app
from service.client import ApiError, Client
from service.server import BackgroundServer
from tests.api.support import TEST_PASSWORD, make_case, person_token


@pytest.fixture
def served(data_dir):  # noqa: F811
    app = create_app({"DATA_DIR": str(data_dir), "DISPATCH": "embedded",
                      "EMBEDDED_ISOLATION": "thread"})  # the controlled engine is in-process
    store = app.extensions["fluxproof"].store
    tokens = {role: person_token(store, role, f"{role}-person")
              for role in ("engineer", "reviewer", "admin")}
    server = BackgroundServer(app).start()
    yield server.url, tokens
    server.stop()
    shutdown_app(app)


def test_submit_wait_report_signoff(served, controlled_engine):  # noqa: F811
    url, tokens = served
    with Client(url, tokens["engineer"]) as engineer, Client(url, tokens["reviewer"]) as reviewer:
        assert engineer.health()["service"] == "ok"
        normalised = engineer.validate(make_case())
        assert normalised["layers"][0]["thickness"]["unit"] == "m"
        stored = engineer.store_case(make_case())
        assert engineer.store_case(make_case()) == stored
        run_id = engineer.submit(make_case())
        record = engineer.wait(run_id, timeout=30)
        assert record["status"] == "succeeded" and record["case_id"] == stored["case_id"]
        assert engineer.get_run(run_id)["run_id"] == run_id
        assert "<h2>Checks</h2>" in engineer.report(run_id)
        assert engineer.wait(engineer.submit_stored(stored["case_id"]), timeout=30)
        signed = reviewer.signoff(run_id, "approved", "fine", password=TEST_PASSWORD,
                                  meaning="responsibility")
        assert (signed["decision"], signed["meaning"]) == ("approved", "responsibility")
        assert signed["name"] == "reviewer-person" and signed["signature"]
    with Client(url, tokens["admin"]) as admin:
        batch_id = admin.start_batch(all_cases=True)
        assert admin.get_batch(batch_id)["batch_id"] == batch_id
        assert admin.verify_audit()["ok"] is True
        assert admin.audit(limit=2)["items"][0]["seq"] == 1


def test_errors_raise_with_the_problem_document(served):
    url, tokens = served
    with Client(url, tokens["engineer"]) as engineer:
        with pytest.raises(ApiError) as caught:
            engineer.validate(make_case(geometry="torus"))
        assert caught.value.status == 422
        assert any(e["path"] == "geometry" for e in caught.value.errors)
        assert "geometry" in str(caught.value)
        with pytest.raises(ApiError) as caught:
            engineer.start_batch(all_cases=True)
        assert caught.value.status == 403 and caught.value.problem["role"] == "engineer"
    with Client(url, "fpt_bad_token") as stranger, pytest.raises(ApiError) as caught:
        stranger.get_run("x")
    assert caught.value.status == 401


def test_wait_times_out(served, controlled_engine, monkeypatch):  # noqa: F811
    import threading

    url, tokens = served
    release = threading.Event()
    original = type(controlled_engine).__call__
    monkeypatch.setattr(type(controlled_engine), "__call__",
                        lambda self, case: (release.wait(10), original(self, case))[1])
    with Client(url, tokens["engineer"]) as engineer:
        run_id = engineer.submit(make_case())
        try:
            with pytest.raises(TimeoutError, match=run_id):
                engineer.wait(run_id, timeout=0.3)
        finally:
            release.set()
        assert engineer.wait(run_id, timeout=30)["status"] == "succeeded"
