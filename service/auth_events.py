"""Audit events of authentication: sign-in, sign-out and failed authentication.

Each is written in a transaction of its own (a failed attempt changes nothing else), naming
the acting person: the login that signed in or out, the login or token id that was tried.
"""

from __future__ import annotations

from typing import Any

from service import audit
from service.store import Store

#: The actor of an attempt whose person is not known (a malformed token).
UNKNOWN_ACTOR = "(unknown)"
SUBJECT_MAX = 200


def record(store: Store, kind: str, *, actor: str, subject: str,
           payload: dict[str, Any] | None = None) -> None:
    """Append one ``auth.*`` event (``auth.signed_in``, ``auth.signed_out``, ``auth.failed``)."""
    with store.transaction() as session:
        audit.append_event(session, actor=(actor or UNKNOWN_ACTOR)[:SUBJECT_MAX], kind=kind,
                           subject=(subject or UNKNOWN_ACTOR)[:SUBJECT_MAX],
                           payload=payload or {})
