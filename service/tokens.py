"""Bearer tokens of people: creation (shown once), lookup in constant time, expiry, revocation.

A token reads ``fpt_<id>_<secret>``. Only the SHA-256 of the whole token is stored. Lookup goes
by the id part (which reveals nothing), then the digests are compared with
``hmac.compare_digest``, so the comparison time does not depend on how much of a guess is right.

Every token belongs to a person (:mod:`service.people`) and acts with that person's login,
printed name and current role; it expires (``TOKEN_LIFETIME_DAYS`` unless given), and it stops
working when revoked or when its person is disabled. Tokens made before people existed belong
to nobody and are refused.
"""

from __future__ import annotations

import hashlib
import hmac
import secrets
from dataclasses import dataclass
from datetime import timedelta

from sqlalchemy import bindparam, select

from service import audit
from service.errors import NotFound, ValidationFailed
from service.people import login_key
from service.store import Store
from service.store.models import Token, User, utc_now

TOKEN_PREFIX = "fpt_"
NAME_MAX = 200
#: The lifetime of a token when neither the caller nor ``TOKEN_LIFETIME_DAYS`` says otherwise.
DEFAULT_LIFETIME_DAYS = 90


@dataclass(frozen=True)
class Identity:
    """Who is calling: the person's login (what four-eyes and the audit trail compare), printed
    name, role, user id, and the token (None for a browser session) or session they came by."""

    login: str
    name: str
    role: str
    user_id: str
    token_id: str | None = None


def token_digest(token: str) -> str:
    return hashlib.sha256(token.encode("utf-8")).hexdigest()


def create_token(store: Store, *, login: str, actor: str, name: str | None = None,
                 lifetime_days: float | None = None) -> tuple[str, str]:
    """Create a token for the person ``login``; return (token_id, token). The token itself is
    never stored. ``name`` says what it is for (default: the login); it expires after
    ``lifetime_days`` (default :data:`DEFAULT_LIFETIME_DAYS`).

    Raises NotFound (no such person) or ValidationFailed (a disabled person, a bad name or
    lifetime).
    """
    lifetime = DEFAULT_LIFETIME_DAYS if lifetime_days is None else lifetime_days
    purpose = (name if name is not None else login).strip()
    errors = []
    if not purpose or len(purpose) > NAME_MAX:
        errors.append({"path": "name", "message": f"expected 1 to {NAME_MAX} characters"})
    if isinstance(lifetime, bool) or not isinstance(lifetime, int | float) or \
            not 0 < lifetime <= 3660:
        errors.append({"path": "lifetime_days", "message": "expected a number of days above 0 "
                                                           f"and at most 3660, got {lifetime!r}"})
    token_id = secrets.token_hex(8)
    token = f"{TOKEN_PREFIX}{token_id}_{secrets.token_urlsafe(32)}"
    with store.transaction() as session:
        user = session.execute(select(User).where(User.login_key == login_key(login))
                               ).scalar_one_or_none()
        if user is None:
            raise NotFound(f"There is no user with login {login!r}; create the person first "
                           "(fluxproof user create).")
        if user.disabled:
            errors.append({"path": "login", "message": f"{user.login} is disabled"})
        if errors:
            raise ValidationFailed("The token cannot be created.", errors=errors)
        expires_at = utc_now() + timedelta(days=float(lifetime))
        session.add(Token(id=token_id, name=purpose, role=user.role, sha256=token_digest(token),
                          created_at=utc_now(), revoked=False, user_id=user.id,
                          expires_at=expires_at))
        audit.append_event(session, actor=actor, kind="token.created", subject=token_id,
                           payload={"login": user.login, "name": purpose, "role": user.role,
                                    "expires_at": expires_at.isoformat()})
    return token_id, token


def revoke_token(store: Store, token_id: str, *, actor: str) -> bool:
    """Revoke a token; False when there is no such token."""
    with store.transaction() as session:
        row = session.get(Token, token_id)
        if row is None:
            return False
        if not row.revoked:
            row.revoked = True
            owner = session.get(User, row.user_id) if row.user_id else None
            audit.append_event(session, actor=actor, kind="token.revoked", subject=token_id,
                               payload={"login": owner.login if owner else None,
                                        "name": row.name})
    return True


_TOKENS = Token.__table__
_USERS = User.__table__
#: Asked on every authenticated request: built once.
_TOKEN_BY_ID = (select(_TOKENS.c.id, _TOKENS.c.sha256, _TOKENS.c.revoked, _TOKENS.c.expires_at,
                       _USERS.c.id.label("user_id"), _USERS.c.login, _USERS.c.name,
                       _USERS.c.role, _USERS.c.disabled)
                .select_from(_TOKENS.join(_USERS, _USERS.c.id == _TOKENS.c.user_id))
                .where(_TOKENS.c.id == bindparam("token_id")))


def identify(store: Store, token: str) -> Identity | None:
    """The identity a presented token stands for, or None (unknown, malformed, revoked,
    expired, of nobody, or of a disabled person)."""
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
    if not hmac.compare_digest(token_digest(token), row.sha256) or row.revoked \
            or row.disabled:
        return None
    expires_at = row.expires_at
    if expires_at is not None:
        if expires_at.tzinfo is None:  # read through Core: naive UTC
            expires_at = expires_at.replace(tzinfo=utc_now().tzinfo)
        if expires_at <= utc_now():
            return None
    return Identity(login=row.login, name=row.name, role=row.role, user_id=row.user_id,
                    token_id=row.id)
