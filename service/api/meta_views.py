"""Health, the OpenAPI document, and case validation."""

from __future__ import annotations

from typing import Any

from schemas.case import CaseSchema
from service import __version__
from service.api import api
from service.api.bodies import HealthSchema, SigningKeySchema
from service.api.context import services
from service.api.declare import Raw, Returns, declare
from service.api.openapi import openapi_document
from service.auth import ENGINEER
from service.cases import validate_document
from service.errors import ServiceUnavailable
from service.server_keys import key_id, public_key_pem
from service.signoffs import PAYLOAD_FIELDS


@declare(api, "get", "/health", summary="Service, store and broker state", roles=None,
         responses={200: Returns("All parts reachable", HealthSchema)},
         problems={503: "The store or the broker is unreachable"})
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
    return body


@declare(api, "get", "/openapi.json", summary="This OpenAPI document", roles=None,
         responses={200: Returns("OpenAPI 3.1 document",
                                 Raw("application/json", {"type": "object"}))})
def openapi():
    return openapi_document()


@declare(api, "post", "/validate", summary="Validate a case and return it normalised to SI",
         roles=ENGINEER, request=CaseSchema, request_loaded=False,
         responses={200: Returns("The normalised case (SI)",
                                 Raw("application/json", {"type": "object"}))})
def validate(body: dict[str, Any]):
    return validate_document(body).normalised


@declare(api, "get", "/meta/signing-key",
         summary="The server's public Ed25519 key: verifies every e-signature", roles=None,
         responses={200: Returns("The public key (PEM) and its id", SigningKeySchema)})
def signing_key():
    key = services().signing_key
    return {"algorithm": "Ed25519", "key_id": key_id(key), "public_key_pem": public_key_pem(key),
            "payload_fields": list(PAYLOAD_FIELDS)}
