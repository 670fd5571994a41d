"""Health, the OpenAPI document, and case validation."""

from __future__ import annotations

from flask import jsonify

from service import __version__
from service.api import api
from service.api.context import services
from service.cases import validate_document
from service.errors import ServiceUnavailable
from service.jsonbody import json_object_body


@api.get("/health")
def health():
    svc = services()
    try:
        svc.store.ping()
        store_state = {"state": "ok", "mode": svc.store.dialect}
    except Exception as exc:  # noqa: BLE001 - any failure to reach the store is "unavailable"
        store_state = {"state": "unavailable", "mode": svc.store.dialect, "detail": str(exc)}
    broker_state = svc.dispatcher.state()
    body = {"service": "ok", "version": __version__, "store": store_state,
            "broker": broker_state}
    if store_state["state"] != "ok" or broker_state["state"] != "ok":
        body["service"] = "degraded"
        raise ServiceUnavailable("The store or the broker cannot be reached.", extra=body)
    return jsonify(body)


@api.get("/openapi.json")
def openapi():
    from service.openapi import openapi_document

    return jsonify(openapi_document())


@api.post("/validate")
def validate():
    validated = validate_document(json_object_body())
    return jsonify(validated.normalised)
