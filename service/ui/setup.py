"""Attaching the browser pages to the app: blueprint, session cookie, security headers."""

from __future__ import annotations

from flask import Flask, Response
from werkzeug.middleware.proxy_fix import ProxyFix

from service.server_keys import installation_secret
from service.ui.blueprint import ui
from service.ui.sessions import (
    COOKIE_NAME,
    ServerSessionInterface,
    absolute_limit,
    cookie_secure_setting,
    idle_limit,
)

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
    """Register ``/ui/`` with server-side sessions (:mod:`service.ui.sessions`); the app's
    secret is the installation's (:func:`service.server_keys.installation_secret`, which
    refuses a weak one outside the embedded default). ``PROXY_FIX_HOPS`` proxies are trusted
    for the client's address, scheme and host (so a TLS proxy makes cookies Secure)."""
    if not app.secret_key:
        app.secret_key = installation_secret(app.config)
    hops = app.config.get("PROXY_FIX_HOPS", 0)
    if isinstance(hops, bool) or not isinstance(hops, int) or not 0 <= hops <= 10:
        raise ValueError(f"FLUXPROOF_PROXY_FIX_HOPS: expected a whole number from 0 to 10, "
                         f"got {hops!r}")
    if hops:
        app.wsgi_app = ProxyFix(app.wsgi_app, x_for=hops, x_proto=hops,  # type: ignore[method-assign]
                                x_host=hops)
    idle_limit(app), absolute_limit(app), cookie_secure_setting(app)  # refuse bad settings now
    app.config["SESSION_COOKIE_NAME"] = COOKIE_NAME
    app.session_interface = ServerSessionInterface()
    app.register_blueprint(ui)
    app.after_request(add_security_headers)
