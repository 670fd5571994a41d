"""The normalised transport problem every solver works on.

All values are SI: positions and thicknesses in m, diffusivities in m^2/s, concentrations in
mol/m^3 (molar basis) or kg/m^3 (mass basis), flux densities in amount/(m^2*s), reaction rates in
amount/(m^3*s), rate constants in 1/s, mass-transfer coefficients in m/s, times in s.

Conventions (those the README states for the case document and the record):

* Position ``r`` is x for a slab and the radius for a cylinder or sphere; the geometric exponent
  ``n`` is 0, 1, 2 so that the shell balance reads ``(1/r^n) d/dr(r^n D dC/dr) = R(C)``.
* ``C`` is always the material-side concentration in the layer. A layer's ``partition`` K is its
  equilibrium coefficient against the reference fluid (``C_layer = K * C_fluid``); at an interface
  ``C_a/K_a = C_b/K_b`` and the flux is continuous.
* Flux ``J = -D dC/dr`` is positive outward (direction of increasing r).
* Boundary ``flux`` values and ``mass_transfer`` fluxes are flux densities *into* the body.
* Reactions are consumption: ``R(C) >= 0`` removes solute.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from functools import cached_property
from types import MappingProxyType

import numpy as np

from worker.engine.boundaries import BoundaryKind, boundary_kind
from worker.engine.reactions import ReactionKind, reaction_kind

GEOMETRY_EXPONENT: Mapping[str, int] = MappingProxyType({"slab": 0, "cylinder": 1, "sphere": 2})


@dataclass(frozen=True)
class Reaction:
    """Volumetric consumption ``R(C)`` in amount/(m^3*s): the kind's parameters by name.

    kind ``none``: R = 0; ``zero_order``: R = rate while C > 0, else 0;
    ``first_order``: R = rate_constant * C; ``michaelis_menten``: R = vmax * C / (km + C).
    The rate law itself is the kind object ``law`` (``worker.engine.reactions``).
    """

    kind: str = "none"
    rate: float = 0.0
    rate_constant: float = 0.0
    vmax: float = 0.0
    km: float = 0.0

    @property
    def law(self) -> ReactionKind:
        """The kind object of ``worker.engine.reactions`` (ValueError for an unknown kind)."""
        return reaction_kind(self.kind)

    @property
    def is_linear(self) -> bool:
        """True when R(C) = k*C everywhere (none, first order)."""
        return self.law.is_linear

    @property
    def reacts(self) -> bool:
        return self.law.reacts

    def rate_at(self, c: np.ndarray) -> np.ndarray:
        """Consumption rate R(C) in amount/(m^3*s); C <= 0 consumes nothing for zero order."""
        return self.law.rate_at(self, np.asarray(c, dtype=float))

    def derivative_at(self, c: np.ndarray) -> np.ndarray:
        """dR/dC in 1/s (zero for zero order away from C = 0)."""
        return self.law.derivative_at(self, np.asarray(c, dtype=float))

    @property
    def linear_rate_constant(self) -> float | None:
        """k in R = k*C for the kinds where that holds (none: 0), else None."""
        return self.law.linear_rate_constant(self)


@dataclass(frozen=True)
class Layer:
    """One homogeneous layer, listed inner to outer.

    ``initial`` is the solute per volume of layer at t = 0, dissolved and undissolved together
    (the case's ``initial`` or ``loading``). ``solubility`` is the saturation concentration of
    the dissolved solute in the layer (material side), None for no limit: wherever a layer's
    solute content exceeds its solubility the dissolved part is the solubility and the excess
    is undissolved (dispersed) solute, which does not diffuse and dissolves as the dissolved
    level falls below saturation (T. Higuchi, J. Pharm. Sci. 50 (1961) 874).
    """

    name: str
    thickness: float
    diffusivity: float
    partition: float = 1.0
    reaction: Reaction = field(default_factory=Reaction)
    initial: float = 0.0
    solubility: float | None = None

    @property
    def dissolved_initial(self) -> float:
        """Dissolved concentration at t = 0: ``initial`` capped at the solubility."""
        return self.initial if self.solubility is None else min(self.initial, self.solubility)

    @property
    def is_loaded_above_solubility(self) -> bool:
        """True when the layer starts with undissolved solute."""
        return self.solubility is not None and self.initial > self.solubility


@dataclass(frozen=True)
class Boundary:
    """A face condition.

    kind ``concentration``: surface C = K_face * value (value = fluid concentration);
    ``flux``: flux density *into* the body = value; ``mass_transfer``: flux into the body =
    coefficient * (bulk - C_surface / K_face); ``symmetry``: zero flux; ``compartment``: a
    well-stirred fluid of ``volume`` (m^3) starting at concentration ``initial``, surface
    C = K_face * C_compartment, first-order ``clearance`` (1/s) removing solute from the fluid
    (a slab's compartment serves the problem's ``area``, a cylinder's its ``length``);
    ``flow``: the lumen of radius ``inner`` carries laminar flow of ``flow_rate`` (m^3/s),
    entering at ``inlet``, the solute's ``diffusivity`` in the fluid (m^2/s) (inner face only).
    ``partition`` overrides K_face (default: the partition of the layer at that face).
    The condition itself is the kind object ``condition`` (``worker.engine.boundaries``).
    """

    kind: str
    value: float = 0.0
    coefficient: float = 0.0
    bulk: float = 0.0
    partition: float | None = None
    volume: float = 0.0
    initial: float = 0.0
    clearance: float = 0.0
    flow_rate: float = 0.0
    inlet: float = 0.0
    diffusivity: float = 0.0

    @property
    def condition(self) -> BoundaryKind:
        """The kind object of ``worker.engine.boundaries`` (ValueError for an unknown kind)."""
        return boundary_kind(self.kind)


@dataclass(frozen=True)
class Regime:
    kind: str = "steady"
    duration: float | None = None
    times: tuple[float, ...] = ()


@dataclass(frozen=True)
class Problem:
    """A transport case in SI, as the solvers see it."""

    geometry: str
    inner: float
    layers: tuple[Layer, ...]
    inner_boundary: Boundary
    outer_boundary: Boundary
    regime: Regime = field(default_factory=Regime)
    probes: tuple[float, ...] = ()
    length: float | None = None
    area: float | None = None
    tolerances: Mapping[str, float] = field(default_factory=dict)
    basis: str = "molar"

    @property
    def exponent(self) -> int:
        """Geometric exponent n: 0 slab, 1 cylinder, 2 sphere."""
        return GEOMETRY_EXPONENT[self.geometry]

    @cached_property
    def edges(self) -> np.ndarray:
        """Positions of the inner face, every interface and the outer face, in m (read-only)."""
        positions = [self.inner]
        for layer in self.layers:
            positions.append(positions[-1] + layer.thickness)
        edges = np.array(positions)
        edges.flags.writeable = False
        return edges

    @cached_property
    def outer(self) -> float:
        return float(self.edges[-1])

    @property
    def total_thickness(self) -> float:
        return float(sum(ly.thickness for ly in self.layers))

    @property
    def solid_centre(self) -> bool:
        """True for a solid cylinder or sphere (inner = 0), whose centre is a symmetry point."""
        return self.geometry != "slab" and self.inner == 0.0

    @property
    def is_linear(self) -> bool:
        """True when every layer's reaction is linear and no solubility can ever be reached
        (:attr:`can_saturate`): then the transport equations are linear."""
        return all(ly.reaction.is_linear for ly in self.layers) and not self.can_saturate

    @property
    def can_saturate(self) -> bool:
        """True when some layer's dissolved solute can reach that layer's solubility.

        With linear kinetics and no sources the largest fluid-equivalent level u = C/K over
        the body never exceeds its largest initial or boundary value (the maximum principle
        for parabolic equations: M.H. Protter, H.F. Weinberger, *Maximum Principles in
        Differential Equations*, 1967, ch. 3); a layer with solubility S is never saturated
        when K * max(u) <= S. A layer loaded above its solubility saturates at once; a face
        that imposes an inflow is a source, and then any layer with a solubility counts as
        able to saturate.
        """
        limited = [ly for ly in self.layers if ly.solubility is not None]
        if not limited:
            return False
        levels = [ly.initial / ly.partition for ly in self.layers]
        for boundary in (self.inner_boundary, self.outer_boundary):
            inflow = boundary.condition.imposed_flux(boundary)
            if inflow is not None and inflow > 0.0:
                return True  # a source: no maximum principle
            fluid = boundary.condition.fluid_concentration(boundary)
            if fluid is not None:
                levels.append(fluid)
        top = max(levels)
        return any(ly.partition * top > ly.solubility for ly in limited  # type: ignore[operator]
                   )

    def face_partition(self, side: str) -> float:
        """Layer/fluid partition coefficient at the ``inner`` or ``outer`` face."""
        boundary = self.inner_boundary if side == "inner" else self.outer_boundary
        layer = self.layers[0] if side == "inner" else self.layers[-1]
        return layer.partition if boundary.partition is None else boundary.partition

    @property
    def concentration_unit(self) -> str:
        return "mol/m^3" if self.basis == "molar" else "kg/m^3"

    @property
    def amount_unit(self) -> str:
        return "mol" if self.basis == "molar" else "kg"

    def geometric_weight(self, r: np.ndarray) -> np.ndarray:
        """r^n: the shell-balance weight without the 2*pi or 4*pi factor."""
        return np.asarray(r, dtype=float) ** self.exponent

    @property
    def measure_factor(self) -> float:
        """Factor turning r^n-weighted amounts into per-area (slab), per-length (cylinder) or
        total (sphere) amounts: 1, 2*pi, 4*pi."""
        return (1.0, 2.0 * np.pi, 4.0 * np.pi)[self.exponent]


@dataclass
class SteadySolution:
    """What a steady solver returns.

    ``flux_inner``/``flux_outer`` are flux densities (outward positive) at the faces;
    ``consumption`` is the r^n-weighted integral of R(C) over the body, amount/(m^(2-n)*s)
    before the measure factor, i.e. ``r_in^n J_in - r_out^n J_out = consumption`` at steady state.
    ``concentration_at(r, layer=None)`` and ``flux_at(r, layer=None)`` evaluate the solution at
    positions r (m, array): with ``layer`` (index) given, that layer's solution is evaluated (r in
    its closed interval, so both sides of a partition jump can be read); without it, each r is
    placed in its layer and an r exactly on an interface takes the inner layer's value.
    ``diagnostics`` holds solver facts (iterations, residuals, cells) for the record.
    """

    method: str
    reference: str
    success: bool
    message: str
    concentration_at: Callable[..., np.ndarray]
    flux_at: Callable[..., np.ndarray]
    flux_inner: float
    flux_outer: float
    consumption: float
    depletion_front: float | None = None
    diagnostics: dict = field(default_factory=dict)
    #: Optional ``(r, layer) -> (C, J)``: both fields from one evaluation, for solvers where
    #: that is cheaper than two calls (same conventions as ``concentration_at``/``flux_at``).
    profile_at: Callable[..., tuple[np.ndarray, np.ndarray]] | None = None
