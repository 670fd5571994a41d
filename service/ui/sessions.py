"""Browser sessions kept on the server: the cookie carries only a random session id.

The store keeps the SHA-256 of the id, who signed in, when, when the session was last seen, and
the session's small data (the form token, messages to show once), through
:mod:`service.browser_sessions`. A session ends on sign-out, when its person is disabled,
after ``SESSION_IDLE_MINUTES`` without a request and ``SESSION_MAX_HOURS`` after sign-in,
whichever comes first; an ended session is never resumed. Signing in gives a fresh id (no
session fixation). The cookie is HttpOnly, SameSite=Lax, limited to ``/ui``, and ``Secure``
whenever the request came over TLS (directly, or by a proxy trusted with ``PROXY_FIX_HOPS``)
or ``SESSION_COOKIE_SECURE`` is true.
"""

from __future__ import annotations

from datetime import UTC, datetime, timedelta
from typing import Any

from flask import Flask, Request, Response, request
from flask.sessions import SessionInterface, SessionMixin
from werkzeug.datastructures import CallbackDict

from service import browser_sessions
from service.browser_sessions import Ended, Resumed

COOKIE_NAME = "fluxproof_session"
#: The last-seen time is written at most this often for a session whose data did not change.
TOUCH_SECONDS = 30


class ServerSession(CallbackDict, SessionMixin):  # type: ignore[misc]
    """The data of one browser session, with the server-side fields beside it."""

    def __init__(self, data: dict[str, Any] | None = None, *, session_id: str | None = None,
                 user_id: str | None = None, signed_in_at: datetime | None = None,
                 last_seen_at: datetime | None = None) -> None:
        def on_update(_self: Any) -> None:
            self.modified = True

        super().__init__(data or {}, on_update)
        self.session_id = session_id
        self.user_id = user_id
        self.signed_in_at = signed_in_at
        self.last_seen_at = last_seen_at
        self.modified = False
        #: Set when the session must end (sign-out, sign-in replacing it): the reason stored.
        self.end_reason: str | None = None
        #: A timeout or revocation found when the session was opened (for the sign-in page).
        self.expired_reason: str | None = None

    def start_person(self, user_id: str) -> None:
        """Sign ``user_id`` in: the old session ends and a new id is issued."""
        self.end_reason = "replaced by a sign-in"
        self.clear()
        self.user_id = user_id
        self.signed_in_at = datetime.now(UTC)
        self.modified = True

    def end(self, reason: str) -> None:
        """End the session (sign-out); what follows is a fresh anonymous one."""
        self.end_reason = reason
        self.clear()
        self.user_id = None
        self.signed_in_at = None
        self.modified = True


def _setting_int(app: Flask, name: str, default: int) -> int:
    value = app.config.get(name, default)
    if isinstance(value, bool) or not isinstance(value, int) or value < 1:
        raise ValueError(f"FLUXPROOF_{name}: expected a whole number of at least 1, "
                         f"got {value!r}")
    return value


def idle_limit(app: Flask) -> timedelta:
    return timedelta(minutes=_setting_int(app, "SESSION_IDLE_MINUTES", 30))


def absolute_limit(app: Flask) -> timedelta:
    return timedelta(hours=_setting_int(app, "SESSION_MAX_HOURS", 8))


def cookie_secure_setting(app: Flask) -> bool | None:
    """``SESSION_COOKIE_SECURE``: True (always), False (never) or None (``auto``: when the
    request came over TLS)."""
    setting = app.config.get("SESSION_COOKIE_SECURE", "auto")
    if setting is True or setting in ("true", "1"):
        return True
    if setting is False or setting in ("false", "0"):
        return False
    if setting != "auto":
        raise ValueError(f"FLUXPROOF_SESSION_COOKIE_SECURE: expected auto, true or false, "
                         f"got {setting!r}")
    return None


def cookie_secure(app: Flask, request: Request) -> bool:
    """``Secure`` when forced by ``SESSION_COOKIE_SECURE``, or, on ``auto`` (the default),
    when the request came over TLS."""
    forced = cookie_secure_setting(app)
    return request.is_secure if forced is None else forced


class ServerSessionInterface(SessionInterface):
    """Flask's session, kept by :mod:`service.browser_sessions`."""

    def _store(self, app: Flask) -> Any:
        return app.extensions["fluxproof"].store

    def open_session(self, app: Flask, request: Request) -> ServerSession:
        presented = request.cookies.get(COOKIE_NAME)
        if not presented or len(presented) > 200:
            return ServerSession()
        found = browser_sessions.resume(self._store(app), presented, idle=idle_limit(app),
                                        absolute=absolute_limit(app))
        if isinstance(found, Resumed):
            return ServerSession(found.data, session_id=presented, user_id=found.user_id,
                                 signed_in_at=found.signed_in_at,
                                 last_seen_at=found.last_seen_at)
        fresh = ServerSession()
        if isinstance(found, Ended) and found.signed_in:
            fresh.expired_reason = found.reason
        return fresh

    def save_session(self, app: Flask, session: SessionMixin, response: Response) -> None:
        assert isinstance(session, ServerSession)
        store = self._store(app)
        path, domain = "/ui", self.get_cookie_domain(app)
        if session.end_reason is not None and session.session_id is not None:
            browser_sessions.end(store, session.session_id, session.end_reason)
            session.session_id = None
        if session.session_id is None:
            if not session.modified or (not dict(session) and session.user_id is None):
                if session.end_reason is not None:
                    response.delete_cookie(COOKIE_NAME, path=path, domain=domain)
                return
            session.session_id = browser_sessions.start(
                store, user_id=session.user_id, data=dict(session),
                signed_in_at=session.signed_in_at, idle=idle_limit(app),
                absolute=absolute_limit(app))
        elif session.modified or session.last_seen_at is None or \
                (datetime.now(UTC) - session.last_seen_at).total_seconds() > TOUCH_SECONDS:
            browser_sessions.touch(store, session.session_id, dict(session))
        else:
            return
        response.set_cookie(COOKIE_NAME, session.session_id, httponly=True, samesite="Lax",
                            secure=cookie_secure(app, request), path=path, domain=domain)
