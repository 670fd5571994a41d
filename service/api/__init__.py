"""The v1 HTTP API: one blueprint, thin views that call the domain functions in ``service/``."""

from __future__ import annotations

from flask import Blueprint

from service.auth import authenticate_request

api = Blueprint("api", __name__, url_prefix="/v1")
api.before_request(authenticate_request)

from service.api import (  # noqa: E402,F401  (the view modules register their routes)
    audit_views,
    batch_views,
    case_views,
    meta_views,
    run_views,
)

__all__ = ["api"]
