"""What every boundary kind answers: its case fields and its face condition in the form each
solver takes it.

Conventions of ``worker.engine.model``: ``C`` is the material-side concentration, ``K_face`` the
face's partition coefficient against the fluid, flux ``J = -D dC/dr`` positive outward, boundary
fluxes are flux densities *into* the body (amount/(m^2*s)). A kind object holds no values: each
method takes the face's ``model.Boundary``.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import TYPE_CHECKING, Any, Literal

from worker.engine.parameters import Parameter

if TYPE_CHECKING:
    from worker.engine.model import Boundary

#: How a face takes part in the steady depletion solutions (``depletion_exact``).
DepletionRole = Literal["fed", "sealed", "other"]
#: The closed-form solver's linear-form combiner (``exact_steady.combine``).
Combine = Callable[..., tuple[Any, Any]]


class BoundaryKind:
    """Base of the boundary kinds; one subclass (and one instance) per kind."""

    #: The ``kind`` string of the case document.
    name: str = ""
    #: What it is, for messages (``"a flux boundary"``).
    noun: str = ""
    #: CamelCase name of its case schema (the JSON Schema definition is named after it).
    schema_name: str = ""
    #: Its case fields, in document order.
    parameters: tuple[Parameter, ...] = ()
    #: Whether a face of this kind can fix the steady level (the case rule on unique solutions).
    sets_level: bool = False
    #: The face holds the surface concentration itself: its condition's residual
    #: (``face_residual``) is a concentration, else a flux density.
    holds_concentration: bool = False
    #: What the face condition is called where its residual is reported (``"film"``).
    residual_label: str = ""
    #: Its condition in a few words for drawings: a ``str.format`` template over its
    #: dimensioned parameters, each given as ``"<number> <unit>"`` (``"flux in {value}"``).
    wording: str = ""
    #: The words for a face whose dimensioned parameters are all zero, where they differ.
    wording_at_zero: str | None = None
    #: The face only makes sense in time (a compartment): steady cases refuse it.
    transient_only: bool = False
    #: The face is a well-stirred fluid of finite volume whose level is one more unknown.
    finite_volume: bool = False
    #: The face is the wall of a lumen with flow along it (``flow``): solved by the lumen
    #: route (``worker.engine.lumen.run``), not by the radial solvers.
    lumen: bool = False

    def fixes_level(self, boundary: Boundary) -> bool:
        """True when this face fixes the steady level (a concentration or a live film)."""
        return False

    def fluid_concentration(self, boundary: Boundary) -> float | None:
        """The fluid-side concentration the face works against, None for flux-type faces."""
        return None

    def imposed_flux(self, boundary: Boundary) -> float | None:
        """The flux density into the body the face prescribes, None where it prescribes none."""
        return None

    def is_sealed(self, boundary: Boundary) -> bool:
        """True when no solute crosses the face."""
        return False

    def is_perfect_sink(self, boundary: Boundary) -> bool:
        """True when the face holds the surface at zero concentration."""
        return False

    def film_coefficient(self, boundary: Boundary) -> float | None:
        """The mass-transfer coefficient h (m/s) of the fluid film at the face, None without a
        film."""
        return None

    def face_residual(
        self, boundary: Boundary, concentration: float, inflow: float, k_face: float
    ) -> float:
        """Residual of the face condition at a solution's surface concentration (amount/m^3)
        and flux density into the body (amount/(m^2*s)): a concentration where the kind
        ``holds_concentration``, else a flux density."""
        raise NotImplementedError

    # forms of the face condition, one per solver ------------------------------------------------
    def fv_face(
        self, boundary: Boundary, side: str, k_face: float, area: float, gap: float,
        diffusivity: float,
    ) -> tuple[float, float, float]:
        """(conductance g, far value C_far, fixed flux into the body) of a finite-volume
        boundary face: the r^n-weighted inflow is ``g * (C_far - C_P) + fixed``; ``area`` is
        r^n at the face, ``gap`` the distance to the cell centre."""
        raise NotImplementedError

    def exact_row(
        self, boundary: Boundary, u_form: Any, flux_form: Any, inward: float, partition: float,
        face_partition: float, combine: Combine,
    ) -> tuple[Any, float]:
        """Row (coefficients by column, right-hand side) of the closed-form solver, from the
        linear forms of u = C/K and J at the face; ``inward`` is +1 at the inner face, -1 at
        the outer, ``partition`` the face layer's K."""
        raise NotImplementedError

    def eigen_row(
        self, boundary: Boundary, outward: float, diffusivity: float, face_partition: float
    ) -> tuple[float, float, float]:
        """(alpha, beta, gamma) of ``alpha f + beta f' = gamma`` for the eigenfunction series,
        flux rows divided by D; ``outward`` is +1 at the outer face, -1 at the inner."""
        raise NotImplementedError

    def laplace_row(
        self, boundary: Boundary, s: Any, outward: float, diffusivity: float,
        face_partition: float, weight: float, capacity: float,
    ) -> tuple[Any, float, Any]:
        """``(alpha, beta, gamma)`` of ``alpha C^ + beta C^' = gamma`` in the Laplace domain at
        complex ``s``: the eigen row with its constant data transformed (gamma / s);
        ``weight`` is r^n at the face, ``capacity`` a compartment's (see ``compartment``)."""
        alpha, beta, gamma = self.eigen_row(boundary, outward, diffusivity, face_partition)
        return alpha, beta, gamma / s

    def bvp_residual(
        self, boundary: Boundary, c: float, flux: float, into: float, k_face: float,
        c_ref: float, j_ref: float,
    ) -> float:
        """Scaled residual of the face condition for the boundary-value reference, from the
        scaled C, J and inflow at the face and the scales ``c_ref``, ``j_ref``."""
        raise NotImplementedError

    def depletion_role(self, boundary: Boundary) -> DepletionRole:
        """``fed``: supplies solute; ``sealed``: none crosses; ``other``: draws solute out."""
        return "other"

    def slab_live_depth(self, boundary: Boundary, q: float, d: float, k_face: float) -> float:
        """Depth (m) of the live zone of a zero-order slab fed through this face, in closed
        form, for consumption ``q`` and diffusivity ``d``."""
        raise NotImplementedError

    # screening ---------------------------------------------------------------------------------
    def plausibility_warnings(self, boundary: Boundary, side: str) -> list[str]:
        """Warnings for this face's parameters outside the screening ranges of the trade."""
        return []
