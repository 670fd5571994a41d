"""Text a person reads: refusing characters that cannot be seen or that reorder what is seen.

A printed name, a title, a layer name, a tag or a comment is read by a reviewer and signed. A
bidirectional control (U+202A-U+202E, U+2066-U+2069) can make a text display in another order
than it is stored, and an invisible character can make two different texts look the same, so
both are refused: every character of Unicode general category Cc (controls; a comment may keep
line breaks and tabs), Cf (format characters: the bidi controls, zero-width spaces and joiners,
the byte-order mark, soft hyphen), Co (private use), Cs (lone surrogates), Cn (unassigned), and
the line and paragraph separators (Zl, Zp). The categories are those of the Unicode Character
Database as Python's :mod:`unicodedata` ships it.
"""

from __future__ import annotations

import unicodedata
from collections.abc import Iterator
from typing import Any

#: General categories refused in text a person reads.
REFUSED_CATEGORIES = frozenset({"Cc", "Cf", "Co", "Cs", "Cn", "Zl", "Zp"})
#: Bidirectional controls (all in Cf; named for the messages).
BIDI_CONTROLS = frozenset(chr(c) for c in (*range(0x202A, 0x202F), *range(0x2066, 0x206A)))
#: Controls a multi-line text (a comment, a justification) may keep.
LINE_BREAKS = frozenset("\n\r\t")
#: White space a document's strings may carry around their text.
EDGE_SPACE = " \t\n\r"

__all__ = ["BIDI_CONTROLS", "REFUSED_CATEGORIES", "hidden_character_errors",
           "hidden_character_problem"]


def hidden_character_problem(text: str, *, multiline: bool = False, offset: int = 0
                             ) -> str | None:
    """Why ``text`` may not be shown to a reader (its first refused character named by code
    point, category and position, counted from ``offset``), or None when every character is
    visible."""
    for position, char in enumerate(text, start=offset):
        if multiline and char in LINE_BREAKS:
            continue
        category = unicodedata.category(char)
        if category in REFUSED_CATEGORIES:
            kind = ("a bidirectional control" if char in BIDI_CONTROLS
                    else f"an invisible or control character (category {category})")
            return (f"contains {kind}, U+{ord(char):04X}, at position {position}; remove it "
                    "(only visible characters are accepted)")
    return None


def _join(prefix: str, key: Any) -> str:
    if isinstance(key, int):
        return f"{prefix}[{key}]"
    return f"{prefix}.{key}" if prefix else str(key)


def hidden_character_errors(document: Any) -> Iterator[tuple[str, str]]:
    """``(path, message)`` for every string of a JSON document (keys too) holding a refused
    character within its text (white space around it is let be), in document order; paths
    as the case schema writes them (``layers[1].name``). Walks with its own stack, so no
    nesting depth can exhaust Python's."""
    stack: list[tuple[str, Any]] = [("", document)]
    while stack:
        path, value = stack.pop()
        if isinstance(value, str):
            # Surrounding white space (a trailing line break after a unit) is ignored, as the
            # case schema ignores it; inside the text no control is accepted.
            core = value.strip(EDGE_SPACE)
            offset = len(value) - len(value.lstrip(EDGE_SPACE))
            problem = hidden_character_problem(core, offset=offset)
            if problem is not None:
                yield path, problem
        elif isinstance(value, dict):
            children = []
            for key, item in value.items():
                child = _join(path, key)
                problem = hidden_character_problem(key) if isinstance(key, str) else None
                if problem is not None:
                    yield child, f"the field name {problem}"
                else:
                    children.append((child, item))
            stack.extend(reversed(children))
        elif isinstance(value, list):
            stack.extend(reversed([(_join(path, i), item) for i, item in enumerate(value)]))
