"""The v1 HTTP API: one blueprint, thin views that call the domain functions in ``service/``.

Every view is declared with ``service.api.declare.declare``; ``ROLE_MATRIX`` and ``PUBLIC``
below are read from those declarations once the view modules have registered.
"""

from __future__ import annotations

from collections.abc import Mapping
from types import MappingProxyType

from flask import Blueprint

from service.auth import authenticate_request

api = Blueprint("api", __name__, url_prefix="/v1")
api.before_request(authenticate_request)

from service.api import (  # noqa: E402  (the view modules register their routes)
    audit_views,
    batch_views,
    case_views,
    meta_views,
    run_views,
)
from service.api.declare import public_endpoints, role_matrix  # noqa: E402

VIEW_MODULES = (audit_views, batch_views, case_views, meta_views, run_views)

#: Endpoint -> roles allowed, derived from the declarations.
ROLE_MATRIX: Mapping[str, frozenset[str]] = MappingProxyType(role_matrix())

#: Endpoints that need no token.
PUBLIC: frozenset[str] = public_endpoints()

__all__ = ["PUBLIC", "ROLE_MATRIX", "api"]
