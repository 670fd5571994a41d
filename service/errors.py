"""Problem details (RFC 9457) for every HTTP error, from one handler.

Every error response is ``application/problem+json`` with ``type``, ``title``, ``status``,
``detail``, ``instance`` and ``errors: [{path, message}]`` (empty when no field is to blame).
Domain code raises :class:`ProblemError` subclasses; Werkzeug's HTTP exceptions (404, 405, 413,
...) and unexpected exceptions (500) go through the same handler. A lost or refused database
connection is a 503 (``store-unavailable``, with ``Retry-After``): the transaction was rolled
back, so nothing was half-written.
"""

from __future__ import annotations

import logging
from typing import Any

from flask import Flask, Response, json, request
from werkzeug.exceptions import HTTPException

PROBLEM_MEDIA_TYPE = "application/problem+json"
PROBLEM_TYPE_BASE = "https://fluxproof.invalid/problems/"

logger = logging.getLogger(__name__)


class ProblemError(Exception):
    """An error that becomes a problem document.

    Parameters
    ----------
    detail
        A sentence for the person reading the response.
    errors
        ``[{"path": ..., "message": ...}]``: the fields at fault and what was expected.
    extra
        Extension members added to the problem document.
    headers
        Extra response headers.
    """

    status = 400
    title = "Bad request"
    slug = "bad-request"

    def __init__(self, detail: str, *, errors: list[dict[str, str]] | None = None,
                 extra: dict[str, Any] | None = None, headers: dict[str, str] | None = None,
                 status: int | None = None, title: str | None = None,
                 slug: str | None = None) -> None:
        super().__init__(detail)
        self.detail = detail
        self.errors = list(errors or [])
        self.extra = dict(extra or {})
        self.headers = dict(headers or {})
        if status is not None:
            self.status = status
        if title is not None:
            self.title = title
        if slug is not None:
            self.slug = slug


class MalformedBody(ProblemError):
    status, title, slug = 400, "Malformed request body", "malformed-body"


class Unauthorized(ProblemError):
    status, title, slug = 401, "Authentication required", "unauthorized"


class Forbidden(ProblemError):
    status, title, slug = 403, "Not allowed", "forbidden"


class FourEyesViolation(Forbidden):
    title, slug = "Four-eyes rule", "four-eyes"


class NotFound(ProblemError):
    status, title, slug = 404, "Not found", "not-found"


class Conflict(ProblemError):
    status, title, slug = 409, "Conflict", "conflict"


class UnsupportedMediaType(ProblemError):
    status, title, slug = 415, "Unsupported media type", "unsupported-media-type"


class ValidationFailed(ProblemError):
    status, title, slug = 422, "Invalid input", "invalid-input"


class ServiceUnavailable(ProblemError):
    status, title, slug = 503, "Service unavailable", "unavailable"


_HTTP_SLUGS = {
    400: "bad-request", 401: "unauthorized", 403: "forbidden", 404: "not-found",
    405: "method-not-allowed", 409: "conflict", 413: "body-too-large",
    415: "unsupported-media-type", 422: "invalid-input", 500: "internal-error",
    503: "unavailable",
}


#: Most ``errors`` a problem document lists; ``errors_total`` counts them all when more.
MAX_PROBLEM_ERRORS = 100


def problem_document(status: int, title: str, detail: str, slug: str,
                     errors: list[dict[str, str]] | None = None,
                     extra: dict[str, Any] | None = None) -> dict[str, Any]:
    errors = list(errors or [])
    if len(errors) > MAX_PROBLEM_ERRORS:
        extra = {"errors_total": len(errors), **(extra or {})}
        errors = errors[:MAX_PROBLEM_ERRORS]
    document: dict[str, Any] = {
        "type": PROBLEM_TYPE_BASE + slug,
        "title": title,
        "status": status,
        "detail": detail,
        "instance": request.path if request else None,
        "errors": list(errors or []),
    }
    for key, value in (extra or {}).items():
        document.setdefault(key, value)
    return document


def problem_response(document: dict[str, Any], headers: dict[str, str] | None = None) -> Response:
    response = Response(json.dumps(document), status=document["status"],
                        mimetype=PROBLEM_MEDIA_TYPE)
    for key, value in (headers or {}).items():
        response.headers[key] = value
    return response


#: Seconds a client is asked to wait (``Retry-After``) when the store cannot be reached.
STORE_RETRY_AFTER_S = 5


def _is_store_unreachable(error: Exception) -> bool:
    """True for a lost or refused database connection (the transaction was rolled back)."""
    try:
        from sqlalchemy import exc as sa_exc
    except ImportError:  # pragma: no cover - sqlalchemy is a service dependency
        return False
    if isinstance(error, (sa_exc.OperationalError, sa_exc.InterfaceError)):
        return True
    return isinstance(error, sa_exc.DBAPIError) and bool(error.connection_invalidated)


def handle_any_error(error: Exception) -> Response:
    """The one error handler: ProblemError, HTTPException, or anything else (500)."""
    if isinstance(error, ProblemError):
        document = problem_document(error.status, error.title, error.detail, error.slug,
                                    error.errors, error.extra)
        return problem_response(document, error.headers)
    if isinstance(error, HTTPException):
        status = error.code or 500
        headers = {k: v for k, v in error.get_headers() if k.lower() != "content-type"}
        detail = error.description or error.name
        if status == 413:
            from flask import current_app

            limit = current_app.config.get("MAX_BODY_BYTES")
            detail = f"The request body is larger than the limit of {limit} bytes."
        document = problem_document(status, error.name, detail,
                                    _HTTP_SLUGS.get(status, "http-error"))
        return problem_response(document, headers)
    if _is_store_unreachable(error):
        logger.warning("store unreachable on %s %s: %s", request.method, request.path, error)
        document = problem_document(503, "Service unavailable",
                                    "The store cannot be reached; the request was not "
                                    "completed. Try again shortly.", "store-unavailable")
        return problem_response(document, {"Retry-After": str(STORE_RETRY_AFTER_S)})
    logger.exception("unhandled error on %s %s", request.method, request.path)
    document = problem_document(500, "Internal server error",
                                "The server met an unexpected error; it has been logged.",
                                "internal-error")
    return problem_response(document)


def init_app(app: Flask) -> None:
    """Register the handler for every exception (HTTP errors included)."""
    app.register_error_handler(Exception, handle_any_error)
