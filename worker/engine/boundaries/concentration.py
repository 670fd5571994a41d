"""Concentration face: the surface holds C = K_face * value (value = fluid concentration)."""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, Any

from worker.engine.boundaries.base import BoundaryKind, Combine, DepletionRole
from worker.engine.parameters import Parameter

if TYPE_CHECKING:
    from worker.engine.model import Boundary


class ConcentrationFace(BoundaryKind):
    name = "concentration"
    noun = "a concentration boundary"
    schema_name = "ConcentrationBoundary"
    parameters = (
        Parameter("value", "concentration", "non_negative"),
        Parameter("partition", None, "positive", required=False),
    )
    sets_level = True
    holds_concentration = True
    residual_label = "concentration"
    wording = "fluid at {value}"

    def fixes_level(self, boundary: Boundary) -> bool:
        return True

    def fluid_concentration(self, boundary: Boundary) -> float | None:
        return boundary.value

    def is_perfect_sink(self, boundary: Boundary) -> bool:
        return boundary.value == 0.0

    def fv_face(
        self, boundary: Boundary, side: str, k_face: float, area: float, gap: float,
        diffusivity: float,
    ) -> tuple[float, float, float]:
        return area * diffusivity / gap, k_face * boundary.value, 0.0

    def exact_row(
        self, boundary: Boundary, u_form: Any, flux_form: Any, inward: float, partition: float,
        face_partition: float, combine: Combine,
    ) -> tuple[Any, float]:
        # K u = K_face * C_fluid
        terms, constant = combine(u_form, signs=(partition,))
        return terms, face_partition * boundary.value - constant

    def eigen_row(
        self, boundary: Boundary, outward: float, diffusivity: float, face_partition: float
    ) -> tuple[float, float, float]:
        return 1.0, 0.0, face_partition * boundary.value

    def bvp_residual(
        self, boundary: Boundary, c: float, flux: float, into: float, k_face: float,
        c_ref: float, j_ref: float,
    ) -> float:
        return c - k_face * boundary.value / c_ref

    def depletion_role(self, boundary: Boundary) -> DepletionRole:
        return "fed" if boundary.value >= 0.0 else "other"

    def face_residual(
        self, boundary: Boundary, concentration: float, inflow: float, k_face: float
    ) -> float:
        return concentration - k_face * boundary.value

    def slab_live_depth(self, boundary: Boundary, q: float, d: float, k_face: float) -> float:
        """Q L^2 / (2 D) = K_face C_fluid."""
        return math.sqrt(2.0 * d * k_face * boundary.value / q)


KIND = ConcentrationFace()
