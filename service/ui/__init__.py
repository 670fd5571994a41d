"""The browser pages under ``/ui/`` (the report and its figures are :mod:`service.report`).

``init_app(app)`` registers the blueprint, the session-cookie settings and the security headers
of every HTML response. Pages are server-rendered Jinja templates with one stylesheet and no
scripts; people sign in with their bearer token, and every form carries a CSRF token.
"""

from __future__ import annotations

from service.ui.setup import init_app

__all__ = ["init_app"]
