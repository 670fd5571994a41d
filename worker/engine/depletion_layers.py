"""Exact steady solution of a layered body whose zero-order uptake runs the solute out in a
depleted zone bounded by fronts, each fixed by the face that feeds its live zone.

Where the solute runs out, a live zone ends at a front ``s`` with ``C = dC/dr = 0`` and the
body beyond holds none (A.V. Hill, "The diffusion of oxygen and lactic acid through tissues",
Proc. R. Soc. B 104 (1928) 39-96; J. Crank, *The Mathematics of Diffusion*, 2nd ed., Oxford,
1975, ch. 14). A live zone is then an ordinary layered problem: the layers from its fed face to
``s`` (the front's layer cut at ``s``) with a sealed face at ``s``, which the engine solves in
closed form taking zero order as never depleted (``exact_steady.solve_linear``). The front is
where that solution reaches zero at the cut: ``g(s) = C(s) = 0``. ``g`` does not rise as the
zone grows (more of the body consumes what the same face supplies), so ``scipy.optimize.
brentq`` finds it between the last layer edge where ``g > 0`` and the first where ``g <= 0``.
With the cut sealed the flux points away from the fed face everywhere in the zone, so ``C/K``
falls towards the front and is nowhere negative. With both faces fed the two zones are
independent, and there is a dead zone only where the inner front lies inside the outer one.

A front can only lie in a zero-order layer: in a layer without uptake, or with first-order
uptake, ``C = dC/dr = 0`` at one point means ``C = 0`` throughout (uniqueness of the layer's
linear equation), so there the front sits at the layer's edge.

Covered: slab, cylinder, sphere (hollow, or solid fed from outside); any number of layers, each
without reaction, first order or zero order (at least one zero order); partition jumps at
interfaces; each face fed or sealed (``depletion_role``), at least one fed. Anything else
returns None (the finite volumes cover it), and so does a body that does not run out
(``solve_exact`` answers it). A single layer is also covered by ``depletion_exact`` (Hill's
closed form).
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
from scipy import optimize

from worker.engine.exact_steady import solve_linear
from worker.engine.layered_profile import LayeredProfile
from worker.engine.model import Boundary, Problem, SteadySolution

__all__ = ["METHOD", "depletion_onset", "front_concentration", "solve_depleted_layers"]

METHOD = "exact-layered-zero-order-front"
REFERENCE = ("A.V. Hill, Proc. R. Soc. B 104 (1928) 39; J. Crank, The Mathematics of Diffusion, "
             "2nd ed., Oxford, 1975, ch. 14; the live zone by basis superposition")
_EPS = np.finfo(float).eps
#: The cut nearest a fed face at which g is evaluated, as a fraction of the thickness of the
#: layer at that face (g at the face itself is the fed face's own value).
_FIRST_CUT = 1e-9


def _role(problem: Problem, side: str) -> str:
    if side == "inner" and problem.solid_centre:
        return "sealed"
    boundary = problem.inner_boundary if side == "inner" else problem.outer_boundary
    return str(boundary.condition.depletion_role(boundary))


def _covered(problem: Problem) -> bool:
    laws = [layer.reaction.law for layer in problem.layers]
    roles = {_role(problem, "inner"), _role(problem, "outer")}
    return (roles <= {"fed", "sealed"} and "fed" in roles
            and all(law.exact_coefficients(layer.reaction) is not None
                    for law, layer in zip(laws, problem.layers, strict=True))
            and any(law.depletes for law in laws))


def _live_zone(problem: Problem, side: str, front: float) -> Problem:
    """The layers between the ``side`` face and ``front`` (m), cut and sealed there."""
    edges = problem.edges
    last = len(problem.layers) - 1
    if side == "inner":
        index = min(max(int(np.searchsorted(edges, front, side="left")) - 1, 0), last)
        cut = dataclasses.replace(problem.layers[index], thickness=front - float(edges[index]))
        return dataclasses.replace(problem, layers=(*problem.layers[:index], cut),
                                   outer_boundary=Boundary("symmetry"))
    index = min(max(int(np.searchsorted(edges, front, side="right")) - 1, 0), last)
    cut = dataclasses.replace(problem.layers[index],
                              thickness=float(edges[index + 1]) - front)
    return dataclasses.replace(problem, inner=front, layers=(cut, *problem.layers[index + 1:]),
                               inner_boundary=Boundary("symmetry"))


def front_concentration(problem: Problem, front: float, side: str = "inner") -> float:
    """g(s): the concentration (material side, amount/m^3) at a sealed cut at ``front`` (m) of
    the live zone fed through the ``side`` face, taken as never depleted; zero at the true
    front (module docstring)."""
    live = _live_zone(problem, side, front)
    solution, _ = solve_linear(live, consumption=False)
    if not solution.success:
        return math.nan
    layer = len(live.layers) - 1 if side == "inner" else 0
    return float(solution.concentration_at(np.array([front]), layer=layer)[0])


def _front(problem: Problem, side: str) -> float | None:
    """The front of the live zone fed through ``side`` (m); None where that zone reaches the
    far face, NaN where a solve fails or nothing is fed."""
    edges = [float(e) for e in problem.edges]
    if side == "inner":
        cuts = [edges[0] + _FIRST_CUT * (edges[1] - edges[0]), *edges[1:]]
    else:
        cuts = [edges[-1] - _FIRST_CUT * (edges[-1] - edges[-2]), *edges[-2::-1]]
    values = [front_concentration(problem, s, side) for s in cuts]
    if not all(math.isfinite(v) for v in values) or values[0] <= 0.0:
        return math.nan
    if values[-1] > 0.0:
        return None
    k = next(i for i, v in enumerate(values) if v <= 0.0)
    if values[k] == 0.0:
        return cuts[k]
    low, high = sorted((cuts[k - 1], cuts[k]))
    return float(optimize.brentq(lambda s: front_concentration(problem, s, side), low, high,
                                 xtol=4 * _EPS * edges[-1], rtol=4 * _EPS))


def solve_depleted_layers(problem: Problem) -> SteadySolution | None:
    """The exact solution of a layered body whose zero-order uptake runs out in a dead zone
    bounded by fronts (module docstring), or None outside the configurations covered or where
    the body does not run out (``solve_exact`` answers those)."""
    if not _covered(problem):
        return None
    edges = [float(e) for e in problem.edges]
    fed = {side: _role(problem, side) == "fed" for side in ("inner", "outer")}
    inner = _front(problem, "inner") if fed["inner"] else edges[0]
    outer = _front(problem, "outer") if fed["outer"] else edges[-1]
    if inner is None or outer is None or not inner <= outer:
        return None  # no dead zone (or a NaN from a failed solve)
    zones = {}
    for side, front in (("inner", inner), ("outer", outer)):
        if fed[side]:
            live = _live_zone(problem, side, front)
            solution, _ = solve_linear(live)
            if not solution.success:
                return None
            first = 0 if side == "inner" else len(problem.layers) - len(live.layers)
            zones[side] = (live, solution, first)

    def piece_of(index: int):
        def piece(r: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
            r = np.asarray(r, dtype=float)
            value, gradient = np.zeros_like(r), np.zeros_like(r)
            for side, (live, solution, first) in zones.items():
                own = index - first
                if not 0 <= own < len(live.layers):
                    continue
                inside = r <= inner if side == "inner" else r >= outer
                if np.any(inside):
                    at = np.clip(r[inside], live.edges[own], live.edges[own + 1])
                    value[inside] = solution.concentration_at(at, layer=own)
                    gradient[inside] = (-np.asarray(solution.flux_at(at, layer=own))
                                        / problem.layers[index].diffusivity)
            return value, gradient
        return piece

    profile = LayeredProfile(edges, [ly.diffusivity for ly in problem.layers],
                             [piece_of(i) for i in range(len(problem.layers))])
    consumption = sum(float(solution.consumption) for _, solution, _ in zones.values())
    return SteadySolution(
        method=METHOD, reference=REFERENCE, success=True,
        message="layered body with a depleted zone between fronts fixed by the fed faces",
        concentration_at=profile.concentration_at, flux_at=profile.flux_at,
        profile_at=profile.profile_at,
        flux_inner=float(zones["inner"][1].flux_inner) if "inner" in zones else 0.0,
        flux_outer=float(zones["outer"][1].flux_outer) if "outer" in zones else 0.0,
        consumption=consumption, depletion_front=inner if fed["inner"] else outer,
        diagnostics={"depleted_zone": (inner, outer)})


def _lowest_undepleted(problem: Problem, c_face: float) -> float:
    """The smallest concentration (material side, amount/m^3) of the zero-order layers with
    the inner face's fluid at ``c_face``, every zero-order layer taken as never depleted."""
    face = dataclasses.replace(problem.inner_boundary, value=float(c_face))
    solution, minima = solve_linear(dataclasses.replace(problem, inner_boundary=face),
                                    consumption=False)
    return min(minima, default=math.inf) if solution.success else math.nan


def depletion_onset(problem: Problem, top: float) -> float | None:
    """The fluid concentration at a ``concentration`` inner face (amount/m^3) in (0, ``top``)
    at which a depleted zone first appears, or None where none appears in that range.

    Above it no zero-order layer runs out and the face flux follows the closed form taken as
    never depleted; below it the front of ``solve_depleted_layers`` enters the body. The flux
    has a kink there (its slope jumps: a sealed zero-order body takes up the same amount at
    every level above it, less and less below), so a table of the flux puts a node there.
    The onset is the root of the never-depleted solution's smallest zero-order concentration
    as a function of the face's value (``scipy.optimize.brentq``: that minimum rises with the
    value the face holds)."""
    if (problem.inner_boundary.kind != "concentration"
            or not any(layer.reaction.law.depletes for layer in problem.layers)):
        return None
    low, high = _lowest_undepleted(problem, 0.0), _lowest_undepleted(problem, top)
    if not (math.isfinite(low) and math.isfinite(high)) or not low < 0.0 < high:
        return None
    return float(optimize.brentq(lambda c: _lowest_undepleted(problem, c), 0.0, top,
                                 xtol=4 * _EPS * top, rtol=4 * _EPS))
