"""The ``ui`` blueprint: pages under ``/ui/``, the stylesheet under ``/ui/static/``.

Before every view: the CSRF check of a POST (:mod:`service.ui.csrf`), then the sign-in and role
check (:mod:`service.ui.signin`). Errors raised in a view become an HTML page with the same
status, not a problem document.
"""

from __future__ import annotations

from flask import Blueprint

from service.ui import csrf, signin

ui = Blueprint("ui", __name__, url_prefix="/ui", static_folder="../static",
               static_url_path="/static")
ui.before_request(csrf.protect)
ui.before_request(signin.require_person)
ui.context_processor(signin.template_globals)

from service.ui import (  # noqa: E402,F401  (the view modules register their routes)
    errors,
    views_audit,
    views_batches,
    views_cases,
    views_runs,
    views_signin,
)

__all__ = ["ui"]
