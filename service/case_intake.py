"""What a submitted case becomes before it is stored: validated, and the fields it is stored
under (its content address, title and tags)."""

from __future__ import annotations

from typing import Any

import schemas
from service.errors import ValidationFailed

#: Longest stored title, in characters (a longer one is cut).
TITLE_MAX_CHARS = 500


def validate_document(document: dict[str, Any]) -> Any:
    """Validate a case with the project's schema; ValidationFailed (422) lists every error."""
    try:
        return schemas.validate_case(document)
    except schemas.CaseError as exc:
        raise ValidationFailed("The case is not valid.", errors=list(exc.errors)) from exc


def stored_case_fields(document: dict[str, Any]) -> dict[str, Any]:
    """What a case is stored under, which is also its ``case.stored`` event's payload: the
    content address ``sha256`` (``schemas.case_sha256``), the ``title`` (at most
    :data:`TITLE_MAX_CHARS` characters) and the sorted, distinct ``tags``."""
    return {"sha256": schemas.case_sha256(document),
            "title": str(document.get("title") or "")[:TITLE_MAX_CHARS],
            "tags": sorted({str(t) for t in document.get("tags") or []})}
