"""Wall laws of the lumen from the layers around it: the steady radial diffusion-reaction of a
layered cylinder (``worker.engine.model.Problem``) seen as ``j(c_w)``, the outward flux
density at the lumen wall (mol/(m^2 s)) as a function of the fluid's wall concentration c_w.

The problem is the radial case with the lumen wall as its inner face: geometry ``cylinder``,
``inner`` the lumen radius (m) > 0, the inner boundary of kind ``concentration`` (its value is
replaced by c_w; its partition, or the first layer's, applies at the wall), the outer boundary
any steady kind. Axial diffusion in the layers is neglected, so at each axial position the
layers are in their steady radial state (the lumen model's assumption).

* Linear kinetics (none, first order; no solubility reached): ``j = k (c_w - c_out)`` exactly,
  ``k`` and ``c_out`` from two closed-form solves at c_w = 0 and 1 (superposition: the solution
  is affine in the boundary data; J. Crank, *The Mathematics of Diffusion*, 2nd ed., 1975,
  ch. 1). This is the Robin wall of the Graetz series (``graetz.graetz_series`` with
  ``Bi = k R / D``) and of ``marching.ConductanceWall``.
* Any kinetics: one steady solve per evaluation (closed form where the engine offers one; the
  layered depletion front of ``depletion_layers`` where zero-order uptake runs out in a body of
  several layers, whose finite-volume flux errs by about 1e-3 when the live zone spans ten
  cells; finite volumes otherwise) and the derivative by a central difference; below c_w = 0 the law
  is continued linearly from c_w = 0 (no wall takes up solute that is not there; the lumen's
  Newton iteration may try such values).
"""

from __future__ import annotations

import dataclasses
import math

from worker.engine.depletion_layers import solve_depleted_layers
from worker.engine.exact_steady import solve_exact
from worker.engine.fv_steady import solve_fv
from worker.engine.lumen.inputs import LumenInputError
from worker.engine.lumen.marching import ConductanceWall, FunctionWall
from worker.engine.model import Problem, SteadySolution

__all__ = ["layer_wall_law", "linear_layer_wall", "solve_layers_at"]

#: Relative step of the central difference for dj/dc_w (of max(|c_w|, the scale given)).
DERIVATIVE_STEP = 1e-6


def _check(problem: Problem) -> None:
    if problem.geometry != "cylinder":
        raise LumenInputError(
            f"geometry: expected 'cylinder' for the layers around a lumen, got "
            f"{problem.geometry!r}")
    if not problem.inner > 0.0:
        raise LumenInputError(
            f"inner: expected the lumen radius (> 0 m), got {problem.inner!r}")
    if problem.inner_boundary.kind != "concentration":
        raise LumenInputError(
            f"inner_boundary.kind: expected 'concentration' (the lumen wall's value is set by "
            f"the flow), got {problem.inner_boundary.kind!r}")


def solve_layers_at(problem: Problem, c_wall: float,
                    cells_per_layer: tuple[int, ...] | int | None = None) -> SteadySolution:
    """The layers' steady solution with the fluid at the wall at ``c_wall`` (closed form where
    the engine has one, the layered depletion front where zero-order uptake runs out beyond
    it, else finite volumes on ``cells_per_layer``)."""
    _check(problem)
    boundary = dataclasses.replace(problem.inner_boundary, value=float(c_wall))
    at_wall = dataclasses.replace(problem, inner_boundary=boundary)
    solution = solve_exact(at_wall)
    if solution is None:
        solution = solve_depleted_layers(at_wall)
    if solution is None or not solution.success:
        solution = solve_fv(at_wall, cells_per_layer)
    if not solution.success:
        raise LumenInputError(
            f"layers: no steady solution with the wall at {c_wall!r}: {solution.message}")
    return solution


def linear_layer_wall(problem: Problem) -> ConductanceWall:
    """``j = k (c_w - c_out)`` of layers with linear kinetics, exactly (module docstring)."""
    _check(problem)
    if not problem.is_linear:
        raise LumenInputError(
            "layers: expected linear kinetics (none or first order, no solubility reached) for "
            "a conductance wall; use layer_wall_law")
    j_zero = solve_layers_at(problem, 0.0).flux_inner
    conductance = solve_layers_at(problem, 1.0).flux_inner - j_zero
    if not (math.isfinite(conductance) and conductance > 0.0):
        raise LumenInputError(
            f"layers: expected a wall that conducts (dj/dc_w > 0), got {conductance!r} m/s")
    return ConductanceWall(conductance, -j_zero / conductance)


def layer_wall_law(problem: Problem, scale: float = 1.0,
                   cells_per_layer: int | None = None) -> FunctionWall:
    """``j(c_w)`` and ``dj/dc_w`` of layers with any kinetics (module docstring); ``scale`` is
    a typical concentration (mol/m^3), setting the difference step."""
    _check(problem)

    def flux(c: float) -> float:
        return float(solve_layers_at(problem, c, cells_per_layer).flux_inner)

    def law(c_wall: float) -> tuple[float, float]:
        at = max(c_wall, 0.0)
        h = DERIVATIVE_STEP * max(abs(at), abs(scale))
        low = max(at - h, 0.0)
        slope = (flux(at + h) - flux(low)) / (at + h - low)
        j = flux(at)
        if c_wall < 0.0:
            j += slope * c_wall
        return j, slope

    return FunctionWall(law)
