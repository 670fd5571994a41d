"""The OpenAPI document: valid OpenAPI 3.1, every route, every response documented."""

from __future__ import annotations

import re

from openapi_spec_validator import validate

from service.api import PUBLIC, ROLE_MATRIX


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
        if not rule.rule.startswith("/v1/"):
            continue  # browser pages and static files are not part of the API document
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


def _validator_for(document, component):
    from jsonschema import Draft202012Validator
    from referencing import Registry, Resource
    from referencing.jsonschema import DRAFT202012

    resource = Resource.from_contents(document, default_specification=DRAFT202012)
    registry = Registry().with_resource("urn:fluxproof:openapi", resource)
    return Draft202012Validator({"$ref": f"urn:fluxproof:openapi#/components/schemas/"
                                         f"{component}"}, registry=registry)


def test_served_records_and_problems_match_their_documented_schemas(client, tokens):
    from tests.api.support import bearer, make_case

    document = client.get("/v1/openapi.json").get_json()
    run = client.post("/v1/runs", json={"case": make_case()},
                      headers=bearer(tokens["engineer"])).get_json()
    record = client.get(f"/v1/runs/{run['run_id']}", headers=bearer(tokens["auditor"]))
    errors = list(_validator_for(document, "Record").iter_errors(record.get_json()))
    assert errors == [], [e.message for e in errors]
    problem = client.post("/v1/runs", json={"nope": 1}, headers=bearer(tokens["engineer"]))
    assert list(_validator_for(document, "Problem").iter_errors(problem.get_json())) == []
    bad_record = {**record.get_json(), "unexpected": 1}
    assert list(_validator_for(document, "Record").iter_errors(bad_record))  # can fail


def _as_components(node):
    """The exported file's ``#/$defs/XSchema`` references as OpenAPI component references."""
    if isinstance(node, dict):
        return {key: (value.replace("#/$defs/", "#/components/schemas/").removesuffix("Schema")
                      if key == "$ref" else _as_components(value)) for key, value in node.items()}
    if isinstance(node, list):
        return [_as_components(item) for item in node]
    return node


def test_the_case_component_is_the_exported_case_schema(client):
    """One converter: the document's Case and its parts are the exported JSON Schema file's."""
    import json

    from schemas import export

    exported = json.loads((export.JSON_DIR / "case-v1.schema.json").read_text(encoding="utf-8"))
    components = client.get("/v1/openapi.json").get_json()["components"]["schemas"]
    case = components["Case"]
    for key in ("properties", "required", "additionalProperties"):
        assert case[key] == _as_components(exported[key]), key
    for name, definition in exported["$defs"].items():
        assert components[name.removesuffix("Schema")] == _as_components(definition), name
    changed = _as_components(exported["properties"])
    changed["geometry"] = {"type": "string"}
    assert case["properties"] != changed  # the comparison can fail
