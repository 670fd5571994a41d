"""Mass-transfer face: flux into the body = coefficient * (bulk - C_surface / K_face), a film of
coefficient h (m/s) against fluid at ``bulk`` (Bird, Stewart & Lightfoot 2002, §22.1)."""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, Any

import numpy as np

from worker.engine.boundaries.base import BoundaryKind, Combine, DepletionRole
from worker.engine.parameters import Parameter
from worker.engine.screening import TRADE_TABLE, outside

if TYPE_CHECKING:
    from worker.engine.model import Boundary

#: m/s, liquid-side coefficients (screening range).
MASS_TRANSFER_RANGE = (1e-7, 1e-3)


class MassTransferFace(BoundaryKind):
    name = "mass_transfer"
    noun = "a mass_transfer boundary"
    schema_name = "MassTransferBoundary"
    parameters = (
        Parameter("coefficient", "velocity", "positive"),
        Parameter("bulk", "concentration", "non_negative"),
        Parameter("partition", None, "positive", required=False),
    )
    sets_level = True
    residual_label = "film"
    wording = "film k = {coefficient}, bulk {bulk}"

    def fixes_level(self, boundary: Boundary) -> bool:
        return boundary.coefficient > 0.0

    def fluid_concentration(self, boundary: Boundary) -> float | None:
        return boundary.bulk

    def is_sealed(self, boundary: Boundary) -> bool:
        return boundary.coefficient == 0.0

    def film_coefficient(self, boundary: Boundary) -> float | None:
        return boundary.coefficient

    def fv_face(
        self, boundary: Boundary, side: str, k_face: float, area: float, gap: float,
        diffusivity: float,
    ) -> tuple[float, float, float]:
        if np.any(np.asarray(boundary.coefficient) <= 0.0):  # may be an array over trials
            raise ValueError(
                f"{side}_boundary.coefficient: expected a positive mass-transfer coefficient "
                f"(m/s), got {boundary.coefficient!r}"
            )
        conductance = area / (k_face / boundary.coefficient + gap / diffusivity)
        return conductance, k_face * boundary.bulk, 0.0

    def exact_row(
        self, boundary: Boundary, u_form: Any, flux_form: Any, inward: float, partition: float,
        face_partition: float, combine: Combine,
    ) -> tuple[Any, float]:
        # inflow + (h/K_face) K u = h * bulk
        h = boundary.coefficient
        terms, constant = combine(flux_form, u_form, signs=(inward, h * partition / face_partition))
        return terms, h * boundary.bulk - constant

    def eigen_row(
        self, boundary: Boundary, outward: float, diffusivity: float, face_partition: float
    ) -> tuple[float, float, float]:
        h = boundary.coefficient
        return h / (face_partition * diffusivity), outward, h * boundary.bulk / diffusivity

    def bvp_residual(
        self, boundary: Boundary, c: float, flux: float, into: float, k_face: float,
        c_ref: float, j_ref: float,
    ) -> float:
        film = boundary.coefficient * c_ref / j_ref
        return into - film * (boundary.bulk / c_ref - c / k_face)

    def depletion_role(self, boundary: Boundary) -> DepletionRole:
        if boundary.coefficient == 0.0:
            return "sealed"
        return "fed" if boundary.bulk >= 0.0 else "other"

    def face_residual(
        self, boundary: Boundary, concentration: float, inflow: float, k_face: float
    ) -> float:
        return inflow - boundary.coefficient * (boundary.bulk - concentration / k_face)

    def slab_live_depth(self, boundary: Boundary, q: float, d: float, k_face: float) -> float:
        """Q L^2/(2D) = K (bulk - Q L/h): the positive root in cancellation-free form."""
        linear = k_face * q / boundary.coefficient
        return 2.0 * k_face * boundary.bulk / (linear + math.sqrt(linear**2
                                                                   + 2.0 * q * k_face
                                                                   * boundary.bulk / d))

    def plausibility_warnings(self, boundary: Boundary, side: str) -> list[str]:
        if not outside(boundary.coefficient, *MASS_TRANSFER_RANGE):
            return []
        return [
            f"{side}_boundary: mass-transfer coefficient {boundary.coefficient:.3g} m/s is "
            f"outside {MASS_TRANSFER_RANGE[0]:g}–{MASS_TRANSFER_RANGE[1]:g} m/s "
            f"({TRADE_TABLE}, 'fluid-side mass-transfer coefficient')"
        ]


KIND = MassTransferFace()
