"""Flux face: the flux density into the body is ``value`` (amount/(m^2*s))."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from worker.engine.boundaries.base import BoundaryKind, Combine, DepletionRole
from worker.engine.parameters import Parameter

if TYPE_CHECKING:
    from worker.engine.model import Boundary


class FluxFace(BoundaryKind):
    name = "flux"
    noun = "a flux boundary"
    schema_name = "FluxBoundary"
    parameters = (Parameter("value", "flux", "any"),)
    residual_label = "flux"
    wording = "flux in {value}"
    wording_at_zero = "sealed (no flux)"

    def imposed_flux(self, boundary: Boundary) -> float | None:
        return boundary.value

    def is_sealed(self, boundary: Boundary) -> bool:
        return boundary.value == 0.0

    def fv_face(
        self, boundary: Boundary, side: str, k_face: float, area: float, gap: float,
        diffusivity: float,
    ) -> tuple[float, float, float]:
        return 0.0, 0.0, area * boundary.value

    def exact_row(
        self, boundary: Boundary, u_form: Any, flux_form: Any, inward: float, partition: float,
        face_partition: float, combine: Combine,
    ) -> tuple[Any, float]:
        terms, constant = combine(flux_form, signs=(inward,))
        return terms, boundary.value - constant

    def eigen_row(
        self, boundary: Boundary, outward: float, diffusivity: float, face_partition: float
    ) -> tuple[float, float, float]:
        # flux into the body = -J at the outer face, +J at the inner face, J = -D f'
        return 0.0, outward, boundary.value / diffusivity

    def bvp_residual(
        self, boundary: Boundary, c: float, flux: float, into: float, k_face: float,
        c_ref: float, j_ref: float,
    ) -> float:
        return into - boundary.value / j_ref

    def depletion_role(self, boundary: Boundary) -> DepletionRole:
        if boundary.value == 0.0:
            return "sealed"
        return "fed" if boundary.value > 0.0 else "other"

    def face_residual(
        self, boundary: Boundary, concentration: float, inflow: float, k_face: float
    ) -> float:
        return inflow - boundary.value

    def slab_live_depth(self, boundary: Boundary, q: float, d: float, k_face: float) -> float:
        """Q L = inflow."""
        return boundary.value / q


KIND = FluxFace()
