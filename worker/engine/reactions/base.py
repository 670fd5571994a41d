"""What every reaction kind answers: its case fields and its rate law R(C), with the forms the
solvers take it in.

Rates are consumption in amount/(m^3*s) (``R >= 0`` removes solute), rate constants in 1/s,
concentrations in the layer's basis (mol/m^3 or kg/m^3). A kind object holds no parameter
values: each method takes the layer's ``model.Reaction``, whose fields carry them by name.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import TYPE_CHECKING

import numpy as np

from worker.engine.parameters import Parameter

if TYPE_CHECKING:
    from worker.engine.model import Reaction

class ReactionKind:
    """Base of the reaction kinds; one subclass (and one instance) per kind."""

    #: The ``kind`` string of the case document.
    name: str = ""
    #: What it is, for messages (``"a zero-order reaction"``).
    noun: str = ""
    #: CamelCase name of its case schema (the JSON Schema definition is named after it).
    schema_name: str = ""
    #: Its case fields, in document order.
    parameters: tuple[Parameter, ...] = ()
    #: The parameter whose positive value means the layer consumes solute (None: never).
    consumption_parameter: str | None = None
    #: R(C) = k*C everywhere (for the exact linear solutions and the eigenfunction series).
    is_linear: bool = False
    #: R(C) drops to zero at C = 0 while it is positive just above: a depleted (dead) zone can
    #: form, whose front is a free boundary.
    depletes: bool = False
    #: R(C) saturates (the kinetics of cell respiration): the oxygen screening ranges apply.
    saturable: bool = False
    #: The maximum principle gives two comparison solutions bracketing the solution
    #: (``worker.engine.mm_bracket``): the steady check verifies the solution lies between them.
    has_bracket: bool = False
    #: A few words for drawings and reports (``"first-order uptake"``); empty: nothing to say.
    label: str = ""

    @property
    def reacts(self) -> bool:
        """False only for the kind that consumes nothing whatever its parameters."""
        return self.consumption_parameter is not None

    # rate law ----------------------------------------------------------------------------------
    def rate_at(self, reaction: Reaction, c: np.ndarray) -> np.ndarray:
        """R(C) in amount/(m^3*s) at concentrations ``c`` (a float array)."""
        raise NotImplementedError

    def derivative_at(self, reaction: Reaction, c: np.ndarray) -> np.ndarray:
        """dR/dC in 1/s at concentrations ``c`` (a float array)."""
        raise NotImplementedError

    def linear_rate_constant(self, reaction: Reaction) -> float | None:
        """k in R = k*C for the linear kinds, else None."""
        return None

    def exact_coefficients(self, reaction: Reaction) -> tuple[float, float] | None:
        """(k in 1/s, Q in amount/(m^3*s)) with R = k*C + Q while C > 0, for the closed-form
        steady solutions; None when R has no such form (no closed form)."""
        return None

    def fixes_level(self, reaction: Reaction) -> bool:
        """True when the uptake alone fixes a steady level (R grows with C, k > 0)."""
        return False

    # finite volumes and the boundary-value reference -------------------------------------------
    def fv_constants(self, reaction: Reaction, index: int) -> tuple[float, float, float, float]:
        """(first-order k, vmax, km, zero-order Q) for the finite-volume reaction terms, 0 where
        the kind has no such term; ``index`` names the layer in errors."""
        return 0.0, 0.0, 0.0, 0.0

    def inverse_length(self, reaction: Reaction, diffusivity: float, c_scale: float) -> float:
        """Inverse reaction-diffusion length sqrt(k/D) in 1/m (0: no such length), used to size
        the cells; ``c_scale`` is the largest concentration a face fixes."""
        return 0.0

    def inverse_lengths(self, reaction: Reaction, diffusivity: np.ndarray,
                        c_scale: np.ndarray) -> np.ndarray:
        """``inverse_length`` for many trials at once: ``diffusivity``, ``c_scale`` and the
        reaction's fields may be arrays over trials (broadcast); 1/m."""
        return np.zeros(np.broadcast(diffusivity, c_scale).shape)

    def regularised_rate(
        self, reaction: Reaction, c: np.ndarray, scale: float, mode: str, smoothing: float
    ) -> tuple[np.ndarray, np.ndarray]:
        """(R, dR/dC) scaled by ``scale`` for the boundary-value reference, with no consumption
        where C <= 0; ``mode`` and ``smoothing`` (amount/m^3) only matter to depleting kinds."""
        raise NotImplementedError

    # measures and screening --------------------------------------------------------------------
    def thiele_rate_constant(
        self, reaction: Reaction, surface: Callable[[], float | None]
    ) -> float | None:
        """The k (1/s) of the Thiele modulus ``L sqrt(k/D)``, None where it has none;
        ``surface()`` gives the largest surface concentration in the layer (or None)."""
        return None

    def plausibility_warnings(self, reaction: Reaction, where: str, basis: str) -> list[str]:
        """Warnings for parameters outside the screening ranges of the trade."""
        return []
