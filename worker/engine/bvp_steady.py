"""Steady diffusion-reaction by collocation (``scipy.integrate.solve_bvp``): the second method.

An independent reference for the finite-volume solver on nonlinear cases: a different
discretisation (4th-order collocation with residual control, J. Kierzenka, L.F. Shampine,
"A BVP solver based on residual control and the MATLAB PSE", ACM TOMS 27 (2001) 299-316, as
implemented by ``scipy.integrate.solve_bvp``), a different unknown (C and the flux J as a
first-order system) and a different initial guess (a constant concentration, not the
finite-volume solution).

The system
----------
Each layer j, r in [a_j, a_j + h_j], is mapped onto t in [0, 1] (r = a_j + h_j t), and all
layers are solved together as one system of 2 x layers equations on the common t interval:

    dC_j/dt = -h_j J_j / D_j,
    dJ_j/dt = -h_j R_j(C_j) - n h_j J_j / r,

(the shell balance (1/r^n) d/dr (r^n J) = -R with J = -D dC/dr). Variables are scaled by a
concentration C_ref and a flux D_1 C_ref / L. For a solid cylinder or sphere the centre term
-n J/t of the first layer is passed to ``solve_bvp`` as its singular term S y / t, whose limit
at t = 0 (dJ/dr = -R/(n+1)) ``solve_bvp`` applies. Boundary conditions: the two faces
(concentration, flux, mass_transfer, symmetry, as in ``model``) and at each interface
C_j/K_j = C_(j+1)/K_(j+1) and J_j = J_(j+1).

Zero order (R = Q while C > 0) is discontinuous at C = 0. The solver first follows the
smoothed rate Q C/(C + eps) down to eps = ``ZERO_ORDER_SMOOTHING_SEARCH`` x C_ref, only to find
out whether and where the solute runs out. Without depletion it then solves with the exact
rate. With a depleted zone touching a sealed face (a solid core, a sealed mid-plane, the sealed
outer edge of a tissue layer), it solves the exact free-boundary problem: the live region only,
with the front position r_c as an unknown parameter of ``solve_bvp`` and the two conditions
C(r_c) = 0 and J(r_c) = 0 (A.V. Hill, Proc. R. Soc. B 104 (1928) 39). Other depletion patterns
(a zone in the middle of a layer, or one reaching an interface) are reported as not supported
(``success`` False), not approximated.
"""

from __future__ import annotations

from typing import Any, cast

import numpy as np
from scipy.integrate import solve_bvp

from worker.engine.failed_solution import failed_steady_solution
from worker.engine.fv_mesh import boundary_concentration_scale
from worker.engine.model import Problem, SteadySolution

METHOD_NAME = "collocation-shell-balance"
REFERENCE = (
    "scipy.integrate.solve_bvp: J. Kierzenka, L.F. Shampine, ACM Trans. Math. Softw. 27 (2001) "
    "299-316 (4th-order collocation, residual control); multi-layer system on mapped unit "
    "intervals with interface conditions as boundary conditions"
)

#: ``solve_bvp`` relative residual tolerance (dimensionless variables); on the reference-test
#: cases face fluxes then agree with the extrapolated finite-volume figures to about 1e-10.
BVP_TOLERANCE = 1e-7
#: Looser tolerance of the smoothed zero-order search, which only locates a depleted zone.
BVP_SEARCH_TOLERANCE = 1e-4
#: ``solve_bvp`` boundary-condition tolerance (dimensionless variables).
BVP_BC_TOLERANCE = 1e-12
#: Initial collocation nodes on the unit interval, and the most ``solve_bvp`` may use.
BVP_INITIAL_NODES = 41
BVP_MAX_NODES = 100_000
#: Most non-zeros of the collocation Jacobian (about 2 (2L)^2 per node for L layers, each with
#: C and J): the node limit of a many-layer case is lowered to keep within it, so its memory
#: stays bounded (about 100 bytes resident per entry with the sparse copies and the LU
#: factors; a 20-layer Michaelis-Menten slab at 100,000 nodes asked for over 11 GB).
BVP_MAX_JACOBIAN_ENTRIES = 4_000_000
#: Reaction-strength continuation used when the direct solve fails (fractions of the rates).
REACTION_CONTINUATION = (0.01, 0.1, 0.3, 1.0)
#: Zero-order smoothing widths eps / C_ref of the search for a depleted zone (last = finest).
ZERO_ORDER_CONTINUATION = (1e-1, 1e-2)
ZERO_ORDER_SMOOTHING_SEARCH = ZERO_ORDER_CONTINUATION[-1]
#: The smoothed search flags a depleted zone where C < DEPLETION_FLAG x eps.
DEPLETION_FLAG = 3.0
#: Gauss-Legendre points per collocation interval for the consumption integral.
QUADRATURE_POINTS = 5

__all__ = [
    "BVP_BC_TOLERANCE",
    "BVP_INITIAL_NODES",
    "BVP_MAX_JACOBIAN_ENTRIES",
    "BVP_MAX_NODES",
    "node_limit",
    "BVP_TOLERANCE",
    "METHOD_NAME",
    "REFERENCE",
    "ZERO_ORDER_SMOOTHING_SEARCH",
    "solve_bvp_reference",
]


class _LayeredSystem:
    """Scaled first-order system of all layers on t in [0, 1].

    ``zero_order`` is ``"smoothed"`` (Q C/(C + eps)), ``"exact"`` (Q where C > 0) or
    ``"live"`` (Q: the live region of a free-boundary solve). ``front`` = (layer, side) makes
    that layer's ``side`` end the unknown front r_c = p[0] * L, with C = J = 0 there in place
    of the face condition on that side.
    """

    def __init__(self, problem: Problem):
        self.problem = problem
        self.n = problem.exponent
        layers = problem.layers
        self.count = len(layers)
        self.edges = problem.edges
        self.thickness = np.array([ly.thickness for ly in layers])
        self.diffusivity = np.array([ly.diffusivity for ly in layers])
        self.partition = np.array([ly.partition for ly in layers])
        self.length = problem.total_thickness
        c_ref = boundary_concentration_scale(problem)
        if c_ref == 0.0:
            imposed = (b.condition.imposed_flux(b)
                       for b in (problem.inner_boundary, problem.outer_boundary))
            fluxes = [abs(flux) for flux in imposed if flux is not None]
            c_ref = max(fluxes, default=0.0) * self.length / self.diffusivity[0]
        self.c_ref = c_ref if c_ref > 0.0 else 1.0
        self.j_ref = self.diffusivity[0] * self.c_ref / self.length
        self.solid_centre = problem.solid_centre
        self.reaction_scale = 1.0
        self.smoothing = ZERO_ORDER_SMOOTHING_SEARCH * self.c_ref
        self.zero_order = "smoothed"
        self.front: tuple[int, str] | None = None

    # geometry ---------------------------------------------------------------------------
    def span(self, j: int, p=None) -> tuple[float, float]:
        """(start, thickness) in m of the solved part of layer j."""
        start, thickness = float(self.edges[j]), float(self.thickness[j])
        if self.front is not None and self.front[0] == j:
            r_c = float(p[0]) * self.length
            if self.front[1] == "inner":
                return r_c, float(self.edges[j + 1]) - r_c
            return start, r_c - start
        return start, thickness

    @property
    def singular(self) -> bool:
        """True when layer 0 starts at a solid centre (singular term at t = 0)."""
        return self.solid_centre and not (self.front == (0, "inner"))

    # reaction ---------------------------------------------------------------------------
    def rate(self, j: int, c: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """R and dR/dC (SI) of layer j at concentrations c; no consumption where C <= 0."""
        reaction = self.problem.layers[j].reaction
        try:
            law = reaction.law
        except ValueError as exc:
            raise ValueError(f"layers[{j}].reaction.kind: {exc}") from None
        return law.regularised_rate(
            reaction, c, self.reaction_scale, self.zero_order, self.smoothing
        )

    # system -----------------------------------------------------------------------------
    def singular_term(self) -> np.ndarray | None:
        if not self.singular:
            return None
        s = np.zeros((2 * self.count, 2 * self.count))
        s[1, 1] = -float(self.n)
        return s

    def fun(self, t: np.ndarray, y: np.ndarray, p=None) -> np.ndarray:
        out = np.empty_like(y)
        d0, length = self.diffusivity[0], self.length
        for j in range(self.count):
            start, h = self.span(j, p)
            flux = y[2 * j + 1]
            out[2 * j] = -(h / length) * (d0 / self.diffusivity[j]) * flux
            rate, _ = self.rate(j, self.c_ref * y[2 * j])
            out[2 * j + 1] = -(h * length / (d0 * self.c_ref)) * rate
            if self.n and not (j == 0 and self.singular):
                out[2 * j + 1] -= self.n * h * flux / (start + h * t)
        return out

    def fun_jac(self, t: np.ndarray, y: np.ndarray) -> np.ndarray:
        m = y.shape[0]
        jac = np.zeros((m, m, t.size))
        d0, length = self.diffusivity[0], self.length
        for j in range(self.count):
            start, h = self.span(j)
            jac[2 * j, 2 * j + 1] = -(h / length) * (d0 / self.diffusivity[j])
            _, slope = self.rate(j, self.c_ref * y[2 * j])
            jac[2 * j + 1, 2 * j] = -(h * length / d0) * slope
            if self.n and not (j == 0 and self.singular):
                jac[2 * j + 1, 2 * j + 1] = -self.n * h / (start + h * t)
        return jac

    def face_residual(self, side: str, c: float, flux: float) -> float:
        """Scaled residual of the face condition on ``side`` for scaled C and J there."""
        problem = self.problem
        boundary = problem.inner_boundary if side == "inner" else problem.outer_boundary
        k_face = problem.face_partition(side)
        # flux into the body, scaled: +J at the inner face, -J at the outer face
        into = flux if side == "inner" else -flux
        try:
            condition = boundary.condition
        except ValueError as exc:
            raise ValueError(f"{side}_boundary.kind: {exc}") from None
        return condition.bvp_residual(boundary, c, flux, into, k_face, self.c_ref, self.j_ref)

    def bc(self, ya: np.ndarray, yb: np.ndarray, p=None) -> np.ndarray:
        last = self.count - 1
        if self.front == (0, "inner"):
            residuals = [ya[0], ya[1]]
        else:
            residuals = [self.face_residual("inner", ya[0], ya[1])]
        for j in range(last):
            residuals.append(yb[2 * j] / self.partition[j] - ya[2 * j + 2] / self.partition[j + 1])
            residuals.append(yb[2 * j + 1] - ya[2 * j + 3])
        if self.front == (last, "outer"):
            residuals += [yb[2 * last], yb[2 * last + 1]]
        else:
            residuals.append(self.face_residual("outer", yb[2 * last], yb[2 * last + 1]))
        return np.array(residuals)

    def initial_guess(self, t: np.ndarray) -> np.ndarray:
        """Constant C = C_ref K_j / K_face(outer) in each layer, J = 0."""
        y = np.zeros((2 * self.count, t.size))
        for j in range(self.count):
            y[2 * j] = self.partition[j] / self.partition[-1]
        return y


def node_limit(layers: int) -> int:
    """``solve_bvp``'s ``max_nodes`` for ``layers`` layers: ``BVP_MAX_NODES``, lowered so that
    the Jacobian's 2 (2 layers)^2 entries per node stay within ``BVP_MAX_JACOBIAN_ENTRIES``."""
    per_node = 2 * (2 * layers) ** 2
    return max(BVP_INITIAL_NODES, min(BVP_MAX_NODES, BVP_MAX_JACOBIAN_ENTRIES // per_node))


def _solve(system: _LayeredSystem, t: np.ndarray, y: np.ndarray, p=None, tol=BVP_TOLERANCE):
    with_front = p is not None
    return solve_bvp(
        system.fun if with_front else (lambda x, v: system.fun(x, v)),
        system.bc if with_front else (lambda a, b: system.bc(a, b)),
        t,
        y,
        p=p,
        S=system.singular_term(),
        fun_jac=None if with_front else system.fun_jac,
        tol=tol,
        bc_tol=BVP_BC_TOLERANCE,
        max_nodes=node_limit(system.count),
    )


def _continued(system: _LayeredSystem):
    """Solve at full strength from the constant guess; else continue in reaction strength."""
    t = np.linspace(0.0, 1.0, BVP_INITIAL_NODES)
    y = system.initial_guess(t)
    smoothed = any(ly.reaction.law.depletes for ly in system.problem.layers)
    widths = ZERO_ORDER_CONTINUATION if smoothed else (None,)
    tol = BVP_SEARCH_TOLERANCE if smoothed else BVP_TOLERANCE
    result: Any = None  # widths is never empty
    for eps in widths:
        if eps is not None:
            system.smoothing = eps * system.c_ref
        result = _solve(system, t, y, tol=tol)
        if result.status != 0:
            break
        t, y = result.x, result.y
    if result.status == 0:
        return result, "direct"
    t = np.linspace(0.0, 1.0, BVP_INITIAL_NODES)
    y = system.initial_guess(t)
    for scale in REACTION_CONTINUATION:
        system.reaction_scale = scale
        for eps in widths:
            if eps is not None:
                system.smoothing = eps * system.c_ref
            result = _solve(system, t, y, tol=tol)
            if result.status != 0:
                system.reaction_scale = 1.0
                return result, f"continuation stopped at reaction fraction {scale}"
            t, y = result.x, result.y
    return result, "continuation in reaction strength"


def _depleted_zone(system: _LayeredSystem, result):
    """Find a depleted zone in the smoothed solution: (layer, side, front guess in m) or a
    reason string when the pattern is not one the free-boundary solve covers, or None."""
    t = np.linspace(0.0, 1.0, 2001)
    y = result.sol(t)
    threshold = DEPLETION_FLAG * system.smoothing
    for j, layer in enumerate(system.problem.layers):
        if not layer.reaction.law.depletes:
            continue
        dead = system.c_ref * y[2 * j] < threshold
        if not dead.any():
            continue
        start, h = system.span(j)
        if dead[0] and not dead[-1] and j == 0:
            edge = np.flatnonzero(~dead)[0]
            if np.any(dead[edge:]):
                return "a depleted zone that is not contiguous with the inner face"
            return j, "inner", start + h * t[edge]
        if dead[-1] and not dead[0] and j == system.count - 1:
            edge = np.flatnonzero(dead)[0]
            if not np.all(dead[edge:]):
                return "a depleted zone that is not contiguous with the outer face"
            return j, "outer", start + h * t[edge]
        return (
            f"a depleted zone in layer {j} that does not end on a face of the body "
            "(inside the layer or at an interface)"
        )
    return None


def _free_boundary(system: _LayeredSystem, smoothed, layer: int, side: str, guess: float):
    """Exact free-boundary solve of the live region with the front as unknown parameter."""
    if abs(system.face_residual(side, 0.0, 0.0)) > 0.0:
        return None, f"a depleted zone at the {side} face, whose condition allows no C = J = 0"
    t = np.linspace(0.0, 1.0, BVP_INITIAL_NODES)
    system.front = (layer, side)
    p0 = np.array([guess / system.length])
    # initial values: the smoothed solution re-sampled on the live part of the front layer
    y = smoothed.sol(t)
    start, h = system.span(layer, p0)
    t_layer = (start + h * t - system.edges[layer]) / system.thickness[layer]
    y[2 * layer : 2 * layer + 2] = smoothed.sol(np.clip(t_layer, 0.0, 1.0))[
        2 * layer : 2 * layer + 2
    ]
    system.zero_order = "live"
    return _solve(system, t, y, p0), "free-boundary solve of the live region"


def _consumption(system: _LayeredSystem, result) -> float:
    """r^n-weighted integral of R(C) by Gauss-Legendre on every collocation interval."""
    nodes, weights = np.polynomial.legendre.leggauss(QUADRATURE_POINTS)
    t = result.x
    left, width = t[:-1, None], np.diff(t)[:, None]
    points = (left + 0.5 * width * (nodes + 1.0)).ravel()
    w = (0.5 * width * weights).ravel()
    y = result.sol(points)
    total = 0.0
    p = getattr(result, "p", None)
    for j in range(system.count):
        start, h = system.span(j, p)
        r = start + h * points
        rate, _ = system.rate(j, system.c_ref * y[2 * j])
        total += h * float(np.sum(w * rate * r**system.n))
    return total


def _not_covered(reason: str, diagnostics: dict) -> SteadySolution:
    return failed_steady_solution(
        METHOD_NAME, REFERENCE, f"not solved by the collocation reference: {reason}", diagnostics)


def _solve_case(system: _LayeredSystem):
    """(result, route) or (None, reason) for a pattern the reference does not cover."""
    has_zero_order = any(ly.reaction.law.depletes for ly in system.problem.layers)
    if not has_zero_order:
        return _continued(system)
    smoothed, route = _continued(system)
    if smoothed.status != 0:
        return smoothed, f"smoothed zero-order search failed ({route})"
    zone = _depleted_zone(system, smoothed)
    reason = "the solute runs out, but no depleted zone ending on a sealed face was found"
    if isinstance(zone, str):
        return None, zone
    if zone is not None:
        layer, side, guess = zone
        result, route = _free_boundary(system, smoothed, layer, side, guess)
        if result is not None and result.status == 0 and _front_inside(system, result):
            return result, route
        if result is None:
            reason = route
        system.front = None
    # no front found (or the flagged zone held only low concentrations): the exact rate,
    # accepted only if the solute never runs out
    system.zero_order = "exact"
    result = _solve(system, smoothed.x, smoothed.y)
    if result.status != 0:
        return None, f"{reason}; the exact-rate solve reports: {result.message}"
    if _lowest_zero_order_concentration(system, result) < 0.0:
        return None, reason
    return result, "exact zero-order rate, no depletion"


def _front_inside(system: _LayeredSystem, result) -> bool:
    layer = cast(tuple[int, str], system.front)[0]
    front = float(result.p[0]) * system.length
    return bool(system.edges[layer] < front < system.edges[layer + 1])


def _lowest_zero_order_concentration(system: _LayeredSystem, result) -> float:
    values = result.sol(np.linspace(0.0, 1.0, 2001))
    lowest = np.inf
    for j, layer in enumerate(system.problem.layers):
        if layer.reaction.law.depletes:
            lowest = min(lowest, float(values[2 * j].min()))
    return lowest


def solve_bvp_reference(problem: Problem) -> SteadySolution:
    """Solve the steady case with ``scipy.integrate.solve_bvp`` (independent reference).

    Parameters
    ----------
    problem : Problem
        The normalised case (SI); any layers, reactions and face kinds. Zero order with a
        depleted zone is covered when the zone ends on a sealed face (see the module notes).

    Returns
    -------
    SteadySolution
        Face fluxes (outward, amount/(m^2 s)) from the collocation solution, ``consumption``
        from Gauss-Legendre quadrature of R(C) r^n, profiles from the collocation interpolant
        (zero in a depleted zone), ``depletion_front`` (m) from the free-boundary solve.
        ``success`` and ``message`` come from ``solve_bvp`` (status 0 = converged), or say
        which depletion pattern is not covered; ``diagnostics`` holds its status, node count,
        largest relative residual and the route taken.
    """
    system = _LayeredSystem(problem)
    result, route = _solve_case(system)
    if result is None:
        return _not_covered(route, {"route": route})
    c_ref, j_ref = system.c_ref, system.j_ref
    edges = problem.edges
    parameters = result.p if system.front is not None else None
    spans = [system.span(j, parameters) for j in range(system.count)]

    def _evaluate(r, layer, offset, scale):
        r_array = np.atleast_1d(np.asarray(r, dtype=float))
        tolerance = 1e-12 * max(abs(edges[-1]), edges[-1] - edges[0])
        if layer is None:
            if np.any((r_array < edges[0] - tolerance) | (r_array > edges[-1] + tolerance)):
                raise ValueError(
                    f"r: expected positions within the body [{edges[0]}, {edges[-1]}] m"
                )
            owners = np.clip(np.searchsorted(edges, r_array, side="left") - 1, 0, system.count - 1)
        else:
            if not 0 <= layer < system.count:
                raise ValueError(f"layer: expected an index in 0..{system.count - 1}, got {layer}")
            owners = np.full(r_array.shape, layer)
        out = np.zeros_like(r_array)
        for j in np.unique(owners):
            chosen = owners == j
            start, h = spans[j]
            t = (r_array[chosen] - start) / h
            live = (t >= -1e-12) & (t <= 1.0 + 1e-12)
            values = scale * result.sol(np.clip(t, 0.0, 1.0))[2 * j + offset]
            out[chosen] = np.where(live, values, 0.0)  # outside the live part: depleted
        return out if np.ndim(r) else out[0]

    def concentration_at(r, layer: int | None = None):
        return _evaluate(r, layer, 0, c_ref)

    def flux_at(r, layer: int | None = None):
        return _evaluate(r, layer, 1, j_ref)

    last = system.count - 1
    depleted_inner = system.front == (0, "inner")
    depleted_outer = system.front == (last, "outer")
    flux_inner = 0.0 if (system.solid_centre or depleted_inner) else float(j_ref * result.y[1, 0])
    flux_outer = 0.0 if depleted_outer else float(j_ref * result.y[2 * last + 1, -1])
    front = float(parameters[0] * system.length) if parameters is not None else None
    success = result.status == 0
    message = f"{result.message} ({route})"
    if success and front is not None:
        layer = cast(tuple[int, str], system.front)[0]  # a front was solved for
        start, end = edges[layer], edges[layer + 1]
        if not start < front < end:
            success = False
            message = f"front {front:.6g} m outside its layer [{start:.6g}, {end:.6g}] m ({route})"
    return SteadySolution(
        method=METHOD_NAME,
        reference=REFERENCE,
        success=bool(success),
        message=message,
        concentration_at=concentration_at,
        flux_at=flux_at,
        flux_inner=flux_inner,
        flux_outer=flux_outer,
        consumption=_consumption(system, result),
        depletion_front=front,
        diagnostics={
            "status": int(result.status),
            "nodes": int(result.x.size),
            "max_relative_residual": float(np.max(result.rms_residuals)),
            "route": route,
            "tolerance": BVP_TOLERANCE,
        },
    )
