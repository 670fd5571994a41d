"""Who may call what: the role matrix, and the bearer-token check before every API view.

``ROLE_MATRIX`` maps each API endpoint to the roles allowed to call it; ``PUBLIC`` is the set
that needs no token. An endpoint missing from both is refused to everyone (fail closed).
Four-eyes (no sign-off by the identity that submitted the run) is enforced in
``service.signoffs``, because it depends on the run, not on the role.
"""

from __future__ import annotations

from collections.abc import Mapping
from types import MappingProxyType

from flask import current_app, g, request

from service.errors import Forbidden, Unauthorized
from service.tokens import Identity, identify

READERS = frozenset({"engineer", "reviewer", "auditor", "admin"})

#: Endpoints that need no token.
PUBLIC = frozenset({"api.health", "api.openapi"})

#: Endpoint -> roles allowed. The single place where access is decided.
ROLE_MATRIX: Mapping[str, frozenset[str]] = MappingProxyType({
    "api.validate": frozenset({"engineer"}),
    "api.create_case": frozenset({"engineer"}),
    "api.list_cases": READERS,
    "api.get_case": READERS,
    "api.list_case_runs": READERS,
    "api.create_run": frozenset({"engineer"}),
    "api.get_run": READERS,
    "api.get_run_report": READERS,
    "api.create_signoff": frozenset({"reviewer"}),
    "api.create_batch": frozenset({"admin"}),
    "api.get_batch": READERS,
    "api.list_audit": frozenset({"auditor", "admin"}),
    "api.verify_audit": frozenset({"auditor", "admin"}),
})

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
    if endpoint is None or endpoint in PUBLIC:
        return
    token = _bearer_token()
    if token is None:
        raise Unauthorized("Send a bearer token: Authorization: Bearer <token>.",
                           errors=[{"path": "Authorization", "message": "missing bearer token"}],
                           headers={"WWW-Authenticate": BEARER_CHALLENGE})
    store = current_app.extensions["fluxproof"].store
    identity = identify(store, token)
    if identity is None:
        raise Unauthorized("The bearer token is unknown, malformed or revoked.",
                           errors=[{"path": "Authorization", "message": "invalid token"}],
                           headers={"WWW-Authenticate":
                                    BEARER_CHALLENGE + ', error="invalid_token"'})
    allowed = ROLE_MATRIX.get(endpoint, frozenset())
    if identity.role not in allowed:
        roles = ", ".join(sorted(allowed)) or "no role"
        raise Forbidden(f"The role {identity.role!r} may not do this; allowed: {roles}.",
                        extra={"role": identity.role, "allowed_roles": sorted(allowed)})
    g.identity = identity


def current_identity() -> Identity:
    """The identity of the authenticated caller (set by :func:`authenticate_request`)."""
    return g.identity
