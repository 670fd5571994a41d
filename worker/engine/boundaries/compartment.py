"""Compartment face: a well-stirred fluid of finite volume (a release medium, a donor or a
receptor) at the face, with optional partition and first-order clearance.

The fluid's concentration C_f is uniform (perfect stirring) and the surface of the body holds
C = K_face * C_f; the compartment's own balance is

    V dC_f/dt = A_face * J_out - V * clearance * C_f,

with ``J_out`` the flux density out of the body through the face and ``A_face`` the face area
(slab: the problem's ``area``; cylinder: 2 pi r_face ``length``; sphere: 4 pi r_face^2).
This is the "stirred solution of limited volume" of J. Crank, *The Mathematics of Diffusion*,
2nd ed., Oxford, 1975, §§4.3.5, 5.3.4, 6.3.4, with a first-order loss term added.

The face has no steady state of its own (its level follows the body), so it is for transient
cases only; in the solvers it is a concentration face whose fluid level is one more unknown
(the method of lines: one more state; the Laplace route: a Robin row whose coefficients depend
on s). Its form per solver:

* finite volumes (``fv_face``): the concentration face at the compartment's *starting* level;
  the method of lines replaces that level by its state (``method_of_lines``);
* Laplace domain (``laplace_row``): with capacity ``W`` (the compartment volume per measure,
  r^n-weighted, :func:`capacity`) and face weight ``w = r_face^n``, the transformed balance
  ``W (s + clearance) C^/K_face - W C_f(0) = w J^_out`` as ``alpha C^ + beta C^' = gamma``.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, Any

import numpy as np

from worker.engine.boundaries.base import BoundaryKind, Combine, DepletionRole
from worker.engine.parameters import Parameter

if TYPE_CHECKING:
    from worker.engine.model import Boundary, Problem


class CompartmentFace(BoundaryKind):
    name = "compartment"
    noun = "a compartment boundary"
    schema_name = "CompartmentBoundary"
    parameters = (
        Parameter("volume", "volume", "positive"),
        Parameter("initial", "concentration", "non_negative", required=False),
        Parameter("partition", None, "positive", required=False),
        Parameter("clearance", "rate_constant", "non_negative", required=False),
    )
    transient_only = True
    finite_volume = True
    residual_label = "compartment"
    wording = "stirred compartment of {volume}, starting at {initial}"

    def fluid_concentration(self, boundary: Boundary) -> float | None:
        return boundary.initial

    def fv_face(
        self, boundary: Boundary, side: str, k_face: float, area: float, gap: float,
        diffusivity: float,
    ) -> tuple[float, float, float]:
        # the concentration face at the compartment's starting level; the method of lines
        # couples the level itself (one more state per compartment)
        return area * diffusivity / gap, k_face * boundary.initial, 0.0

    def face_residual(
        self, boundary: Boundary, concentration: float, inflow: float, k_face: float
    ) -> float:
        raise NotImplementedError("a compartment face has a level that changes in time")

    def exact_row(
        self, boundary: Boundary, u_form: Any, flux_form: Any, inward: float, partition: float,
        face_partition: float, combine: Combine,
    ) -> tuple[Any, float]:
        raise NotImplementedError("a compartment face has no steady closed form")

    def eigen_row(
        self, boundary: Boundary, outward: float, diffusivity: float, face_partition: float
    ) -> tuple[float, float, float]:
        raise NotImplementedError("a compartment face has no s-independent Robin form")

    def laplace_row(
        self, boundary: Boundary, s: np.ndarray, outward: float, diffusivity: float,
        face_partition: float, weight: float, capacity: float,
    ) -> tuple[Any, float, Any]:
        """``alpha C^ + beta C^' = gamma`` at the face in the Laplace domain (divided by
        ``weight * diffusivity``): W (s + k_c) C^/K_face + outward w D C^' = W C_f(0), from the
        transformed balance with J_out = -outward D C^' (outward: +1 outer, -1 inner)."""
        scale = capacity / (weight * diffusivity)
        alpha = scale * (np.asarray(s) + boundary.clearance) / face_partition
        gamma = scale * boundary.initial * np.ones_like(alpha)
        return alpha, outward, gamma

    def bvp_residual(
        self, boundary: Boundary, c: float, flux: float, into: float, k_face: float,
        c_ref: float, j_ref: float,
    ) -> float:
        raise NotImplementedError("a compartment face has no steady boundary-value form")

    def depletion_role(self, boundary: Boundary) -> DepletionRole:
        return "other"

    def slab_live_depth(self, boundary: Boundary, q: float, d: float, k_face: float) -> float:
        raise NotImplementedError("a compartment face has no steady closed form")


KIND = CompartmentFace()


def face_area_per_measure(problem: Problem, side: str) -> float:
    """What one unit of the record's measure holds of the compartment's face: the slab's
    ``area`` (m^2), the cylinder's ``length`` (m), 1 for a sphere; ValueError naming the field
    where the case lacks it."""
    if problem.geometry == "slab":
        if problem.area is None or not problem.area > 0.0:
            raise ValueError(f"area: a slab with a compartment at its {side} face needs the "
                             f"face area (a positive area), got {problem.area!r}")
        return float(problem.area)
    if problem.geometry == "cylinder":
        if problem.length is None or not problem.length > 0.0:
            raise ValueError(f"length: a cylinder with a compartment at its {side} face needs "
                             f"its length (a positive length), got {problem.length!r}")
        return float(problem.length)
    return 1.0


def capacity(problem: Problem, side: str) -> float:
    """The compartment's volume per measure in the solvers' r^n-weighted units (m^(n+1)):
    V / (area_or_length * measure factor), so that ``capacity * dC_f/dt`` balances the
    r^n-weighted flux ``r^n J`` through the face (slab: V/A; cylinder: V/(2 pi L); sphere:
    V/(4 pi)). ValueError naming the field for a bad volume, initial level or clearance."""
    boundary = problem.inner_boundary if side == "inner" else problem.outer_boundary
    if not (math.isfinite(boundary.volume) and boundary.volume > 0.0):
        raise ValueError(f"{side}_boundary.volume: expected a positive volume in m^3, got "
                         f"{boundary.volume!r}")
    for name in ("initial", "clearance"):
        value = getattr(boundary, name)
        if not (math.isfinite(value) and value >= 0.0):
            raise ValueError(f"{side}_boundary.{name}: expected a finite value >= 0, got "
                             f"{value!r}")
    if side == "inner" and problem.solid_centre:
        raise ValueError("inner_boundary.kind: the centre of a solid cylinder or sphere cannot "
                         "be a compartment (expected symmetry)")
    return boundary.volume / (face_area_per_measure(problem, side) * problem.measure_factor)


def compartment_sides(problem: Problem) -> list[str]:
    """The faces (``"inner"``, ``"outer"``) that are compartments."""
    return [side for side, b in (("inner", problem.inner_boundary),
                                 ("outer", problem.outer_boundary))
            if getattr(b.condition, "finite_volume", False)]
