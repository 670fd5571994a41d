"""Closed forms of a body exchanging solute with a well-stirred compartment of limited volume:
the independent checks of the ``compartment`` face.

Crank's limited-volume solutions (J. Crank, *The Mathematics of Diffusion*, 2nd ed., Oxford,
1975): a uniform body (plane sheet of half-thickness l, sealed or symmetric at its mid-plane;
solid cylinder or sphere of radius a) in a stirred solution of limited volume, body and
solution each uniform at t = 0, no loss. With ``alpha`` = (solution volume) / (K * body
volume) per measure, the fraction of the final exchange reached at time t is

    M_t / M_inf = 1 - sum_n B_n exp(-D q_n^2 t / a^2),

* plane sheet (Crank §4.3.5, eqs. 4.37-4.38): B_n = 2 alpha (1 + alpha) /
  (1 + alpha + alpha^2 q_n^2), q_n the positive roots of tan q = -alpha q;
* cylinder (Crank §5.3.4): B_n = 4 alpha (1 + alpha) / (4 + 4 alpha + alpha^2 q_n^2),
  alpha q J0(q) + 2 J1(q) = 0;
* sphere (Crank §6.3.4, eq. 6.30): B_n = 6 alpha (1 + alpha) / (9 + 9 alpha + alpha^2 q_n^2),
  tan q = 3 q / (3 + alpha q^2)

(equation numbers from memory; the forms are checked in the tests against their alpha -> inf
limits, Crank's sink solutions eqs. 4.18, 5.23, 6.20, and against the method of lines and the
Laplace route). The final state is the exact equilibrium partition of the load (no clearance):
the fluid-equivalent level is uniform, C_f = (N_body + N_fluid) / (V_f + K V_body), per measure.
Crank's figures are for uptake by the body; the approach of a release (body loaded, solution
empty) follows the same curve, since any uniform pair of starting levels is the equilibrium
plus a multiple of the uptake problem.

Finite-donor permeation (a thin membrane between a donor compartment and a perfect sink): the
donor decays as exp(-t / tau) with tau = V h / (A D K) once the membrane is at its quasi-steady
state, the thin-membrane limit (E.L. Cussler, *Diffusion: Mass Transfer in Fluid Systems*,
3rd ed., 2009, §2.4, the diaphragm cell, from memory; valid while the membrane holds little of
the load, h K A << V).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq
from scipy.special import j0, j1, jn_zeros

from worker.engine.boundaries.compartment import capacity, compartment_sides
from worker.engine.model import Problem

#: Terms are summed until exp(-q_n^2 tau) is below this for the smallest positive tau.
TAIL = 1e-18
#: Most series terms evaluated.
MAX_TERMS = 20000

__all__ = ["CrankCase", "crank_case", "donor_time_constant", "equilibrium_level",
           "limited_volume_fraction", "limited_volume_roots"]


def limited_volume_roots(geometry: str, alpha: float, count: int) -> np.ndarray:
    """The first ``count`` positive roots q_n of Crank's limited-volume eigen-condition for
    ``geometry`` (``slab``, ``cylinder``, ``sphere``) and ``alpha`` > 0, each by ``brentq`` in
    its bracket.

    Slab: q = (n - 1/2) pi + x with x in (0, pi/2) and tan q = -alpha q written as
    x = atan(1/(alpha q)); sphere: q = n pi + x, x in (0, pi/2), x = atan(3q/(3 + alpha q^2))
    (both free of the cancellation of tan near its poles at any alpha); cylinder: between
    j_{0,n} and j_{1,n}, the zeros of J0 and J1 (the alpha -> inf and alpha -> 0 limits).
    """
    if not (alpha > 0.0 and math.isfinite(alpha)):
        raise ValueError(f"alpha: expected a positive finite volume ratio, got {alpha!r}")
    roots = np.empty(count)
    half = 0.5 * math.pi
    for k in range(count):
        if geometry == "slab":
            base = (k + 0.5) * math.pi

            def shift(x: float, base: float = base) -> float:
                return x - math.atan(1.0 / (alpha * (base + x)))
        elif geometry == "sphere":
            base = (k + 1) * math.pi

            def shift(x: float, base: float = base) -> float:
                q = base + x
                return x - math.atan(3.0 * q / (3.0 + alpha * q * q))
        else:
            base = 0.0
            shift = None  # type: ignore[assignment]
        if shift is not None:
            roots[k] = base + brentq(shift, 0.0, half, xtol=1e-16, rtol=1e-15, maxiter=200)
    if geometry == "cylinder":
        low, high = jn_zeros(0, count), jn_zeros(1, count)

        def condition(q: float) -> float:
            return alpha * q * float(j0(q)) + 2.0 * float(j1(q))

        roots = np.array([brentq(condition, a, b, xtol=1e-15, rtol=1e-15, maxiter=200)
                          for a, b in zip(low, high, strict=True)])
    return roots


def _weights(geometry: str, alpha: float, q: np.ndarray) -> np.ndarray:
    a2q2 = alpha * alpha * q * q
    if geometry == "slab":
        return 2.0 * alpha * (1.0 + alpha) / (1.0 + alpha + a2q2)
    if geometry == "cylinder":
        return 4.0 * alpha * (1.0 + alpha) / (4.0 + 4.0 * alpha + a2q2)
    return 6.0 * alpha * (1.0 + alpha) / (9.0 + 9.0 * alpha + a2q2)


def limited_volume_fraction(geometry: str, alpha: float, tau) -> np.ndarray:
    """M_t / M_inf of Crank's limited-volume solution at dimensionless times tau = D t / a^2
    (a: the sheet's half-thickness or the radius); 0 at tau = 0."""
    tau = np.atleast_1d(np.asarray(tau, dtype=float))
    positive = tau[tau > 0.0]
    if positive.size == 0:
        return np.zeros_like(tau)
    count = int(min(MAX_TERMS, math.ceil(math.sqrt(-math.log(TAIL) / positive.min()) / math.pi)
                    + 10))
    q = limited_volume_roots(geometry, alpha, count)
    weights = _weights(geometry, alpha, q)
    out = np.zeros_like(tau)
    later = tau > 0.0
    out[later] = 1.0 - np.exp(-np.outer(tau[later], q * q)) @ weights
    return out


def equilibrium_level(problem: Problem) -> float | None:
    """The fluid-equivalent level u = C/K that a closed linear case (no reaction, no
    clearance, every face sealed or a compartment) reaches, amount/m^3, exactly by
    conservation: (N_body + sum W C_f0) / (sum_i K_i V_i + sum W K_layer/K_face) per measure
    (r^n-weighted); each compartment then holds C_f = u K_layer / K_face. None where the case
    is not closed (a face passing solute to the outside, a reaction, a clearance).

    A layer with a solubility S_i caps the level at u* = min S_i/K_i: where the load exceeds
    what the body and compartments hold at u*, the level is u* and the excess stays
    undissolved in the layer(s) that saturate first (dissolved C_i = min(K_i u, S_i) = K_i u
    everywhere, since u <= u*)."""
    if any(ly.reaction.reacts for ly in problem.layers):
        return None
    sides = compartment_sides(problem)
    if not sides:
        return None
    for side, boundary in (("inner", problem.inner_boundary), ("outer", problem.outer_boundary)):
        if side in sides:
            if boundary.clearance != 0.0:
                return None
        elif not (boundary.condition.is_sealed(boundary)
                  or (side == "inner" and problem.solid_centre)):
            return None
    n = problem.exponent
    edges = problem.edges
    volumes = (edges[1:] ** (n + 1) - edges[:-1] ** (n + 1)) / (n + 1)
    amount = float(sum(v * ly.initial for v, ly in zip(volumes, problem.layers, strict=True)))
    held = float(sum(v * ly.partition for v, ly in zip(volumes, problem.layers, strict=True)))
    for side in sides:
        boundary = problem.inner_boundary if side == "inner" else problem.outer_boundary
        w = capacity(problem, side)
        layer = problem.layers[0] if side == "inner" else problem.layers[-1]
        amount += w * boundary.initial
        held += w * layer.partition / problem.face_partition(side)
    caps = [ly.solubility / ly.partition for ly in problem.layers if ly.solubility is not None]
    return min([amount / held] + caps)


@dataclass(frozen=True)
class CrankCase:
    """A case inside the range of Crank's limited-volume solutions: its geometry, alpha, the
    length a of tau = D t / a^2, the compartment side, and the exact per-measure amounts."""

    geometry: str
    alpha: float
    length: float
    diffusivity: float
    side: str
    start_fluid: float
    final_fluid: float
    capacity: float
    measure: float

    def fluid(self, times) -> np.ndarray:
        """The compartment's concentration at the times (s), amount/m^3."""
        fraction = limited_volume_fraction(self.geometry, self.alpha,
                                           self.diffusivity * np.asarray(times, dtype=float)
                                           / self.length**2)
        return self.start_fluid + (self.final_fluid - self.start_fluid) * fraction

    def released(self, times) -> np.ndarray:
        """The cumulative amount through the compartment's face, per measure."""
        return self.measure * self.capacity * (self.fluid(times) - self.start_fluid)


def crank_case(problem: Problem) -> tuple[CrankCase | None, str]:
    """The Crank case of ``problem``, or None and why it is outside Crank's solutions: one
    uniform layer without reaction or saturation, one compartment face without clearance, the
    other face sealed (slab) or the centre of a solid cylinder or sphere."""
    if len(problem.layers) != 1:
        return None, "more than one layer"
    layer = problem.layers[0]
    if layer.reaction.reacts or not problem.is_linear:
        return None, "the layer reacts or can saturate"
    sides = compartment_sides(problem)
    if len(sides) != 1:
        return None, "not exactly one compartment face"
    side = sides[0]
    other = problem.outer_boundary if side == "inner" else problem.inner_boundary
    boundary = problem.inner_boundary if side == "inner" else problem.outer_boundary
    if boundary.clearance != 0.0:
        return None, "the compartment has a clearance"
    if problem.geometry == "slab":
        if not other.condition.is_sealed(other):
            return None, "the other face of the sheet is not sealed"
    elif not (problem.solid_centre and side == "outer"):
        return None, "a hollow cylinder or sphere"
    level = equilibrium_level(problem)
    if level is None:
        return None, "not a closed case"
    w = capacity(problem, side)
    k_face = problem.face_partition(side)
    n = problem.exponent
    volume = problem.outer ** (n + 1) / (n + 1) if problem.geometry != "slab" \
        else layer.thickness
    alpha = w / (k_face * volume)
    final_fluid = level * layer.partition / k_face
    return CrankCase(problem.geometry, alpha, layer.thickness, layer.diffusivity, side,
                     float(boundary.initial), float(final_fluid), w,
                     problem.measure_factor), ""


def donor_time_constant(volume: float, thickness: float, area: float, diffusivity: float,
                        partition: float) -> float:
    """tau = V h / (A D K), s: the donor's exponential decay through a thin membrane into a
    sink at quasi-steady state (Cussler 2009, §2.4, the diaphragm cell; from memory)."""
    return volume * thickness / (area * diffusivity * partition)
