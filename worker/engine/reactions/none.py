"""No reaction: R(C) = 0."""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from worker.engine.reactions.base import ReactionKind

if TYPE_CHECKING:
    from worker.engine.model import Reaction


class NoReaction(ReactionKind):
    name = "none"
    noun = "reaction 'none'"
    schema_name = "NoReaction"
    is_linear = True

    def rate_at(self, reaction: Reaction, c: np.ndarray) -> np.ndarray:
        return np.zeros_like(c)

    def derivative_at(self, reaction: Reaction, c: np.ndarray) -> np.ndarray:
        return np.zeros_like(c)

    def linear_rate_constant(self, reaction: Reaction) -> float | None:
        return 0.0

    def exact_coefficients(self, reaction: Reaction) -> tuple[float, float] | None:
        return 0.0, 0.0

    def regularised_rate(
        self, reaction: Reaction, c: np.ndarray, scale: float, mode: str, smoothing: float
    ) -> tuple[np.ndarray, np.ndarray]:
        return np.zeros_like(c), np.zeros_like(c)


KIND = NoReaction()
