"""The coarse finite-volume mesh of a case whose first requested time is very early: cells graded
towards the exchanging face(s), where uniform cells cannot resolve the boundary layer.

Shortly after the start, what a face releases (or takes up) comes from a layer of about the
diffusion length sqrt(D t) next to it: for a body of thickness L the released fraction grows as
sqrt(D t / L^2) (J. Crank, *The Mathematics of Diffusion*, 2nd ed., 1975, eq. 4.18 for the
plane sheet), and the concentration falls from the face value to the body's within a few
diffusion lengths. The uniform coarse mesh resolves that layer with cells of at most
``solve.EARLY_RESOLUTION`` diffusion lengths up to ``solve.MAX_COARSE_CELLS`` cells per layer;
past that cap its cells grow with 1/sqrt(t1) and the early amounts fail their own refinement
study and cross-checks (measured: a 0.1 mm sphere releasing into a sink, first time at
D t1 / a^2 = 3e-5, cells of 0.73 diffusion lengths, misses the release cross-check; at 4e-5,
0.63 diffusion lengths, it passes).

Where a layer touching an exchanging face (one that works against a fluid: a concentration,
mass-transfer or compartment face, with an area) would get capped cells wider than
``GRADING_TRIGGER`` diffusion lengths, its cells are graded towards that face (both faces of a
single layer exchanging at each end): the same number of cells, the cell at the face
``resolution`` diffusion lengths wide, the map ``fv_grading``'s tanh stretching. Every other
case keeps the uniform meshes it had, cell for cell. A sealed or symmetry face, an imposed flux
and a solid centre exchange nothing with a fluid and draw no grading; inner layers stay uniform.
"""

from __future__ import annotations

import math

from worker.engine.fv_grading import MAX_STRETCH, GradedCells, stretch_for_slope
from worker.engine.model import Problem

#: Capped uniform cells wider than this many diffusion lengths sqrt(D t1) at an exchanging face
#: make that layer's cells graded (between the 0.63 that still passes and the 0.73 that fails,
#: module docstring).
GRADING_TRIGGER = 0.65
#: The steepest grading asked for: the face-cell slope of ``fv_grading.MAX_STRETCH``, 8.1e-13
#: (reached only for a first time below some 1e-28 of the diffusion time L^2 / D across the
#: layer: slope = N resolution sqrt(D t1) / L, with at least ``solve.MAX_COARSE_CELLS`` = 250
#: cells at ``solve.EARLY_RESOLUTION`` = 0.35, gives D t1 / L^2 = 8.6e-29).
SLOPE_FLOOR = MAX_STRETCH / math.sinh(MAX_STRETCH)

__all__ = ["GRADING_TRIGGER", "exchanging_sides", "graded_coarse"]


def exchanging_sides(problem: Problem) -> tuple[str, ...]:
    """The faces (``"inner"``, ``"outer"``) that exchange solute with a fluid: a concentration,
    mass-transfer or compartment face with a nonzero area (not the centre of a solid cylinder
    or sphere)."""
    sides = []
    for side, boundary in (("inner", problem.inner_boundary), ("outer", problem.outer_boundary)):
        if side == "inner" and problem.exponent > 0 and problem.inner == 0.0:
            continue
        if boundary.condition.fluid_concentration(boundary) is not None:
            sides.append(side)
    return tuple(sides)


def graded_coarse(problem: Problem, first_time: float | None, cells: tuple[int, ...],
                  resolution: float) -> GradedCells | None:
    """The coarse mesh ``cells`` (cells per layer) graded where the first requested time
    ``first_time`` (s) needs it (module docstring), or None where no layer does. A graded
    layer keeps its cells; its face cell is ``resolution`` diffusion lengths wide."""
    if first_time is None or not first_time > 0.0:
        return None
    exchanging = exchanging_sides(problem)
    last = len(problem.layers) - 1
    sides: list[str] = []
    stretches: list[float] = []
    for j, (layer, count) in enumerate(zip(problem.layers, cells, strict=True)):
        towards = [side for side in exchanging
                   if (side == "inner" and j == 0) or (side == "outer" and j == last)]
        length = math.sqrt(layer.diffusivity * first_time)
        if not towards or layer.thickness / count <= GRADING_TRIGGER * length:
            sides.append("")
            stretches.append(0.0)
            continue
        # the face cell is L s'(0) / N wide to first order (``fv_grading``)
        slope = max(count * resolution * length / layer.thickness, SLOPE_FLOOR)
        stretch = stretch_for_slope(slope)
        sides.append(("both" if len(towards) == 2 else towards[0]) if stretch else "")
        stretches.append(stretch)
    if not any(stretches):
        return None
    return GradedCells(tuple(cells), tuple(sides), tuple(stretches))
