"""First-order consumption: R(C) = k C, k = ``rate_constant`` in 1/s (Crank 1975, ch. 14)."""

from __future__ import annotations

from collections.abc import Callable
from typing import TYPE_CHECKING

import numpy as np

from worker.engine.parameters import Parameter
from worker.engine.reactions.base import ReactionKind
from worker.engine.screening import TRADE_TABLE, outside

if TYPE_CHECKING:
    from worker.engine.model import Reaction

#: 1/s, drug elimination or degradation (screening range).
FIRST_ORDER_RANGE = (1e-7, 1e-2)


class FirstOrder(ReactionKind):
    name = "first_order"
    noun = "a first-order reaction"
    schema_name = "FirstOrder"
    parameters = (Parameter("rate_constant", "rate_constant", "non_negative"),)
    consumption_parameter = "rate_constant"
    is_linear = True
    label = "first-order uptake"

    def rate_at(self, reaction: Reaction, c: np.ndarray) -> np.ndarray:
        return reaction.rate_constant * c

    def derivative_at(self, reaction: Reaction, c: np.ndarray) -> np.ndarray:
        return np.full_like(c, reaction.rate_constant)

    def linear_rate_constant(self, reaction: Reaction) -> float | None:
        return reaction.rate_constant

    def exact_coefficients(self, reaction: Reaction) -> tuple[float, float] | None:
        return reaction.rate_constant, 0.0

    def fixes_level(self, reaction: Reaction) -> bool:
        return reaction.rate_constant > 0.0

    def fv_constants(self, reaction: Reaction, index: int) -> tuple[float, float, float, float]:
        return reaction.rate_constant, 0.0, 0.0, 0.0

    def inverse_length(self, reaction: Reaction, diffusivity: float, c_scale: float) -> float:
        return float(np.sqrt(reaction.rate_constant / diffusivity))

    def inverse_lengths(self, reaction: Reaction, diffusivity: np.ndarray,
                        c_scale: np.ndarray) -> np.ndarray:
        k = np.broadcast_to(reaction.rate_constant, np.broadcast(diffusivity, c_scale).shape)
        return np.sqrt(k / diffusivity)

    def regularised_rate(
        self, reaction: Reaction, c: np.ndarray, scale: float, mode: str, smoothing: float
    ) -> tuple[np.ndarray, np.ndarray]:
        k = scale * reaction.rate_constant
        return k * c, np.full_like(c, k)

    def thiele_rate_constant(
        self, reaction: Reaction, surface: Callable[[], float | None]
    ) -> float | None:
        return reaction.rate_constant

    def plausibility_warnings(self, reaction: Reaction, where: str, basis: str) -> list[str]:
        if not outside(reaction.rate_constant, *FIRST_ORDER_RANGE):
            return []
        return [
            f"{where}: first-order rate constant {reaction.rate_constant:.3g} 1/s is outside "
            f"{FIRST_ORDER_RANGE[0]:g}–{FIRST_ORDER_RANGE[1]:g} 1/s "
            f"({TRADE_TABLE}, 'first-order rate constant')"
        ]


KIND = FirstOrder()
