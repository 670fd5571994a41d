"""A signed-off record never changes: the error the store raises when something tries.

The rule is enforced by the database itself, for every path that writes (ORM, Core statements,
plain SQL): triggers on ``runs`` and ``signoffs`` (migration 0004, on PostgreSQL and SQLite)
refuse any ``UPDATE`` or ``DELETE`` of a signed-off run and of a sign-off. Their message starts
with :data:`SEAL_MARKER`; :class:`service.store.session.Store` turns the database error into
:class:`SealedRecordError`, and the domain layer (``service.signoffs``) refuses such changes
first with an explanation.
"""

from __future__ import annotations

#: The start of the triggers' message (migration 0004), by which their error is recognised.
SEAL_MARKER = "sealed record:"


class SealedRecordError(RuntimeError):
    """Raised when code tries to change or delete a signed-off record."""


def sealed_record_error(exc: BaseException) -> SealedRecordError | None:
    """The :class:`SealedRecordError` a database error stands for, or None when it is another
    error."""
    message = str(getattr(exc, "orig", None) or exc)
    if SEAL_MARKER not in message:
        return None
    reason = message[message.index(SEAL_MARKER) + len(SEAL_MARKER):].strip().splitlines()[0]
    return SealedRecordError(reason)
