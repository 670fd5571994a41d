"""Bearer tokens: creation (shown once), lookup in constant time, revocation.

A token reads ``fpt_<id>_<secret>``. Only the SHA-256 of the whole token is stored. Lookup goes
by the id part (which reveals nothing), then the digests are compared with
``hmac.compare_digest``, so the comparison time does not depend on how much of a guess is right.
"""

from __future__ import annotations

import hashlib
import hmac
import secrets
from dataclasses import dataclass

from sqlalchemy import bindparam, select

from service import audit
from service.errors import ValidationFailed
from service.store import Store
from service.store.models import ROLES, Token, utc_now

TOKEN_PREFIX = "fpt_"
NAME_MAX = 200


@dataclass(frozen=True)
class Identity:
    """Who is calling: the token's name (the person's identity), role and token id."""

    name: str
    role: str
    token_id: str


def token_digest(token: str) -> str:
    return hashlib.sha256(token.encode("utf-8")).hexdigest()


def create_token(store: Store, *, role: str, name: str, actor: str = "cli") -> tuple[str, str]:
    """Create a token; return (token_id, token). The token itself is never stored."""
    errors = []
    if role not in ROLES:
        errors.append({"path": "role", "message": f"expected one of {', '.join(ROLES)}, "
                                                   f"got {role!r}"})
    clean_name = (name or "").strip()
    if not clean_name or len(clean_name) > NAME_MAX:
        errors.append({"path": "name", "message": f"expected 1 to {NAME_MAX} characters"})
    if errors:
        raise ValidationFailed("The token cannot be created.", errors=errors)
    token_id = secrets.token_hex(8)
    token = f"{TOKEN_PREFIX}{token_id}_{secrets.token_urlsafe(32)}"
    with store.transaction() as session:
        session.add(Token(id=token_id, name=clean_name, role=role, sha256=token_digest(token),
                          created_at=utc_now(), revoked=False))
        audit.append_event(session, actor=actor, kind="token.created", subject=token_id,
                           payload={"name": clean_name, "role": role})
    return token_id, token


def revoke_token(store: Store, token_id: str, *, actor: str = "cli") -> bool:
    """Revoke a token; False when there is no such token."""
    with store.transaction() as session:
        row = session.get(Token, token_id)
        if row is None:
            return False
        if not row.revoked:
            row.revoked = True
            audit.append_event(session, actor=actor, kind="token.revoked", subject=token_id,
                               payload={"name": row.name, "role": row.role})
    return True


_TOKENS = Token.__table__
#: Asked on every authenticated request: built once.
_TOKEN_BY_ID = (select(_TOKENS.c.id, _TOKENS.c.name, _TOKENS.c.role, _TOKENS.c.sha256,
                       _TOKENS.c.revoked).where(_TOKENS.c.id == bindparam("token_id")))


def identify(store: Store, token: str) -> Identity | None:
    """The identity a presented token stands for, or None (unknown, malformed or revoked)."""
    if not token.startswith(TOKEN_PREFIX):
        return None
    token_id, sep, _secret = token[len(TOKEN_PREFIX):].partition("_")
    if not sep or not token_id:
        return None
    rows = store.read(_TOKEN_BY_ID, {"token_id": token_id})
    if not rows:
        # Spend the same digest work as for a known id.
        hmac.compare_digest(token_digest(token), "0" * 64)
        return None
    row = rows[0]
    if not hmac.compare_digest(token_digest(token), row.sha256) or row.revoked:
        return None
    return Identity(name=row.name, role=row.role, token_id=row.id)


def identity_of_token_id(store: Store, token_id: str) -> Identity | None:
    """The identity of a token already proven by its holder (a signed-in browser session keeps
    the token's id), or None when that token is unknown or revoked since."""
    rows = store.read(_TOKEN_BY_ID, {"token_id": token_id})
    if not rows or rows[0].revoked:
        return None
    return Identity(name=rows[0].name, role=rows[0].role, token_id=rows[0].id)
