"""Cross-site request forgery protection for every form under ``/ui/``.

One random token per session, kept in the signed session cookie and repeated in a hidden field
(``csrf_token``) of every form; a POST whose field does not match is refused (400) before the
view runs. The login form is protected too, so nobody can sign a browser in as someone else.
A browser-sent ``Origin`` from another site is refused as well.
"""

from __future__ import annotations

import hmac
import secrets
from urllib.parse import urlsplit

from flask import request, session

from service.errors import ProblemError

SESSION_KEY = "csrf"
FIELD = "csrf_token"
SAFE_METHODS = frozenset({"GET", "HEAD", "OPTIONS"})


class CsrfRefused(ProblemError):
    status, title, slug = 400, "Form refused", "csrf-refused"


def csrf_token() -> str:
    """The session's token (made on first use); put it in a hidden field of every form."""
    token = session.get(SESSION_KEY)
    if not token:
        token = secrets.token_urlsafe(32)
        session[SESSION_KEY] = token
    return token


def renew() -> str:
    """A fresh token (after signing in or out)."""
    session[SESSION_KEY] = secrets.token_urlsafe(32)
    return session[SESSION_KEY]


def _same_origin(origin: str) -> bool:
    sent = urlsplit(origin)
    return (sent.scheme, sent.netloc) == (request.scheme, request.host)


def protect() -> None:
    """``before_request``: refuse a state-changing request without the session's token."""
    if request.method in SAFE_METHODS:
        return
    origin = request.headers.get("Origin")
    if origin and origin != "null" and not _same_origin(origin):
        raise CsrfRefused("This form was sent from another site and has been refused.",
                          errors=[{"path": "Origin", "message": f"expected this site, got "
                                                               f"{origin!r}"}])
    expected = session.get(SESSION_KEY)
    sent = request.form.get(FIELD, "")
    if not expected or not sent or not hmac.compare_digest(str(expected), sent):
        raise CsrfRefused("The form has expired or did not come from this site. Open the page "
                          "again and resend it.",
                          errors=[{"path": FIELD, "message": "missing or not this session's"}])
