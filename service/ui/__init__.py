"""The browser pages under ``/ui/`` and the figures of the HTML report.

``init_app(app)`` registers the blueprint, the session-cookie settings and the security headers
of every HTML response. Pages are server-rendered Jinja templates with one stylesheet and no
scripts; people sign in with their bearer token, and every form carries a CSRF token.
"""

from __future__ import annotations

from typing import Any


def init_app(app: Any) -> None:
    """Attach the browser pages to ``app`` (see :func:`service.ui.setup.init_app`)."""
    from service.ui.setup import init_app as _init_app

    _init_app(app)


__all__ = ["init_app"]
