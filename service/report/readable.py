"""An SI value in the unit a designer reads it in: 0.005 mol/m³ as 5 µmol/L, 1.8e6 s as 20.8 d.

The SI value stays the record's figure; this is the second column beside it. Each SI unit of
the record has a short list of readable units, largest first, with the SI size of one of them
(exact factors: 1 mol/m³ = 1 mmol/L, 1 kg/m³ = 1 g/L, 1 d = 86 400 s, 1 cm² = 10⁻⁴ m²). The
unit chosen is the largest in which the magnitude reads as at least 1; values that already read
well in SI (a partition coefficient, a Biot number) get no second column.

Imports nothing beyond the standard library, so the text report keeps to the base install.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence

_DAY, _HOUR, _MINUTE = 86400.0, 3600.0, 60.0
_CM2 = 1e-4

#: SI unit of the record -> readable units, largest first: (symbol, SI size of one).
READABLE_UNITS: dict[str, tuple[tuple[str, float], ...]] = {
    "s": (("d", _DAY), ("h", _HOUR), ("min", _MINUTE), ("s", 1.0)),
    "m": (("m", 1.0), ("mm", 1e-3), ("µm", 1e-6), ("nm", 1e-9)),
    "mol/m^3": (("mmol/L", 1.0), ("µmol/L", 1e-3), ("nmol/L", 1e-6)),
    "kg/m^3": (("g/L", 1.0), ("mg/L", 1e-3), ("µg/L", 1e-6)),
    "mol/(m^2*s)": (("mmol/(cm²·d)", 1e-3 / _CM2 / _DAY), ("µmol/(cm²·d)", 1e-6 / _CM2 / _DAY),
                    ("nmol/(cm²·d)", 1e-9 / _CM2 / _DAY)),
    "kg/(m^2*s)": (("mg/(cm²·d)", 1e-6 / _CM2 / _DAY), ("µg/(cm²·d)", 1e-9 / _CM2 / _DAY),
                   ("ng/(cm²·d)", 1e-12 / _CM2 / _DAY)),
    "mol/s": (("mmol/h", 1e-3 / _HOUR), ("µmol/h", 1e-6 / _HOUR), ("nmol/h", 1e-9 / _HOUR),
              ("pmol/h", 1e-12 / _HOUR)),
    "kg/s": (("mg/d", 1e-6 / _DAY), ("µg/d", 1e-9 / _DAY), ("ng/d", 1e-12 / _DAY)),
    "mol": (("mmol", 1e-3), ("µmol", 1e-6), ("nmol", 1e-9), ("pmol", 1e-12)),
    "kg": (("g", 1e-3), ("mg", 1e-6), ("µg", 1e-9), ("ng", 1e-12)),
    "mol/m^2": (("µmol/cm²", 1e-6 / _CM2), ("nmol/cm²", 1e-9 / _CM2)),
    "kg/m^2": (("mg/cm²", 1e-6 / _CM2), ("µg/cm²", 1e-9 / _CM2), ("ng/cm²", 1e-12 / _CM2)),
    "mol/m": (("µmol/cm", 1e-6 / 1e-2), ("nmol/cm", 1e-9 / 1e-2)),
    "kg/m": (("mg/cm", 1e-6 / 1e-2), ("µg/cm", 1e-9 / 1e-2), ("ng/cm", 1e-12 / 1e-2)),
    "mol/(m*s)": (("µmol/(cm·d)", 1e-6 / 1e-2 / _DAY), ("nmol/(cm·d)", 1e-9 / 1e-2 / _DAY)),
    "kg/(m*s)": (("µg/(cm·d)", 1e-9 / 1e-2 / _DAY), ("ng/(cm·d)", 1e-12 / 1e-2 / _DAY)),
}

#: Dimensionless quantities that are fractions of a whole, read as a percentage.
FRACTIONS = frozenset({"release_fraction", "release_fraction_final"})


def _finite(values: Iterable[object]) -> list[float]:
    return [abs(float(v)) for v in values  # type: ignore[arg-type]
            if isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)]


def readable_unit(unit: str | None, values: Sequence[object], quantity: str = ""
                  ) -> tuple[str, float] | None:
    """(symbol, SI size of one) in which ``values`` (SI, in ``unit``) read best together, or None
    when the SI unit reads well already or is not one this module knows.

    The scale is set by the largest magnitude among ``values`` (so that a value and its bound
    share a unit); a fraction of a whole (``release_fraction``) reads in %.
    """
    if quantity in FRACTIONS and unit in (None, "", "1"):
        return "%", 0.01
    scales = READABLE_UNITS.get(unit or "")
    if not scales:
        return None
    magnitudes = [m for m in _finite(values) if m > 0.0]
    if not magnitudes:
        return None
    largest = max(magnitudes)
    chosen = next(((symbol, size) for symbol, size in scales if largest >= size), scales[-1])
    if chosen[0] == unit:
        return None
    return chosen


def readable_text(value: object, unit: str | None, quantity: str = "",
                  also: Sequence[object] = (), significant: int = 4) -> str:
    """``value`` (SI) in its readable unit as plain text (``5 µmol/L``), or "" where there is
    none; ``also``: other values that must share the unit (a bound)."""
    if not isinstance(value, (int, float)) or isinstance(value, bool) or not math.isfinite(value):
        return ""
    chosen = readable_unit(unit, [value, *also], quantity)
    if chosen is None:
        return ""
    symbol, size = chosen
    return f"{value / size:.{significant}g} {symbol}"
