"""A PDF as an HTTP response: its media type, and a file name to save it under."""

from __future__ import annotations

from flask import Response


def pdf_response(content: bytes, filename: str) -> Response:
    """``application/pdf`` shown inline, saved as ``filename``; never cached by a proxy."""
    response = Response(content, status=200, mimetype="application/pdf")
    response.headers["Content-Disposition"] = f'inline; filename="{filename}"'
    response.headers["Cache-Control"] = "private, no-store"
    return response
