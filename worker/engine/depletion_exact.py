"""Exact steady solution of one zero-order layer that runs out of solute (a depleted zone).

With constant consumption Q where C > 0 and none where C = 0, the live zone next to a fed face
ends at a front ``s`` where ``C = dC/dr = 0`` (A.V. Hill, "The diffusion of oxygen and lactic
acid through tissues", Proc. R. Soc. B 104 (1928) 39-96; J. Crank, *The Mathematics of
Diffusion*, 2nd ed., Oxford, 1975, ch. 14). Integrating ``(1/r^n)(r^n C')' = Q/D`` twice from
the front gives ``C = (Q/D) F(r; s)`` with

    slab      F = (r - s)^2 / 2
    cylinder  F = (r^2 - s^2)/4 - (s^2/2) ln(r/s)
    sphere    F = (r - s)^2 (r + 2 s) / (6 r)  ( = r^2/6 - s^2/2 + s^3/(3 r) )

and the outward flux ``J = -Q (r^(n+1) - s^(n+1)) / ((n+1) r^n)``. The fed face's condition fixes
``s``: a concentration face ``(Q/D) F(face; s) = K_face C_fluid`` (slab: distance
``sqrt(2 D Cs / Q)`` from the face; solid cylinder and sphere: critical radii ``sqrt(4 D Cs/Q)``,
``sqrt(6 D Cs/Q)``), a film ``inflow(s) = h (C_bulk - C_face/K_face)``, or a prescribed influx
``inflow(s) = N``. Slabs are solved in closed form; curved bodies with ``scipy.optimize.brentq``
on the distance from the face, which the residual increases with monotonically.

Covered (single-layer bodies whose one layer is zero order):

* one fed face (concentration, mass transfer with h > 0, or influx N > 0) and the other face
  sealed (symmetry, zero flux, h = 0) or a solid centre: one front;
* both faces fed (slab, hollow cylinder, hollow sphere): a dead zone between two fronts, each
  fixed by its own face.

Anything else with a depleted zone (more than one layer, an imposed outflux, a negative fluid
concentration) returns None: the numerical solver covers it.
"""

from __future__ import annotations

import math

import numpy as np
from scipy import optimize

from worker.engine.layered_profile import LayeredProfile
from worker.engine.model import Boundary, Problem, SteadySolution

METHOD = "exact-zero-order-depletion-front"
REFERENCE = ("A.V. Hill, Proc. R. Soc. B 104 (1928) 39; J. Crank, The Mathematics of Diffusion, "
             "2nd ed., Oxford, 1975, ch. 14")
_EPS = np.finfo(float).eps


def _t_minus_log1p(t: np.ndarray | float) -> np.ndarray:
    """t - ln(1 + t) for t > -1, from its series sum_{k>=2} (-t)^k / k where |t| < 0.1."""
    t = np.asarray(t, dtype=float)
    small = np.clip(t, -0.1, 0.1)
    series = sum((-small) ** k / k for k in range(2, 18))
    return np.where(np.abs(t) < 0.1, series, t - np.log1p(t))


def front_shape(exponent: int, r, front: float) -> tuple[np.ndarray, np.ndarray]:
    """F(r; s) (m^2) and dF/dr (m) with F = F' = 0 at the front s; C = (Q/D) F."""
    r = np.asarray(r, dtype=float)
    s = float(front)
    n = exponent
    safe_r = np.where(r > 0.0, r, 1.0)
    slope = np.where(r > 0.0, (r ** (n + 1) - s ** (n + 1)) / ((n + 1) * safe_r**n), 0.0)
    if n == 0:
        return 0.5 * (r - s) ** 2, r - s
    if n == 1:
        if s == 0.0:
            return r**2 / 4.0, slope
        # (r^2 - s^2)/4 - (s^2/2) ln(r/s) = (s^2/4) [t^2 + 2 (t - ln(1 + t))], t = r/s - 1
        t = (r - s) / s
        return 0.25 * s**2 * (t**2 + 2.0 * _t_minus_log1p(t)), slope
    if s == 0.0:
        return r**2 / 6.0, slope
    return (r - s) ** 2 * (r + 2.0 * s) / (6.0 * safe_r), slope


def _face_kind(boundary: Boundary) -> str:
    """'fed', 'sealed' or 'other' for the depletion configurations."""
    return boundary.condition.depletion_role(boundary)


def _shape_at(exponent: int, r: float, s: float) -> tuple[float, float]:
    """Scalar F(r; s) and dF/dr (same formulas as ``front_shape``), for the front search."""
    n = exponent
    slope = (r ** (n + 1) - s ** (n + 1)) / ((n + 1) * r**n) if r > 0.0 else 0.0
    if n == 0:
        return 0.5 * (r - s) ** 2, r - s
    if s == 0.0:
        return r**2 / (2.0 * (n + 1)), slope
    if n == 1:
        t = (r - s) / s
        t_minus_log = float(_t_minus_log1p(t)) if abs(t) < 0.1 else t - math.log1p(t)
        return 0.25 * s**2 * (t**2 + 2.0 * t_minus_log), slope
    return (r - s) ** 2 * (r + 2.0 * s) / (6.0 * r), slope


def _front_residual(problem: Problem, side: str, front: float, face: float) -> float:
    """Face condition residual, increasing with the live zone's extent (amount/m^3 or flux)."""
    layer = problem.layers[0]
    boundary = problem.inner_boundary if side == "inner" else problem.outer_boundary
    q, d = layer.reaction.rate, layer.diffusivity
    k_face = problem.face_partition(side)
    shape, slope = _shape_at(problem.exponent, face, front)
    concentration = q / d * shape
    inflow = abs(q * slope)  # |J| at the face; it points into the body
    return boundary.condition.face_residual(boundary, concentration, inflow, k_face)


def _slab_distance(problem: Problem, side: str) -> float:
    """Live-zone depth from a fed slab face, in closed form (m)."""
    layer = problem.layers[0]
    boundary = problem.inner_boundary if side == "inner" else problem.outer_boundary
    q, d, k_face = layer.reaction.rate, layer.diffusivity, problem.face_partition(side)
    return boundary.condition.slab_live_depth(boundary, q, d, k_face)


def _front_from(problem: Problem, side: str, a: float, b: float) -> float | None:
    """Front position for the live zone fed through ``side``; None if it reaches the far face."""
    face, far = (a, b) if side == "inner" else (b, a)
    if problem.geometry == "slab":
        depth = _slab_distance(problem, side)
        if depth >= b - a:
            return None
        return face + depth if side == "inner" else face - depth
    if _front_residual(problem, side, face, face) >= 0.0:
        return face  # nothing delivered through this face: the dead zone reaches it
    if _front_residual(problem, side, far, face) <= 0.0:
        return None
    return float(optimize.brentq(lambda s: _front_residual(problem, side, s, face),
                                 min(face, far), max(face, far),
                                 xtol=4 * _EPS * b, rtol=4 * _EPS))


def solve_depleted(problem: Problem) -> SteadySolution | None:
    """Exact solution of a single zero-order layer with a depleted zone, or None.

    Parameters
    ----------
    problem : Problem
        A body of one zero-order layer (SI units) known to run out somewhere
        (``solve_exact`` tests that first with the undepleted solution).

    Returns
    -------
    SteadySolution or None
        ``depletion_front`` is the front; with both faces fed it is the inner edge of the dead
        zone and ``diagnostics["depleted_zone"]`` holds both edges. None outside the
        configurations listed in the module docstring.
    """
    if len(problem.layers) != 1 or not problem.layers[0].reaction.law.depletes:
        return None
    inner_kind = "sealed" if problem.solid_centre else _face_kind(problem.inner_boundary)
    outer_kind = _face_kind(problem.outer_boundary)
    if "other" in (inner_kind, outer_kind) or (inner_kind, outer_kind) == ("sealed", "sealed"):
        return None
    edges = problem.edges
    a, b, n = float(edges[0]), float(edges[-1]), problem.exponent
    front_in = _front_from(problem, "inner", a, b) if inner_kind == "fed" else a
    front_out = _front_from(problem, "outer", a, b) if outer_kind == "fed" else b
    if front_in is None or front_out is None or not front_in < front_out:
        return None
    layer = problem.layers[0]
    q, d = layer.reaction.rate, layer.diffusivity
    lower = front_in
    upper = front_out

    def piece(r: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        value = np.zeros_like(r)
        gradient = np.zeros_like(r)
        for live, front in ((r < lower, lower), (r > upper, upper)):
            if np.any(live):
                shape, slope = front_shape(n, r[live], front)
                value[live] = q / d * shape
                gradient[live] = q / d * slope
        return value, gradient

    profile = LayeredProfile(edges, [d], [piece])
    consumption = q * ((front_in ** (n + 1) - a ** (n + 1))
                       + (b ** (n + 1) - front_out ** (n + 1))) / (n + 1)
    flux_inner = float(profile.flux_at(a)) if inner_kind == "fed" else 0.0
    flux_outer = float(profile.flux_at(b)) if outer_kind == "fed" else 0.0
    front = front_in if inner_kind == "fed" else front_out
    return SteadySolution(
        method=METHOD, reference=REFERENCE, success=True,
        message="zero-order layer with a depleted zone; front from the fed face's condition",
        concentration_at=profile.concentration_at, flux_at=profile.flux_at,
        profile_at=profile.profile_at,
        flux_inner=flux_inner, flux_outer=flux_outer, consumption=float(consumption),
        depletion_front=float(front),
        diagnostics={"depleted_zone": (float(front_in), float(front_out))})
