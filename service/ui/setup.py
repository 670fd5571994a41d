"""Attaching the browser pages to the app: blueprint, session cookie, security headers."""

from __future__ import annotations

import logging

from flask import Flask, Response

from service.ui.blueprint import ui

logger = logging.getLogger(__name__)

DEV_SECRET = "dev-only-change-me"

#: No scripts at all, styles from this site (and the inline ones of the SVG figures and the
#: standalone report), forms only to this site, never framed.
CONTENT_SECURITY_POLICY = ("default-src 'none'; style-src 'self' 'unsafe-inline'; "
                           "img-src 'self' data:; form-action 'self'; frame-ancestors 'none'; "
                           "base-uri 'none'")

HTML_HEADERS = {
    "Content-Security-Policy": CONTENT_SECURITY_POLICY,
    "X-Content-Type-Options": "nosniff",
    "X-Frame-Options": "DENY",
    "Referrer-Policy": "same-origin",
}


def add_security_headers(response: Response) -> Response:
    """``after_request``: the headers above on every HTML response; no caching of /ui/ pages."""
    if response.mimetype == "text/html":
        for name, value in HTML_HEADERS.items():
            response.headers.setdefault(name, value)
        response.headers.setdefault("Cache-Control", "no-store")
    return response


def init_app(app: Flask) -> None:
    """Register ``/ui/``; the session cookie is HttpOnly, SameSite=Lax, signed with SECRET_KEY."""
    app.secret_key = app.config.get("SECRET_KEY")
    if not app.secret_key:
        raise ValueError("FLUXPROOF_SECRET_KEY: expected a secret for the session cookie, got "
                         "nothing")
    if app.secret_key == DEV_SECRET and not app.config.get("TESTING"):
        logger.warning("FLUXPROOF_SECRET_KEY is the development default; set a secret of your "
                       "own before anyone signs in to /ui/")
    app.config["SESSION_COOKIE_NAME"] = "fluxproof_session"
    app.config["SESSION_COOKIE_HTTPONLY"] = True
    app.config["SESSION_COOKIE_SAMESITE"] = "Lax"
    app.config["SESSION_COOKIE_PATH"] = "/ui"
    # Secure cookies need HTTPS; set FLUXPROOF_SESSION_COOKIE_SECURE=true behind TLS.
    app.config["SESSION_COOKIE_SECURE"] = bool(app.config.get("SESSION_COOKIE_SECURE", False))
    app.register_blueprint(ui)
    app.after_request(add_security_headers)
