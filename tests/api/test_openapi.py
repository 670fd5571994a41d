"""The OpenAPI document: valid OpenAPI 3.1, every route, every response documented."""

from __future__ import annotations

import re

from openapi_spec_validator import validate

from service.auth import PUBLIC, ROLE_MATRIX


def test_document_is_valid_openapi_31(client):
    response = client.get("/v1/openapi.json")
    assert response.status_code == 200
    document = response.get_json()
    assert document["openapi"] == "3.1.0"
    validate(document)


def _flask_to_openapi(rule: str) -> str:
    return re.sub(r"<(?:[a-z]+:)?([a-z_]+)>", r"{\1}", rule)


def test_every_route_appears_with_its_methods(app, client):
    document = client.get("/v1/openapi.json").get_json()
    for rule in app.url_map.iter_rules():
        path = _flask_to_openapi(rule.rule)
        assert path in document["paths"], path
        for method in rule.methods - {"HEAD", "OPTIONS"}:
            assert method.lower() in document["paths"][path], (path, method)


def test_every_operation_documents_its_responses(client):
    document = client.get("/v1/openapi.json").get_json()
    assert document["components"]["securitySchemes"]["bearer"] == {"type": "http",
                                                                   "scheme": "bearer"}
    operations = [op for item in document["paths"].values() for op in item.values()]
    assert len(operations) == len(ROLE_MATRIX) + len(PUBLIC)
    for operation in operations:
        responses = operation["responses"]
        assert any(code.startswith("2") for code in responses)
        assert "500" in responses
        public = operation["operationId"] in {e.split(".")[1] for e in PUBLIC}
        if not public:
            assert {"401", "403"} <= set(responses)
            assert operation["security"] == [{"bearer": []}]
        if "requestBody" in operation:
            assert {"400", "413", "415", "422"} <= set(responses)
        for code, response in responses.items():
            if not code.startswith("2"):
                assert "application/problem+json" in response["content"]


def test_case_and_result_schemas_are_embedded(client):
    document = client.get("/v1/openapi.json").get_json()
    schemas = document["components"]["schemas"]
    assert schemas["Case"]["type"] == "object" and "layers" in schemas["Case"]["properties"]
    text = str(document)
    assert "#/$defs/" not in text  # every reference resolves inside the OpenAPI document
