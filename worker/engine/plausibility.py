"""Plausibility warnings: inputs outside the screening ranges of the trade.

The ranges are the project's own screening table, bounds of common practice held as constants
here, in ``worker.engine.screening`` and in the kind modules (each kind's
``plausibility_warnings``); each warning names its row. They are screening limits: a value
outside them gives a warning, never a failed check, because biological and material data
legitimately scatter by factors of 2-10.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from worker.engine.screening import TRADE_TABLE

if TYPE_CHECKING:
    from worker.engine.model import Problem

#: D above this is high for any solute in water at 37 °C (O2, about 3e-9 m^2/s, is near the top).
DIFFUSIVITY_HIGH = 5e-9
#: D near 1e-5 .. 1e-3 m^2/s looks like a value in cm^2/s entered as m^2/s (1 cm^2/s = 1e-4 m^2/s).
DIFFUSIVITY_CM2_SUSPECT = 1e-6
#: Below this no polymer of the table diffuses anything (glassy PLGA/PLA go down to ~1e-19).
DIFFUSIVITY_LOW = 1e-20
PARTITION_HIGH = 1e5
O2_CONCENTRATION_HIGH = 1.0  # mol/m^3, pure O2 at 1 atm in water


def input_warnings(problem: Problem) -> list[str]:
    """Warnings for inputs outside the screening ranges, each naming its source row.

    The ranges of each kind's own parameters are the kind's (``plausibility_warnings`` of
    ``worker.engine.reactions`` and ``worker.engine.boundaries``); the layer-wide ones are here.
    """
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
                f"{where}: diffusivity {d:.3g} m^2/s is below {DIFFUSIVITY_LOW:g} m^2/s, "
                f"lower than glassy polymers ({TRADE_TABLE}, 'D in glassy/semicrystalline "
                "polymers')"
            )
        if layer.partition > PARTITION_HIGH:
            warnings.append(
                f"{where}: partition coefficient {layer.partition:.3g} exceeds {PARTITION_HIGH:g} "
                f"({TRADE_TABLE}, 'partition coefficients')"
            )
        reaction = layer.reaction
        warnings.extend(reaction.law.plausibility_warnings(reaction, where, problem.basis))
    for side in ("inner", "outer"):
        boundary = problem.inner_boundary if side == "inner" else problem.outer_boundary
        warnings.extend(boundary.condition.plausibility_warnings(boundary, side))
        fluid = boundary.condition.fluid_concentration(boundary)
        if (
            problem.basis == "molar"
            and fluid is not None
            and fluid > O2_CONCENTRATION_HIGH
            and any(ly.reaction.law.saturable for ly in problem.layers)
        ):
            warnings.append(
                f"{side}_boundary: fluid concentration {fluid:.3g} mol/m^3 exceeds "
                f"{O2_CONCENTRATION_HIGH:g} mol/m^3 (pure O2 at 1 atm in water); if the solute is "
                f"oxygen, carriers must be modelled ({TRADE_TABLE}, 'O2 concentration')"
            )
    return warnings
