"""Bad input: the right status, a problem document, and nothing stored."""

from __future__ import annotations

import json

import pytest

from tests.api.support import bearer, count_rows, make_case

PROBLEM_KEYS = {"type", "title", "status", "detail", "instance", "errors"}


def assert_problem(response, status: int) -> dict:
    assert response.status_code == status, response.get_data(as_text=True)
    assert response.mimetype == "application/problem+json"
    document = response.get_json()
    assert PROBLEM_KEYS <= set(document)
    assert document["status"] == status
    assert document["instance"] == response.request.path
    for item in document["errors"]:
        assert set(item) == {"path", "message"}
    return document


WRITE_ENDPOINTS = [("/v1/cases", "engineer"), ("/v1/runs", "engineer"),
                   ("/v1/validate", "engineer"), ("/v1/batches", "admin")]


@pytest.mark.parametrize("url,role", WRITE_ENDPOINTS)
def test_malformed_json_is_400_and_stores_nothing(client, store, tokens, url, role):
    before = count_rows(store)
    response = client.post(url, data='{"title": "unterminated', headers={
        **bearer(tokens[role]), "Content-Type": "application/json"})
    document = assert_problem(response, 400)
    assert "not valid JSON" in document["detail"]
    assert count_rows(store) == before


@pytest.mark.parametrize("url,role", WRITE_ENDPOINTS)
def test_wrong_content_type_is_415(client, store, tokens, url, role):
    before = count_rows(store)
    response = client.post(url, data=json.dumps(make_case()),
                           headers={**bearer(tokens[role]), "Content-Type": "text/plain"})
    document = assert_problem(response, 415)
    assert document["errors"][0]["path"] == "Content-Type"
    assert count_rows(store) == before


def test_missing_body_is_a_clear_error(client, tokens):
    response = client.post("/v1/cases", headers={**bearer(tokens["engineer"]),
                                                 "Content-Type": "application/json"})
    assert "empty" in assert_problem(response, 400)["detail"]


def test_duplicate_keys_are_refused(client, tokens):
    response = client.post("/v1/runs", data='{"case_id": "a", "case_id": "b"}', headers={
        **bearer(tokens["engineer"]), "Content-Type": "application/json"})
    assert "duplicate key" in assert_problem(response, 400)["detail"]


@pytest.mark.parametrize("literal", ["NaN", "Infinity", "-Infinity", "1e999"])
def test_non_finite_numbers_are_422_with_their_path(client, store, tokens, literal):
    before = count_rows(store)
    text = json.dumps(make_case()).replace('"partition": 1.0', f'"partition": {literal}')
    assert literal in text
    response = client.post("/v1/cases", data=text, headers={
        **bearer(tokens["engineer"]), "Content-Type": "application/json"})
    document = assert_problem(response, 422)
    assert document["errors"][0]["path"] == "layers[0].partition"
    assert literal in document["errors"][0]["message"]
    assert count_rows(store) == before


def test_unknown_fields_in_a_case_are_422(client, store, tokens):
    before = count_rows(store)
    response = client.post("/v1/cases", json=make_case(colour="blue"),
                           headers=bearer(tokens["engineer"]))
    document = assert_problem(response, 422)
    assert any(e["path"] == "colour" for e in document["errors"])
    assert count_rows(store) == before


def test_unknown_fields_in_a_run_request_are_422(client, store, tokens):
    before = count_rows(store)
    response = client.post("/v1/runs", json={"case": make_case(), "priority": "high"},
                           headers=bearer(tokens["engineer"]))
    document = assert_problem(response, 422)
    assert document["errors"] == [{"path": "priority",
                                   "message": "unknown field: not part of this request body"}]
    assert count_rows(store) == before


def test_invalid_case_in_a_run_request_stores_nothing(client, store, tokens):
    before = count_rows(store)
    bad = make_case(layers=[{"name": "membrane", "thickness": "50 kg",
                             "diffusivity": "1e-10 m^2/s", "partition": 1.0}])
    response = client.post("/v1/runs", json={"case": bad}, headers=bearer(tokens["engineer"]))
    document = assert_problem(response, 422)
    assert any(e["path"].startswith("layers[0].thickness") for e in document["errors"])
    assert count_rows(store) == before


@pytest.mark.parametrize("body,path", [
    ({}, ""),
    ({"case_id": "x", "case": {}}, ""),
    ({"case_id": ""}, "case_id"),
    ({"case_id": "no-such-case"}, "case_id"),
])
def test_run_request_needs_exactly_one_valid_source(client, store, tokens, body, path):
    before = count_rows(store)
    response = client.post("/v1/runs", json=body, headers=bearer(tokens["engineer"]))
    document = assert_problem(response, 422)
    assert document["errors"][0]["path"] == path
    assert count_rows(store) == before


def test_body_must_be_an_object(client, tokens):
    response = client.post("/v1/cases", json=[1, 2], headers=bearer(tokens["engineer"]))
    assert assert_problem(response, 422)["errors"][0]["message"].startswith("expected an object")


def test_oversize_body_is_413_and_stores_nothing(data_dir, dispatch_mode):
    from service.app import create_app, shutdown_app
    from tests.api.support import person_token

    app = create_app({"DATA_DIR": str(data_dir), "DISPATCH": "inline", "MAX_BODY_BYTES": 2000})
    try:
        store = app.extensions["fluxproof"].store
        token = person_token(store, "engineer", "big-sender")
        before = count_rows(store)
        case = make_case(reference="x" * 5000)
        response = app.test_client().post("/v1/cases", json=case, headers=bearer(token))
        document = assert_problem(response, 413)
        assert "2000 bytes" in document["detail"]
        assert count_rows(store) == before
        small = app.test_client().post("/v1/cases", json=make_case(), headers=bearer(token))
        assert small.status_code == 201
    finally:
        shutdown_app(app)


def test_default_body_limit_is_one_mebibyte(app):
    assert app.config["MAX_CONTENT_LENGTH"] == 1_048_576


def test_unknown_path_is_a_404_problem(client):
    assert_problem(client.get("/v1/nowhere"), 404)
    assert_problem(client.get("/"), 404)


def test_wrong_method_is_a_405_problem_with_allow(client, tokens):
    response = client.delete("/v1/cases", headers=bearer(tokens["admin"]))
    assert_problem(response, 405)
    assert "GET" in response.headers["Allow"]
    assert_problem(client.put("/v1/health"), 405)


def test_missing_resources_are_404_problems(client, tokens):
    headers = bearer(tokens["auditor"])
    for url in ("/v1/cases/none", "/v1/cases/none/runs", "/v1/runs/none",
                "/v1/runs/none/report", "/v1/batches/none"):
        assert "none" in assert_problem(client.get(url, headers=headers), 404)["detail"]


def test_bad_query_parameters_are_422(client, tokens):
    headers = bearer(tokens["auditor"])
    document = assert_problem(client.get("/v1/cases?limit=0", headers=headers), 422)
    assert document["errors"][0]["path"] == "limit"
    document = assert_problem(client.get("/v1/audit?colour=red", headers=headers), 422)
    assert document["errors"][0]["path"] == "colour"


def test_unexpected_errors_are_500_problems_without_internals(app, client, tokens,
                                                              monkeypatch):
    import service.cases

    def explode(*_args, **_kwargs):
        raise RuntimeError("secret internal detail")

    monkeypatch.setattr(service.cases, "list_cases", explode)
    response = client.get("/v1/cases", headers=bearer(tokens["auditor"]))
    document = assert_problem(response, 500)
    assert "secret" not in response.get_data(as_text=True)
    assert document["title"] == "Internal server error"


def test_store_unavailable_is_a_503_health_problem(app, client, monkeypatch):
    store = app.extensions["fluxproof"].store

    def down():
        raise ConnectionError("database host unreachable")

    monkeypatch.setattr(store, "ping", down)
    document = assert_problem(client.get("/v1/health"), 503)
    assert document["store"]["state"] == "unavailable"
