"""The reaction regime notes of a record (warnings that never change the verdict): a large
Thiele modulus, and for Michaelis-Menten layers the regime the solution is actually in.

The record's ``thiele_modulus`` is built on vmax/km for a Michaelis-Menten layer (the contract):
that is the first-order limit at C << km. Where the layer is fed at C >> km the consumption is
close to zero order and that modulus overstates how reaction-limited the layer is, so the note
of a Michaelis-Menten layer is built on the concentration at its fed face in the solution:
the effective first-order constant vmax/(km + Cs) and the generalised Thiele modulus
(:func:`worker.engine.reaction_measures.generalised_modulus`).
"""

from __future__ import annotations

from collections.abc import Sequence

from worker.engine import exact_steady
from worker.engine.model import Problem
from worker.engine.reaction_measures import michaelis_menten_regime

#: A Thiele modulus (or generalised modulus) above this marks a reaction-limited layer: the
#: effectiveness factor is then about 1/phi or less (common practice).
THIELE_LARGE = 3.0

__all__ = ["THIELE_LARGE", "thiele_notes"]


def thiele_notes(problem: Problem, fed_levels: Sequence[float | None],
                 when: str = "") -> list[str]:
    """The Thiele notes of every reacting layer.

    Parameters
    ----------
    problem : Problem
        The case.
    fed_levels : sequence of float or None
        Per layer, the solution's concentration at its fed face (amount/m^3): the larger of
        its two end values, since a consuming layer has no interior maximum (maximum principle:
        div(D grad C) = R >= 0). Only Michaelis-Menten layers read it; None where unknown.
    when : str
        Which solution the levels come from, for the wording (``" at t = 3600 s"``).
    """
    notes = []
    for index, layer in enumerate(problem.layers):
        phi = exact_steady.thiele_modulus(layer, problem)
        where = f"layers[{index}] ({layer.name})"
        level = fed_levels[index] if index < len(fed_levels) else None
        if layer.reaction.kind == "michaelis_menten" and level is not None and phi is not None:
            regime = michaelis_menten_regime(layer, level)
            modulus = regime.modulus
            if phi <= THIELE_LARGE and modulus <= THIELE_LARGE:
                continue
            described = {
                "saturated": "saturated, close to zero order",
                "mixed": "between first and zero order",
                "first-order-like": "close to first order",
            }[regime.regime]
            text = (f"{where}: Michaelis-Menten fed at C = {regime.surface:.4g}{when} "
                    f"(C/km = {regime.saturation:.3g}: {described}); effective first-order "
                    f"constant vmax/(km + C) = {regime.effective_rate_constant:.4g} 1/s, "
                    f"generalised Thiele modulus {modulus:.3g} (Bischoff 1965; Aris 1975)")
            if modulus > THIELE_LARGE:
                text += (f" > {THIELE_LARGE:g}: reaction-limited, the solute is consumed within "
                         "about thickness/modulus of the fed face and the interior sees little "
                         "of it (common practice)")
            else:
                text += (f" <= {THIELE_LARGE:g}: not reaction-limited; the record's "
                         f"thiele_modulus {phi:.3g} is built on vmax/km, the limit at C << km, "
                         "and overstates it here")
            notes.append(text)
            continue
        if phi is not None and phi > THIELE_LARGE:
            notes.append(
                f"{where}: Thiele modulus {phi:.3g} > {THIELE_LARGE:g}: "
                "reaction-limited, the solute is consumed within about thickness/phi of the fed "
                "face and the interior sees little of it (common practice)")
    return notes
