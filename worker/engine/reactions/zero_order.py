"""Zero-order consumption: R = Q (``rate``, amount/(m^3*s)) while C > 0, else 0.

The solute can run out: a depleted zone with a free front forms (A.V. Hill, Proc. R. Soc. B 104
(1928) 39; Crank 1975, ch. 13).
"""

from __future__ import annotations

from collections.abc import Callable
from typing import TYPE_CHECKING

import numpy as np

from worker.engine.parameters import Parameter
from worker.engine.reactions.base import ReactionKind
from worker.engine.screening import volumetric_rate_warnings

if TYPE_CHECKING:
    from worker.engine.model import Reaction


class ZeroOrder(ReactionKind):
    name = "zero_order"
    noun = "a zero-order reaction"
    schema_name = "ZeroOrder"
    parameters = (Parameter("rate", "volumetric_rate", "non_negative"),)
    consumption_parameter = "rate"
    depletes = True
    label = "zero-order uptake"

    def rate_at(self, reaction: Reaction, c: np.ndarray) -> np.ndarray:
        return np.where(c > 0.0, reaction.rate, 0.0)

    def derivative_at(self, reaction: Reaction, c: np.ndarray) -> np.ndarray:
        return np.zeros_like(c)

    def exact_coefficients(self, reaction: Reaction) -> tuple[float, float] | None:
        return 0.0, reaction.rate

    def fv_constants(self, reaction: Reaction, index: int) -> tuple[float, float, float, float]:
        return 0.0, 0.0, 0.0, reaction.rate

    def inverse_length(self, reaction: Reaction, diffusivity: float, c_scale: float) -> float:
        if reaction.rate > 0.0 and c_scale > 0.0:
            return float(np.sqrt(reaction.rate / (2.0 * diffusivity * c_scale)))
        return 0.0

    def inverse_lengths(self, reaction: Reaction, diffusivity: np.ndarray,
                        c_scale: np.ndarray) -> np.ndarray:
        shape = np.broadcast(diffusivity, c_scale).shape
        rate = np.broadcast_to(np.asarray(reaction.rate, dtype=float), shape)
        scale = np.broadcast_to(np.asarray(c_scale, dtype=float), shape)
        live = (rate > 0.0) & (scale > 0.0)
        ratio = np.divide(rate, 2.0 * diffusivity * scale, out=np.zeros(shape), where=live)
        return np.where(live, np.sqrt(ratio), 0.0)

    def regularised_rate(
        self, reaction: Reaction, c: np.ndarray, scale: float, mode: str, smoothing: float
    ) -> tuple[np.ndarray, np.ndarray]:
        """``live``: Q everywhere; ``exact``: Q where C > 0; ``smoothed``: Q C/(C + eps),
        continued as Q C/eps for C < 0 (C^1 across C = 0), eps = ``smoothing``."""
        q = scale * reaction.rate
        if mode == "live":
            return np.full_like(c, q), np.zeros_like(c)
        if mode == "exact":
            return np.where(c > 0.0, q, 0.0), np.zeros_like(c)
        denominator = np.maximum(c, 0.0) + smoothing
        return q * c / denominator, q * smoothing / denominator**2

    def thiele_rate_constant(
        self, reaction: Reaction, surface: Callable[[], float | None]
    ) -> float | None:
        """Q / Cs, Cs the largest surface concentration (None when no face imposes one)."""
        cs = surface()
        if cs is None or cs <= 0.0:
            return None
        return reaction.rate / cs

    def plausibility_warnings(self, reaction: Reaction, where: str, basis: str) -> list[str]:
        return volumetric_rate_warnings(reaction.rate, where, basis)


KIND = ZeroOrder()
