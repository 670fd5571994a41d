"""The layers' steady answer at one wall concentration, as accurate as the lumen's record
claims, and the study of the layers' radial mesh (``convergence.space_layers``).

Where the engine has no closed form for the layers (Michaelis-Menten uptake, say) they are
solved by the finite volumes of ``fv_steady`` (second order in the cell size). On the default
mesh (``fv_mesh.default_cells_per_layer``) that error is about 2e-3 of the layers' minimum and
4e-5 of the wall flux (measured on the Michaelis-Menten fibre of the tests), far above the
lumen's own grid bands, and no study of the lumen (in r or z) sees it. So every answer is
formed as the steady family's primary check forms its figures (``steady_check``: meshes refined
by 2, Richardson extrapolation):

* the layers are solved on two meshes, ``2 n0`` and ``4 n0`` cells per layer (``n0`` half the
  default mesh, rounded up: the finer of the two is twice the default);
* the wall flux, the consumption and the outer-face rate per unit length and the layers'
  minimum (an interior one by the parabola through the lowest node and its neighbours,
  :func:`smooth_minimum`) are Richardson-extrapolated at the scheme's formal order 2,
  ``phi = phi_f + (phi_f - phi_c) / (2^2 - 1)`` (L.F. Richardson, "The approximate arithmetical
  solution by finite differences of physical problems", Phil. Trans. R. Soc. A 210 (1911) 307;
  P.J. Roache, *Verification and Validation in Computational Science and Engineering*, 1998,
  ch. 5); the minimum's radius and the profile (the record's picture) are the finer mesh's;
* layers with zero-order uptake are not extrapolated (a depletion front crossing cells lowers
  the order): their answer is the finer mesh's.

The study (:func:`study_layer_mesh`) adds the mesh of ``n0`` cells: a three-grid study (Celik
et al., J. Fluids Eng. 130 (2008) 078001, ``convergence.grid_study``) of the same quantities on
``4 n0``, ``2 n0`` and ``n0`` cells, whose finest mesh is the finer of the answer's two. Its
observed order tests the formal order the extrapolation assumes, and its GCI_fine bounds the
finer mesh's error; in the asymptotic range the extrapolated value lies well inside that band
(on the fibre the extrapolated minimum is within 3e-7 of scipy's shooting, relative, where the
band is about 6e-4 of it: a conservative band, as the steady family's GCI_fine of its
extrapolated fluxes is).

Layers with a closed form (``exact_steady``: linear kinetics, zero order without a depleted
zone; and any other route ``layer_walls.solve_layers_at`` takes before finite volumes) are
solved once: their answer carries no mesh error and needs no study.

:func:`accurate_answer` is the one route to an accurate answer: the full check's wall table and
direct solves (``wall_table.layer_answer``) and a trial model must all go through it (or, for
many trials at once, through :func:`accurate_batch`, the same rule batched), so that every
route is equally accurate.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any, Protocol, TypeVar

import numpy as np

from worker.engine.convergence import GridStudy, gci_or_fallback, grid_study
from worker.engine.fv_mesh import default_cells_per_layer
from worker.engine.fv_steady import METHOD_NAME as FINITE_VOLUMES
from worker.engine.fv_trials import cells_per_layer_trials, solve_one_grid
from worker.engine.limits import check_limit
from worker.engine.lumen.layer_walls import solve_layers_at
from worker.engine.model import Problem, SteadySolution
from worker.engine.outcome import Outcome
from worker.engine.steady_check import FALLBACK_SAFETY_FACTOR, FORMAL_ORDER, ORDER_BAND

__all__ = [
    "EXTRAPOLATED",
    "FORMAL_ORDER",
    "REFINEMENT",
    "LayerStudy",
    "accurate_answer",
    "accurate_batch",
    "base_cells",
    "extrapolated",
    "flux_band_fraction",
    "layer_mesh_check",
    "richardson",
    "smooth_minimum",
    "study_layer_mesh",
]

#: Refinement ratio between the meshes. The scheme's formal order, the observed orders taken
#: as the formal one and Roache's safety factor for a band formed from the formal order where
#: no order can be observed are the steady family's (``steady_check``): the same finite
#: volumes.
REFINEMENT = 2
#: The fields of an answer that are Richardson-extrapolated (the rest are the finer mesh's).
EXTRAPOLATED = ("wall_flux", "consumption_per_length", "outer_per_length", "minimum")


class _Answer(Protocol):
    """What an answer must hold to be extrapolated (the fields ``EXTRAPOLATED``)."""

    @property
    def wall_flux(self) -> float: ...
    @property
    def consumption_per_length(self) -> float: ...
    @property
    def outer_per_length(self) -> float: ...
    @property
    def minimum(self) -> float: ...


A = TypeVar("A", bound=_Answer)
#: ``sample(problem, solution) -> answer``: the figures of one steady solution of the layers
#: (``wall_table.answer_of``).
Sampler = Callable[[Problem, SteadySolution], A]


def base_cells(problem: Problem, c_wall: float) -> tuple[int, ...]:
    """``n0``: half the default mesh (cells per layer) of the layers at ``c_wall``, rounded up
    (at least the 2 cells a layer needs)."""
    boundary = dataclasses.replace(problem.inner_boundary, value=float(c_wall))
    at_wall = dataclasses.replace(problem, inner_boundary=boundary)
    return tuple(max(2, math.ceil(n / REFINEMENT)) for n in default_cells_per_layer(at_wall))


def _refined(cells: tuple[int, ...], level: int) -> tuple[int, ...]:
    return tuple(n * REFINEMENT**level for n in cells)


def richardson(fine: Any, coarse: Any) -> Any:
    """``fine + (fine - coarse) / (r^p - 1)`` with r = ``REFINEMENT``, p = ``FORMAL_ORDER``
    (Richardson 1911): floats or numpy arrays alike (a batch of figures solved on the meshes
    of ``2 n0`` and ``4 n0`` cells per layer)."""
    return fine + (fine - coarse) / (REFINEMENT**FORMAL_ORDER - 1.0)


def smooth_minimum(problem: Problem, solution: SteadySolution,
                   cells: tuple[int, ...]) -> float:
    """The lowest concentration of a finite-volume solution on ``cells`` (per layer, uniform
    within each layer), as a quantity that converges smoothly with the mesh: at a face or an
    interface the edge value (the lowest node next to it too: at a sealed face the edge value
    is the last cell's), inside a layer the vertex of the parabola through the lowest cell
    centre and its two neighbours. The lowest node alone (the minimum of the piecewise-linear
    profile) errs there by up to a quarter of the curvature times h^2, by an amount that
    depends on where the true minimum falls between nodes, so that it cannot be
    extrapolated."""
    lowest = math.inf
    edges = problem.edges
    for j, n in enumerate(cells):
        start, stop = float(edges[j]), float(edges[j + 1])
        h = (stop - start) / n
        r = np.concatenate(([start], start + h * (np.arange(n) + 0.5), [stop]))
        c = np.asarray(solution.concentration_at(r, layer=j), dtype=float)
        i = int(np.argmin(c))
        value = float(c[i])
        if 1 < i < r.size - 2:  # a cell centre with cell centres either side
            (x0, x1, x2), (c0, c1, c2) = r[i - 1:i + 2], c[i - 1:i + 2]
            slope = (c1 - c0) / (x1 - x0)
            curvature = ((c2 - c1) / (x2 - x1) - slope) / (x2 - x0)
            if curvature > 0.0:
                x = min(max(0.5 * (x0 + x1) - slope / (2.0 * curvature), x0), x2)
                value = min(value, float(c0 + slope * (x - x0) + curvature * (x - x0) * (x - x1)))
        lowest = min(lowest, value)
    return lowest


def _smoothed(problem: Problem, solution: SteadySolution, cells: tuple[int, ...],
              sample: Sampler[A]) -> A:
    """``sample`` of the solution with its minimum by :func:`smooth_minimum`."""
    answer = sample(problem, solution)
    return dataclasses.replace(  # type: ignore[type-var]
        answer, minimum=smooth_minimum(problem, solution, cells))


def extrapolated(fine: A, coarse: A) -> A:
    """``fine`` with the fields ``EXTRAPOLATED`` replaced by :func:`richardson` of the two."""
    changes = {name: float(richardson(getattr(fine, name), getattr(coarse, name)))
               for name in EXTRAPOLATED}
    return dataclasses.replace(fine, **changes)  # type: ignore[type-var]


def _extrapolates(problem: Problem) -> bool:
    return not any(layer.reaction.law.depletes for layer in problem.layers)


def accurate_answer(problem: Problem, c_wall: float, sample: Sampler[A]) -> A:
    """The layers' answer with the fluid at the wall at ``c_wall`` (``problem``: the layers
    with the lumen wall as a ``concentration`` face): one closed-form solve where
    ``solve_layers_at`` offers one, else two meshes and Richardson extrapolation (module
    docstring). ``sample`` forms the answer of one solution."""
    cells = base_cells(problem, c_wall)
    fine = solve_layers_at(problem, c_wall, _refined(cells, 2))
    if fine.method != FINITE_VOLUMES or not _extrapolates(problem):
        return sample(problem, fine)
    coarse = solve_layers_at(problem, c_wall, _refined(cells, 1))
    return extrapolated(_smoothed(problem, fine, _refined(cells, 2), sample),
                        _smoothed(problem, coarse, _refined(cells, 1), sample))


def accurate_batch(view: Problem, n: int) -> tuple[np.ndarray, np.ndarray]:
    """(wall flux density (mol/(m^2 s)), the layers' minimum (mol/m^3)) of n trials of layers
    without a closed form, arrays (n,): :func:`accurate_answer`'s finite-volume route for every
    trial at once (``fv_trials.solve_one_grid`` on the meshes of ``2 n0`` and ``4 n0`` cells
    per layer, each trial's own ``n0``, then :func:`richardson`; the minimum by the rule of
    :func:`smooth_minimum`; layers with zero-order uptake: the finer mesh alone). ``view``:
    the layers (the wall a ``concentration`` face) with the varied fields, the wall value
    among them, as arrays of length n (``fv_trials.solve_trials``). NaN marks a trial whose
    solve failed."""
    base = np.maximum(2, -(-cells_per_layer_trials(view, n) // REFINEMENT))
    fine = solve_one_grid(view, n, base * REFINEMENT**2)
    if not _extrapolates(view):
        return fine.flux_inner, fine.layer_min.min(axis=1)
    coarse = solve_one_grid(view, n, base * REFINEMENT)
    return (richardson(fine.flux_inner, coarse.flux_inner),
            richardson(fine.smooth_min, coarse.smooth_min))


@dataclass(frozen=True)
class LayerStudy:
    """The study of the layers' radial mesh at one wall concentration ``c_wall`` (mol/m^3):
    ``studies`` by field of ``EXTRAPOLATED``, on ``cells`` (per layer, fine to coarse);
    ``answer``: the accurate answer there (:func:`accurate_answer`, from the same solves)."""

    c_wall: float
    cells: tuple[tuple[int, ...], ...]
    studies: dict[str, GridStudy]
    answer: Any
    extrapolated: bool

    def band(self, name: str) -> float:
        """The grid band of ``name`` (its unit): GCI_fine times the fine value, or where no
        order can be observed the formal order with safety factor 3 (Roache 1994); 0 where the
        meshes agree to round-off."""
        study = self.studies[name]
        fraction = gci_or_fallback(study, FORMAL_ORDER, FALLBACK_SAFETY_FACTOR)
        return fraction * abs(study.fine) if math.isfinite(fraction) else math.inf


def study_layer_mesh(problem: Problem, c_wall: float, sample: Sampler[A]) -> LayerStudy | None:
    """The three-grid study of the layers at ``c_wall`` on ``4 n0``, ``2 n0`` and ``n0`` cells
    per layer; None where the layers have a closed form (no mesh to study)."""
    cells = base_cells(problem, c_wall)
    solutions = [solve_layers_at(problem, c_wall, _refined(cells, level)) for level in (2, 1)]
    if solutions[0].method != FINITE_VOLUMES:
        return None
    solutions.append(solve_layers_at(problem, c_wall, _refined(cells, 0)))
    extrapolates = _extrapolates(problem)
    if extrapolates:
        answers = [_smoothed(problem, s, _refined(cells, level), sample)
                   for s, level in zip(solutions, (2, 1, 0), strict=True)]
    else:
        answers = [sample(problem, s) for s in solutions]
    studies = {name: grid_study([getattr(a, name) for a in answers],
                                ratios=(REFINEMENT, REFINEMENT)) for name in EXTRAPOLATED}
    answer = extrapolated(answers[0], answers[1]) if extrapolates else answers[0]
    return LayerStudy(float(c_wall), tuple(_refined(cells, k) for k in (2, 1, 0)),
                      studies, answer, extrapolates)


def layer_mesh_check(outcome: Outcome, problem: Problem, studies: list[LayerStudy], *,
                     flux_scale: float, radius: float, inlet: float) -> None:
    """``convergence.space_layers``: the largest grid band of the layers' answer over the
    studied wall concentrations: the wall flux's over ``flux_scale`` (the largest |j| of the
    wall law, mol/(m^2 s)), the consumption's and the outer-face rate's over
    ``2 pi radius flux_scale`` (as ``wall_table`` judges its table) and the minimum's over the
    inlet concentration (as ``convergence.space_r`` judges the lumen's concentrations). Warns
    where an extrapolated quantity's observed order is outside ``ORDER_BAND``."""
    per_length = 2.0 * math.pi * radius * max(flux_scale, 1e-300)
    scales = {"wall_flux": max(flux_scale, 1e-300), "consumption_per_length": per_length,
              "outer_per_length": per_length, "minimum": max(abs(inlet), 1e-300)}
    worst, words = 0.0, []
    for study in studies:
        parts = []
        for name, grid in study.studies.items():
            relative = study.band(name) / scales[name]
            worst = max(worst, relative) if math.isfinite(relative) else math.inf
            order = (f"{grid.apparent_order:.3g}" if math.isfinite(grid.apparent_order)
                     else "not formed")
            parts.append(f"{name} fine {grid.fine:.9g}, observed order {order}, band "
                         f"{study.band(name):.3g} ({grid.convergence})")
            if (study.extrapolated and grid.convergence == "monotonic"
                    and not ORDER_BAND[0] <= grid.apparent_order <= ORDER_BAND[1]):
                outcome.warnings.append(
                    f"study of the layers' mesh at the wall concentration {study.c_wall:.6g}: "
                    f"{name} converges at observed order {grid.apparent_order:.3g}, outside "
                    f"{ORDER_BAND[0]:g}-{ORDER_BAND[1]:g} around the formal order "
                    f"{FORMAL_ORDER} its Richardson extrapolation assumes")
        cells = ", ".join("/".join(map(str, c)) for c in study.cells)
        words.append(f"wall at {study.c_wall:.6g} {problem.concentration_unit}, cells per "
                     f"layer {cells}: " + "; ".join(parts))
    outcome.check_at_most(
        "convergence.space_layers", worst, check_limit(problem, "convergence.space_layers"),
        "the layers' radial finite volumes refined by 2 twice at the wall concentrations that "
        "matter (Celik et al. 2008): " + " | ".join(words) + "; the answer used is "
        + ("Richardson-extrapolated from the two finer meshes at the formal order 2"
           if all(s.extrapolated for s in studies) else "the finest mesh's (zero-order "
           "uptake: not extrapolated)")
        + "; bands over the largest wall flux (rates per length over 2 pi R times it) and the "
        "minimum over the inlet concentration")


def flux_band_fraction(studies: list[LayerStudy]) -> float:
    """The largest relative grid band of the wall flux over the studied wall concentrations."""
    worst = 0.0
    for study in studies:
        j = abs(study.studies["wall_flux"].fine)
        band = study.band("wall_flux")
        worst = max(worst, band / j if j > 0.0 else (0.0 if band == 0.0 else math.inf))
    return worst
