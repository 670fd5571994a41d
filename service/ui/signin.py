"""Who is using the browser pages: sign-in with login and password, the session, the role gate.

People sign in with their login and password (:func:`service.people.check_password`); the
session is kept on the server (:mod:`service.ui.sessions`) and the cookie holds only its id.
Every request re-reads the person, so a disabled person's sessions end at once, and the
session's idle and absolute timeouts apply. Sign-in, sign-out and a failed sign-in are audit
events naming the person. Which role may open which page comes from the API's
:data:`service.api.ROLE_MATRIX`, so the two never disagree.
"""

from __future__ import annotations

from collections.abc import Mapping
from types import MappingProxyType
from typing import Any
from urllib.parse import quote

from flask import current_app, flash, g, redirect, request, session, url_for

from service import auth_events
from service.api import ROLE_MATRIX
from service.errors import Forbidden, Unauthorized
from service.people import check_password, get_person
from service.report.html import DEFAULT_CAUTION
from service.tokens import Identity
from service.ui import csrf
from service.ui.sessions import ServerSession

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


def _server_session() -> ServerSession:
    current = session._get_current_object()  # type: ignore[attr-defined]
    assert isinstance(current, ServerSession)
    return current


def identity_of(person: Any) -> Identity:
    return Identity(login=person.login, name=person.name, role=person.role,
                    user_id=person.user_id)


def sign_in(login: str, password: str) -> Identity | None:
    """Start a session for the person with this login and password; None (no session, an
    ``auth.failed`` event) when they do not match an enabled person."""
    store = _store()
    person = check_password(store, login.strip(), password)
    if person is None:
        auth_events.record(store, "auth.failed", actor=login.strip(), subject=login.strip(),
                           payload={"via": "sign-in form", "reason": "unknown login, wrong "
                                    "password or disabled person"})
        return None
    _server_session().start_person(person.user_id)  # a new session id (no fixation)
    csrf.renew()
    auth_events.record(store, "auth.signed_in", actor=person.login, subject=person.login,
                       payload={"via": "sign-in form"})
    return identity_of(person)


def sign_out() -> None:
    """End the session (it can never be resumed) and audit it."""
    person = g.get("person")
    _server_session().end("signed out")
    csrf.renew()
    if person is not None:
        auth_events.record(_store(), "auth.signed_out", actor=person.login,
                           subject=person.login, payload={})


def _session_identity() -> Identity | None:
    user_id = _server_session().user_id
    if not user_id:
        return None
    person = get_person(_store(), user_id)
    if person is None or person.disabled:
        return None
    return identity_of(person)


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
        ended = _server_session().expired_reason
        if ended:
            flash(f"Your session ended ({ended}); sign in again.", "error")
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
