"""Exact steady solution of a layered body fed through its inner face whose zero-order uptake
runs the solute out beyond a front (a depleted zone reaching the sealed outer face).

Where the solute runs out, the live zone ends at a front ``s`` with ``C = dC/dr = 0`` and the
body beyond holds none (A.V. Hill, "The diffusion of oxygen and lactic acid through tissues",
Proc. R. Soc. B 104 (1928) 39-96; J. Crank, *The Mathematics of Diffusion*, 2nd ed., Oxford,
1975, ch. 14). The live zone is then an ordinary layered problem: the layers from the inner
face to ``s`` (the front's layer cut at ``s``) with the fed inner face and a sealed face at
``s``, which the engine solves in closed form taking zero order as never depleted
(``exact_steady.solve_linear``). The front is where that solution reaches zero at the cut:
``g(s) = C(s) = 0``. ``g`` does not increase with ``s`` (more of the body consumes what the
same face supplies), so ``scipy.optimize.brentq`` finds it between the last layer edge where
``g > 0`` and the first where ``g <= 0``. With the cut sealed the flux points outward
everywhere in the live zone, so ``C/K`` falls towards the front and is nowhere negative.

A front can only lie in a zero-order layer: in a layer without uptake, or with first-order
uptake, ``C = dC/dr = 0`` at one point means ``C = 0`` throughout (uniqueness of the layer's
linear equation), so there the front sits at the layer's inner edge.

Covered: slab, cylinder, sphere with a hollow inner face; any number of layers, each without
reaction, first order or zero order (at least one zero order); partition jumps at interfaces;
the inner face fed (``depletion_role`` ``fed``), the outer sealed (symmetry, zero flux, or a
film of zero coefficient). Anything else returns None (the finite volumes cover it). A single
layer is also covered by ``depletion_exact`` (Hill's closed form), which the tests compare.
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
#: The first layer's cut nearest the inner face at which g is evaluated, as a fraction of that
#: layer's thickness (g at the face itself is the fed face's own value).
_FIRST_CUT = 1e-9


def _covered(problem: Problem) -> bool:
    laws = [layer.reaction.law for layer in problem.layers]
    return (not problem.solid_centre
            and problem.inner_boundary.condition.depletion_role(problem.inner_boundary) == "fed"
            and problem.outer_boundary.condition.depletion_role(problem.outer_boundary)
            == "sealed"
            and all(law.exact_coefficients(layer.reaction) is not None
                    for law, layer in zip(laws, problem.layers, strict=True))
            and any(law.depletes for law in laws))


def _live_zone(problem: Problem, front: float) -> Problem:
    """The layers from the inner face to ``front`` (m), the last cut there and sealed."""
    edges = problem.edges
    index = int(np.searchsorted(edges, front, side="left")) - 1
    index = min(max(index, 0), len(problem.layers) - 1)
    cut = dataclasses.replace(problem.layers[index], thickness=front - float(edges[index]))
    return dataclasses.replace(problem, layers=(*problem.layers[:index], cut),
                               outer_boundary=Boundary("symmetry"))


def front_concentration(problem: Problem, front: float) -> float:
    """g(s): the concentration (material side, amount/m^3) at a sealed cut at ``front`` (m) of
    the live zone taken as never depleted; zero at the true front (module docstring)."""
    live = _live_zone(problem, front)
    solution, _ = solve_linear(live, consumption=False)
    if not solution.success:
        return math.nan
    return float(solution.concentration_at(np.array([front]),
                                           layer=len(live.layers) - 1)[0])


def solve_depleted_layers(problem: Problem) -> SteadySolution | None:
    """The exact solution of a layered body whose zero-order uptake runs out beyond a front
    (module docstring), or None outside the configurations covered or where the body does not
    run out (``g`` positive at the outer face: ``solve_exact`` answers those)."""
    if not _covered(problem):
        return None
    edges = [float(e) for e in problem.edges]
    cuts = [edges[0] + _FIRST_CUT * (edges[1] - edges[0]), *edges[1:]]
    values = [front_concentration(problem, s) for s in cuts]
    if not all(math.isfinite(v) for v in values) or values[-1] > 0.0:
        return None
    if values[0] <= 0.0:
        return None  # nothing fed: the finite volumes answer the trivial case
    k = next(i for i, v in enumerate(values) if v <= 0.0)
    if values[k] == 0.0:
        front = cuts[k]
    else:
        front = float(optimize.brentq(lambda s: front_concentration(problem, s), cuts[k - 1],
                                      cuts[k], xtol=4 * _EPS * edges[-1], rtol=4 * _EPS))
    live = _live_zone(problem, front)
    solution, _ = solve_linear(live)
    if not solution.success:
        return None
    last = len(live.layers) - 1

    def piece_of(index: int):
        def piece(r: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
            r = np.asarray(r, dtype=float)
            value, gradient = np.zeros_like(r), np.zeros_like(r)
            if index <= last:
                inside = r <= front if index == last else np.ones(r.shape, dtype=bool)
                if np.any(inside):
                    at = np.minimum(r[inside], live.edges[index + 1])
                    value[inside] = solution.concentration_at(at, layer=index)
                    gradient[inside] = (-np.asarray(solution.flux_at(at, layer=index))
                                        / problem.layers[index].diffusivity)
            return value, gradient
        return piece

    profile = LayeredProfile(edges, [ly.diffusivity for ly in problem.layers],
                             [piece_of(i) for i in range(len(problem.layers))])
    return SteadySolution(
        method=METHOD, reference=REFERENCE, success=True,
        message="layered body with a depleted zone beyond a front fixed by the fed inner face",
        concentration_at=profile.concentration_at, flux_at=profile.flux_at,
        profile_at=profile.profile_at,
        flux_inner=float(solution.flux_inner), flux_outer=0.0,
        consumption=float(solution.consumption), depletion_front=front,
        diagnostics={"depleted_zone": (front, edges[-1]),
                     **solution.diagnostics})


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
