"""Shared pieces of the plausibility screening: the table its warnings name and the range test.

The screening table is the project's own: bounds of common practice held as constants here, in
``worker.engine.plausibility`` and in the kind modules. The ranges are screening limits: a value
outside gives a warning, never a failed check.
"""

from __future__ import annotations

#: The table each screening warning names, with the row it applies.
TRADE_TABLE = "fluxproof screening table (worker/engine/screening.py)"

#: mol/(m^3 s): upper screening limit of tissue or construct O2 consumption.
VOLUMETRIC_RATE_HIGH_MOLAR = 0.3


def outside(value: float, low: float | None, high: float | None) -> bool:
    """True when ``value`` lies below ``low`` or above ``high`` (None: no bound)."""
    return (low is not None and value < low) or (high is not None and value > high)


def volumetric_rate_warnings(volumetric: float, where: str, basis: str) -> list[str]:
    """The warning for a volumetric consumption (mol/(m^3 s)) above the O2 screening limit."""
    if basis != "molar" or not volumetric > VOLUMETRIC_RATE_HIGH_MOLAR:
        return []
    return [
        f"{where}: volumetric consumption {volumetric:.3g} mol/(m^3 s) exceeds "
        f"{VOLUMETRIC_RATE_HIGH_MOLAR:g}, the upper screening limit for oxygen "
        f"consumption of tissue or constructs ({TRADE_TABLE}, 'O2 consumption per "
        "volume'); check the units if the solute is oxygen"
    ]
