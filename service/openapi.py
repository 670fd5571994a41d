"""The OpenAPI 3.1 document, generated with apispec from the marshmallow schemas.

``OPERATIONS`` describes every endpoint once (path, method, summary, bodies); the access rules
come from ``service.auth.ROLE_MATRIX`` and the problem responses are added from what each
operation can do, so the document and the code cannot drift apart silently (a test checks that
every route of the app appears here).
"""

from __future__ import annotations

import copy
import functools
from typing import Any

from apispec import APISpec
from apispec.ext.marshmallow import MarshmallowPlugin

from service import __version__
from service.api import bodies
from service.auth import PUBLIC, ROLE_MATRIX

JSON = "application/json"
PROBLEM = "application/problem+json"

#: endpoint -> (method, path, summary, request body component or None, {status: (description,
#: response component or schema, media type)})
OPERATIONS: dict[str, dict[str, Any]] = {
    "api.health": {"method": "get", "path": "/v1/health",
                   "summary": "Service, store and broker state",
                   "responses": {200: ("All parts reachable", "Health", JSON),
                                 503: ("The store or the broker is unreachable", "Problem",
                                       PROBLEM)}},
    "api.openapi": {"method": "get", "path": "/v1/openapi.json",
                    "summary": "This OpenAPI document",
                    "responses": {200: ("OpenAPI 3.1 document", {"type": "object"}, JSON)}},
    "api.validate": {"method": "post", "path": "/v1/validate",
                     "summary": "Validate a case and return it normalised to SI",
                     "request": "Case",
                     "responses": {200: ("The normalised case (SI)", {"type": "object"}, JSON)}},
    "api.create_case": {"method": "post", "path": "/v1/cases",
                        "summary": "Store a case (content-addressed)", "request": "Case",
                        "responses": {201: ("Stored", "CaseCreated", JSON),
                                      200: ("The same content was stored already",
                                            "CaseCreated", JSON)}},
    "api.list_cases": {"method": "get", "path": "/v1/cases",
                       "summary": "List stored cases, newest first",
                       "query": bodies.CaseListQuerySchema,
                       "responses": {200: ("A page of cases", "CasePage", JSON)}},
    "api.get_case": {"method": "get", "path": "/v1/cases/{case_id}",
                     "summary": "Read one stored case",
                     "responses": {200: ("The case", "StoredCase", JSON)}},
    "api.list_case_runs": {"method": "get", "path": "/v1/cases/{case_id}/runs",
                           "summary": "Every run of one case, newest first",
                           "responses": {200: ("The case's runs", "CaseRuns", JSON)}},
    "api.create_run": {"method": "post", "path": "/v1/runs",
                       "summary": "Queue a check of a stored or a new case",
                       "request": "RunRequest",
                       "responses": {202: ("Queued; poll the Location", "RunAccepted", JSON)},
                       "conflict": False, "unavailable": True},
    "api.get_run": {"method": "get", "path": "/v1/runs/{run_id}",
                    "summary": "The check record of one run",
                    "responses": {200: ("The record: result document and run fields",
                                        "Record", JSON)}},
    "api.get_run_report": {"method": "get", "path": "/v1/runs/{run_id}/report",
                           "summary": "The check record as an HTML report",
                           "responses": {200: ("HTML report", {"type": "string"},
                                               "text/html")}},
    "api.create_signoff": {"method": "post", "path": "/v1/runs/{run_id}/signoffs",
                           "summary": "Sign off a succeeded run (four-eyes: never its "
                                      "submitter)",
                           "request": "SignoffRequest",
                           "responses": {201: ("Recorded; the record is now sealed",
                                               "SignoffCreated", JSON)},
                           "conflict": True},
    "api.create_batch": {"method": "post", "path": "/v1/batches",
                         "summary": "Re-verify stored cases (all, or those with a tag)",
                         "request": "BatchRequest",
                         "responses": {202: ("Started", "BatchAccepted", JSON)},
                         "unavailable": True},
    "api.get_batch": {"method": "get", "path": "/v1/batches/{batch_id}",
                      "summary": "Progress and drift of a batch",
                      "responses": {200: ("The batch", "Batch", JSON)}},
    "api.list_audit": {"method": "get", "path": "/v1/audit",
                       "summary": "The hash-chained audit trail, in order",
                       "query": bodies.AuditQuerySchema,
                       "responses": {200: ("A page of events", "AuditPage", JSON)}},
    "api.verify_audit": {"method": "get", "path": "/v1/audit/verify",
                         "summary": "Recompute the chain; name the first broken event",
                         "responses": {200: ("Verification result", "AuditVerify", JSON)}},
}

# Nested schemas first: apispec registers a nested schema under its own name on first use.
COMPONENTS = {
    "RunSummary": bodies.RunSummarySchema, "Problem": bodies.ProblemSchema, "Health": bodies.HealthSchema,
    "CaseCreated": bodies.CaseCreatedSchema, "CasePage": bodies.CasePageSchema,
    "StoredCase": bodies.StoredCaseSchema, "CaseRuns": bodies.CaseRunsSchema,
    "RunRequest": bodies.RunRequestSchema, "RunAccepted": bodies.RunAcceptedSchema,
    "SignoffRequest": bodies.SignoffRequestSchema, "SignoffCreated": bodies.SignoffCreatedSchema,
    "BatchRequest": bodies.BatchRequestSchema, "BatchAccepted": bodies.BatchAcceptedSchema,
    "Batch": bodies.BatchSchema, "AuditPage": bodies.AuditPageSchema,
    "AuditVerify": bodies.AuditVerifySchema,
}


def _ref(name: str) -> dict[str, str]:
    return {"$ref": f"#/components/schemas/{name}"}


def embed_json_schema(spec: APISpec, name: str, schema: dict[str, Any]) -> None:
    """Add a JSON Schema document as component ``name``, hoisting its ``$defs`` to components.

    Inside an OpenAPI document a ``#/$defs/X`` reference would resolve against the document
    root, so each definition becomes component ``<name>.X`` and its references are rewritten.
    """
    schema = copy.deepcopy(schema)
    definitions = schema.pop("$defs", {}) or schema.pop("definitions", {}) or {}
    schema.pop("$schema", None)
    schema.pop("$id", None)

    def rewrite(node: Any) -> Any:
        if isinstance(node, dict):
            out = {}
            for key, value in node.items():
                if key == "$ref" and isinstance(value, str):
                    for prefix in ("#/$defs/", "#/definitions/"):
                        if value.startswith(prefix):
                            value = f"#/components/schemas/{name}.{value[len(prefix):]}"
                    if value == "#":
                        value = f"#/components/schemas/{name}"
                out[key] = rewrite(value)
            return out
        if isinstance(node, list):
            return [rewrite(item) for item in node]
        return node

    for def_name, definition in definitions.items():
        spec.components.schema(f"{name}.{def_name}", component=rewrite(definition))
    spec.components.schema(name, component=rewrite(schema))


def _problem_statuses(endpoint: str, op: dict[str, Any]) -> dict[int, str]:
    statuses: dict[int, str] = {}
    if endpoint not in PUBLIC:
        statuses[401] = "No valid bearer token"
        statuses[403] = "The token's role may not do this" + (
            ", or four-eyes: the reviewer submitted the run" if endpoint == "api.create_signoff"
            else "")
    if "{" in op["path"]:
        statuses[404] = "No such resource"
    if op.get("request"):
        statuses[400] = "Malformed JSON"
        statuses[413] = "Body larger than FLUXPROOF_MAX_BODY_BYTES"
        statuses[415] = "Body not sent as application/json"
        statuses[422] = "Invalid body: unknown fields, wrong values, NaN/Infinity"
    if op.get("query"):
        statuses[422] = "Invalid query parameters"
    if op.get("conflict"):
        statuses[409] = "The run is not succeeded, or is already signed off"
    if op.get("unavailable"):
        statuses[503] = "The broker is unreachable (the runs stay queued)"
    statuses[405] = "Method not allowed on this path"
    statuses[500] = "Unexpected server error"
    return statuses


def _content(component: Any, media: str) -> dict[str, Any]:
    schema = _ref(component) if isinstance(component, str) else component
    return {media: {"schema": schema}}


RECORD_RUN_FIELDS = tuple(bodies.RunSummarySchema().fields)


def _record_component(result_schema: dict[str, Any]) -> dict[str, Any]:
    """The record: the result document's fields plus the run's own (``RunSummary``) fields.

    Defined by reference to both components rather than ``allOf``, because the result schema
    forbids properties it does not list.
    """
    properties = {name: _ref_pointer("Result", name) for name in result_schema["properties"]}
    properties.update({name: _ref_pointer("RunSummary", name) for name in RECORD_RUN_FIELDS})
    return {"type": "object", "properties": properties,
            "required": ["run_id", "case_id", "status", "submitted_by", "signoffs"],
            "additionalProperties": False,
            "description": "The result document with the run's own fields; while the run is "
                           "queued or running only the run fields are present."}


def _ref_pointer(component: str, prop: str) -> dict[str, str]:
    return {"$ref": f"#/components/schemas/{component}/properties/{prop}"}


def build_spec() -> APISpec:
    import schemas.export

    spec = APISpec(title="fluxproof", version=__version__, openapi_version="3.1.0",
                   plugins=[MarshmallowPlugin()],
                   info={"description": "Independent checks of diffusion-reaction design "
                         "calculations. Results support, but do not replace, design "
                         "verification testing and qualified independent review; local "
                         "regulations and licensed practice govern."})
    spec.components.security_scheme("bearer", {"type": "http", "scheme": "bearer"})
    for name, schema in COMPONENTS.items():
        spec.components.schema(name, schema=schema)
    embed_json_schema(spec, "Case", schemas.export.case_json_schema())
    embed_json_schema(spec, "Result", schemas.export.result_json_schema())
    spec.components.schema("Record", component=_record_component(
        schemas.export.result_json_schema()))

    paths: dict[str, dict[str, Any]] = {}
    for endpoint, op in OPERATIONS.items():
        operation: dict[str, Any] = {"operationId": endpoint.split(".", 1)[1],
                                     "summary": op["summary"], "responses": {}}
        if endpoint in PUBLIC:
            operation["security"] = []
        else:
            roles = ", ".join(sorted(ROLE_MATRIX[endpoint]))
            operation["security"] = [{"bearer": []}]
            operation["description"] = f"Roles allowed: {roles}."
        parameters = [{"in": "path", "name": part[1:-1], "required": True,
                       "schema": {"type": "string"}}
                      for part in op["path"].split("/") if part.startswith("{")]
        if op.get("query"):
            parameters.append({"in": "query", "schema": op["query"]})
        if parameters:
            operation["parameters"] = parameters
        if op.get("request"):
            operation["requestBody"] = {"required": True,
                                        "content": _content(op["request"], JSON)}
        for status, (description, component, media) in op["responses"].items():
            response: dict[str, Any] = {"description": description,
                                        "content": _content(component, media)}
            if status == 202:
                response["headers"] = {"Location": {"schema": {"type": "string"},
                                                    "description": "URL to poll"}}
            operation["responses"][str(status)] = response
        for status, description in _problem_statuses(endpoint, op).items():
            operation["responses"].setdefault(
                str(status), {"description": description, "content": _content("Problem",
                                                                             PROBLEM)})
        paths.setdefault(op["path"], {})[op["method"]] = operation
    for path, operations in paths.items():
        spec.path(path=path, operations=operations)
    return spec


@functools.cache
def openapi_document() -> dict[str, Any]:
    """The OpenAPI document as a dict (built once per process)."""
    return build_spec().to_dict()
