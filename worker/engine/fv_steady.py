"""Steady diffusion-reaction by cell-centred finite volumes (``solve_fv``).

The discrete balance of every cell i (see ``fv_mesh``) is

    F_i(C) = (A C - b)_i + V_i [k_i C_i + vmax_i C_i / (km_i + C_i)] + V_i Q_i - lambda_i = 0,

with A the tridiagonal diffusion operator, b its right-hand side, k first-order constants,
(vmax, km) Michaelis-Menten constants and Q zero-order rates. ``lambda_i`` is nonzero only in
zero-order cells and expresses that a zero-order reaction stops where the solute is used up:
the steady problem is then an obstacle problem, ``C >= 0``, ``lambda >= 0``, ``lambda C = 0``
(A.V. Hill's depleted core, Proc. R. Soc. B 104 (1928) 39). ``V_i Q_i - lambda_i`` is the
consumption the cell actually achieves; in the cell that holds the depletion front it is the
live fraction of the cell.

Linear cases (no reaction, first order) are one banded solve, for several meshes at once
(``solve_fv_grids``: the meshes of a grid study stacked into one block-diagonal system,
each mesh's arithmetic unchanged). Otherwise the solver runs a
primal-dual active-set iteration on the zero-order complementarity (M. Hintermueller, K. Ito,
K. Kunisch, "The primal-dual active set strategy as a semismooth Newton method", SIAM J. Optim.
13 (2002) 865-888), and, for each active set, a damped Newton iteration with the banded
Jacobian ``A + diag(V dR/dC)`` and a backtracking line search on the residual norm.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from functools import partial
from typing import cast

import numpy as np
from scipy.linalg import LinAlgError

from worker.engine.failed_solution import failed_steady_solution
from worker.engine.fv_mesh import (
    DiffusionOperator,
    Mesh,
    NodalProfile,
    ReactionTerms,
    assemble_diffusion,
    assemble_stack_operator,
    boundary_concentration_scale,
    build_mesh,
    build_mesh_stack,
    default_cells_per_layer,
    face_flux_densities,
    layer_reaction_constants,
    reaction_terms,
    solve_tridiagonal,
)
from worker.engine.model import Problem, SteadySolution

METHOD_NAME = "finite-volume-shell-balance"
REFERENCE = (
    "S.V. Patankar, Numerical Heat Transfer and Fluid Flow, Hemisphere, 1980 (cell-centred "
    "finite volumes and the harmonic-mean interface conductivity, ch. 4), here with the "
    "partition jump in the series conductance; zero order as a complementarity problem by the "
    "primal-dual active-set method (Hintermueller, Ito, Kunisch, SIAM J. Optim. 13 (2002) 865)"
)

#: Newton stops when max|F| <= NEWTON_RESIDUAL_RTOL * (scale of the balance terms) ...
NEWTON_RESIDUAL_RTOL = 1e-11
#: ... and the last update max|dC| <= NEWTON_UPDATE_RTOL * max|C| (both must hold).
NEWTON_UPDATE_RTOL = 1e-10
#: Newton iterations allowed per active set.
NEWTON_MAX_ITERATIONS = 60
#: Active-set (zero-order complementarity) iterations allowed.
ACTIVE_SET_MAX_ITERATIONS = 200
#: Picard sweeps before Newton for Michaelis-Menten, and the relative change that ends them.
PICARD_MAX_SWEEPS = 50
PICARD_HANDOVER_RTOL = 1e-3
#: Smoothing widths eps / C_scale of the zero-order continuation, in order (``_smoothed_start``).
ZERO_ORDER_SMOOTHING_STEPS = (1e-1, 1e-2, 1e-3, 1e-4, 1e-6, 1e-8)
#: Relative update at which a continuation stage hands over to the next.
ZERO_ORDER_STAGE_UPDATE_RTOL = 1e-4
#: Relative round-off band of the active-set update (``_next_active_set``).
ACTIVE_SET_BAND = 1e-12
#: Line-search halvings allowed per Newton step.
LINE_SEARCH_MAX_HALVINGS = 30
#: Michaelis-Menten iterates are kept above -MM_FLOOR_FRACTION * km (the rate is singular at -km).
MM_FLOOR_FRACTION = 0.5

__all__ = [
    "ACTIVE_SET_MAX_ITERATIONS",
    "METHOD_NAME",
    "NEWTON_MAX_ITERATIONS",
    "NEWTON_RESIDUAL_RTOL",
    "NEWTON_UPDATE_RTOL",
    "REFERENCE",
    "solve_fv",
    "solve_fv_grids",
]


def _with_diagonal(ab: np.ndarray, diagonal_addition: np.ndarray) -> np.ndarray:
    out = ab.copy()
    out[1] += diagonal_addition
    return out


def _pin_rows(ab: np.ndarray, rows: np.ndarray) -> np.ndarray:
    """Replace the given rows of a banded matrix by identity rows."""
    if not rows.any():
        return ab
    out = ab.copy()
    index = np.flatnonzero(rows)
    out[1, index] = 1.0
    upper = index[index < ab.shape[1] - 1]
    out[0, upper + 1] = 0.0
    lower = index[index > 0]
    out[2, lower - 1] = 0.0
    return out


class _Balance:
    """The discrete balance F(C) and its Jacobian for a fixed zero-order active set."""

    def __init__(self, mesh: Mesh, operator: DiffusionOperator, terms: ReactionTerms):
        self.mesh = mesh
        self.operator = operator
        self.volumes = mesh.volumes
        self.linear_diagonal = mesh.volumes * terms.first_order
        self.mm_cells = terms.vmax > 0.0
        self.has_mm = bool(self.mm_cells.any())
        self.mm_load = (mesh.volumes * terms.vmax)[self.mm_cells]
        self.km = terms.km[self.mm_cells]
        self.zero_order_cells = terms.zero_order > 0.0
        self.has_zero_order = bool(self.zero_order_cells.any())
        self.zero_order_load = mesh.volumes * terms.zero_order
        self.zero_load_cells = self.zero_order_load[self.zero_order_cells]
        self.rhs = operator.rhs

    def consumption(self, c: np.ndarray) -> np.ndarray:
        """V R(C) per cell for the first-order and Michaelis-Menten cells."""
        out = self.linear_diagonal * c
        if self.has_mm:
            out[self.mm_cells] += self.mm_load * c[self.mm_cells] / (self.km + c[self.mm_cells])
        return out

    def unconstrained(
        self, c: np.ndarray, smoothing: float | None = None
    ) -> tuple[np.ndarray, np.ndarray]:
        """Balance with lambda = 0 and the diagonal of its Jacobian (V dR/dC).

        Zero-order cells consume fully (``V Q``), or, with ``smoothing`` = eps given, at the
        smoothed rate ``Q C/(C + eps)`` (continued linearly, ``Q C/eps``, for C < 0).
        """
        value = self.operator.apply(c) - self.rhs + self.linear_diagonal * c
        slope = self.linear_diagonal.copy()
        if self.has_mm:
            mm = self.mm_cells
            denominator = self.km + c[mm]
            value[mm] += self.mm_load * c[mm] / denominator
            slope[mm] += self.mm_load * self.km / denominator**2
        if not self.has_zero_order:
            return value, slope
        if smoothing is None:
            value += self.zero_order_load
        else:
            z = self.zero_order_cells
            denominator = np.where(c[z] > 0.0, c[z] + smoothing, smoothing)
            value[z] += self.zero_load_cells * c[z] / denominator
            slope[z] += self.zero_load_cells * smoothing / denominator**2
        return value, slope

    def scale(self, c: np.ndarray) -> float:
        """Magnitude of the terms of the balance, for a relative residual test."""
        ab = self.operator.ab
        magnitude = np.abs(ab[1] * c)
        magnitude[:-1] += np.abs(ab[0, 1:] * c[1:])
        magnitude[1:] += np.abs(ab[2, :-1] * c[:-1])
        magnitude += np.abs(self.rhs) + np.abs(self.consumption(c)) + self.zero_order_load
        return float(magnitude.max())


def _newton(
    balance: _Balance,
    c: np.ndarray,
    active: np.ndarray,
    history: list[float],
    smoothing: float | None = None,
    update_rtol: float = NEWTON_UPDATE_RTOL,
    residual_rtol: float = NEWTON_RESIDUAL_RTOL,
):
    """Damped Newton for the balance with the zero-order cells ``active`` pinned at C = 0.

    ``smoothing``: see ``_Balance.unconstrained``. Returns (C, iterations, converged);
    converged means max|F| <= residual_rtol * scale and max|dC| <= update_rtol * max|C|.
    """
    mm = balance.mm_cells
    floor = -MM_FLOOR_FRACTION * balance.km
    c = c.copy()
    c[active] = 0.0
    any_active = bool(active.any())

    def reduced(values):
        f, slope = balance.unconstrained(values, smoothing)
        if any_active:
            f[active] = values[active]
        return f, slope

    f, slope = reduced(c)
    norm = float(np.abs(f).max())
    residual_limit = residual_rtol * balance.scale(c)
    for iteration in range(1, NEWTON_MAX_ITERATIONS + 1):
        jacobian = balance.operator.ab.copy()
        jacobian[1] += slope
        if any_active:
            jacobian = _pin_rows(jacobian, active)
        step = solve_tridiagonal(jacobian, -f)
        alpha = 1.0
        if balance.has_mm:
            below = c[mm] + step[mm] < floor
            if below.any():
                ratio = (floor[below] - c[mm][below]) / step[mm][below]
                alpha = min(1.0, 0.9 * float(ratio.min()))
        trial = c + alpha * step
        f_trial, slope_trial = reduced(trial)
        norm_trial = float(np.abs(f_trial).max())
        if norm > residual_limit:
            # backtracking (Armijo) only while the residual is above its floor
            for _ in range(LINE_SEARCH_MAX_HALVINGS):
                if norm_trial <= (1.0 - 1e-4 * alpha) * norm:
                    break
                alpha *= 0.5
                trial = c + alpha * step
                f_trial, slope_trial = reduced(trial)
                norm_trial = float(np.abs(f_trial).max())
        update = alpha * float(np.abs(step).max())
        c, f, slope, norm = trial, f_trial, slope_trial, norm_trial
        history.append(norm)
        c_norm = max(float(np.abs(c).max()), np.finfo(float).tiny)
        if update <= update_rtol * c_norm:
            residual_limit = residual_rtol * balance.scale(c)
            if norm <= residual_limit or residual_limit == 0.0:
                return c, iteration, True
    return c, NEWTON_MAX_ITERATIONS, False


def _initial_guess(mesh: Mesh, operator: DiffusionOperator, terms: ReactionTerms, problem):
    """A first-order surrogate solution: k = vmax/(km + C_scale) for Michaelis-Menten cells.

    By the maximum principle this surrogate lies above the Michaelis-Menten solution for
    0 <= C <= C_scale (R. Aris 1975, comparison bounds), a safe start for Newton.
    """
    c_scale = boundary_concentration_scale(problem)
    k = terms.first_order.copy()
    mm = terms.vmax > 0.0
    k[mm] += terms.vmax[mm] / (terms.km[mm] + c_scale)
    ab = _with_diagonal(operator.ab, mesh.volumes * k)
    rhs = operator.rhs - mesh.volumes * terms.zero_order
    guess = solve_tridiagonal(ab, rhs)
    if not mm.any():
        return guess
    # Picard (lagged-coefficient) sweeps R ~ [vmax/(km + C_old)] C keep the matrix an M-matrix
    # and the iterate away from the pole of Michaelis-Menten at C = -km; Newton takes over
    # once they settle to PICARD_HANDOVER_RTOL.
    for _ in range(PICARD_MAX_SWEEPS):
        k = terms.first_order.copy()
        k[mm] += terms.vmax[mm] / (terms.km[mm] + np.maximum(guess[mm], 0.0))
        updated = solve_tridiagonal(_with_diagonal(operator.ab, mesh.volumes * k), rhs)
        change = float(np.abs(updated - guess).max())
        guess = updated
        if change <= PICARD_HANDOVER_RTOL * max(float(np.abs(guess).max()), np.finfo(float).tiny):
            break
    guess[mm] = np.maximum(guess[mm], -0.5 * MM_FLOOR_FRACTION * terms.km[mm])
    return guess


def _smoothed_start(balance: _Balance, c: np.ndarray, problem: Problem, history: list[float]):
    """Continuation on the smoothed zero-order rate Q C/(C + eps), eps -> 0.

    The active-set iteration moves a depletion front by about one cell per iteration; starting
    it from the smoothed solution leaves it only the last few cells to settle. Returns the
    smoothed solution, the starting active set (zero-order cells with C < eps_last) and the
    Newton iterations spent.
    """
    c_scale = boundary_concentration_scale(problem) or float(np.abs(c).max()) or 1.0
    c = np.maximum(c, 0.0)
    no_cells = np.zeros(c.size, dtype=bool)
    spent = 0
    smoothing = c_scale
    for factor in ZERO_ORDER_SMOOTHING_STEPS:
        smoothing = factor * c_scale
        c, iterations, _ = _newton(
            balance, c, no_cells, history, smoothing, ZERO_ORDER_STAGE_UPDATE_RTOL, np.inf
        )
        spent += iterations
    active = balance.zero_order_cells & (c < smoothing)
    return c, active, spent


def _next_active_set(balance: _Balance, c, active, multiplier):
    """Primal-dual active-set update with a round-off band.

    A depleted cell is released when its multiplier is negative beyond round-off; a live
    zero-order cell is pinned when its concentration is negative beyond round-off. The band
    keeps a front that falls exactly on a face from flipping between two sets.
    """
    load = balance.zero_order_load
    c_band = ACTIVE_SET_BAND * max(float(np.abs(c).max()), np.finfo(float).tiny)
    keep = active & (multiplier >= -ACTIVE_SET_BAND * load)
    add = ~active & (c < -c_band)
    return balance.zero_order_cells & (keep | add)


def _depletion_fronts(mesh: Mesh, active: np.ndarray, live_fraction: np.ndarray) -> list[float]:
    """Front positions: in each depleted cell bordering a live cell, the edge of its live part.

    The live part of a border cell is its live fraction of the r^n-weighted volume, placed on
    the side of the live neighbour.
    """
    n = mesh.exponent
    fronts = []
    n_cells = mesh.n_cells
    for i in np.flatnonzero(active):
        live_west = i > 0 and not active[i - 1]
        live_east = i < n_cells - 1 and not active[i + 1]
        if live_west == live_east:
            continue
        live_volume = live_fraction[i] * mesh.volumes[i]
        west, east = mesh.faces[i], mesh.faces[i + 1]
        if live_east:
            value = max(east ** (n + 1) - (n + 1) * live_volume, 0.0) ** (1.0 / (n + 1))
        else:
            value = (west ** (n + 1) + (n + 1) * live_volume) ** (1.0 / (n + 1))
        fronts.append(float(np.clip(value, west, east)))
    return fronts


def _linear_record() -> dict:
    return {
        "newton_iterations": 0,
        "active_set_iterations": 0,
        "residual_history": [],
        "success": True,
        "message": "linear system solved directly",
    }


def _solve_cells(mesh: Mesh, operator: DiffusionOperator, terms: ReactionTerms, problem):
    """Cell values, achieved consumption V R per cell, final active set and solver record of a
    Michaelis-Menten or zero-order case (linear cases: ``solve_fv_grids``)."""
    record = _linear_record()
    history = record["residual_history"]
    balance = _Balance(mesh, operator, terms)
    c = _initial_guess(mesh, operator, terms, problem)
    active = np.zeros(mesh.n_cells, dtype=bool)
    zero_cells = balance.zero_order_cells
    if zero_cells.any() and np.any(c[zero_cells] < 0.0):
        c, active, record["newton_iterations"] = _smoothed_start(balance, c, problem, history)
    record["success"] = False
    record["message"] = f"active set did not settle in {ACTIVE_SET_MAX_ITERATIONS} iterations"
    seen_sets: set[bytes] = set()
    multiplier = np.zeros(mesh.n_cells)
    for iteration in range(1, ACTIVE_SET_MAX_ITERATIONS + 1):
        record["active_set_iterations"] = iteration
        c, iterations, converged = _newton(balance, c, active, history)
        record["newton_iterations"] += iterations
        if not converged:
            record["message"] = (
                f"Newton did not converge in {NEWTON_MAX_ITERATIONS} iterations "
                f"(residual {history[-1]:.3e})"
            )
            break
        unconstrained, _ = balance.unconstrained(c)
        multiplier = np.where(active, unconstrained, 0.0)
        new_active = _next_active_set(balance, c, active, multiplier)
        if np.array_equal(new_active, active):
            record["success"] = True
            record["message"] = "converged"
            break
        key = new_active.tobytes()
        if key in seen_sets:
            record["message"] = "active set cycled without settling"
            break
        seen_sets.add(key)
        active = new_active
    achieved = balance.consumption(c) + balance.zero_order_load - multiplier
    return c, achieved, active, record


def _fixes_a_level(mesh: Mesh, operator: DiffusionOperator, terms: ReactionTerms) -> bool:
    """True when the steady problem has a unique solution: some face conductance to a fixed
    concentration, or some consumption that grows with C."""
    return bool(
        operator.east_coefficient[0] > 0.0
        or operator.west_coefficient[-1] > 0.0
        or terms.has_michaelis_menten
        or np.any(terms.first_order > 0.0)
    )


def _failed(problem: Problem, mesh: Mesh, message: str) -> SteadySolution:
    return failed_steady_solution(
        METHOD_NAME, REFERENCE, message,
        {"cells_per_layer": mesh.cells_per_layer, "cells": mesh.n_cells})


def solve_fv(
    problem: Problem,
    cells_per_layer: Sequence[int] | int | None = None,
    *,
    source: Callable[[np.ndarray], np.ndarray] | None = None,
) -> SteadySolution:
    """Solve the steady case by cell-centred finite volumes.

    Parameters
    ----------
    problem : Problem
        The normalised case (SI).
    cells_per_layer : int or sequence of int, optional
        Cells per layer; default ``fv_mesh.default_cells_per_layer``.
    source : callable, optional
        Production source S(r), amount/(m^3 s), added to the balance (verification only).

    Returns
    -------
    SteadySolution
        Face fluxes (outward, amount/(m^2 s)) from the boundary half-cell relations,
        ``consumption`` = sum of V_i R_i (r^n-weighted; zero-order cells contribute what they
        actually consume, the front cell its live fraction), ``depletion_front`` (m) when a
        zero-order layer runs out (the first one found, inner to outer; all of them in
        ``diagnostics["depletion_fronts"]``). A solve that does not converge, or a case
        without a unique steady state (singular matrix), returns ``success=False`` with the
        reason in ``message``; ``diagnostics`` holds cells, iterations and the residual
        history.

    Notes
    -----
    The scheme is second order (observed 2.00 for profiles and face fluxes by manufactured
    solutions). With a zero-order depletion front the error of the face flux and of the front
    keeps a second-order envelope but depends on where the front falls within its cell, so
    successive refinements do not shrink it by a constant factor: a three-grid study of such a
    case may show an irregular apparent order.
    """
    if cells_per_layer is None:
        cells_per_layer = default_cells_per_layer(problem)
    return solve_fv_grids(problem, [cells_per_layer], source=source)[0]


_NO_LEVEL = (
    "no unique steady state: no face fixes a concentration (concentration or "
    "mass_transfer) and no layer has a reaction that grows with C (first order or "
    "Michaelis-Menten); the concentration is then fixed only up to a constant"
)


def solve_fv_grids(
    problem: Problem,
    cells: Sequence[Sequence[int] | int],
    *,
    source: Callable[[np.ndarray], np.ndarray] | None = None,
) -> list[SteadySolution]:
    """``solve_fv`` on several meshes of one problem, one entry of ``cells`` per mesh.

    Linear cases (no reaction, first order) are solved on every mesh at once: the meshes are
    stacked (``fv_mesh.MeshStack``) into one block-diagonal tridiagonal system, so that the
    array work and the LAPACK call run once, with each mesh's arithmetic unchanged (each result
    equals that of the mesh solved alone). Michaelis-Menten and zero-order cases are solved
    mesh by mesh (``_solve_cells``).
    """
    first_order, vmax, _, zero_order = layer_reaction_constants(problem)
    if any(v > 0.0 for v in vmax) or any(q > 0.0 for q in zero_order):
        return [_solve_nonlinear(problem, c, source) for c in cells]
    stack = build_mesh_stack(problem, cells)
    blocks = stack.blocks
    whole = assemble_stack_operator(stack, problem, source)
    reacts = any(k > 0.0 for k in first_order)
    fixed = [bool(whole.east_coefficient[first] > 0.0
                  or whole.west_coefficient[first + n] > 0.0 or reacts) for first, n in blocks]
    if not all(fixed):
        if len(blocks) > 1 and any(fixed):
            return [solve_fv_grids(problem, [c], source=source)[0] for c in cells]
        return [_failed(problem, mesh, _NO_LEVEL) for mesh in stack.meshes]
    uptake = stack.volumes * stack.per_cell(first_order) if reacts else None
    try:
        if uptake is not None:
            c = solve_tridiagonal(_with_diagonal(whole.ab, uptake), whole.rhs, overwrite_ab=True)
        else:
            c = solve_tridiagonal(whole.ab, whole.rhs)
    except LinAlgError as error:
        if len(blocks) > 1:  # each mesh alone, so that the failure names its own row
            return [solve_fv_grids(problem, [c], source=source)[0] for c in cells]
        return [_failed(
            problem, stack.mesh(0), f"no unique steady state: {error} (check the boundary kinds)"
        )]
    achieved = uptake * c if uptake is not None else None
    flux_density = face_flux_densities(stack, whole.face_fluxes(c))
    # a finite sum over every mesh means every mesh is finite (NaN and inf propagate)
    finite = True if math.isfinite(float(c.sum())) else None
    solutions = []
    for g, (first, n) in enumerate(blocks):
        solutions.append(_solution(
            partial(stack.mesh, g), c[first : first + n], flux_density[first : first + n + 1],
            achieved[first : first + n] if achieved is not None else None, _linear_record(),
            cells_per_layer=stack.counts[g],
            centres=stack.centres[first : first + n],
            faces=stack.faces[first : first + n + 1], finite=finite))
    return solutions


def _solve_nonlinear(
    problem: Problem,
    cells_per_layer: Sequence[int] | int,
    source: Callable[[np.ndarray], np.ndarray] | None,
) -> SteadySolution:
    mesh = build_mesh(problem, cells_per_layer)
    operator = assemble_diffusion(mesh, problem, source)
    terms = reaction_terms(mesh, problem)
    if not _fixes_a_level(mesh, operator, terms):
        return _failed(problem, mesh, _NO_LEVEL)
    try:
        c, achieved, active, record = _solve_cells(mesh, operator, terms, problem)
    except LinAlgError as error:
        return _failed(
            problem, mesh, f"no unique steady state: {error} (check the boundary kinds)"
        )
    flux_density = face_flux_densities(mesh, operator.face_fluxes(c))
    return _solution(mesh, c, flux_density, achieved, record, active, terms.zero_order)


def _solution(
    mesh: Mesh | Callable[[], Mesh],
    c: np.ndarray,
    flux_density: np.ndarray,
    achieved: np.ndarray | None,
    record: dict,
    active: np.ndarray | None = None,
    zero_order: np.ndarray | None = None,
    *,
    cells_per_layer: tuple[int, ...] | None = None,
    centres: np.ndarray | None = None,
    faces: np.ndarray | None = None,
    finite: bool | None = None,
) -> SteadySolution:
    """The SteadySolution of solved cell values (``achieved``: consumption V R per cell, None
    for none at all; ``active``: depleted zero-order cells).

    ``mesh`` may be a callable returning it (built only if the profile is read; the
    mesh facts of the diagnostics are then given as ``cells_per_layer``, ``centres`` and
    ``faces``); ``finite``, if known, saves looking at the values again."""
    if finite is None:
        finite = math.isfinite(float(c.sum()))  # NaN or inf anywhere propagates into the sum
    profile = NodalProfile(mesh, c, flux_density)
    if isinstance(mesh, Mesh):
        cells_per_layer, centres, faces = mesh.cells_per_layer, mesh.centres, mesh.faces

    fronts: list[float] = []
    depleted_cells = 0 if active is None else int(np.count_nonzero(active))
    if depleted_cells:
        # only a solved mesh has depleted cells; it comes with its zero-order rates
        mesh = cast(Mesh, mesh)
        achieved, zero_order = cast(np.ndarray, achieved), cast(np.ndarray, zero_order)
        load = mesh.volumes * zero_order
        live_fraction = np.divide(achieved, load, out=np.ones_like(load), where=load > 0.0)
        fronts = _depletion_fronts(
            mesh, cast(np.ndarray, active), np.clip(live_fraction, 0.0, 1.0)
        )

    diagnostics = {
        "cells_per_layer": cells_per_layer,
        "cells": int(c.size),
        "newton_iterations": record["newton_iterations"],
        "active_set_iterations": record["active_set_iterations"],
        "residual_history": record["residual_history"],
        "depleted_cells": depleted_cells,
        "depletion_fronts": fronts,
        "cell_centres": centres,
        "cell_concentrations": c,
        "face_positions": faces,
        "face_flux_densities": flux_density,
    }
    return SteadySolution(
        method=METHOD_NAME,
        reference=REFERENCE,
        success=record["success"] and finite,
        message=record["message"] if finite else "non-finite values in the solution",
        concentration_at=profile.concentration_at,
        flux_at=profile.flux_at,
        profile_at=profile.profile_at,
        flux_inner=float(flux_density[0]),
        flux_outer=float(flux_density[-1]),
        consumption=0.0 if achieved is None else float(achieved.sum()),
        depletion_front=fronts[0] if fronts else None,
        diagnostics=diagnostics,
    )
