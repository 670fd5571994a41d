"""Canonical JSON text of a document, and its SHA-256: the identity of a case's content."""

from __future__ import annotations

import hashlib
import json
from typing import Any

#: What ``json.dumps`` would build on every call with these options (it keeps no state
#: between calls).
_CANONICAL = json.JSONEncoder(sort_keys=True, separators=(",", ":"), ensure_ascii=False,
                              allow_nan=False)


def canonical_json(doc: Any) -> str:
    """Keys sorted, no whitespace, non-ASCII kept as is; NaN and infinity refused (ValueError)."""
    return _CANONICAL.encode(doc)


def document_sha256(doc: Any) -> str:
    """Hex SHA-256 of the UTF-8 bytes of :func:`canonical_json` (a case, a record)."""
    return hashlib.sha256(canonical_json(doc).encode("utf-8")).hexdigest()


def case_sha256(doc: Any) -> str:
    """Hex SHA-256 of the UTF-8 bytes of :func:`canonical_json`: a case's content address."""
    return document_sha256(doc)
