"""Numbers and units as people read them: significant figures, powers of ten, unit symbols."""

from __future__ import annotations

import math
import re
from typing import Any

from markupsafe import Markup, escape

SIGNIFICANT = 4
_SUPERSCRIPT = str.maketrans("0123456789-", "⁰¹²³⁴⁵⁶⁷⁸⁹⁻")
_POWER = re.compile(r"\^\(?(-?\d+)\)?")
_MICRO = re.compile(r"\bu(?=(m|g|L|l|mol|M|s)\b)")


def is_number(value: Any) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool)


def finite_number(value: Any) -> float | None:
    """``value`` as a float when it is a finite number (not a bool), else None."""
    return float(value) if is_number(value) and math.isfinite(value) else None


def plain_number(value: Any, significant: int = SIGNIFICANT) -> str:
    """``value`` to ``significant`` figures as plain text (``1.235e-06`` style for extremes)."""
    if not is_number(value):
        return "" if value is None else str(value)
    if value == 0:
        return "0"
    if not math.isfinite(value):
        return str(value)
    return f"{value:.{significant}g}"


def number_markup(value: Any, significant: int = SIGNIFICANT) -> Markup:
    """``value`` for HTML: ``1.235 × 10<sup>−6</sup>`` beyond 10^±4, plain figures otherwise."""
    if isinstance(value, (list, tuple)):
        return Markup(", ").join(number_markup(v, significant) if v is not None else "—"
                                 for v in value)
    if not is_number(value):
        return escape("—" if value is None else value)
    text = plain_number(value, significant)
    mantissa, sep, exponent = text.partition("e")
    if sep:
        shown = Markup("{}&#8239;×&#8239;10<sup>{}</sup>").format(
            mantissa, str(int(exponent)).replace("-", "−"))
    else:
        shown = escape(text)
    # The exact stored value stays machine-readable (and copyable) beside the rounded one.
    return Markup('<data value="{}">{}</data>').format(repr(value), shown)


def unit_text(unit: Any) -> str:
    """A pint-style unit string with symbols: ``mol/(m^2*s)`` -> ``mol/(m²·s)``, ``um`` -> µm."""
    if unit in (None, "", "1", "dimensionless"):
        return ""
    text = str(unit)
    text = _POWER.sub(lambda m: m.group(1).translate(_SUPERSCRIPT), text)
    text = text.replace("**", "^").replace("*", "·")
    return _MICRO.sub("µ", text)


def quantity_markup(quantity: Any) -> Markup:
    """``{"value": v, "unit": u}`` (or a bare value) as HTML."""
    if isinstance(quantity, dict) and "value" in quantity:
        unit = unit_text(quantity.get("unit"))
        value = number_markup(quantity.get("value"))
        return value + Markup("&nbsp;") + unit if unit else value
    return number_markup(quantity)


#: Length units for axes and drawings, largest first: (name, metres per unit).
LENGTH_SCALES = (("m", 1.0), ("mm", 1e-3), ("µm", 1e-6), ("nm", 1e-9))
TIME_SCALES = (("d", 86400.0), ("h", 3600.0), ("min", 60.0), ("s", 1.0))


def length_scale(extent_m: float) -> tuple[str, float]:
    """The length unit in which ``extent_m`` reads as a number from about 0.2 to 2000."""
    for name, size in LENGTH_SCALES:
        if extent_m >= 0.2 * size:
            return name, size
    return LENGTH_SCALES[-1]


def time_scale(extent_s: float) -> tuple[str, float]:
    """The time unit in which ``extent_s`` reads well (at least about 2 of it)."""
    for name, size in TIME_SCALES:
        if extent_s >= 2.0 * size:
            return name, size
    return TIME_SCALES[-1]


def length_markup(metres: Any) -> Markup:
    """A length in the unit that reads best (``0.2268 mm``), for prose beside SI tables."""
    if not is_number(metres):
        return number_markup(metres)
    name, size = length_scale(abs(metres))
    return number_markup(metres / size) + Markup("&nbsp;") + name


def readable_time(seconds: Any) -> str | None:
    """A time in the unit a person reads best (``6.603 d``, ``21.66 min``), for beside its SI
    value; None when seconds already read best or the value is not a finite number."""
    if not is_number(seconds) or not math.isfinite(seconds):
        return None
    name, size = time_scale(abs(seconds))
    if size == 1.0:
        return None
    return f"{plain_number(seconds / size)} {name}"


def time_markup(seconds: Any) -> Markup:
    """A time for HTML: the SI value in s and, where it reads better, the readable one beside."""
    shown = number_markup(seconds) + Markup("&nbsp;s")
    readable = readable_time(seconds)
    if readable:
        shown += Markup(' <span class="readable">({})</span>').format(
            readable.replace(" ", "\u00a0"))
    return shown
