"""The audit trail for auditors: the chain check and the events, page by page."""

from __future__ import annotations

from flask import render_template, request

from service import audit, listing
from service.api.context import services
from service.ui.blueprint import ui

EVENTS_PER_PAGE = 100


@ui.get("/audit", endpoint="audit")
def audit_page():
    store = services().store
    kind = request.args.get("kind") or None
    subject = (request.args.get("subject") or "").strip() or None
    errors = []
    if kind is not None and kind not in audit.EVENT_KINDS:
        errors.append({"path": "kind", "message": f"expected one of "
                                                  f"{', '.join(audit.EVENT_KINDS)}"})
        kind = None
    offset = listing.page_offset(request.args.get("offset"))
    events = audit.list_events(store, limit=EVENTS_PER_PAGE, offset=offset, kind=kind,
                               subject=subject)
    chain = audit.verify_chain(store)
    return render_template("ui_audit.html", chain=chain, events=events, kinds=audit.EVENT_KINDS,
                           kind=kind, subject=subject or "", errors=errors,
                           per_page=EVENTS_PER_PAGE), 422 if errors else 200
