"""The error raised for an invalid case, and the flattening of marshmallow's nested messages."""

from __future__ import annotations

from collections.abc import Iterable, Iterator
from typing import Any

#: Most errors a CaseError keeps; ``total`` still counts every one found.
MAX_ERRORS = 100


class CaseError(Exception):
    """An invalid case document.

    ``errors`` lists the problems found (the first :data:`MAX_ERRORS`), each
    ``{"path": str, "message": str}``; the path is dotted with list indices
    (``layers[1].reaction.vmax``), empty for the whole document. ``total`` counts every problem
    found, kept or not.
    """

    def __init__(self, errors: Iterable[dict[str, str]]) -> None:
        self.errors = []
        self.total = 0
        for e in errors:
            self.total += 1
            if self.total <= MAX_ERRORS:
                self.errors.append({"path": e["path"], "message": e["message"]})
        super().__init__(self._text())

    def _text(self) -> str:
        lines = [f"{e['path'] or '(document)'}: {e['message']}" for e in self.errors]
        count = self.total
        if count > len(lines):
            lines.append(f"... and {count - len(lines)} more")
        head = f"invalid case ({count} error{'s' if count != 1 else ''})"
        return "\n".join([head, *("  " + line for line in lines)])

    def __str__(self) -> str:
        return self._text()


def _join(prefix: str, key: Any) -> str:
    if isinstance(key, int):
        return f"{prefix}[{key}]"
    if key == "_schema":
        return prefix
    return f"{prefix}.{key}" if prefix else str(key)


def flatten_messages(messages: Any, prefix: str = "") -> Iterator[tuple[str, str]]:
    """Turn marshmallow's nested error messages into ``(path, message)`` pairs."""
    if isinstance(messages, dict):
        for key, value in messages.items():
            yield from flatten_messages(value, _join(prefix, key))
    elif isinstance(messages, list | tuple):
        for item in messages:
            if isinstance(item, str):
                yield prefix, item
            else:
                yield from flatten_messages(item, prefix)
    else:
        yield prefix, str(messages)
