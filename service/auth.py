"""The roles, and the bearer-token check before every API view.

Each endpoint names its roles where it is declared (``service.api.declare``); the check reads
them from the declaration attached to the view function, and ``service.api.ROLE_MATRIX`` is
derived from the same declarations. A declaration with ``roles=None`` is public; a view
without a declaration is refused to everyone (fail closed).
Four-eyes (no sign-off by the person who submitted the run or first stored its case) is
enforced in ``service.signoffs``, because it depends on the run, not on the role. A presented
token that is not valid is an ``auth.failed`` audit event.
"""

from __future__ import annotations

from flask import current_app, g, request

from service import auth_events
from service.errors import Forbidden, Unauthorized
from service.tokens import TOKEN_PREFIX, Identity, identify

ENGINEER = frozenset({"engineer"})
ADMIN = frozenset({"admin"})
AUDITORS = frozenset({"auditor", "admin"})
READERS = frozenset({"engineer", "reviewer", "auditor", "admin"})

BEARER_CHALLENGE = 'Bearer realm="fluxproof"'


def _bearer_token() -> str | None:
    header = request.headers.get("Authorization", "")
    scheme, _, value = header.partition(" ")
    if scheme.lower() != "bearer" or not value.strip():
        return None
    return value.strip()


def authenticate_request() -> None:
    """``before_request`` of the API blueprint: 401 without a valid token, 403 wrong role."""
    endpoint = request.endpoint
    if endpoint is None:
        return  # no route matched: the 404 or 405 follows
    declaration = getattr(current_app.view_functions.get(endpoint), "declaration", None)
    if declaration is not None and declaration.roles is None:
        return
    token = _bearer_token()
    if token is None:
        raise Unauthorized("Send a bearer token: Authorization: Bearer <token>.",
                           errors=[{"path": "Authorization", "message": "missing bearer token"}],
                           headers={"WWW-Authenticate": BEARER_CHALLENGE})
    store = current_app.extensions["fluxproof"].store
    identity = identify(store, token)
    if identity is None:
        claimed = token[len(TOKEN_PREFIX):].partition("_")[0] \
            if token.startswith(TOKEN_PREFIX) else ""
        auth_events.record(store, "auth.failed", actor=auth_events.UNKNOWN_ACTOR,
                           subject=f"token {claimed}" if claimed else "token",
                           payload={"via": "bearer token", "path": request.path,
                                    "reason": "unknown, malformed, expired or revoked token"})
        raise Unauthorized("The bearer token is unknown, malformed, expired or revoked.",
                           errors=[{"path": "Authorization", "message": "invalid token"}],
                           headers={"WWW-Authenticate":
                                    BEARER_CHALLENGE + ', error="invalid_token"'})
    allowed = frozenset() if declaration is None else declaration.roles
    if identity.role not in allowed:
        roles = ", ".join(sorted(allowed)) or "no role"
        raise Forbidden(f"The role {identity.role!r} may not do this; allowed: {roles}.",
                        extra={"role": identity.role, "allowed_roles": sorted(allowed)})
    g.identity = identity


def current_identity() -> Identity:
    """The identity of the authenticated caller (set by :func:`authenticate_request`)."""
    return g.identity
