"""The server side of browser sessions: the ``browser_sessions`` rows.

The browser holds a random session id; the store keeps the SHA-256 of it (someone reading the
database cannot take a session over), who signed in and when, when the session was last seen,
its small data (the form token, messages shown once), and when and why it ended. The pages
reach these rows only through this module (:mod:`service.ui.sessions`).
"""

from __future__ import annotations

import hashlib
import secrets
from dataclasses import dataclass, field
from datetime import datetime, timedelta
from typing import Any

from sqlalchemy import delete, or_, update

from service.store import Store
from service.store.models import BrowserSession, User, utc_now


def session_digest(session_id: str) -> str:
    return hashlib.sha256(session_id.encode("utf-8")).hexdigest()


@dataclass(frozen=True)
class Resumed:
    """A live session: its data, its person (None before sign-in) and times."""

    data: dict[str, Any]
    user_id: str | None
    signed_in_at: datetime | None
    last_seen_at: datetime


@dataclass(frozen=True)
class Ended:
    """A session that ended as it was presented (a timeout, or its person disabled)."""

    reason: str
    signed_in: bool = field(default=False)


def resume(store: Store, session_id: str, *, idle: timedelta, absolute: timedelta
           ) -> Resumed | Ended | None:
    """The session ``session_id`` if it is live; :class:`Ended` when it times out or its person
    is disabled now (it is ended in the store); None when unknown or ended before."""
    now = utc_now()
    with store.transaction() as db:
        row = db.get(BrowserSession, session_digest(session_id))
        if row is None or row.ended_at is not None:
            return None
        reason = None
        if now - row.last_seen_at > idle:
            reason = "idle timeout"
        elif row.signed_in_at is not None and now - row.signed_in_at > absolute:
            reason = "absolute timeout"
        elif row.user_id is not None:
            user = db.get(User, row.user_id)
            if user is None or user.disabled:
                reason = "user disabled"
        if reason is not None:
            row.ended_at, row.end_reason = now, reason
            return Ended(reason, signed_in=row.user_id is not None)
        return Resumed(dict(row.data or {}), row.user_id, row.signed_in_at, row.last_seen_at)


def end(store: Store, session_id: str, reason: str) -> None:
    """End a session for good (sign-out, or replaced at sign-in)."""
    with store.transaction() as db:
        db.execute(update(BrowserSession)
                   .where(BrowserSession.id_sha256 == session_digest(session_id),
                          BrowserSession.ended_at.is_(None))
                   .values(ended_at=utc_now(), end_reason=reason))


def start(store: Store, *, user_id: str | None, data: dict[str, Any],
          signed_in_at: datetime | None, idle: timedelta, absolute: timedelta) -> str:
    """Store a new session; return its id (for the cookie). Sessions nobody can resume are
    deleted first: anonymous ones idle past ``idle``, any not seen for ``absolute`` + ``idle``
    (the audit trail keeps sign-in and sign-out)."""
    now = utc_now()
    session_id = secrets.token_urlsafe(32)
    with store.transaction() as db:
        db.execute(delete(BrowserSession).where(or_(
            BrowserSession.user_id.is_(None) & (BrowserSession.last_seen_at < now - idle),
            BrowserSession.last_seen_at < now - absolute - idle)))
        db.add(BrowserSession(id_sha256=session_digest(session_id), user_id=user_id,
                              data=dict(data), created_at=now, signed_in_at=signed_in_at,
                              last_seen_at=now))
    return session_id


def touch(store: Store, session_id: str, data: dict[str, Any]) -> None:
    """Write a live session's data and the time it was last seen."""
    with store.transaction() as db:
        db.execute(update(BrowserSession)
                   .where(BrowserSession.id_sha256 == session_digest(session_id),
                          BrowserSession.ended_at.is_(None))
                   .values(data=dict(data), last_seen_at=utc_now()))
