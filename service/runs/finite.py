"""Finding the numbers a check record cannot hold (NaN, infinity)."""

from __future__ import annotations

import json
import math
from typing import Any


def non_finite_paths(value: Any, path: str = "") -> list[str]:
    """Paths of every NaN or infinite float in a JSON-like document."""
    if isinstance(value, float):
        return [] if math.isfinite(value) else [path or "(document)"]
    if isinstance(value, dict):
        return [p for key, item in value.items()
                for p in non_finite_paths(item, f"{path}.{key}" if path else str(key))]
    if isinstance(value, (list, tuple)):
        return [p for index, item in enumerate(value)
                for p in non_finite_paths(item, f"{path}[{index}]")]
    return []


def non_finite_paths_of_record(record: dict[str, Any]) -> list[str]:
    """:func:`non_finite_paths` of a record, asked of the C JSON encoder first (a record holds
    hundreds of numbers; walking them in Python was a tenth of a run's bookkeeping)."""
    try:
        json.dumps(record, allow_nan=False)
    except ValueError:
        bad = non_finite_paths(record)
        if bad:
            return bad
        raise
    return []
