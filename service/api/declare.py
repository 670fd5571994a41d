"""Each API endpoint declared once: route, roles, request and response schemas, problems.

``@declare(...)`` registers the Flask route on the blueprint and keeps the declaration in
:data:`ENDPOINTS`; the role matrix (``service.api.ROLE_MATRIX``), the browser pages' roles and
the OpenAPI document (``service.api.openapi``) are read from there.

A view receives the request body as ``body`` (loaded through the request schema, or only
parsed when ``request_loaded`` is false because the domain function validates it, as for case
documents) and the loaded query string as ``query``. It returns the response body, or a
:class:`Reply` when the status or the headers vary; the body is dumped through the schema
declared for that status, so what the schema says is what is sent.

The bearer-token check (``service.auth.authenticate_request``) reads ``roles`` from the
declaration attached to the view function: ``roles=None`` is a public endpoint, and a view
without a declaration is refused to everyone.
"""

from __future__ import annotations

import functools
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from typing import Any

from flask import Blueprint, Response, jsonify, request
from marshmallow import Schema

from service.api.bodies import load_or_422
from service.jsonbody import json_object_body

JSON = "application/json"


@dataclass(frozen=True)
class Raw:
    """A response body that does not pass through a marshmallow schema: its media type and
    the JSON Schema that describes it (the view returns the text, or a plain JSON object)."""

    media_type: str
    json_schema: Mapping[str, Any]


@dataclass(frozen=True)
class Returns:
    """One documented success response: what it means, and its body (schema or :class:`Raw`)."""

    description: str
    body: type[Schema] | Raw
    headers: Mapping[str, str] = field(default_factory=dict)


@dataclass(frozen=True)
class Endpoint:
    """The declaration of one endpoint (see the module docstring)."""

    name: str
    method: str
    rule: str
    summary: str
    roles: frozenset[str] | None
    responses: Mapping[int, Returns]
    request: type[Schema] | None = None
    request_name: str = "request body"
    request_loaded: bool = True
    query: type[Schema] | None = None
    problems: Mapping[int, str] = field(default_factory=dict)

    @property
    def public(self) -> bool:
        return self.roles is None

    @property
    def path(self) -> str:
        """The OpenAPI path of the Flask rule (``<run_id>`` → ``{run_id}``)."""
        return self.rule.replace("<", "{").replace(">", "}")

    @property
    def path_parameters(self) -> list[str]:
        return [part[1:-1] for part in self.rule.split("/") if part.startswith("<")]


@dataclass
class Reply:
    """A response body with a status (one of the declared ones) and headers."""

    body: Any
    status: int
    headers: dict[str, str] = field(default_factory=dict)


#: endpoint name ("api.create_run") -> its declaration, in the order declared.
ENDPOINTS: dict[str, Endpoint] = {}


def declare(blueprint: Blueprint, method: str, rule: str, *, summary: str,
            roles: frozenset[str] | None, responses: Mapping[int, Returns],
            request: type[Schema] | None = None, request_name: str = "request body",
            request_loaded: bool = True, query: type[Schema] | None = None,
            problems: Mapping[int, str] | None = None) -> Callable:
    """Register ``rule`` on ``blueprint`` for ``method`` with everything about it."""

    def register(view: Callable) -> Callable:
        endpoint = Endpoint(name=f"{blueprint.name}.{view.__name__}", method=method.lower(),
                            rule=blueprint.url_prefix + rule, summary=summary, roles=roles,
                            responses=dict(responses), request=request,
                            request_name=request_name, request_loaded=request_loaded,
                            query=query,
                            problems=dict(problems or {}))
        if endpoint.name in ENDPOINTS:
            raise ValueError(f"endpoint {endpoint.name} is declared twice")
        ENDPOINTS[endpoint.name] = endpoint

        @functools.wraps(view)
        def handle(**path_args: Any) -> Any:
            return _respond(endpoint, view(**path_args, **_inputs(endpoint)))

        handle.declaration = endpoint  # type: ignore[attr-defined]
        blueprint.add_url_rule(rule, view_func=handle, methods=[method.upper()])
        return handle

    return register


def _inputs(endpoint: Endpoint) -> dict[str, Any]:
    inputs: dict[str, Any] = {}
    if endpoint.request is not None:
        body = json_object_body()
        inputs["body"] = (load_or_422(endpoint.request(), body, endpoint.request_name)
                          if endpoint.request_loaded else body)
    if endpoint.query is not None:
        inputs["query"] = load_or_422(endpoint.query(), request.args.to_dict(), "query string")
    return inputs


def _respond(endpoint: Endpoint, result: Any) -> Any:
    if isinstance(result, Response):
        return result
    reply = result if isinstance(result, Reply) else Reply(result, _only_status(endpoint))
    declared = endpoint.responses.get(reply.status)
    if declared is None:
        raise RuntimeError(f"{endpoint.name} answered {reply.status}, which it does not declare")
    body = declared.body
    if isinstance(body, Raw) and body.media_type != JSON:
        response = Response(reply.body, status=reply.status,
                            content_type=f"{body.media_type}; charset=utf-8")
    else:
        response = jsonify(reply.body if isinstance(body, Raw) else body().dump(reply.body))
        response.status_code = reply.status
    response.headers.update(reply.headers)
    return response


def _only_status(endpoint: Endpoint) -> int:
    (status,) = endpoint.responses
    return status


def role_matrix() -> dict[str, frozenset[str]]:
    """Endpoint -> roles allowed, for every endpoint that needs a token."""
    return {name: e.roles for name, e in ENDPOINTS.items() if e.roles is not None}


def public_endpoints() -> frozenset[str]:
    return frozenset(name for name, e in ENDPOINTS.items() if e.roles is None)


__all__ = ["ENDPOINTS", "Endpoint", "Raw", "Reply", "Returns", "declare", "public_endpoints",
           "role_matrix"]
