"""The lumen's primary figures for many trials at once: the design trials' model of a flow case.

A flow case's record takes its figures from the finest mesh of the two refinement studies of
``lumen.run.solve_flow`` and the layers' wall law. A trial needs only that finest march, so
this module marches every trial together on the mesh the full check's study ends on
(:func:`fine_meshes`: ``lumen.run.coarse_mesh`` of the trial, doubled as the nominal case's
study doubled it, times ``REFINEMENT`` squared in both directions), with the same scheme as
``marching.march``:

* finite volumes in the radius (the same cells, convected weights and half-cell wall
  conductance), each implicit step one tridiagonal system per trial, solved for all trials
  together by the Thomas algorithm along the radius with arrays over trials (no pivoting is
  needed: the matrix is a symmetric M-matrix, diagonally dominant; L.H. Thomas 1949; G.H.
  Golub, C.F. Van Loan, *Matrix Computations*, 4th ed., 2013, §4.3), with two right-hand sides
  as there (``c = a + b c_w``);
* implicit Euler with local Richardson extrapolation along the axis (two half steps against one
  whole step: Lawson & Morris 1978), nodes graded as ``marching.axial_nodes``;
* the wall concentration of each trial at each step from the wall law: exactly for a
  conductance wall (linear kinetics, the law is affine), else by the safeguarded Newton
  iteration of ``marching`` (Press et al., *Numerical Recipes*, 3rd ed., 2007, §9.4) on every
  trial at once, to the same tolerance.

Wall laws (:class:`ConductanceWalls`, :class:`TableWalls`) hold one law per trial or one shared
by all. A table holds the layers' wall flux and minimum at nodes of c_w / inlet (the nominal
table's nodes) and interpolates them as ``wall_table.WallTable`` does (pchip, F.N. Fritsch,
R.E. Carlson, SIAM J. Numer. Anal. 17 (1980) 238; continued linearly outside [0, inlet]). A
pchip interpolant on an interval reads only the two nodes on each side, so a per-trial table
needs the layers solved only at the nodes around the wall concentrations its lumen reaches:
:func:`flow_trial_figures` starts from the nodes the nominal case reached and adds nodes
below for any trial whose lumen goes lower, marching it again.

The body's minimum is formed as ``lumen.run._minimum_of`` forms it: the layers' minimum along
the lumen from the table (a conductance wall: the lowest wall concentration, where the layers'
minimum is lowest by the comparison principle for linear kinetics, the minimum rising with the
concentration offered), then one direct solve of the layers there, against the lowest fluid
concentration of the march.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from scipy.interpolate import PchipInterpolator

from worker.engine.lumen.marching import AXIAL_GRADING, NEWTON_MAX_ITERATIONS, NEWTON_RTOL
from worker.engine.lumen.run import (
    COARSE_MESH,
    MAX_COARSE_CELLS,
    MAX_COARSE_STEPS,
    REFINEMENT,
    coarse_steps,
)

__all__ = [
    "LUMEN_FIELDS",
    "NODE_MARGIN",
    "ConductanceWalls",
    "LayerSolver",
    "TableWalls",
    "TubeTrials",
    "fine_meshes",
    "flow_trial_figures",
    "march_trials",
]

#: Fields of a flow case (``(part, name)`` of ``design.paths.FieldRef``) that only the lumen
#: reads: varying them leaves the layers' wall law as it is.
LUMEN_FIELDS = frozenset({("inner_boundary", "flow_rate"), ("inner_boundary", "inlet"),
                          ("inner_boundary", "diffusivity"), ("problem", "length")})
#: Extra table nodes below the lowest one the nominal lumen reached, for the first march of
#: trials with their own table (each trial whose lumen goes lower is marched again).
NODE_MARGIN = 3
#: The figures :func:`_figures` forms from the march (the rest come from the inputs).
FIGURES = ("outlet_concentration", "concentration_min", "sherwood_outlet")

#: ``solve(rows, c_wall) -> (wall flux density (mol/(m^2 s)), layers' minimum (mol/m^3))`` of
#: the layers of trials ``rows`` (an index array) with the fluid at the wall at ``c_wall``
#: (shape (len(rows), q)), every value a direct steady solve of the layers.
LayerSolver = Callable[[np.ndarray, np.ndarray], tuple[np.ndarray, np.ndarray]]


@dataclass(frozen=True)
class TubeTrials:
    """The lumen of n trials: arrays (n,) of radius (m), length (m), flow rate (m^3/s),
    diffusivity in the fluid (m^2/s) and inlet concentration (mol/m^3)."""

    radius: np.ndarray
    length: np.ndarray
    flow_rate: np.ndarray
    diffusivity: np.ndarray
    inlet: np.ndarray

    @property
    def n(self) -> int:
        return int(self.radius.size)

    def take(self, rows: np.ndarray) -> TubeTrials:
        return TubeTrials(self.radius[rows], self.length[rows], self.flow_rate[rows],
                          self.diffusivity[rows], self.inlet[rows])

    def z_star(self, z: np.ndarray) -> np.ndarray:
        """``pi D z / (4 F)`` (``graetz.dimensionless_length``), z of shape (n,) or (n, k)."""
        d, f = self.diffusivity, self.flow_rate
        if np.ndim(z) == 2:
            d, f = d[:, None], f[:, None]
        return math.pi * d * z / (4.0 * f)


def fine_meshes(tube: TubeTrials, doublings: tuple[int, int] = (0, 0)) -> np.ndarray:
    """The finest mesh (radial cells, axial steps) of each trial's studies, shape (n, 2):
    ``lumen.run.coarse_mesh`` with the coarse mesh doubled ``doublings`` times in r and in z
    (as the study of the nominal case doubled it, within the same caps), times
    ``REFINEMENT``^2 in both directions."""
    n_z = coarse_steps(tube.z_star(tube.length))
    n_r = np.full(tube.n, COARSE_MESH[0], dtype=np.int64)
    for _ in range(doublings[0]):
        n_r = np.minimum(2 * n_r, MAX_COARSE_CELLS)
    for _ in range(doublings[1]):
        n_z = np.minimum(2 * n_z, MAX_COARSE_STEPS)
    return np.column_stack([n_r, n_z]) * REFINEMENT**2


# -- wall laws ------------------------------------------------------------------------------

@dataclass(frozen=True)
class ConductanceWalls:
    """``j = k (c_w - c_out)`` per trial (``marching.ConductanceWall``): arrays (n,) or
    scalars shared by all trials."""

    conductance: np.ndarray
    outside: np.ndarray

    def take(self, rows: np.ndarray) -> ConductanceWalls:
        return ConductanceWalls(_rows(self.conductance, rows), _rows(self.outside, rows))

    def solve(self, g: np.ndarray, a: np.ndarray, b: np.ndarray, guess: np.ndarray
              ) -> tuple[np.ndarray, np.ndarray]:
        """(c_w, j) of ``g (a + (b - 1) c_w) = j(c_w)``: exact for the affine law."""
        k, out = self.conductance, self.outside
        c_w = (g * a + k * out) / (k - g * (b - 1.0))
        return c_w, k * (c_w - out)

    def layer_minimum(self, wall: np.ndarray) -> np.ndarray:
        """An increasing stand-in for the layers' minimum along the lumen (module docstring):
        the wall concentration itself."""
        return wall


def _rows(value: np.ndarray, rows: np.ndarray) -> np.ndarray:
    value = np.asarray(value, dtype=float)
    return value if value.ndim == 0 else value[rows]


class TableWalls:
    """Pchip tables of the layers' wall flux and minimum over s = c_w / ``top``.

    ``nodes`` (m,): s of the nodes, from 0 to 1; ``top`` (n,): each trial's inlet; ``flux``,
    ``minimum``: (m, n) per trial, or (m, 1) shared; ``start`` (n,): each trial's first node
    with values (the nodes below are not solved; the law is continued linearly below it as
    below 0). A trial with a value missing (NaN) from its start up gets NaN from its law."""

    def __init__(self, nodes: np.ndarray, top: np.ndarray, flux: np.ndarray,
                 minimum: np.ndarray, start: np.ndarray | None = None):
        self.nodes = np.asarray(nodes, dtype=float)
        self.top = np.asarray(top, dtype=float)
        self.flux, self.minimum = np.asarray(flux, dtype=float), np.asarray(minimum, dtype=float)
        columns = self.flux.shape[1]
        self.start = (np.zeros(columns, dtype=np.intp) if start is None
                      else np.asarray(start, dtype=np.intp))
        self._flux = np.full((4, self.nodes.size - 1, columns), np.nan)
        self._minimum = np.full_like(self._flux, np.nan)
        # a trial whose layers did not solve at some node keeps NaN (its figures then NaN)
        solved = np.ones(columns, dtype=bool)
        for first in np.unique(self.start):
            group = np.flatnonzero(self.start == first)
            solved[group] = (np.all(np.isfinite(self.flux[first:, group]), axis=0)
                             & np.all(np.isfinite(self.minimum[first:, group]), axis=0))
        for first in np.unique(self.start):
            group = np.flatnonzero((self.start == first) & solved)
            if group.size == 0:
                continue
            x = self.nodes[first:]
            self._flux[:, first:, group] = PchipInterpolator(x, self.flux[first:, group],
                                                             axis=0).c
            self._minimum[:, first:, group] = PchipInterpolator(x, self.minimum[first:, group],
                                                                axis=0).c

    @property
    def shared(self) -> bool:
        return self.flux.shape[1] == 1

    def take(self, rows: np.ndarray) -> TableWalls:
        columns = np.zeros(rows.size, dtype=np.intp) if self.shared else rows
        taken = TableWalls.__new__(TableWalls)
        taken.nodes, taken.top = self.nodes, self.top[rows]
        taken.flux, taken.minimum = self.flux[:, columns], self.minimum[:, columns]
        taken.start = self.start[columns]
        taken._flux, taken._minimum = self._flux[:, :, columns], self._minimum[:, :, columns]
        return taken

    def _evaluate(self, coefficients: np.ndarray, c: np.ndarray, rows: np.ndarray
                  ) -> tuple[np.ndarray, np.ndarray]:
        """(value, d value/d c_w) at c (shape (len(rows),) or (len(rows), k))."""
        top = self.top[rows]
        columns = np.zeros(rows.size, dtype=np.intp) if self.shared else rows
        first = self.nodes[self.start[columns]]
        if c.ndim == 2:
            top, first, columns = top[:, None], first[:, None], columns[:, None]
            start = self.start[columns]
        else:
            start = self.start[columns]
        s = c / top
        at = np.clip(s, first, 1.0)
        index = np.clip(np.searchsorted(self.nodes, at, side="right") - 1, start,
                        self.nodes.size - 2)
        t = at - self.nodes[index]
        k3, k2, k1, k0 = (coefficients[p, index, columns] for p in range(4))
        value = ((k3 * t + k2) * t + k1) * t + k0
        slope = (3.0 * k3 * t + 2.0 * k2) * t + k1
        return value + slope * (s - at), slope / top

    def law(self, c: np.ndarray, rows: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(j, dj/dc_w) of trials ``rows`` at c (``wall_table.WallTable.flux``)."""
        return self._evaluate(self._flux, c, rows)

    def layer_minimum(self, wall: np.ndarray) -> np.ndarray:
        """The layers' minimum along the lumen, (n, K) at the wall concentrations (n, K)
        (``WallTable.minimum``, not continued outside the nodes)."""
        rows = np.arange(wall.shape[0])
        s_low = self.nodes[self.start[np.zeros(rows.size, dtype=np.intp) if self.shared
                                      else rows]]
        clipped = np.clip(wall, (s_low * self.top)[:, None], self.top[:, None])
        return self._evaluate(self._minimum, clipped, rows)[0]

    def solve(self, g: np.ndarray, a: np.ndarray, b: np.ndarray, guess: np.ndarray
              ) -> tuple[np.ndarray, np.ndarray]:
        """(c_w, j) of ``g (a + (b - 1) c_w) = j(c_w)`` for every trial: the safeguarded
        Newton iteration of ``marching`` (Newton, bisection once a bracket is known and a step
        leaves it or does not halve the previous one), to its tolerance; NaN where it does
        not settle."""
        n = a.size
        c_w = guess.copy()
        scale = np.maximum(np.maximum(np.abs(a), np.abs(guess)), 1e-300)
        low, high = np.full(n, -np.inf), np.full(n, np.inf)
        previous = np.full(n, np.inf)
        out_c, out_j = np.full(n, np.nan), np.full(n, np.nan)
        rows = np.arange(n)
        for _ in range(NEWTON_MAX_ITERATIONS):
            j, slope = self.law(c_w[rows], rows)
            residual = g[rows] * (a[rows] + (b[rows] - 1.0) * c_w[rows]) - j
            exact = residual == 0.0
            out_c[rows[exact]], out_j[rows[exact]] = c_w[rows[exact]], j[exact]
            low[rows] = np.where(residual > 0.0, np.maximum(low[rows], c_w[rows]), low[rows])
            high[rows] = np.where(residual < 0.0, np.minimum(high[rows], c_w[rows]),
                                  high[rows])
            with np.errstate(divide="ignore", invalid="ignore"):
                step = -residual / (g[rows] * (b[rows] - 1.0) - slope)
            proposal = c_w[rows] + step
            lo, hi = low[rows], high[rows]
            bracketed = np.isfinite(lo) & np.isfinite(hi)
            bisect = bracketed & (~((lo <= proposal) & (proposal <= hi))
                                  | (np.abs(step) > 0.5 * previous[rows]))
            proposal = np.where(bisect, 0.5 * (lo + hi), proposal)
            change = np.abs(proposal - c_w[rows])
            previous[rows] = change
            c_w[rows] = proposal
            settled = change <= NEWTON_RTOL * np.maximum(np.abs(proposal), scale[rows])
            settled &= np.isfinite(proposal) & ~exact
            if settled.any():
                done = rows[settled]
                out_c[done] = c_w[done]
                out_j[done] = self.law(c_w[done], done)[0]
            rows = rows[~(settled | exact | ~np.isfinite(proposal))]
            if rows.size == 0:
                break
        return out_c, out_j


Walls = ConductanceWalls | TableWalls


# -- the march ------------------------------------------------------------------------------

@dataclass
class MarchTrials:
    """What the figures need of each trial's finest march (arrays (n,), ``wall`` (n, M + 1)):
    the outlet mixing cup, wall concentration and wall flux density, the lowest fluid
    concentration of the field, and the wall concentration along the lumen."""

    outlet_mixing_cup: np.ndarray
    outlet_wall: np.ndarray
    outlet_wall_flux: np.ndarray
    fluid_minimum: np.ndarray
    wall: np.ndarray


def _factor(diagonal: np.ndarray, off: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Forward elimination of symmetric tridiagonal systems (N, n) with off-diagonal ``off``
    (N - 1, n): the multipliers and the inverse pivots."""
    size = diagonal.shape[0]
    ratio = np.empty_like(off)
    inverse = np.empty_like(diagonal)
    inverse[0] = 1.0 / diagonal[0]
    for i in range(1, size):
        ratio[i - 1] = off[i - 1] * inverse[i - 1]
        inverse[i] = 1.0 / (diagonal[i] - off[i - 1] * ratio[i - 1])
    return ratio, inverse


def _substitute(ratio: np.ndarray, inverse: np.ndarray, off: np.ndarray, rhs: np.ndarray
                ) -> np.ndarray:
    size = rhs.shape[0]
    x = np.empty_like(rhs)
    x[0] = rhs[0] * inverse[0]
    for i in range(1, size):
        x[i] = (rhs[i] - off[i - 1] * x[i - 1]) * inverse[i]
    for i in range(size - 2, -1, -1):
        x[i] -= ratio[i] * x[i + 1]
    return x


def march_trials(tube: TubeTrials, walls: Walls, radial_cells: int, axial_steps: int,
                 grading: float = AXIAL_GRADING) -> MarchTrials:
    """March every trial's lumen on one mesh (``marching.march`` with its default scheme,
    extrapolated implicit Euler, for all trials at once; module docstring)."""
    n, cells = tube.n, int(radial_cells)
    radius, diffusivity = tube.radius, tube.diffusivity
    dr = radius / cells
    faces = np.linspace(0.0, 1.0, cells + 1)[:, None] * radius[None, :]       # (N + 1, n)
    mean_velocity = tube.flow_rate / (math.pi * radius**2)
    primitive = 2.0 * mean_velocity * (faces**2 / 2.0 - faces**4 / (4.0 * radius**2))
    weights = np.diff(primitive, axis=0)                                        # (N, n)
    face_g = diffusivity * faces[1:-1] / dr                                     # (N - 1, n)
    half_cell = 2.0 * diffusivity / dr
    wall_g = radius * half_cell
    off = -face_g
    base = np.zeros((cells, n))
    base[:-1] += face_g
    base[1:] += face_g
    base[-1] += wall_g
    unit = np.zeros((cells, n))
    unit[-1] = wall_g

    z = tube.length[:, None] * (np.arange(axial_steps + 1) / axial_steps)[None, :] ** grading
    c = np.repeat(tube.inlet[None, :], cells, axis=0)
    c_w, j = walls.solve(half_cell, c[-1], np.zeros(n), c[-1])
    walls_along = np.empty((n, axial_steps + 1))
    walls_along[:, 0] = c_w
    fluid_min = c.min(axis=0)

    def factor(h: np.ndarray):
        ratio, inverse = _factor(weights / h + base, off)
        return ratio, inverse, _substitute(ratio, inverse, off, unit)

    def step(c: np.ndarray, guess: np.ndarray, h: np.ndarray, factored):
        ratio, inverse, b = factored
        a = _substitute(ratio, inverse, off, weights / h * c)
        c_w, j = walls.solve(half_cell, a[-1], b[-1], guess)
        return a + b * c_w, c_w, j

    for k in range(axial_steps):
        h = z[:, k + 1] - z[:, k]
        halves = factor(0.5 * h)
        c_half, w_half, _ = step(c, c_w, 0.5 * h, halves)
        c_two, w_two, j_two = step(c_half, w_half, 0.5 * h, halves)
        c_one, w_one, j_one = step(c, c_w, h, factor(h))
        c, c_w, j = 2.0 * c_two - c_one, 2.0 * w_two - w_one, 2.0 * j_two - j_one
        walls_along[:, k + 1] = c_w
        fluid_min = np.minimum(fluid_min, c.min(axis=0))
    mixing = (c * weights).sum(axis=0) / weights.sum(axis=0)
    return MarchTrials(mixing, c_w, j, fluid_min, walls_along)


# -- figures --------------------------------------------------------------------------------

def _figures(tube: TubeTrials, walls: Walls, meshes: np.ndarray, direct: LayerSolver,
             rows: np.ndarray) -> tuple[dict[str, np.ndarray], np.ndarray]:
    """Figures of trials ``rows`` (indices into ``tube``/``walls``/``meshes``), grouped by
    mesh; and the lowest wall concentration each trial's march reached."""
    n = rows.size
    out = {name: np.full(n, np.nan) for name in FIGURES}
    lowest = np.full(n, np.nan)
    for mesh in np.unique(meshes[rows], axis=0):
        local = np.flatnonzero(np.all(meshes[rows] == mesh, axis=1))
        group = rows[local]
        sub_tube, sub_walls = tube.take(group), walls.take(group)
        with np.errstate(all="ignore"):
            result = march_trials(sub_tube, sub_walls, int(mesh[0]), int(mesh[1]))
            along = sub_walls.layer_minimum(result.wall)
            k = np.argmin(np.where(np.isfinite(along), along, np.inf), axis=1)
            at = result.wall[np.arange(group.size), k]
            _, layer_min = direct(group, at[:, None])
            driving = result.outlet_mixing_cup - result.outlet_wall
            sherwood = np.where(driving != 0.0, 2.0 * sub_tube.radius * result.outlet_wall_flux
                                / (sub_tube.diffusivity * driving), np.nan)
        out["outlet_concentration"][local] = result.outlet_mixing_cup
        lowest_body = np.where(layer_min[:, 0] <= result.fluid_minimum, layer_min[:, 0],
                               result.fluid_minimum)
        lowest_body[np.isnan(layer_min[:, 0]) | np.isnan(result.fluid_minimum)] = np.nan
        out["concentration_min"][local] = lowest_body
        out["sherwood_outlet"][local] = sherwood
        lowest[local] = np.min(result.wall, axis=1)
    return out, lowest


def flow_trial_figures(tube: TubeTrials, meshes: np.ndarray, layers: LayerSolver, *,
                       walls: ConductanceWalls | TableWalls | None = None,
                       nodes: np.ndarray | None = None, first_node: int = 0
                       ) -> dict[str, np.ndarray]:
    """The record's scalar figures of n trials (arrays (n,)): ``outlet_concentration``,
    ``concentration_min``, ``peclet``, ``graetz``, ``sherwood_outlet``.

    ``meshes`` (n, 2): each trial's finest mesh (:func:`fine_meshes`); ``layers``: direct solves
    of each trial's layers (:data:`LayerSolver`). The wall law: ``walls`` (conductances or a
    shared table), or per-trial tables on ``nodes`` (s = c_w / inlet, from 0 to 1), the layers
    solved from node ``first_node`` up, and from lower nodes for each trial whose lumen goes
    lower (that trial is then marched again)."""
    n = tube.n
    all_rows = np.arange(n)
    if walls is not None:
        figures, _ = _figures(tube, walls, meshes, layers, all_rows)
    elif nodes is not None:
        nodes = np.asarray(nodes, dtype=float)
        figures = {name: np.full(n, np.nan) for name in FIGURES}
        flux, minimum = np.full((nodes.size, n), np.nan), np.full((nodes.size, n), np.nan)
        start = np.full(n, min(max(first_node, 0), nodes.size - 2), dtype=np.intp)
        pending = all_rows
        while pending.size:
            _fill(nodes, tube.inlet, flux, minimum, start, pending, layers)
            table = TableWalls(nodes, tube.inlet, flux, minimum, start)
            found, lowest = _figures(tube, table, meshes, layers, pending)
            for name, values in found.items():
                figures[name][pending] = values
            # the march equals that on the whole table where it reaches no lower than the
            # second node used (pchip reads two nodes on each side of an interval)
            second = nodes[np.minimum(start[pending] + 1, nodes.size - 1)]
            short = (start[pending] > 0) & ~(lowest >= second * tube.inlet[pending])
            again = pending[short]
            if again.size:
                s_low = np.where(np.isfinite(lowest[short]), lowest[short] / tube.inlet[again],
                                 0.0)
                below = np.searchsorted(nodes, s_low, side="right") - 1 - NODE_MARGIN
                start[again] = np.clip(np.minimum(below, start[again] - 1), 0, None)
            pending = again
    else:
        raise ValueError("walls or nodes: expected a wall law for the trials")
    with np.errstate(all="ignore"):
        figures["peclet"] = 2.0 * tube.flow_rate / (math.pi * tube.radius * tube.diffusivity)
        figures["graetz"] = 1.0 / tube.z_star(tube.length)
    return figures


def _fill(nodes: np.ndarray, top: np.ndarray, flux: np.ndarray, minimum: np.ndarray,
          start: np.ndarray, rows: np.ndarray, layers: LayerSolver) -> None:
    """Solve the layers of trials ``rows`` at every node from their ``start`` not solved yet
    (``flux``, ``minimum`` (m, n) filled in place; NaN marks a node not solved)."""
    index = np.arange(nodes.size)[:, None]
    missing = np.isnan(flux[:, rows]) & (index >= start[rows][None, :])
    wanted = missing.any(axis=0)
    if not wanted.any():
        return
    need = rows[wanted]
    # a rectangle of nodes: from the lowest start to the highest missing node
    first = int(np.min(start[need]))
    last = int(np.max(np.where(missing[:, wanted], index, -1)))
    picked = np.arange(first, last + 1)
    j, low = layers(need, nodes[picked][None, :] * top[need][:, None])
    block = np.ix_(picked, need)
    keep = np.isnan(flux[block])
    flux[block] = np.where(keep, j.T, flux[block])
    minimum[block] = np.where(keep, low.T, minimum[block])
