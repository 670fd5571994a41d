"""The OpenAPI 3.1 document, read from the endpoint declarations (``service.api.declare``).

Paths, roles, request and response bodies and problem responses all come from
:data:`service.api.declare.ENDPOINTS`; the JSON Schema of every body comes from the project's
one converter (``schemas.json_schema``), with nested schemas as components. apispec assembles
the document and refuses two components of the same name.

The document is written for client generators: every ``$ref`` names a whole component (never a
property inside one), and no object-valued property carries a ``default``.
"""

from __future__ import annotations

import functools
from typing import Any

from apispec import APISpec
from marshmallow import Schema

from schemas.case import CaseSchema
from schemas.json_schema import JsonSchemaConverter
from service import __version__
from service.api.bodies import ProblemSchema
from service.api.declare import ENDPOINTS, JSON, Endpoint, Raw
from service.errors import PROBLEM_MEDIA_TYPE

COMPONENT_REF = "#/components/schemas/{name}"

DESCRIPTION = ("Independent checks of diffusion-reaction design calculations. Results support, "
               "but do not replace, design verification testing and qualified independent "
               "review; local regulations and licensed practice govern.")


def component_name(cls: type[Schema]) -> str:
    """``RunAcceptedSchema`` → ``RunAccepted``."""
    name = cls.__name__
    return name[: -len("Schema")] if name.endswith("Schema") and name != "Schema" else name


def problem_statuses(endpoint: Endpoint) -> dict[int, str]:
    """The problem responses of an endpoint: those that follow from its declaration, then the
    ones it declares itself (which may say more about a status)."""
    statuses: dict[int, str] = {}
    if not endpoint.public:
        statuses[401] = "No valid bearer token"
        statuses[403] = "The token's role may not do this"
    if endpoint.path_parameters:
        statuses[404] = "No such resource"
    if endpoint.request is not None:
        statuses[400] = "Malformed JSON"
        statuses[413] = "Body larger than FLUXPROOF_MAX_BODY_BYTES"
        statuses[415] = "Body not sent as application/json"
        statuses[422] = "Invalid body: unknown fields, wrong values, NaN/Infinity"
    if endpoint.query is not None:
        statuses[422] = "Invalid query parameters"
    statuses.update(endpoint.problems)
    statuses[405] = "Method not allowed on this path"
    statuses[500] = "Unexpected server error"
    return statuses


class _Builder:
    def __init__(self) -> None:
        self.converter = JsonSchemaConverter(COMPONENT_REF, component_name)

    def content(self, body: type[Schema] | Raw) -> dict[str, Any]:
        if isinstance(body, Raw):
            return {body.media_type: {"schema": dict(body.json_schema)}}
        return {JSON: {"schema": self.converter.ref(body)}}

    def query_parameters(self, query: type[Schema]) -> list[dict[str, Any]]:
        converted = self.converter.schema(query)
        required = set(converted.get("required", ()))
        return [{"in": "query", "name": name, "required": name in required,
                 "schema": schema} for name, schema in converted["properties"].items()]

    def operation(self, endpoint: Endpoint) -> dict[str, Any]:
        operation: dict[str, Any] = {"operationId": endpoint.name.split(".", 1)[1],
                                     "summary": endpoint.summary, "responses": {}}
        if endpoint.public:
            operation["security"] = []
        else:
            operation["security"] = [{"bearer": []}]
            operation["description"] = f"Roles allowed: {', '.join(sorted(endpoint.roles))}."
        parameters = [{"in": "path", "name": name, "required": True,
                       "schema": {"type": "string"}} for name in endpoint.path_parameters]
        if endpoint.query is not None:
            parameters += self.query_parameters(endpoint.query)
        if parameters:
            operation["parameters"] = parameters
        if endpoint.request is not None:
            operation["requestBody"] = {"required": True,
                                        "content": self.content(endpoint.request)}
        for status, returns in endpoint.responses.items():
            response: dict[str, Any] = {"description": returns.description,
                                        "content": self.content(returns.body)}
            if returns.headers:
                response["headers"] = {name: {"schema": {"type": "string"},
                                              "description": about}
                                       for name, about in returns.headers.items()}
            operation["responses"][str(status)] = response
        problem = {PROBLEM_MEDIA_TYPE: {"schema": self.converter.ref(ProblemSchema)}}
        for status, description in problem_statuses(endpoint).items():
            operation["responses"].setdefault(str(status), {"description": description,
                                                            "content": problem})
        return operation


def build_spec() -> APISpec:
    spec = APISpec(title="fluxproof", version=__version__, openapi_version="3.1.0",
                   info={"description": DESCRIPTION})
    spec.components.security_scheme("bearer", {"type": "http", "scheme": "bearer"})
    builder = _Builder()
    builder.converter.ref(CaseSchema)
    paths: dict[str, dict[str, Any]] = {}
    for endpoint in ENDPOINTS.values():
        paths.setdefault(endpoint.path, {})[endpoint.method] = builder.operation(endpoint)
    for name, component in sorted(builder.converter.defs.items()):
        spec.components.schema(name, component=component)
    for path, operations in paths.items():
        spec.path(path=path, operations=operations)
    return spec


@functools.cache
def openapi_document() -> dict[str, Any]:
    """The OpenAPI document as a dict (built once per process, after the views registered)."""
    return build_spec().to_dict()


__all__ = ["build_spec", "component_name", "openapi_document", "problem_statuses"]
