"""Steady finite volumes for many trials of one case at once (``solve_trials``).

A Monte Carlo run or a design search asks for the same steady case with a few inputs changed,
thousands of times. For kinetics without a closed form (Michaelis-Menten, zero order with a
depleted zone in a layered body) the full check's primary figures come from the finite
volumes of ``fv_steady`` on three grids (``convergence.refined_solutions``) and Richardson
extrapolation (``steady_check.primary_figures``). This module computes the same figures for
every trial together:

* **The same discrete problems.** Each trial gets the meshes the full check would build for it
  (``fv_mesh.default_cells_per_layer``, its rule evaluated over the trials by
  ``cells_per_layer_trials``; the medium and fine meshes twice and four times as many cells per
  layer), the same operator (``fv_mesh.assemble_blocks``, the one assembly of the face
  conductances) and the same reaction terms.
* **Laid end to end.** The meshes of all trials on one grid are stacked as ``fv_mesh.MeshStack``
  stacks the grids of one problem: one spacer cell (an identity row) between consecutive
  trials, so each Newton iteration is one tridiagonal solve (LAPACK ``dgtsv``) of the whole
  stack, every trial's rows exactly its own system.
* **Newton and the active set, per trial.** Each iteration is a Newton step on the balance of
  ``fv_steady`` with the zero-order cells of the active set pinned at C = 0 (the primal-dual
  active-set method of Hintermueller, Ito & Kunisch, SIAM J. Optim. 13 (2002) 865, which is a
  semismooth Newton method), a per-trial step bound that keeps Michaelis-Menten iterates above
  ``-MM_FLOOR_FRACTION km`` and a per-trial backtracking line search on the residual, as
  ``fv_steady._newton``. A trial stops when ``fv_steady``'s own tests hold for it (max|F| <=
  ``NEWTON_RESIDUAL_RTOL`` times the balance scale and, where the balance is nonlinear, the last
  update <= ``NEWTON_UPDATE_RTOL`` max|C|) and its active set no longer changes; its cells are
  then left alone. The discrete problem has one solution (an M-matrix operator with a
  monotone rate), so the path to it does not matter, only the tests that it is reached.
* **Coarse to fine.** The coarse grid starts from ``fv_steady``'s first-order surrogate (a
  supersolution); the medium and fine grids start from the coarser solution interpolated
  linearly within each layer and its active set, which leaves Newton two or three steps.

Trials that do not converge within ``TRIAL_ITERATIONS`` on a grid are reported unsolved
(``TrialFigures.solved``); the caller solves them again one at a time.

Figures of each trial (``TrialFigures``), as ``steady_check.primary_figures`` forms them: the
face fluxes and the consumption of the three grids, Richardson-extrapolated per
``convergence.grid_study`` (``extrapolated_or_fine``); the surface concentrations, the depletion
front and the extremes from the fine grid. The extremes of each layer are the exact extremes of
the fine grid's piecewise-linear profile (``fv_mesh.layer_profiles``: the layer's two edge values
and its cell centres), that is, the smallest and largest of its nodes; the full check searches
the same profile from 41 samples per layer (``extremes.layer_extremes``) and reaches the same
value to within the profile's curvature times its search grid spacing squared.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from worker.engine.convergence import REFINEMENT_RATIO, extrapolated_or_fine
from worker.engine.fv_mesh import (
    MAX_CELLS_PER_LAYER,
    MIN_CELLS_PER_LAYER,
    RESISTANCE_CELLS,
    THIELE_CELL_LIMIT,
    assemble_blocks,
    cell_geometry,
    solve_tridiagonal,
)
from worker.engine.fv_steady import (
    ACTIVE_SET_BAND,
    LINE_SEARCH_MAX_HALVINGS,
    MM_FLOOR_FRACTION,
    NEWTON_RESIDUAL_RTOL,
    NEWTON_UPDATE_RTOL,
    ZERO_ORDER_SMOOTHING_STEPS,
    ZERO_ORDER_STAGE_UPDATE_RTOL,
)
from worker.engine.model import Problem

__all__ = ["TRIAL_ITERATIONS", "OneGridFigures", "TrialFigures", "cells_per_layer_trials",
           "solve_one_grid", "solve_trials"]

#: Newton steps allowed on one grid, every change of the active set included.
TRIAL_ITERATIONS = 120
_TINY = np.finfo(float).tiny


@dataclass(frozen=True)
class TrialFigures:
    """The primary figures of n trials (arrays over trials; SI).

    ``flux_inner``, ``flux_outer``: outward flux densities at the faces (amount/(m^2 s));
    ``consumption``: the r^n-weighted consumption (``SteadySolution.consumption``); each the
    best estimate of the three-grid study. ``surface_inner``, ``surface_outer``: material-side
    face concentrations; ``layer_min``, ``layer_max`` (n, layers): extremes per layer;
    ``depletion_front``: the fine grid's first front (m), NaN without one. ``solved``: every
    grid of the trial converged (the other figures of an unsolved trial are NaN)."""

    flux_inner: np.ndarray
    flux_outer: np.ndarray
    consumption: np.ndarray
    surface_inner: np.ndarray
    surface_outer: np.ndarray
    layer_min: np.ndarray
    layer_max: np.ndarray
    depletion_front: np.ndarray
    solved: np.ndarray


class _Trials:
    """A case's fields as arrays over n trials: per layer (n, L), per face (n,)."""

    def __init__(self, view: Problem, n: int):
        def full(value) -> np.ndarray:
            return np.broadcast_to(np.asarray(value, dtype=float), (n,)).copy()

        self.full = full
        self.view, self.n, self.exponent = view, n, view.exponent
        layers = view.layers
        self.thickness = np.column_stack([full(ly.thickness) for ly in layers])
        self.diffusivity = np.column_stack([full(ly.diffusivity) for ly in layers])
        self.partition = np.column_stack([full(ly.partition) for ly in layers])
        constants = [ly.reaction.law.fv_constants(ly.reaction, j) for j, ly in enumerate(layers)]
        self.first_order, self.vmax, self.km, self.zero_order = (
            np.column_stack([full(c[i]) for c in constants]) for i in range(4))
        self.edges = np.empty((n, len(layers) + 1))
        self.edges[:, 0] = full(view.inner)
        for j in range(len(layers)):
            self.edges[:, j + 1] = self.edges[:, j] + self.thickness[:, j]
        self.c_scale = np.zeros(n)
        for side, boundary in (("inner", view.inner_boundary), ("outer", view.outer_boundary)):
            fluid = boundary.condition.fluid_concentration(boundary)
            if fluid is not None:
                self.c_scale = np.maximum(self.c_scale,
                                          np.abs(full(view.face_partition(side)) * full(fluid)))


def cells_per_layer_trials(view: Problem, n: int) -> np.ndarray:
    """``fv_mesh.default_cells_per_layer`` of every trial, shape (n, layers), int: the same rule
    (its module constants) with the trials' fields as arrays."""
    return _cells(_Trials(view, n))


def _cells(trials: _Trials) -> np.ndarray:
    middle = 0.5 * (trials.edges[:, :-1] + trials.edges[:, 1:])
    resistances = trials.thickness / (trials.diffusivity * trials.partition
                                      * middle ** trials.exponent)
    shares = resistances / resistances.sum(axis=1, keepdims=True)
    cells = np.maximum(MIN_CELLS_PER_LAYER, np.ceil(RESISTANCE_CELLS * shares))
    for j, layer in enumerate(trials.view.layers):
        inverse = layer.reaction.law.inverse_lengths(layer.reaction, trials.diffusivity[:, j],
                                                     trials.c_scale)
        reacting = inverse > 0.0
        needed = np.ceil(trials.thickness[:, j] * inverse / THIELE_CELL_LIMIT)
        cells[:, j] = np.where(reacting, np.maximum(cells[:, j], needed), cells[:, j])
    return np.minimum(cells, MAX_CELLS_PER_LAYER).astype(np.intp)


class _Grid:
    """The meshes of every trial on one grid (``counts`` (n, L) cells per layer), end to end."""

    def __init__(self, trials: _Trials, counts: np.ndarray):
        n, layers = counts.shape
        self.trials, self.counts, self.n, self.layers = trials, counts, n, layers
        # segments: each layer of each trial, then its outer face / the spacer cell after it
        lengths = np.concatenate([counts, np.ones((n, 1), dtype=np.intp)], axis=1).ravel()
        self.lengths = lengths
        seg_starts = np.cumsum(lengths) - lengths
        self.seg_starts = seg_starts.reshape(n, layers + 1)
        total = int(lengths.sum())
        step = np.concatenate([trials.thickness / counts, np.zeros((n, 1))], axis=1).ravel()
        local = np.arange(total) - np.repeat(seg_starts, lengths)
        # the arithmetic of fv_mesh.build_mesh_stack: whole cell widths from the layer's edge
        faces = local * np.repeat(step, lengths) + np.repeat(trials.edges.ravel(), lengths)
        self.faces = faces
        exponent = trials.exponent
        (self.centres, self.face_areas, self.volumes, self.west_gaps,
         self.east_gaps) = cell_geometry(faces, exponent)
        self.firsts = self.seg_starts[:, 0].copy()
        self.lasts = self.seg_starts[:, layers].copy()
        self.member = np.repeat(np.arange(n), counts.sum(axis=1) + 1)[:-1]
        self.segment = np.repeat(np.arange(n * (layers + 1)), lengths)[:-1]
        self.real = (self.segment % (layers + 1)) != layers
        self.d = self.per_cell(trials.diffusivity, np.inf)
        self.k = self.per_cell(trials.partition, 1.0)
        view = trials.view
        faces_of = []
        for side, boundary, at, gap, cell in (
                ("inner", view.inner_boundary, self.firsts, self.west_gaps, self.firsts),
                ("outer", view.outer_boundary, self.lasts, self.east_gaps, self.lasts - 1)):
            area = self.face_areas[at]
            condition: Any = boundary.condition  # its fv_face takes arrays over trials too
            g, far, fixed = (trials.full(v) for v in condition.fv_face(
                boundary, side, trials.full(view.face_partition(side)), area, gap[cell],
                self.d[cell]))
            closed = area == 0.0  # the centre of a solid body carries no flux
            faces_of.append((np.where(closed, 0.0, g), np.where(closed, 0.0, far),
                             np.where(closed, 0.0, fixed)))
        self.operator = assemble_blocks(self.face_areas, self.west_gaps, self.east_gaps, self.d,
                                        self.k, self.firsts, self.lasts, faces_of[0],
                                        faces_of[1], self.lasts[:-1])
        self.first_order = self.per_cell(trials.first_order, 0.0)
        vmax = self.per_cell(trials.vmax, 0.0)
        self.mm = np.flatnonzero(vmax > 0.0)
        self.km = self.per_cell(trials.km, 1.0)[self.mm]
        self.mm_load = (self.volumes * vmax)[self.mm]
        self.linear_diagonal = self.volumes * self.first_order
        self.first_order_any = bool(np.any(self.first_order > 0.0))
        zero_order = self.per_cell(trials.zero_order, 0.0)
        self.zero_cells = zero_order > 0.0
        self.zero_index = np.flatnonzero(self.zero_cells)
        self.zero_load = self.volumes * zero_order
        self.nonlinear = np.zeros(n, dtype=bool)
        self.nonlinear[self.member[self.mm]] = True

    def per_cell(self, per_layer: np.ndarray, spacer: float) -> np.ndarray:
        values = np.concatenate([per_layer, np.full((self.n, 1), spacer)], axis=1).ravel()
        return np.repeat(values, self.lengths)[:-1]

    def per_trial_max(self, values: np.ndarray) -> np.ndarray:
        return np.maximum.reduceat(np.abs(values), self.firsts)

    # -- the balance of fv_steady._Balance, every trial at once ---------------------------------

    def consumption(self, c: np.ndarray) -> np.ndarray:
        out = self.linear_diagonal * c
        if self.mm.size:
            cm = c[self.mm]
            out[self.mm] += self.mm_load * cm / (self.km + cm)
        return out

    def unconstrained(self, c: np.ndarray, smoothing: np.ndarray | None = None
                      ) -> tuple[np.ndarray, np.ndarray]:
        """``fv_steady._Balance.unconstrained``; ``smoothing``: eps of each zero-order cell."""
        value = self.operator.apply(c)
        value -= self.operator.rhs
        if self.first_order_any:
            value += self.linear_diagonal * c
        slope = self.linear_diagonal.copy()
        if self.mm.size:
            cm = c[self.mm]
            denominator = self.km + cm
            value[self.mm] += self.mm_load * cm / denominator
            slope[self.mm] += self.mm_load * self.km / denominator**2
        if smoothing is None:
            if self.zero_index.size:
                value += self.zero_load
        else:
            z = self.zero_index
            cz, eps = c[z], smoothing
            denominator = np.where(cz > 0.0, cz + eps, eps)
            value[z] += self.zero_load[z] * cz / denominator
            slope[z] += self.zero_load[z] * eps / denominator**2
        return value, slope

    def reduced(self, c: np.ndarray, active: np.ndarray, smoothing: np.ndarray | None = None
                ) -> tuple[np.ndarray, np.ndarray]:
        value, slope = self.unconstrained(c, smoothing)
        value[active] = c[active]
        return value, slope

    def scale(self, c: np.ndarray) -> np.ndarray:
        ab = self.operator.ab
        magnitude = np.abs(ab[1] * c)
        magnitude[:-1] += np.abs(ab[0, 1:] * c[1:])
        magnitude[1:] += np.abs(ab[2, :-1] * c[:-1])
        magnitude += np.abs(self.operator.rhs) + np.abs(self.consumption(c)) + self.zero_load
        return self.per_trial_max(magnitude)

    def surrogate(self) -> np.ndarray:
        """``fv_steady._initial_guess`` without its Picard sweeps: first order with
        k = vmax/(km + C_scale) in the Michaelis-Menten cells, zero order fully live."""
        k = self.first_order.copy()
        c_scale = self.trials.c_scale[self.member[self.mm]]
        k[self.mm] += self.mm_load / self.volumes[self.mm] / (self.km + c_scale)
        ab = self.operator.ab.copy()
        ab[1] += self.volumes * k
        return solve_tridiagonal(ab, self.operator.rhs - self.zero_load, overwrite_ab=True)


def _newton_active_set(grid: _Grid, c: np.ndarray, active: np.ndarray,
                       smoothing: np.ndarray | None = None,
                       update_rtol: float = NEWTON_UPDATE_RTOL,
                       residual_rtol: float = NEWTON_RESIDUAL_RTOL,
                       ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Every trial's solution on ``grid`` from the start (c, active); returns (C, active set,
    converged per trial). With ``smoothing`` (eps per zero-order cell) the zero-order rate is
    smoothed and no active set is formed (a stage of ``_smoothed_start``)."""
    member, n = grid.member, grid.n
    active = active & grid.zero_cells
    c = np.where(active, 0.0, c)
    done = np.zeros(n, dtype=bool)
    floor = -MM_FLOOR_FRACTION * grid.km
    f, slope = grid.reduced(c, active, smoothing)
    norm = grid.per_trial_max(f)
    limit = residual_rtol * grid.scale(c)
    nonlinear = grid.nonlinear if smoothing is None else np.ones(n, dtype=bool)
    for _ in range(TRIAL_ITERATIONS):
        jacobian = grid.operator.ab.copy()
        jacobian[1] += slope
        pinned = np.flatnonzero(active)
        if pinned.size:
            jacobian[1, pinned] = 1.0
            jacobian[0, pinned[pinned < c.size - 1] + 1] = 0.0
            jacobian[2, pinned[pinned > 0] - 1] = 0.0
        step = solve_tridiagonal(jacobian, -f, overwrite_ab=True)
        step[done[member]] = 0.0
        alpha = np.ones(n)
        if grid.mm.size:
            cm, sm = c[grid.mm], step[grid.mm]
            below = np.flatnonzero(cm + sm < floor)
            if below.size:
                ratio = 0.9 * (floor[below] - cm[below]) / sm[below]
                np.minimum.at(alpha, member[grid.mm[below]], ratio)
        trial = c + alpha[member] * step
        f_trial, slope_trial = grid.reduced(trial, active, smoothing)
        norm_trial = grid.per_trial_max(f_trial)
        for _ in range(LINE_SEARCH_MAX_HALVINGS):
            # backtracking (Armijo) only while the residual is above its floor
            short = ~done & (norm > limit) & ~(norm_trial <= (1.0 - 1e-4 * alpha) * norm)
            if not short.any():
                break
            alpha[short] *= 0.5
            trial = c + alpha[member] * step
            f_trial, slope_trial = grid.reduced(trial, active, smoothing)
            norm_trial = grid.per_trial_max(f_trial)
        update = alpha * grid.per_trial_max(step)
        c, f, slope, norm = trial, f_trial, slope_trial, norm_trial
        size = np.maximum(grid.per_trial_max(c), _TINY)
        settled = update <= update_rtol * size
        if not np.any(~done & (settled | ~nonlinear)):
            continue
        limit = residual_rtol * grid.scale(c)  # as fv_steady: once the update is small
        # a linear balance (no Michaelis-Menten cell) is solved by one step: its residual
        # test alone says so
        newton_done = ~done & (norm <= limit) & (settled | ~nonlinear)
        if not newton_done.any():
            continue
        if smoothing is not None or not grid.zero_index.size:
            done |= newton_done
            if done.all():
                break
            continue
        unconstrained, _ = grid.unconstrained(c)
        multiplier = np.where(active, unconstrained, 0.0)
        band = ACTIVE_SET_BAND * size
        keep = active & (multiplier >= -ACTIVE_SET_BAND * grid.zero_load)
        add = ~active & (c < -band[member])
        proposed = grid.zero_cells & (keep | add)
        changed = np.logical_or.reduceat(proposed != active, grid.firsts)
        moving = newton_done & changed
        done |= newton_done & ~changed
        if done.all():
            break
        if moving.any():
            cells = moving[member]
            active = np.where(cells, proposed, active)
            c = np.where(cells & active, 0.0, c)
            f, slope = grid.reduced(c, active)
            norm = grid.per_trial_max(f)
            limit = residual_rtol * grid.scale(c)
    return c, active, done


def _smoothed_start(grid: _Grid, c: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``fv_steady._smoothed_start`` for every trial: continuation on the smoothed zero-order
    rate Q C/(C + eps), eps = ``ZERO_ORDER_SMOOTHING_STEPS`` times the trial's concentration
    scale; returns the smoothed solution and the starting active set (C < eps_last)."""
    member = grid.member[grid.zero_index]
    scale = grid.trials.c_scale.copy()
    largest = grid.per_trial_max(c)
    scale = np.where(scale > 0.0, scale, np.where(largest > 0.0, largest, 1.0))[member]
    c = np.maximum(c, 0.0)
    none = np.zeros(c.size, dtype=bool)
    smoothing = scale
    for factor in ZERO_ORDER_SMOOTHING_STEPS:
        smoothing = factor * scale
        c, _, _ = _newton_active_set(grid, c, none, smoothing, ZERO_ORDER_STAGE_UPDATE_RTOL,
                                     np.inf)
    active = np.zeros(c.size, dtype=bool)
    active[grid.zero_index] = c[grid.zero_index] < smoothing
    return c, active


def _refined_start(coarse: _Grid, c: np.ndarray, active: np.ndarray
                   ) -> tuple[np.ndarray, np.ndarray]:
    """The coarse solution on the mesh with twice the cells per layer: two children per cell,
    at the quarter points, from the cell's value and its slope within its layer."""
    segment = coarse.segment
    before = np.zeros(c.size, dtype=bool)
    after = np.zeros(c.size, dtype=bool)
    before[1:] = segment[1:] == segment[:-1]
    after[:-1] = segment[:-1] == segment[1:]
    previous = np.empty_like(c)
    following = np.empty_like(c)
    previous[1:], previous[0] = c[:-1], c[0]
    following[:-1], following[-1] = c[1:], c[-1]
    slope = np.where(before & after, 0.5 * (following - previous),
                     np.where(after, following - c, np.where(before, c - previous, 0.0)))
    slope[~coarse.real] = 0.0
    children = np.where(coarse.real, 2, 1)
    fine = np.repeat(c, children)
    shift = np.repeat(0.25 * slope, children)
    first_child = np.cumsum(children) - children
    shift[first_child[coarse.real]] *= -1.0
    return fine + shift, np.repeat(active, children)


@dataclass(frozen=True)
class _GridFigures:
    flux_inner: np.ndarray
    flux_outer: np.ndarray
    consumption: np.ndarray


def _face_flux_density(grid: _Grid, c: np.ndarray, faces: np.ndarray) -> np.ndarray:
    """Outward flux density J at the given stacked faces (0 on a face of zero area)."""
    op = grid.operator
    q = op.face_constant[faces].copy()
    west = faces > 0
    q[west] += op.west_coefficient[faces[west]] * c[faces[west] - 1]
    east = faces < c.size
    q[east] -= op.east_coefficient[faces[east]] * c[faces[east]]
    areas = grid.face_areas[faces]
    return np.divide(q, areas, out=np.zeros_like(q), where=areas > 0.0)


def _achieved(grid: _Grid, c: np.ndarray, active: np.ndarray) -> np.ndarray:
    """The consumption V R each cell achieves (a depleted cell: its live part)."""
    achieved = grid.consumption(c)
    if grid.zero_index.size:
        unconstrained, _ = grid.unconstrained(c)
        achieved += grid.zero_load - np.where(active, unconstrained, 0.0)
    return achieved


def _grid_figures(grid: _Grid, c: np.ndarray, achieved: np.ndarray) -> _GridFigures:
    return _GridFigures(_face_flux_density(grid, c, grid.firsts),
                        _face_flux_density(grid, c, grid.lasts),
                        np.add.reduceat(achieved, grid.firsts))


def _fronts(grid: _Grid, c: np.ndarray, active: np.ndarray, achieved: np.ndarray
            ) -> np.ndarray:
    """``fv_steady._depletion_fronts`` of every trial, the first (innermost) one; NaN without."""
    n_cells, member = c.size, grid.member
    cells = np.flatnonzero(active)
    west_live = np.zeros(cells.size, dtype=bool)
    east_live = np.zeros(cells.size, dtype=bool)
    inside_w = (cells > 0) & (member[np.maximum(cells - 1, 0)] == member[cells])
    inside_e = (cells < n_cells - 1) & (member[np.minimum(cells + 1, n_cells - 1)]
                                        == member[cells])
    west_live[inside_w] = ~active[cells[inside_w] - 1]
    east_live[inside_e] = ~active[cells[inside_e] + 1]
    border = west_live != east_live
    cells, east_live = cells[border], east_live[border]
    front = np.full(grid.n, np.nan)
    if not cells.size:
        return front
    load = grid.zero_load[cells]
    fraction = np.clip(np.divide(achieved[cells], load, out=np.ones_like(load),
                                 where=load > 0.0), 0.0, 1.0)
    live_volume = fraction * grid.volumes[cells]
    e = grid.trials.exponent + 1
    west, east = grid.faces[cells], grid.faces[cells + 1]
    value = np.where(east_live,
                     np.maximum(east**e - e * live_volume, 0.0) ** (1.0 / e),
                     (west**e + e * live_volume) ** (1.0 / e))
    value = np.clip(value, west, east)
    owners, first = np.unique(member[cells], return_index=True)
    front[owners] = value[first]
    return front


def _edge_values(grid: _Grid, c: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per trial and layer (n, layers), the layer's inner and outer edge values
    (``fv_mesh.layer_profiles``)."""
    layers = grid.layers
    starts = grid.seg_starts[:, :layers]
    ends = grid.seg_starts[:, 1:]  # one past each layer's last cell = its outer face
    inner_j = _face_flux_density(grid, c, starts.ravel()).reshape(starts.shape)
    outer_j = _face_flux_density(grid, c, ends.ravel()).reshape(ends.shape)
    first, last = starts, ends - 1
    return (c[first] + inner_j * grid.west_gaps[first] / grid.d[first],
            c[last] - outer_j * grid.east_gaps[last] / grid.d[last])


def _layer_extremes(grid: _Grid, c: np.ndarray) -> tuple[np.ndarray, np.ndarray,
                                                            np.ndarray, np.ndarray]:
    """Per trial and layer, the smallest and largest node of the piecewise-linear profile
    (``fv_mesh.layer_profiles``); and the two face concentrations."""
    starts = grid.seg_starts[:, :grid.layers]
    inner_edge, outer_edge = _edge_values(grid, c)
    values = np.where(grid.real, c, np.nan)
    flat = starts.ravel()
    low = np.fmin.reduceat(values, flat).reshape(starts.shape)
    high = np.fmax.reduceat(values, flat).reshape(starts.shape)
    low = np.minimum(low, np.minimum(inner_edge, outer_edge))
    high = np.maximum(high, np.maximum(inner_edge, outer_edge))
    return low, high, inner_edge[:, 0], outer_edge[:, -1]


def solve_trials(view: Problem, n: int) -> TrialFigures:
    """The finite-volume primary figures of n trials of a steady case (see the module).

    ``view`` is the case with the varied fields as arrays of length n
    (``worker.engine.design.paths.replaced``); its structure (geometry, layers, kinds, whether
    the body is solid) is the same in every trial. Memory grows with n times the cells of the
    fine grid: callers pass the trials in blocks.
    """
    trials = _Trials(view, n)
    base = _cells(trials)
    grids: list[_Grid] = []
    figures: list[_GridFigures] = []
    solved = np.ones(n, dtype=bool)
    c = active = None
    for level in range(3):  # coarse, medium, fine
        grid = _Grid(trials, base * REFINEMENT_RATIO**level)
        if c is None or active is None:
            c, active = grid.surrogate(), np.zeros(grid.d.size, dtype=bool)
            if grid.zero_index.size:  # a front anywhere is found from a smoothed start
                with np.errstate(all="ignore"):
                    c, active = _smoothed_start(grid, c)
        else:
            c, active = _refined_start(grids[-1], c, active)
        with np.errstate(all="ignore"):
            c, active, done = _newton_active_set(grid, c, active)
        solved &= done & np.isfinite(np.add.reduceat(c, grid.firsts))
        grids.append(grid)
        achieved = _achieved(grid, c, active)
        figures.append(_grid_figures(grid, c, achieved))
    fine = grids[-1]
    assert c is not None and active is not None
    coarse_to_fine = figures[::-1]

    def best(name: str) -> np.ndarray:
        values = np.column_stack([getattr(f, name) for f in coarse_to_fine])
        return extrapolated_or_fine(values, float(REFINEMENT_RATIO))

    flux_inner = np.zeros(n) if view.solid_centre else best("flux_inner")
    low, high, surface_inner, surface_outer = _layer_extremes(fine, c)
    nan = np.where(solved, 0.0, np.nan)
    return TrialFigures(
        flux_inner=flux_inner + nan, flux_outer=best("flux_outer") + nan,
        consumption=best("consumption") + nan, surface_inner=surface_inner + nan,
        surface_outer=surface_outer + nan, layer_min=low + nan[:, None],
        layer_max=high + nan[:, None], depletion_front=_fronts(fine, c, active, achieved) + nan,
        solved=solved)


@dataclass(frozen=True)
class OneGridFigures:
    """Figures of n trials each solved on one mesh alone (arrays over trials, SI): outward flux
    densities at the faces, the r^n-weighted consumption, the lowest node of each layer's
    piecewise-linear profile (n, layers), the lowest concentration of each trial by
    :func:`_smooth_minimum` (n,); ``solved`` as in ``TrialFigures``."""

    flux_inner: np.ndarray
    flux_outer: np.ndarray
    consumption: np.ndarray
    layer_min: np.ndarray
    solved: np.ndarray
    smooth_min: np.ndarray


def _smooth_minimum(grid: _Grid, c: np.ndarray, inner_edge: np.ndarray,
                    outer_edge: np.ndarray) -> np.ndarray:
    """Per trial, the lowest concentration as ``lumen.layer_accuracy.smooth_minimum`` forms it
    (the same rule, every trial at once): in each layer the lowest of its nodes (inner edge,
    cell centres, outer edge; the first where several are equal), and where that is a cell
    centre with cell centres either side, the vertex of the parabola through the three
    (uniform cells: ``c_k - (c_k+1 - c_k-1)^2 / (8 (c_k+1 - 2 c_k + c_k-1))`` where the
    curvature is positive); ``inner_edge``, ``outer_edge``: (n, layers), each layer's edge
    values (:func:`_edge_values`)."""
    starts = grid.seg_starts[:, :grid.layers].ravel()
    counts = grid.counts.ravel()
    cells = np.flatnonzero(grid.real)  # trial by trial, layer by layer, as the segments
    owner = np.repeat(np.arange(starts.size), counts)
    centre_min = np.minimum.reduceat(c[cells], np.cumsum(counts) - counts)
    hits = np.flatnonzero(c[cells] == centre_min[owner])
    found, first = np.unique(owner[hits], return_index=True)
    lowest = np.full(starts.size, -1, dtype=np.intp)
    lowest[found] = cells[hits[first]]
    k = lowest - starts
    inner, outer = inner_edge.ravel(), outer_edge.ravel()
    value = np.minimum(np.minimum(inner, outer), centre_min)
    rows = np.flatnonzero((lowest >= 0) & (inner > centre_min) & (centre_min <= outer)
                          & (k >= 1) & (k <= counts - 2))
    if rows.size:
        i = lowest[rows]
        left, middle, right = c[i - 1], c[i], c[i + 1]
        second = right - 2.0 * middle + left
        vertex = middle - (right - left) ** 2 / (8.0 * np.where(second > 0.0, second, 1.0))
        value[rows] = np.where(second > 0.0, np.minimum(middle, vertex), middle)
    return value.reshape(grid.n, grid.layers).min(axis=1)


def solve_one_grid(view: Problem, n: int, cells: np.ndarray | None = None) -> OneGridFigures:
    """n trials of a steady case, each on one mesh: by default the one ``fv_steady.solve_fv``
    builds for it (``fv_mesh.default_cells_per_layer``, no refinement study), else ``cells``
    (n, layers) cells per layer; the same discrete problem as ``solve_fv`` on that mesh,
    solved to the same tests, so its figures equal that solve's to its convergence tolerance.
    ``view`` as for :func:`solve_trials`."""
    trials = _Trials(view, n)
    grid = _Grid(trials, _cells(trials) if cells is None else np.asarray(cells, dtype=np.intp))
    c, active = grid.surrogate(), np.zeros(grid.d.size, dtype=bool)
    with np.errstate(all="ignore"):
        if grid.zero_index.size:
            c, active = _smoothed_start(grid, c)
        c, active, done = _newton_active_set(grid, c, active)
    solved = done & np.isfinite(np.add.reduceat(c, grid.firsts))
    figures = _grid_figures(grid, c, _achieved(grid, c, active))
    low, _, _, _ = _layer_extremes(grid, c)
    nan = np.where(solved, 0.0, np.nan)
    with np.errstate(all="ignore"):
        smooth = _smooth_minimum(grid, c, *_edge_values(grid, c))
    return OneGridFigures(flux_inner=figures.flux_inner + nan,
                          flux_outer=figures.flux_outer + nan,
                          consumption=figures.consumption + nan,
                          layer_min=low + nan[:, None], solved=solved, smooth_min=smooth + nan)
