"""Strict reading of JSON request bodies.

Python's ``json`` accepts ``NaN``, ``Infinity`` and numbers like ``1e999`` (which become
infinite floats); none of them is JSON a design tool should send, and none is a valid input
value. Such literals are found with their paths and rejected with 422; syntax errors and
duplicate keys are 400; a media type other than ``application/json`` is 415.

Two more things Python's ``json`` takes that a service must not: nesting deep enough to exhaust
the parser's recursion (refused with 400 by a scan of the brackets before parsing, so no deep
structure is ever built), and lone UTF-16 surrogates written as escapes (``"\\ud800"``), which
parse into strings that cannot be stored or hashed as UTF-8 (refused with 422 naming the field).
"""

from __future__ import annotations

import json
import math
import re
from typing import Any

import numpy as np
from flask import request

from service.errors import MalformedBody, UnsupportedMediaType, ValidationFailed

JSON_MEDIA_TYPES = ("application/json",)

#: Deepest nesting of arrays and objects accepted in a body. A case document nests about six
#: deep (case, layers, a layer, its reaction, a quantity); the limit leaves room and keeps the
#: parser far from Python's recursion limit.
MAX_JSON_DEPTH = 32

#: A JSON string token (escapes included): removed before the brackets are counted, so a
#: bracket inside a string does not count.
_STRING = re.compile(r'"(?:[^"\\]|\\.)*"')
_LONE_SURROGATE = re.compile("[\ud800-\udfff]")
#: A surrogate written as an escape: the only way one reaches a string of UTF-8 text.
_SURROGATE_ESCAPE = re.compile(r"\\u[dD][89a-fA-F]")
_OPENING = np.frombuffer(b"[{", dtype=np.uint8)
_CLOSING = np.frombuffer(b"]}", dtype=np.uint8)


class _NonFinite:
    """Placeholder for a NaN/Infinity literal, replaced by an error once its path is known."""

    def __init__(self, literal: str) -> None:
        self.literal = literal



class _NumberHooks:
    """``json.loads`` hooks that put a placeholder for each non-finite number and remember
    that they did (so an ordinary body is not walked for them)."""

    def __init__(self) -> None:
        self.non_finite = False

    def constant(self, literal: str) -> _NonFinite:
        self.non_finite = True
        return _NonFinite(literal)

    def float(self, text: str) -> float | _NonFinite:
        value = float(text)
        if math.isfinite(value):
            return value
        self.non_finite = True
        return _NonFinite(text)


def _reject_duplicates(pairs: list[tuple[str, Any]]) -> dict[str, Any]:
    result: dict[str, Any] = {}
    for key, value in pairs:
        if key in result:
            raise ValueError(f"duplicate key {key!r} in one object")
        result[key] = value
    return result


def nesting_depth_exceeds(text: str, limit: int = MAX_JSON_DEPTH) -> bool:
    """True when the arrays and objects of JSON ``text`` nest deeper than ``limit``.

    Counts brackets outside strings without parsing; a text with no more opening brackets than
    ``limit`` cannot nest deeper and is not scanned.
    """
    if text.count("[") + text.count("{") <= limit:
        return False
    codes = np.frombuffer(_STRING.sub("", text).encode("utf-8"), dtype=np.uint8)
    steps = np.isin(codes, _OPENING).astype(np.int64) - np.isin(codes, _CLOSING)
    return bool(steps.size) and int(np.cumsum(steps).max()) > limit


def has_lone_surrogate(text: str) -> bool:
    """True when ``text`` holds a UTF-16 surrogate code point (not encodable as UTF-8)."""
    return _LONE_SURROGATE.search(text) is not None


def _lone_surrogate_message(what: str) -> str:
    return (f"{what} holds a lone UTF-16 surrogate (an unpaired \\ud800-\\udfff escape), "
            "which is not a character; send valid Unicode text")


def _find_unacceptable(value: Any, path: str, found: list[dict[str, str]]) -> None:
    """Non-finite numbers and lone surrogates (in keys and strings), with their paths."""
    if isinstance(value, _NonFinite):
        found.append({"path": path, "message": f"{value.literal} is not a finite number; "
                      "give a finite value"})
    elif isinstance(value, str):
        if has_lone_surrogate(value):
            found.append({"path": path, "message": _lone_surrogate_message("the text")})
    elif isinstance(value, dict):
        for key, item in value.items():
            item_path = f"{path}.{key}" if path else str(key)
            if has_lone_surrogate(key):
                item_path = f"{path}.{key!a}" if path else ascii(key)
                found.append({"path": item_path, "message": _lone_surrogate_message("the key")})
            _find_unacceptable(item, item_path, found)
    elif isinstance(value, list):
        for index, item in enumerate(value):
            _find_unacceptable(item, f"{path}[{index}]", found)


def parse_strict_json(data: bytes) -> Any:
    """Parse ``data`` as strict JSON; raises MalformedBody or ValidationFailed."""
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise MalformedBody(f"The body is not UTF-8 text: {exc}") from exc
    if not text.strip():
        raise MalformedBody("The request body is empty; a JSON object was expected.")
    if nesting_depth_exceeds(text):
        raise MalformedBody(f"The body nests arrays and objects deeper than {MAX_JSON_DEPTH} "
                            "levels; no request needs that.",
                            errors=[{"path": "", "message": "nesting deeper than "
                                     f"{MAX_JSON_DEPTH} levels"}])
    hooks = _NumberHooks()
    try:
        value = json.loads(text, parse_constant=hooks.constant, parse_float=hooks.float,
                           object_pairs_hook=_reject_duplicates)
    except json.JSONDecodeError as exc:
        raise MalformedBody(f"The body is not valid JSON: {exc.msg} at line {exc.lineno} "
                            f"column {exc.colno}.") from exc
    except ValueError as exc:
        raise MalformedBody(f"The body is not acceptable JSON: {exc}.") from exc
    except RecursionError as exc:  # a guard behind the depth scan
        raise MalformedBody("The body nests too deeply to be read.") from exc
    found: list[dict[str, str]] = []
    if hooks.non_finite or _SURROGATE_ESCAPE.search(text):
        _find_unacceptable(value, "", found)
    if found:
        raise ValidationFailed("The body holds values that are not acceptable JSON data "
                               "(non-finite numbers, or lone surrogates in text).", errors=found)
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
