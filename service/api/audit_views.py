"""The audit trail and its verification."""

from __future__ import annotations

from flask import jsonify

from service import audit
from service.api import api
from service.api.bodies import AuditQuerySchema
from service.api.context import query_args, services


@api.get("/audit")
def list_audit():
    args = query_args(AuditQuerySchema())
    return jsonify(audit.list_events(services().store, limit=args["limit"],
                                     offset=args["offset"], kind=args.get("kind"),
                                     subject=args.get("subject")))


@api.get("/audit/verify")
def verify_audit():
    return jsonify(audit.verify_chain(services().store).to_dict())
