"""What a submitted case becomes before it is stored: validated, and the fields it is stored
under (its content address, title and tags)."""

from __future__ import annotations

from typing import Any

from flask import current_app, has_app_context

import schemas
from service.errors import ValidationFailed
from service.settings import cost_budget_scale, settings_from_env
from worker.engine.cost import DEFAULT_BUDGETS, Budgets

#: Longest stored title, in characters (a longer one is cut).
TITLE_MAX_CHARS = 500


def intake_budgets() -> Budgets:
    """The cost budgets of this process: the app's settings when serving, else the
    environment's (``FLUXPROOF_COST_BUDGET_SCALE``)."""
    settings = current_app.config if has_app_context() else settings_from_env()
    return DEFAULT_BUDGETS.scaled(cost_budget_scale(settings))


def validate_document(document: dict[str, Any]) -> Any:
    """Validate a case with the project's schema, cost budget included; ValidationFailed (422)
    lists the errors (the first 100, ``errors_total`` counts them all)."""
    try:
        return schemas.validate_case(document, intake_budgets())
    except schemas.CaseError as exc:
        raise ValidationFailed("The case is not valid.", errors=list(exc.errors),
                               extra={"errors_total": exc.total}) from exc


def stored_case_fields(document: dict[str, Any]) -> dict[str, Any]:
    """What a case is stored under, which is also its ``case.stored`` event's payload: the
    content address ``sha256`` (``schemas.case_sha256``), the ``title`` (at most
    :data:`TITLE_MAX_CHARS` characters) and the sorted, distinct ``tags``."""
    return {"sha256": schemas.case_sha256(document),
            "title": str(document.get("title") or "")[:TITLE_MAX_CHARS],
            "tags": sorted({str(t) for t in document.get("tags") or []})}
