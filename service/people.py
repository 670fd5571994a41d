"""People: users with a login, a printed name, a role and a password.

A login is unique after Unicode NFKC normalisation and case folding (``login_key``), so
``Engineer-1`` and ``ｅｎｇｉｎｅｅｒ-1`` are one person and cannot be created twice. Printed names
and logins refuse invisible and bidirectional-control characters (:mod:`schemas.text`).
Passwords are hashed with argon2id (``argon2-cffi``, RFC 9106), a memory-hard hash; only the
hash is stored. Every change is an audit event naming the acting person.
"""

from __future__ import annotations

import secrets
import unicodedata
from dataclasses import dataclass
from typing import Any

from argon2 import PasswordHasher, profiles
from argon2.exceptions import InvalidHashError, VerificationError, VerifyMismatchError
from sqlalchemy import select
from sqlalchemy.orm import Session

from schemas.text import hidden_character_problem
from service import audit
from service.errors import Conflict, NotFound, ValidationFailed
from service.store import Store
from service.store.models import ROLES, BrowserSession, Token, User, utc_now

LOGIN_MAX = 200
NAME_MAX = 200
#: Shortest password accepted (characters).
PASSWORD_MIN = 12
PASSWORD_MAX = 1024

#: argon2id, RFC 9106 section 4's second recommended option (t=3, 64 MiB, p=4).
HASH_PARAMETERS = profiles.RFC_9106_LOW_MEMORY
#: The one hasher. The tests swap in a cheaper one; the parameters are stored in each hash,
#: so every hash verifies whichever hasher made it.
HASHER = PasswordHasher.from_parameters(HASH_PARAMETERS)
#: Hashed once, verified when a login is unknown, so that an unknown login costs the same time.
_DUMMY_HASH: list[str] = []

__all__ = ["HASHER", "Person", "change_user", "check_password", "create_user", "disable_user",
           "get_person", "login_key", "person_by_login", "set_password"]


@dataclass(frozen=True)
class Person:
    """A user as the rest of the service sees them (never the password hash)."""

    user_id: str
    login: str
    name: str
    role: str
    disabled: bool

    def to_dict(self) -> dict[str, Any]:
        return {"user_id": self.user_id, "login": self.login, "name": self.name,
                "role": self.role, "disabled": self.disabled}


def login_key(login: str) -> str:
    """The form a login is unique in: NFKC, then case folding, then NFKC again (the folded
    text can need it), surrounding spaces removed."""
    return unicodedata.normalize("NFKC", unicodedata.normalize("NFKC", login.strip()).casefold())


def _person(row: User) -> Person:
    return Person(user_id=row.id, login=row.login, name=row.name, role=row.role,
                  disabled=bool(row.disabled))


def _text_errors(path: str, value: str | None, maximum: int) -> list[dict[str, str]]:
    text = (value or "").strip()
    if not text or len(text) > maximum:
        return [{"path": path, "message": f"expected 1 to {maximum} characters"}]
    problem = hidden_character_problem(text)
    return [] if problem is None else [{"path": path, "message": problem}]


def _password_errors(password: str | None) -> list[dict[str, str]]:
    if password is None:
        return []
    if not PASSWORD_MIN <= len(password) <= PASSWORD_MAX:
        return [{"path": "password", "message": f"expected {PASSWORD_MIN} to {PASSWORD_MAX} "
                                                f"characters, got {len(password)}"}]
    return []


def _role_errors(role: str | None) -> list[dict[str, str]]:
    if role not in ROLES:
        return [{"path": "role", "message": f"expected one of {', '.join(ROLES)}, got {role!r}"}]
    return []


def hash_password(password: str) -> str:
    return HASHER.hash(password)


def create_user(store: Store, *, login: str, name: str, role: str, password: str | None,
                actor: str) -> Person:
    """Create a person; ``password`` None makes one who cannot sign in or sign (machines).

    Raises ValidationFailed (naming ``login``, ``name``, ``role`` or ``password``) or Conflict
    (the login, normalised, is taken).
    """
    errors = (_text_errors("login", login, LOGIN_MAX) + _text_errors("name", name, NAME_MAX)
              + _role_errors(role) + _password_errors(password))
    if errors:
        raise ValidationFailed("The user cannot be created.", errors=errors)
    key = login_key(login)
    digest = None if password is None else hash_password(password)
    with store.transaction() as session:
        taken = session.execute(select(User).where(User.login_key == key)).scalar_one_or_none()
        if taken is not None:
            raise Conflict(f"The login {login.strip()!r} is taken: it is the same as "
                           f"{taken.login!r} once case and Unicode forms are ignored.",
                           extra={"login": taken.login})
        row = User(id=secrets.token_hex(16), login=login.strip(), login_key=key,
                   name=name.strip(), role=role, password_hash=digest, disabled=False,
                   created_at=utc_now(), created_by=actor)
        session.add(row)
        session.flush()
        audit.append_event(session, actor=actor, kind="user.created", subject=row.login,
                           payload={"name": row.name, "role": role,
                                    "password": password is not None})
        return _person(row)


def _user_by_login(session: Session, login: str) -> User:
    row = session.execute(select(User).where(User.login_key == login_key(login))
                          ).scalar_one_or_none()
    if row is None:
        raise NotFound(f"There is no user with login {login!r}.")
    return row


def change_user(store: Store, login: str, *, actor: str, name: str | None = None,
                role: str | None = None) -> Person:
    """Change a person's printed name and/or role (audited with before and after)."""
    errors = ([] if name is None else _text_errors("name", name, NAME_MAX)) + \
        ([] if role is None else _role_errors(role))
    if errors:
        raise ValidationFailed("The user cannot be changed.", errors=errors)
    with store.transaction() as session:
        row = _user_by_login(session, login)
        changes: dict[str, Any] = {}
        if name is not None and name.strip() != row.name:
            changes["name"] = {"before": row.name, "after": name.strip()}
            row.name = name.strip()
        if role is not None and role != row.role:
            changes["role"] = {"before": row.role, "after": role}
            row.role = role
        if changes:
            row.changed_at = utc_now()
            audit.append_event(session, actor=actor, kind="user.changed", subject=row.login,
                               payload=changes)
        return _person(row)


def set_password(store: Store, login: str, password: str, *, actor: str) -> Person:
    """Set a person's password (audited without the password)."""
    errors = _password_errors(password)
    if errors:
        raise ValidationFailed("The password cannot be set.", errors=errors)
    digest = hash_password(password)
    with store.transaction() as session:
        row = _user_by_login(session, login)
        row.password_hash = digest
        row.changed_at = utc_now()
        audit.append_event(session, actor=actor, kind="user.changed", subject=row.login,
                           payload={"password": "set"})
        return _person(row)


def disable_user(store: Store, login: str, *, actor: str) -> Person:
    """Disable a person: their tokens and browser sessions stop working at once."""
    now = utc_now()
    with store.transaction() as session:
        row = _user_by_login(session, login)
        if not row.disabled:
            row.disabled = True
            row.changed_at = now
            for token in session.execute(select(Token).where(Token.user_id == row.id,
                                                             Token.revoked.is_(False))
                                         ).scalars():
                token.revoked = True
                audit.append_event(session, actor=actor, kind="token.revoked", subject=token.id,
                                   payload={"login": row.login, "name": token.name,
                                            "reason": "user disabled"})
            for browser in session.execute(select(BrowserSession).where(
                    BrowserSession.user_id == row.id, BrowserSession.ended_at.is_(None))
                    ).scalars():
                browser.ended_at = now
                browser.end_reason = "user disabled"
            audit.append_event(session, actor=actor, kind="user.disabled", subject=row.login,
                               payload={"name": row.name, "role": row.role})
        return _person(row)


def get_person(store: Store, user_id: str) -> Person | None:
    with store.transaction() as session:
        row = session.get(User, user_id)
        return None if row is None else _person(row)


def person_by_login(store: Store, login: str) -> Person | None:
    with store.transaction() as session:
        row = session.execute(select(User).where(User.login_key == login_key(login))
                              ).scalar_one_or_none()
        return None if row is None else _person(row)


def _verify(digest: str | None, password: str) -> bool:
    if digest is None:
        if not _DUMMY_HASH:
            _DUMMY_HASH.append(HASHER.hash(secrets.token_urlsafe(16)))
        digest, password = _DUMMY_HASH[0], password + "\x00never"
        try:
            HASHER.verify(digest, password)
        except (VerificationError, InvalidHashError):
            pass
        return False
    try:
        return HASHER.verify(digest, password)
    except (VerifyMismatchError, VerificationError, InvalidHashError):
        return False


def check_password(store: Store, login: str, password: str) -> Person | None:
    """The person whose login and password these are (enabled, with a password), or None.
    An unknown login spends the same hashing work as a known one."""
    with store.transaction() as session:
        row = session.execute(select(User).where(User.login_key == login_key(login or ""))
                              ).scalar_one_or_none()
        digest = None if row is None else row.password_hash
        person = None if row is None else _person(row)
    if not _verify(digest, password or "") or person is None or person.disabled:
        return None
    return person


def password_matches(store: Store, user_id: str, password: str) -> bool:
    """True when ``password`` is the password of the (enabled) user ``user_id``."""
    with store.transaction() as session:
        row = session.get(User, user_id)
        digest = None if row is None or row.disabled else row.password_hash
    return _verify(digest, password or "")
