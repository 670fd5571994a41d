"""One declaration per endpoint: the route, the roles and the OpenAPI operation all come from it,
responses are dumped through the declared schema, and a route without a declaration is refused
to everyone."""

from __future__ import annotations

import json

import pytest
from flask import Blueprint, Flask
from marshmallow import Schema, fields

from service import runs
from service.api import PUBLIC, ROLE_MATRIX
from service.api.declare import ENDPOINTS, Reply, Returns, declare
from service.api.openapi import openapi_document, problem_statuses
from service.auth import authenticate_request
from tests.api.support import bearer, make_case


class _PairSchema(Schema):
    kept = fields.String(required=True)


def _toy_app() -> tuple[Flask, dict]:
    """A bare app with a blueprint of its own (its declarations are removed afterwards)."""
    blueprint = Blueprint("toy_declarations", __name__, url_prefix="/toy")

    @declare(blueprint, "get", "/pair", summary="a pair", roles=None,
             responses={200: Returns("a pair", _PairSchema)})
    def pair():
        return {"kept": "sent", "dropped": "not in the schema"}

    @declare(blueprint, "get", "/odd", summary="an undeclared status", roles=None,
             responses={200: Returns("a pair", _PairSchema)})
    def odd():
        return Reply({"kept": "x"}, 201)

    app = Flask(__name__)
    app.register_blueprint(blueprint)
    return app, {name: ENDPOINTS.pop(name) for name in list(ENDPOINTS)
                 if name.startswith("toy_declarations.")}


def test_a_response_carries_exactly_what_its_schema_declares():
    app, declared = _toy_app()
    assert set(declared) == {"toy_declarations.pair", "toy_declarations.odd"}
    body = app.test_client().get("/toy/pair").get_json()
    assert body == {"kept": "sent"}


def test_a_status_the_endpoint_does_not_declare_is_an_error():
    app, _ = _toy_app()
    with app.test_request_context("/toy/odd"), pytest.raises(RuntimeError, match="201"):
        app.view_functions["toy_declarations.odd"]()


def test_the_role_matrix_is_read_from_the_declarations(app):
    declared = {name for name in ENDPOINTS if name.startswith("api.")}
    assert declared == set(ROLE_MATRIX) | set(PUBLIC)
    assert not set(ROLE_MATRIX) & set(PUBLIC)
    for name, endpoint in ENDPOINTS.items():
        if name.startswith("api."):
            assert app.view_functions[name].declaration is endpoint
            assert (endpoint.roles is None) == (name in PUBLIC)
            if endpoint.roles is not None:
                assert ROLE_MATRIX[name] == endpoint.roles


def test_the_document_is_read_from_the_declarations(app):
    document = openapi_document()
    for name, endpoint in ENDPOINTS.items():
        if not name.startswith("api."):
            continue
        operation = document["paths"][endpoint.path][endpoint.method]
        assert operation["operationId"] == name.split(".", 1)[1]
        assert operation["summary"] == endpoint.summary
        declared = {str(s) for s in endpoint.responses} | {str(s) for s in
                                                          problem_statuses(endpoint)}
        assert set(operation["responses"]) == declared
        if endpoint.roles is not None:
            assert ", ".join(sorted(endpoint.roles)) in operation["description"]


def test_a_route_without_a_declaration_is_refused_to_every_role(app, tokens):
    blueprint = Blueprint("undeclared", __name__, url_prefix="/v1/undeclared")
    blueprint.before_request(authenticate_request)
    blueprint.add_url_rule("/", "plain", lambda: {"leaked": True})
    app.register_blueprint(blueprint)
    client = app.test_client()
    assert client.get("/v1/undeclared/").status_code == 401
    for token in tokens.values():
        response = client.get("/v1/undeclared/", headers=bearer(token))
        assert response.status_code == 403
        assert response.get_json()["allowed_roles"] == []


def test_dumping_through_the_record_schema_loses_nothing(client, store, tokens):
    accepted = client.post("/v1/runs", json={"case": make_case()},
                           headers=bearer(tokens["engineer"])).get_json()
    served = client.get(f"/v1/runs/{accepted['run_id']}", headers=bearer(tokens["auditor"]))
    stored = json.loads(json.dumps(runs.get_record(store, accepted["run_id"])))
    assert served.status_code == 200
    assert stored["status"] == "succeeded" and stored["quantities"]
    assert served.get_json() == stored
