"""Michaelis-Menten consumption: R = vmax C / (km + C), vmax in amount/(m^3*s), km > 0 in the
concentration unit (Michaelis & Menten 1913; Aris 1975 for its diffusion-reaction problems)."""

from __future__ import annotations

from collections.abc import Callable
from typing import TYPE_CHECKING

import numpy as np

from worker.engine.parameters import Parameter
from worker.engine.reactions.base import ReactionKind
from worker.engine.screening import TRADE_TABLE, volumetric_rate_warnings

if TYPE_CHECKING:
    from worker.engine.model import Reaction

#: mol/m^3, Km(O2) of respiration (screening limit).
KM_HIGH_MOLAR = 0.05


class MichaelisMenten(ReactionKind):
    name = "michaelis_menten"
    noun = "a Michaelis-Menten reaction"
    schema_name = "MichaelisMenten"
    parameters = (
        Parameter("vmax", "volumetric_rate", "non_negative"),
        Parameter("km", "concentration", "positive"),
    )
    consumption_parameter = "vmax"
    saturable = True
    has_bracket = True
    label = "saturable uptake"

    def rate_at(self, reaction: Reaction, c: np.ndarray) -> np.ndarray:
        return reaction.vmax * c / (reaction.km + c)

    def derivative_at(self, reaction: Reaction, c: np.ndarray) -> np.ndarray:
        return reaction.vmax * reaction.km / (reaction.km + c) ** 2

    def fv_constants(self, reaction: Reaction, index: int) -> tuple[float, float, float, float]:
        if np.any(np.asarray(reaction.km) <= 0.0):  # km may be an array over trials
            raise ValueError(
                f"layers[{index}].reaction.km: expected a positive Michaelis constant, "
                f"got {reaction.km!r}"
            )
        return 0.0, reaction.vmax, reaction.km, 0.0

    def inverse_length(self, reaction: Reaction, diffusivity: float, c_scale: float) -> float:
        if reaction.km > 0.0:
            return float(np.sqrt(reaction.vmax / reaction.km / diffusivity))
        return 0.0

    def inverse_lengths(self, reaction: Reaction, diffusivity: np.ndarray,
                        c_scale: np.ndarray) -> np.ndarray:
        shape = np.broadcast(diffusivity, c_scale).shape
        km = np.broadcast_to(np.asarray(reaction.km, dtype=float), shape)
        vmax = np.broadcast_to(np.asarray(reaction.vmax, dtype=float), shape)
        positive = km > 0.0
        ratio = np.divide(vmax, km, out=np.zeros(shape), where=positive)
        return np.where(positive, np.sqrt(ratio / diffusivity), 0.0)

    def regularised_rate(
        self, reaction: Reaction, c: np.ndarray, scale: float, mode: str, smoothing: float
    ) -> tuple[np.ndarray, np.ndarray]:
        denominator = reaction.km + np.maximum(c, 0.0)
        rate = scale * reaction.vmax * np.maximum(c, 0.0) / denominator
        slope = np.where(c > 0.0, scale * reaction.vmax * reaction.km / denominator**2, 0.0)
        return rate, slope

    def thiele_rate_constant(
        self, reaction: Reaction, surface: Callable[[], float | None]
    ) -> float | None:
        """vmax / km, the first-order limit at low C."""
        return reaction.vmax / reaction.km

    def plausibility_warnings(self, reaction: Reaction, where: str, basis: str) -> list[str]:
        warnings = volumetric_rate_warnings(reaction.vmax, where, basis)
        if basis == "molar" and reaction.km > KM_HIGH_MOLAR:
            warnings.append(
                f"{where}: km {reaction.km:.3g} mol/m^3 exceeds {KM_HIGH_MOLAR:g} mol/m^3, the "
                f"screening limit for Km(O2) of respiration ({TRADE_TABLE}, 'Km(O2)'); "
                "applies if the solute is oxygen"
            )
        return warnings


KIND = MichaelisMenten()
