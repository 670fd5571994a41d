"""Who is using the browser pages: sign-in with a bearer token, the session, the role gate.

The session (Flask's signed cookie) holds the token's id and the time of sign-in, never the
token itself. Every request re-reads the token's row, so a revoked token ends its sessions at
once, and a session older than :data:`SESSION_SECONDS` must sign in again. Which role may open
which page comes from the API's :data:`service.api.ROLE_MATRIX`, so the two never disagree.
"""

from __future__ import annotations

import time
from collections.abc import Mapping
from types import MappingProxyType
from typing import Any
from urllib.parse import quote

from flask import current_app, g, redirect, request, session, url_for

from service.api import ROLE_MATRIX
from service.errors import Forbidden, Unauthorized
from service.report.html import DEFAULT_CAUTION
from service.tokens import Identity, identify, identity_of_token_id
from service.ui import csrf

#: A session lasts this long after sign-in (8 hours: one working day).
SESSION_SECONDS = 8 * 3600

#: Pages anyone may open (the sign-in form and the stylesheet).
OPEN_PAGES = frozenset({"ui.login", "ui.login_submit", "ui.static"})

#: Page -> roles allowed, each the same as the API endpoint that does the same thing.
PAGE_ROLES: Mapping[str, frozenset[str]] = MappingProxyType({
    "ui.index": ROLE_MATRIX["api.get_run"],
    "ui.logout": ROLE_MATRIX["api.get_run"],
    "ui.runs": ROLE_MATRIX["api.get_run"],
    "ui.run": ROLE_MATRIX["api.get_run"],
    "ui.run_report": ROLE_MATRIX["api.get_run_report"],
    "ui.run_record": ROLE_MATRIX["api.get_run"],
    "ui.run_record_pdf": ROLE_MATRIX["api.get_run_report_pdf"],
    "ui.signoff": ROLE_MATRIX["api.create_signoff"],
    "ui.case": ROLE_MATRIX["api.list_case_runs"],
    "ui.batches": ROLE_MATRIX["api.get_batch"],
    "ui.batch": ROLE_MATRIX["api.get_batch"],
    "ui.audit": ROLE_MATRIX["api.list_audit"],
})


def _store():
    return current_app.extensions["fluxproof"].store


def sign_in(token: str) -> Identity | None:
    """Start a session for the holder of ``token``; None (no session) when it is not valid."""
    identity = identify(_store(), token.strip())
    if identity is None:
        return None
    session.clear()  # no state from before sign-in survives (session fixation)
    session["token_id"] = identity.token_id
    session["signed_in_at"] = int(time.time())
    csrf.renew()
    return identity


def sign_out() -> None:
    session.clear()
    csrf.renew()


def _session_identity() -> Identity | None:
    token_id = session.get("token_id")
    signed_in_at = session.get("signed_in_at")
    if not token_id or not isinstance(signed_in_at, int):
        return None
    if time.time() - signed_in_at > SESSION_SECONDS:
        return None
    return identity_of_token_id(_store(), token_id)


def may_open(role: str, endpoint: str) -> bool:
    return role in PAGE_ROLES.get(endpoint, frozenset())


def require_person() -> Any:
    """``before_request``: sign-in page for strangers, 403 for a role the page is not for."""
    endpoint = request.endpoint or ""
    if endpoint in OPEN_PAGES:
        g.person = _session_identity()
        return None
    person = _session_identity()
    if person is None:
        if session.get("token_id"):
            sign_out()
        if request.method == "GET":
            target = request.full_path.rstrip("?")
            return redirect(url_for("ui.login") + "?next=" + quote(target, safe="/"), code=303)
        raise Unauthorized("Sign in first: your session has ended or was never started.")
    g.person = person
    allowed = PAGE_ROLES.get(endpoint, frozenset())
    if person.role not in allowed:
        roles = ", ".join(sorted(allowed)) or "no role"
        raise Forbidden(f"This page is for {roles}; you are signed in as {person.name} "
                        f"({person.role}).")
    return None


def safe_next(target: str | None) -> str:
    """Where to go after sign-in: only a path under /ui/ on this site."""
    if target and target.startswith("/ui/") and not target.startswith("//") \
            and "\\" not in target:
        return target
    return url_for("ui.runs")


def template_globals() -> dict[str, Any]:
    person = g.get("person")
    return {"person": person, "csrf_token": csrf.csrf_token, "caution_text": DEFAULT_CAUTION,
            "may_open": (lambda endpoint: person is not None and may_open(person.role,
                                                                           endpoint))}
