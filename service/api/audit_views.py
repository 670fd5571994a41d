"""The audit trail and its verification."""

from __future__ import annotations

from typing import Any

from service import audit
from service.api import api
from service.api.bodies import AuditPageSchema, AuditQuerySchema, AuditVerifySchema
from service.api.context import services
from service.api.declare import Returns, declare
from service.auth import AUDITORS


@declare(api, "get", "/audit", summary="The hash-chained audit trail, in order",
         roles=AUDITORS, query=AuditQuerySchema,
         responses={200: Returns("A page of events", AuditPageSchema)})
def list_audit(query: dict[str, Any]):
    return audit.list_events(services().store, limit=query["limit"], offset=query["offset"],
                             kind=query.get("kind"), subject=query.get("subject"))


@declare(api, "get", "/audit/verify",
         summary="Recompute the chain; name the first broken event", roles=AUDITORS,
         responses={200: Returns("Verification result", AuditVerifySchema)})
def verify_audit():
    return audit.verify_chain(services().store).to_dict()
