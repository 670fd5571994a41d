"""Plausibility warnings: inputs outside the screening ranges of the trade.

The ranges come from the project's trade-range table (``shared/TRADE_RANGES.md``, section 7
"Suggested plausibility bounds", itself distilled from cited sources; each warning names the row).
They are screening limits: a value outside them gives a warning, never a failed check, because
biological and material data legitimately scatter by factors of 2-10.
"""

from __future__ import annotations

from worker.engine.model import Problem

TRADE_TABLE = "TRADE_RANGES.md §7 (screening bounds)"

#: D above this is high for any solute in water at 37 °C (O2, about 3e-9 m^2/s, is near the top).
DIFFUSIVITY_HIGH = 5e-9
#: D near 1e-5 .. 1e-3 m^2/s looks like a value in cm^2/s entered as m^2/s (1 cm^2/s = 1e-4 m^2/s).
DIFFUSIVITY_CM2_SUSPECT = 1e-6
#: Below this no polymer of the table diffuses anything (glassy PLGA/PLA go down to ~1e-19).
DIFFUSIVITY_LOW = 1e-20
PARTITION_HIGH = 1e5
FIRST_ORDER_RANGE = (1e-7, 1e-2)  # 1/s, drug elimination or degradation
MASS_TRANSFER_RANGE = (1e-7, 1e-3)  # m/s, liquid-side coefficients
VOLUMETRIC_RATE_HIGH_MOLAR = 0.3  # mol/(m^3 s), tissue or construct O2 consumption
KM_HIGH_MOLAR = 0.05  # mol/m^3, respiration Km(O2)
O2_CONCENTRATION_HIGH = 1.0  # mol/m^3, pure O2 at 1 atm in water


def _outside(value: float, low: float | None, high: float | None) -> bool:
    return (low is not None and value < low) or (high is not None and value > high)


def input_warnings(problem: Problem) -> list[str]:
    """Warnings for inputs outside the screening ranges, each naming its source row."""
    warnings: list[str] = []
    for index, layer in enumerate(problem.layers):
        where = f"layers[{index}] ({layer.name})"
        d = layer.diffusivity
        if d >= DIFFUSIVITY_CM2_SUSPECT:
            warnings.append(
                f"{where}: diffusivity {d:.3g} m^2/s is far above any solute in water or tissue; "
                f"a value in cm^2/s entered as m^2/s? (1 cm^2/s = 1e-4 m^2/s; {TRADE_TABLE}, "
                "'D in water, any solute')"
            )
        elif d > DIFFUSIVITY_HIGH:
            warnings.append(
                f"{where}: diffusivity {d:.3g} m^2/s exceeds {DIFFUSIVITY_HIGH:g} m^2/s, the "
                f"screening limit for solutes in water at 37 °C ({TRADE_TABLE}, 'D in water')"
            )
        elif d < DIFFUSIVITY_LOW:
            warnings.append(
                f"{where}: diffusivity {d:.3g} m^2/s is below {DIFFUSIVITY_LOW:g} m^2/s, lower than "
                f"glassy polymers ({TRADE_TABLE}, 'D in glassy/semicrystalline polymers')"
            )
        if layer.partition > PARTITION_HIGH:
            warnings.append(
                f"{where}: partition coefficient {layer.partition:.3g} exceeds {PARTITION_HIGH:g} "
                f"({TRADE_TABLE}, 'partition coefficients')"
            )
        reaction = layer.reaction
        if reaction.kind == "first_order" and _outside(reaction.rate_constant, *FIRST_ORDER_RANGE):
            warnings.append(
                f"{where}: first-order rate constant {reaction.rate_constant:.3g} 1/s is outside "
                f"{FIRST_ORDER_RANGE[0]:g}–{FIRST_ORDER_RANGE[1]:g} 1/s "
                f"({TRADE_TABLE}, 'first-order rate constant')"
            )
        if problem.basis == "molar":
            volumetric = reaction.rate if reaction.kind == "zero_order" else reaction.vmax
            if reaction.kind in ("zero_order", "michaelis_menten") and (
                volumetric > VOLUMETRIC_RATE_HIGH_MOLAR
            ):
                warnings.append(
                    f"{where}: volumetric consumption {volumetric:.3g} mol/(m^3 s) exceeds "
                    f"{VOLUMETRIC_RATE_HIGH_MOLAR:g}, the upper screening limit for oxygen "
                    f"consumption of tissue or constructs ({TRADE_TABLE}, 'O2 consumption per "
                    "volume'); check the units if the solute is oxygen"
                )
            if reaction.kind == "michaelis_menten" and reaction.km > KM_HIGH_MOLAR:
                warnings.append(
                    f"{where}: km {reaction.km:.3g} mol/m^3 exceeds {KM_HIGH_MOLAR:g} mol/m^3, the "
                    f"screening limit for Km(O2) of respiration ({TRADE_TABLE}, 'Km(O2)'); "
                    "applies if the solute is oxygen"
                )
    for side in ("inner", "outer"):
        boundary = problem.inner_boundary if side == "inner" else problem.outer_boundary
        if boundary.kind == "mass_transfer" and _outside(boundary.coefficient, *MASS_TRANSFER_RANGE):
            warnings.append(
                f"{side}_boundary: mass-transfer coefficient {boundary.coefficient:.3g} m/s is "
                f"outside {MASS_TRANSFER_RANGE[0]:g}–{MASS_TRANSFER_RANGE[1]:g} m/s "
                f"({TRADE_TABLE}, 'fluid-side mass-transfer coefficient')"
            )
        fluid = boundary.value if boundary.kind == "concentration" else boundary.bulk
        if (
            problem.basis == "molar"
            and boundary.kind in ("concentration", "mass_transfer")
            and fluid > O2_CONCENTRATION_HIGH
            and any(ly.reaction.kind == "michaelis_menten" for ly in problem.layers)
        ):
            warnings.append(
                f"{side}_boundary: fluid concentration {fluid:.3g} mol/m^3 exceeds "
                f"{O2_CONCENTRATION_HIGH:g} mol/m^3 (pure O2 at 1 atm in water); if the solute is "
                f"oxygen, carriers must be modelled ({TRADE_TABLE}, 'O2 concentration')"
            )
    return warnings
