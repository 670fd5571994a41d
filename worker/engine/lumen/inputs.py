"""Checks of the lumen functions' inputs: each error names the argument and what was expected."""

from __future__ import annotations

import math

__all__ = ["LumenInputError", "non_negative", "positive"]


class LumenInputError(ValueError):
    """Bad input to a lumen function (the message names the argument and what was expected)."""


def _number(name: str, value, expected: str, accept) -> float:
    try:
        number = float(value)
    except (TypeError, ValueError) as error:
        raise LumenInputError(f"{name}: expected {expected}, got {value!r}") from error
    if not (math.isfinite(number) and accept(number)):
        raise LumenInputError(f"{name}: expected {expected}, got {value!r}")
    return number


def positive(name: str, value) -> float:
    """``value`` as a float, or LumenInputError unless it is positive and finite."""
    return _number(name, value, "a positive finite number", lambda x: x > 0.0)


def non_negative(name: str, value) -> float:
    """``value`` as a float, or LumenInputError unless it is finite and >= 0."""
    return _number(name, value, "a non-negative finite number", lambda x: x >= 0.0)
