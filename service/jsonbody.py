"""Strict reading of JSON request bodies.

Python's ``json`` accepts ``NaN``, ``Infinity`` and numbers like ``1e999`` (which become
infinite floats); none of them is JSON a design tool should send, and none is a valid input
value. Such literals are found with their paths and rejected with 422; syntax errors and
duplicate keys are 400; a media type other than ``application/json`` is 415.
"""

from __future__ import annotations

import json
import math
from typing import Any

from flask import request

from service.errors import MalformedBody, UnsupportedMediaType, ValidationFailed

JSON_MEDIA_TYPES = ("application/json",)


class _NonFinite:
    """Placeholder for a NaN/Infinity literal, replaced by an error once its path is known."""

    def __init__(self, literal: str) -> None:
        self.literal = literal


def _parse_constant(literal: str) -> _NonFinite:
    return _NonFinite(literal)


def _parse_float(text: str) -> float | _NonFinite:
    value = float(text)
    return value if math.isfinite(value) else _NonFinite(text)


def _reject_duplicates(pairs: list[tuple[str, Any]]) -> dict[str, Any]:
    result: dict[str, Any] = {}
    for key, value in pairs:
        if key in result:
            raise ValueError(f"duplicate key {key!r} in one object")
        result[key] = value
    return result


def _find_non_finite(value: Any, path: str, found: list[dict[str, str]]) -> None:
    if isinstance(value, _NonFinite):
        found.append({"path": path, "message": f"{value.literal} is not a finite number; "
                      "give a finite value"})
    elif isinstance(value, dict):
        for key, item in value.items():
            _find_non_finite(item, f"{path}.{key}" if path else str(key), found)
    elif isinstance(value, list):
        for index, item in enumerate(value):
            _find_non_finite(item, f"{path}[{index}]", found)


def parse_strict_json(data: bytes) -> Any:
    """Parse ``data`` as strict JSON; raises MalformedBody or ValidationFailed."""
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise MalformedBody(f"The body is not UTF-8 text: {exc}") from exc
    if not text.strip():
        raise MalformedBody("The request body is empty; a JSON object was expected.")
    try:
        value = json.loads(text, parse_constant=_parse_constant, parse_float=_parse_float,
                           object_pairs_hook=_reject_duplicates)
    except json.JSONDecodeError as exc:
        raise MalformedBody(f"The body is not valid JSON: {exc.msg} at line {exc.lineno} "
                            f"column {exc.colno}.") from exc
    except ValueError as exc:
        raise MalformedBody(f"The body is not acceptable JSON: {exc}.") from exc
    found: list[dict[str, str]] = []
    _find_non_finite(value, "", found)
    if found:
        raise ValidationFailed("The body holds non-finite numbers (NaN or Infinity).",
                               errors=found)
    return value


def json_object_body() -> dict[str, Any]:
    """The request's body as a JSON object, strictly parsed (415 / 400 / 413 / 422 otherwise)."""
    if request.mimetype not in JSON_MEDIA_TYPES:
        got = request.mimetype or "none"
        raise UnsupportedMediaType(
            f"Send the body as application/json (got {got}).",
            errors=[{"path": "Content-Type", "message": f"expected application/json, got {got}"}],
        )
    value = parse_strict_json(request.get_data(cache=True))
    if not isinstance(value, dict):
        raise ValidationFailed("The body must be a JSON object.",
                               errors=[{"path": "", "message":
                                        f"expected an object, got {type(value).__name__}"}])
    return value
