"""Symmetry face: zero flux (a mirror plane, or the centre of a solid cylinder or sphere)."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from worker.engine.boundaries.base import BoundaryKind, Combine, DepletionRole

if TYPE_CHECKING:
    from worker.engine.model import Boundary


class SymmetryFace(BoundaryKind):
    name = "symmetry"
    noun = "a symmetry boundary"
    schema_name = "SymmetryBoundary"
    residual_label = "symmetry"
    wording = "symmetry (no flux)"

    def is_sealed(self, boundary: Boundary) -> bool:
        return True

    def face_residual(
        self, boundary: Boundary, concentration: float, inflow: float, k_face: float
    ) -> float:
        return inflow

    def fv_face(
        self, boundary: Boundary, side: str, k_face: float, area: float, gap: float,
        diffusivity: float,
    ) -> tuple[float, float, float]:
        return 0.0, 0.0, 0.0

    def exact_row(
        self, boundary: Boundary, u_form: Any, flux_form: Any, inward: float, partition: float,
        face_partition: float, combine: Combine,
    ) -> tuple[Any, float]:
        terms, constant = combine(flux_form, signs=(inward,))
        return terms, 0.0 - constant

    def eigen_row(
        self, boundary: Boundary, outward: float, diffusivity: float, face_partition: float
    ) -> tuple[float, float, float]:
        return 0.0, outward, 0.0

    def bvp_residual(
        self, boundary: Boundary, c: float, flux: float, into: float, k_face: float,
        c_ref: float, j_ref: float,
    ) -> float:
        return flux

    def depletion_role(self, boundary: Boundary) -> DepletionRole:
        return "sealed"


KIND = SymmetryFace()
