"""Cell-centred finite-volume mesh and diffusion operator for layered slab, cylinder and sphere.

This module holds the space discretisation only, so that the steady solver (``fv_steady``) and
a transient solver share one mesh, one operator and one set of reaction terms.

Discretised balance
-------------------
Cells are uniform within each layer (or graded towards a layer's face, ``fv_grading``, where a
``GradedCells`` asks for it) and layer interfaces lie on faces. With the geometric
exponent ``n`` (0 slab, 1 cylinder, 2 sphere), the r^n-weighted balance of cell ``i`` between
faces ``i`` (west, inner) and ``i+1`` (east, outer) is

    Q[i+1] - Q[i] + V[i] * R(C[i]) = V[i] * S[i],

with ``V[i] = (r_e^(n+1) - r_w^(n+1)) / (n+1)`` the r^n-weighted cell volume (no 2*pi or 4*pi),
``Q[f] = r_f^n * J_f`` the r^n-weighted outward flux through face ``f``, ``R`` the consumption and
``S`` an optional production source (used by manufactured-solution verification). Every face
flux is affine in the two adjacent cell values,

    Q[f] = west_coefficient[f] * C[f-1] - east_coefficient[f] * C[f] + face_constant[f],

so the operator is tridiagonal (returned in ``scipy.linalg.solve_banded`` (1, 1) form).

Face conductances (derivation)
------------------------------
Between cell P (layer a, centre-to-face distance ``d_P``) and cell E (layer b, ``d_E``) the
flux density J is continuous through the face, and each half cell is represented by a linear
profile: ``J = D_a (C_P - C_a,f) / d_P = D_b (C_b,f - C_E) / d_E``. With the equilibrium jump
``C_a,f / K_a = C_b,f / K_b = u_f``, divide each relation by ``D K`` of its side and add:

    J = (C_P / K_a - C_E / K_b) / (d_P / (D_a K_a) + d_E / (D_b K_b)),

the series (harmonic) conductance of the two half cells in the continuous potential ``u = C/K``
with the exact partition jump (S.V. Patankar, *Numerical Heat Transfer and Fluid Flow*,
Hemisphere, 1980, ch. 4, the harmonic-mean interface conductivity; the partition form follows
by writing the balance in u). Inside one layer (K_a = K_b, D_a = D_b) it reduces to D/Delta.
The r^n-weighted face flux multiplies by the face area ``r_f^n`` (face-area-weighted form;
second order in r for cylinder and sphere, verified by manufactured solutions in
``tests/reference/test_fv_manufactured.py``).

Boundary faces use the half cell between the outermost centre and the face:

* ``concentration``: surface value ``C_s = K_face * value``; ``J = D (C_s - C_P) / d`` into the
  body, conductance ``r^n D / d``.
* ``mass_transfer``: film and half cell in series. Flux into the body
  ``J = h (C_bulk - C_s / K_face)`` and ``J = D (C_s - C_P) / d``; eliminating ``C_s``,
  ``J = (K_face C_bulk - C_P) / (K_face / h + d / D)``.
* ``flux``: ``J`` into the body fixed; ``symmetry``: ``J = 0``. The centre face of a solid
  cylinder or sphere has zero area, so it carries no flux whatever its kind.

Surface values are reconstructed from the same half-cell relations (``C_s = C_P + J d / D`` at
the inner face, ``C_s = C_P - J d / D`` at the outer face), which keeps them second-order
accurate because the boundary flux itself is.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from itertools import accumulate

import numpy as np
from scipy.linalg import LinAlgError
from scipy.linalg.lapack import dgtsv

from worker.engine.fv_grading import GradedCells
from worker.engine.model import Problem
from worker.engine.reactions import ReactionKind

#: Default mesh rule (``default_cells_per_layer``): every layer gets at least
#: ``MIN_CELLS_PER_LAYER`` cells; ``RESISTANCE_CELLS`` cells are shared among layers in proportion
#: to each layer's share of the total diffusion resistance; a reacting layer gets enough cells
#: that ``Delta * m <= THIELE_CELL_LIMIT`` per cell, where m = sqrt(k/D) (k the first-order
#: constant, or vmax/km for Michaelis-Menten) or, for zero order, m = 1/l with the penetration
#: length l = sqrt(2 D C_scale / Q) (C_scale the largest face concentration set by the
#: boundaries); no layer gets more than ``MAX_CELLS_PER_LAYER``.
MIN_CELLS_PER_LAYER = 40
MAX_CELLS_PER_LAYER = 4000
RESISTANCE_CELLS = 200
THIELE_CELL_LIMIT = 0.1

__all__ = [
    "MAX_CELLS_PER_LAYER",
    "MIN_CELLS_PER_LAYER",
    "RESISTANCE_CELLS",
    "THIELE_CELL_LIMIT",
    "DiffusionOperator",
    "Mesh",
    "MeshStack",
    "NodalProfile",
    "ReactionTerms",
    "assemble_blocks",
    "assemble_diffusion",
    "assemble_stack",
    "assemble_stack_operator",
    "boundary_concentration_scale",
    "build_mesh",
    "build_mesh_stack",
    "cell_geometry",
    "default_cells_per_layer",
    "face_flux_densities",
    "layer_profiles",
    "layer_reaction_constants",
    "make_profile_functions",
    "reaction_terms",
    "solve_tridiagonal",
    "surface_values",
]


@dataclass(frozen=True)
class Mesh:
    """A cell-centred mesh of the layered body.

    Attributes
    ----------
    exponent : int
        Geometric exponent n (0 slab, 1 cylinder, 2 sphere).
    edges : ndarray, shape (L+1,)
        Inner face, interfaces and outer face, m.
    faces : ndarray, shape (N+1,)
        Face positions, m; ``faces[layer_starts[j]]`` is the inner edge of layer j.
    centres : ndarray, shape (N,)
        Cell centres (midpoints of their faces), m.
    face_areas : ndarray, shape (N+1,)
        r_f^n, m^n (without 2*pi or 4*pi).
    volumes : ndarray, shape (N,)
        r^n-weighted cell volumes (r_e^(n+1) - r_w^(n+1))/(n+1), m^(n+1).
    west_gaps, east_gaps : ndarray, shape (N,)
        Distance from each centre to its west and east face, m.
    layer_index : ndarray of int, shape (N,)
        Layer of each cell.
    layer_starts : ndarray of int, shape (L+1,)
        First cell of each layer; the last entry is N.
    diffusivity, partition : ndarray, shape (N,)
        D (m^2/s) and K of each cell's layer.
    cells_per_layer : tuple of int
        Cells in each layer.
    grading : GradedCells or None
        The grading the mesh was built with, None for cells uniform in every layer.
    """

    exponent: int
    edges: np.ndarray
    faces: np.ndarray
    centres: np.ndarray
    face_areas: np.ndarray
    volumes: np.ndarray
    west_gaps: np.ndarray
    east_gaps: np.ndarray
    layer_index: np.ndarray
    layer_starts: np.ndarray
    diffusivity: np.ndarray
    partition: np.ndarray
    cells_per_layer: tuple[int, ...] = ()
    grading: GradedCells | None = None

    @property
    def n_cells(self) -> int:
        return int(self.centres.size)

    @property
    def spec(self) -> tuple[int, ...] | GradedCells:
        """What ``build_mesh`` takes to build this mesh again: the grading, or the cells per
        layer where they are uniform."""
        return self.grading if self.grading is not None else self.cells_per_layer

    @property
    def n_layers(self) -> int:
        return int(self.layer_starts.size - 1)

    def layer_cells(self, layer: int) -> slice:
        """Slice of the cells of one layer."""
        return slice(int(self.layer_starts[layer]), int(self.layer_starts[layer + 1]))


@dataclass(frozen=True)
class DiffusionOperator:
    """The assembled diffusion operator: ``ab @ C = rhs`` is the reaction-free balance.

    Attributes
    ----------
    ab : ndarray, shape (3, N)
        Tridiagonal matrix in ``scipy.linalg.solve_banded((1, 1), ...)`` layout: ``ab[0, 1:]``
        the upper, ``ab[1]`` the main and ``ab[2, :-1]`` the lower diagonal. Units m^n * m/s.
    rhs : ndarray, shape (N,)
        Boundary contributions plus ``V * S`` of any source, amount/(m^(2-n) s).
    west_coefficient, east_coefficient, face_constant : ndarray, shape (N+1,)
        ``Q[f] = west_coefficient[f] * C[f-1] - east_coefficient[f] * C[f] + face_constant[f]``
        (r^n-weighted outward flux; terms referring to cells outside the mesh are zero).
    """

    ab: np.ndarray
    rhs: np.ndarray
    west_coefficient: np.ndarray
    east_coefficient: np.ndarray
    face_constant: np.ndarray

    def face_fluxes(self, c: np.ndarray) -> np.ndarray:
        """r^n-weighted outward flux Q at every face, amount/(m^(2-n) s), shape (N+1,)."""
        q = self.face_constant.copy()
        q[1:] += self.west_coefficient[1:] * c
        q[:-1] -= self.east_coefficient[:-1] * c
        return q

    def apply(self, c: np.ndarray) -> np.ndarray:
        """The diffusion part of the cell balance, ``ab @ c``, shape (N,)."""
        out = self.ab[1] * c
        out[:-1] += self.ab[0, 1:] * c[1:]
        out[1:] += self.ab[2, :-1] * c[:-1]
        return out


@dataclass(frozen=True)
class ReactionTerms:
    """Per-cell reaction data, fixed for a mesh and problem.

    Attributes
    ----------
    first_order : ndarray, shape (N,)
        Linear rate constant k (1/s) of each cell (0 where not first order).
    vmax, km : ndarray, shape (N,)
        Michaelis-Menten constants (0 where not Michaelis-Menten).
    zero_order : ndarray, shape (N,)
        Zero-order rate Q (amount/(m^3 s)) of each cell (0 where not zero order).
    """

    first_order: np.ndarray
    vmax: np.ndarray
    km: np.ndarray
    zero_order: np.ndarray
    has_michaelis_menten: bool = False
    has_zero_order: bool = False

    def smooth_rate(self, c: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """First-order plus Michaelis-Menten consumption and its derivative at cell values c.

        Returns (R, dR/dC) in amount/(m^3 s) and 1/s. Zero order is left out: it is handled
        as a complementarity condition by the solvers.
        """
        rate = self.first_order * c
        slope = self.first_order.copy()
        if self.has_michaelis_menten:
            mm = self.vmax > 0.0
            denominator = self.km[mm] + c[mm]
            rate[mm] += self.vmax[mm] * c[mm] / denominator
            slope[mm] += self.vmax[mm] * self.km[mm] / denominator**2
        return rate, slope


def _check_cells(cells_per_layer: Sequence[int] | int, n_layers: int) -> tuple[int, ...]:
    if type(cells_per_layer) is tuple and all(type(n) is int for n in cells_per_layer):
        counts = cells_per_layer  # already what the conversion below makes
    elif isinstance(cells_per_layer, int | np.integer):
        counts = (int(cells_per_layer),) * n_layers
    else:
        counts = tuple(int(n) for n in cells_per_layer)
    if len(counts) != n_layers:
        raise ValueError(
            f"cells_per_layer: expected {n_layers} counts (one per layer), got {len(counts)}"
        )
    if min(counts) < 2:
        raise ValueError(f"cells_per_layer: every layer needs at least 2 cells, got {counts}")
    return counts


def build_mesh(problem: Problem,
               cells_per_layer: Sequence[int] | int | GradedCells | None = None) -> Mesh:
    """Build the cell-centred mesh, uniform within each layer unless graded.

    Parameters
    ----------
    problem : Problem
        The normalised case (SI).
    cells_per_layer : int, sequence of int or GradedCells, optional
        Cells in each layer (one int for all layers), or cells graded towards faces
        (``fv_grading.GradedCells``); default ``default_cells_per_layer``.

    Returns
    -------
    Mesh
    """
    if cells_per_layer is None:
        cells_per_layer = default_cells_per_layer(problem)
    return build_mesh_stack(problem, [cells_per_layer]).mesh(0)


@dataclass(frozen=True)
class MeshStack:
    """Several meshes of one problem laid end to end in shared arrays.

    Array work (geometry, conductances, the banded solve) then runs once for all of them, with
    the same arithmetic, element by element, as for each mesh alone. Mesh g owns faces
    ``offsets[g] .. offsets[g] + N_g`` and cells ``offsets[g] .. offsets[g] + N_g - 1`` of the
    stacked arrays; between the outer face of one mesh and the inner face of the next lies one
    spacer cell (index in ``spacers``), which the stacked operator decouples (identity row).
    ``mesh(g)`` is mesh g as a ``Mesh`` of views into the stacked arrays. The spacer cells carry
    D = inf and K = 1, so that the conductance formula stays finite on the faces next to them
    (those faces are boundary faces of their meshes and are overwritten).

    Attributes
    ----------
    edges : ndarray
        Inner face, interfaces and outer face, m (shared by every mesh).
    counts : tuple of tuple of int
        Cells per layer of each mesh.
    gradings : tuple of (GradedCells or None)
        The grading of each mesh (None: uniform cells).
    offsets, spacers : tuple of int
    exponent : int
        Geometric exponent n of every mesh.
    faces, face_areas : ndarray, shape (F,)
        Stacked faces (F = sum of N_g + 1) and their areas r^n.
    centres, volumes, west_gaps, east_gaps, diffusivity, partition : ndarray
        Stacked cell data, shape (F - 1,), spacer cells included.
    """

    edges: np.ndarray
    counts: tuple[tuple[int, ...], ...]
    offsets: tuple[int, ...]
    spacers: tuple[int, ...]
    exponent: int
    faces: np.ndarray
    face_areas: np.ndarray
    centres: np.ndarray
    volumes: np.ndarray
    west_gaps: np.ndarray
    east_gaps: np.ndarray
    diffusivity: np.ndarray
    partition: np.ndarray
    gradings: tuple[GradedCells | None, ...] = ()

    @property
    def blocks(self) -> list[tuple[int, int]]:
        """(first cell, cells) of each mesh in the stacked arrays."""
        return [(first, sum(counts)) for first, counts in zip(self.offsets, self.counts,
                                                               strict=True)]

    def mesh(self, g: int) -> Mesh:
        """Mesh g, its arrays views into the stacked ones."""
        first, counts = self.offsets[g], self.counts[g]
        n = sum(counts)
        cells, faces = slice(first, first + n), slice(first, first + n + 1)
        return Mesh(
            exponent=self.exponent,
            edges=self.edges,
            faces=self.faces[faces],
            centres=self.centres[cells],
            face_areas=self.face_areas[faces],
            volumes=self.volumes[cells],
            west_gaps=self.west_gaps[cells],
            east_gaps=self.east_gaps[cells],
            layer_index=(np.zeros(n, dtype=np.intp) if len(counts) == 1 else
                         np.repeat(np.arange(len(counts)), counts)),
            layer_starts=np.array(list(accumulate(counts, initial=0))),
            diffusivity=self.diffusivity[cells],
            partition=self.partition[cells],
            cells_per_layer=counts,
            grading=self.gradings[g] if self.gradings else None,
        )

    @property
    def meshes(self) -> tuple[Mesh, ...]:
        return tuple(self.mesh(g) for g in range(len(self.counts)))

    def per_cell(self, per_layer: Sequence[float], spacer_value: float = 0.0) -> np.ndarray:
        """A per-layer property spread over the stacked cells (spacers get ``spacer_value``)."""
        return _spread(per_layer, self.counts, spacer_value)


def _spread(per_layer: Sequence[float], counts_list: Sequence[Sequence[int]],
            spacer_value: float) -> np.ndarray:
    """Per-layer values repeated over the cells of each stacked mesh, one spacer value between
    consecutive meshes."""
    if len(counts_list) == 1 and len(per_layer) == 1:
        return np.full(counts_list[0][0], float(per_layer[0]))
    values: list[float] = []
    repeats: list[int] = []
    for g, counts in enumerate(counts_list):
        if g:
            values.append(spacer_value)
            repeats.append(1)
        values += per_layer
        repeats += counts
    return np.array(values, dtype=float).repeat(np.array(repeats))


def cell_geometry(faces: np.ndarray, n: int):
    """Centres, face areas r^n, r^n-weighted volumes and west/east gaps of the cells between
    consecutive faces."""
    west_faces, east_faces = faces[:-1], faces[1:]
    centres = 0.5 * (west_faces + east_faces)
    if n == 0:
        face_areas = np.ones(faces.size)
        volumes = east_faces - west_faces
    else:
        face_areas = faces if n == 1 else faces * faces
        powered = face_areas * faces
        volumes = (powered[1:] - powered[:-1]) / (n + 1)
    return centres, face_areas, volumes, centres - west_faces, east_faces - centres


def build_mesh_stack(problem: Problem,
                     cells: Sequence[Sequence[int] | int | GradedCells]) -> MeshStack:
    """Build the meshes with the given cells per layer (one entry per mesh; a
    ``GradedCells`` entry grades them), stacked.

    Each mesh is exactly what ``build_mesh`` gives for its cells (see ``MeshStack``).
    """
    layers = problem.layers
    gradings = tuple(c if isinstance(c, GradedCells) and c.graded else None for c in cells)
    counts_list = [_check_cells(c.cells if isinstance(c, GradedCells) else c, len(layers))
                   for c in cells]
    edges = problem.edges
    bounds = edges.tolist()
    # West face of every cell: its layer's inner edge plus whole cell widths (the layer edges
    # themselves are exact, local index 0, so interfaces carry no round-off drift); then the
    # outer face of the mesh, exact; then the next mesh.
    faces = np.empty(sum(sum(counts) + 1 for counts in counts_list))
    offsets: list[int] = []
    start = 0
    for counts, grading in zip(counts_list, gradings, strict=True):
        offsets.append(start)
        for j, (layer, count, edge) in enumerate(zip(layers, counts, bounds[:-1], strict=True)):
            segment = faces[start : start + count]
            if grading is not None and grading.stretches[j]:
                # the layer's map (``fv_grading``): its inner edge exact, as below
                np.multiply(grading.layer_faces(j)[:-1], layer.thickness, out=segment)
            else:
                np.multiply(np.arange(count), layer.thickness / count, out=segment)
            segment += edge
            start += count
        faces[start] = bounds[-1]
        start += 1
    n = problem.exponent
    centres, face_areas, volumes, west_gaps, east_gaps = cell_geometry(faces, n)
    diffusivity = _spread([ly.diffusivity for ly in layers], counts_list, math.inf)
    partition = _spread([ly.partition for ly in layers], counts_list, 1.0)
    return MeshStack(
        edges=edges, counts=tuple(counts_list), offsets=tuple(offsets),
        spacers=tuple(first - 1 for first in offsets[1:]), exponent=n, faces=faces,
        face_areas=face_areas, centres=centres, volumes=volumes, west_gaps=west_gaps,
        east_gaps=east_gaps, diffusivity=diffusivity, partition=partition,
        gradings=gradings if any(g is not None for g in gradings) else (),
    )


def _boundary_face(problem: Problem, side: str, area: float, gap: float, diffusivity: float):
    """(conductance g, far value C_far, fixed flux into the body) of one boundary face.

    For ``concentration`` and ``mass_transfer`` faces the r^n-weighted flux into the body is
    ``g * (C_far - C_P)``; for ``flux``/``symmetry`` faces it is ``area * value``.
    """
    boundary = problem.inner_boundary if side == "inner" else problem.outer_boundary
    if area == 0.0:
        return 0.0, 0.0, 0.0
    try:
        condition = boundary.condition
    except ValueError as exc:
        raise ValueError(f"{side}_boundary.kind: {exc}") from None
    return condition.fv_face(boundary, side, problem.face_partition(side), area, gap, diffusivity)


def assemble_diffusion(
    mesh: Mesh,
    problem: Problem,
    source: Callable[[np.ndarray], np.ndarray] | None = None,
) -> DiffusionOperator:
    """Assemble the tridiagonal diffusion operator and its right-hand side.

    Parameters
    ----------
    mesh : Mesh
    problem : Problem
    source : callable, optional
        Production source S(r) in amount/(m^3 s), evaluated at the cell centres (midpoint
        rule); for verification by manufactured solutions.

    Returns
    -------
    DiffusionOperator
        ``ab @ C + V * R(C) = rhs`` is the discrete steady balance.
    """
    return _assemble(problem, mesh.face_areas, mesh.volumes, mesh.centres, mesh.west_gaps,
                     mesh.east_gaps, mesh.diffusivity, mesh.partition, [(0, mesh.n_cells)], (),
                     source)


def assemble_stack(
    stack: MeshStack,
    problem: Problem,
    source: Callable[[np.ndarray], np.ndarray] | None = None,
) -> tuple[DiffusionOperator, tuple[DiffusionOperator, ...]]:
    """The diffusion operator of every mesh of a stack, assembled at once.

    Returns the stacked operator (block diagonal: each mesh's rows, and an identity row with a
    zero right-hand side for each spacer cell) and, as views into it, the operator of each mesh,
    equal to what ``assemble_diffusion`` gives for that mesh.
    """
    whole = assemble_stack_operator(stack, problem, source)
    operators = []
    for first, cells in stack.blocks:
        faces = slice(first, first + cells + 1)
        operators.append(DiffusionOperator(
            ab=whole.ab[:, first : first + cells],
            rhs=whole.rhs[first : first + cells],
            west_coefficient=whole.west_coefficient[faces],
            east_coefficient=whole.east_coefficient[faces],
            face_constant=whole.face_constant[faces],
        ))
    return whole, tuple(operators)


def assemble_stack_operator(
    stack: MeshStack,
    problem: Problem,
    source: Callable[[np.ndarray], np.ndarray] | None = None,
) -> DiffusionOperator:
    """The stacked operator of ``assemble_stack`` alone (no per-mesh views)."""
    return _assemble(problem, stack.face_areas, stack.volumes, stack.centres, stack.west_gaps,
                     stack.east_gaps, stack.diffusivity, stack.partition, stack.blocks,
                     stack.spacers, source)


def _assemble(problem: Problem, face_areas, volumes, centres, west_gaps, east_gaps, d, k,
              blocks: Sequence[tuple[int, int]], spacers: Sequence[int],
              source: Callable[[np.ndarray], np.ndarray] | None) -> DiffusionOperator:
    """Operator of the cells between consecutive faces; ``blocks`` are the (first cell, cells)
    of each mesh, whose first and last faces are boundary faces; ``spacers`` the cells between
    meshes (see ``MeshStack``)."""
    firsts = np.array([first for first, _ in blocks], dtype=np.intp)
    lasts = np.array([first + cells for first, cells in blocks], dtype=np.intp)
    inner = np.array([_boundary_face(problem, "inner", float(face_areas[first]),
                                     float(west_gaps[first]), float(d[first]))
                      for first in firsts]).T
    outer = np.array([_boundary_face(problem, "outer", float(face_areas[last]),
                                     float(east_gaps[last - 1]), float(d[last - 1]))
                      for last in lasts]).T
    rhs_source = None if source is None else volumes * np.asarray(source(centres), dtype=float)
    return assemble_blocks(face_areas, west_gaps, east_gaps, d, k, firsts, lasts,
                           (inner[0], inner[1], inner[2]), (outer[0], outer[1], outer[2]),
                           np.asarray(spacers, dtype=np.intp), rhs_source)


def assemble_blocks(face_areas: np.ndarray, west_gaps: np.ndarray, east_gaps: np.ndarray,
                    d: np.ndarray, k: np.ndarray, firsts: np.ndarray, lasts: np.ndarray,
                    inner_faces: tuple, outer_faces: tuple, spacers: np.ndarray,
                    source_terms: np.ndarray | None = None) -> DiffusionOperator:
    """The operator of meshes laid end to end (one per block), each block's boundary faces
    given: ``firsts``/``lasts`` the inner and outer face of each block (= its first cell and
    one past its last cell), ``inner_faces``/``outer_faces`` the (conductance g, far value,
    fixed flux into the body) of each block's faces (``BoundaryKind.fv_face``; scalars or one
    per block), ``spacers`` the decoupled cells between blocks (identity rows), and
    ``source_terms`` an optional ``V * S`` per cell. Shared by one problem's grid stack
    (``MeshStack``) and by many trials of a case stacked (``worker.engine.fv_trials``)."""
    n_cells = d.size
    dk = d * k
    west = np.empty(n_cells + 1)
    east = np.empty(n_cells + 1)
    constant = np.zeros(n_cells + 1)

    # interior faces: Q = (C_P/K_P - C_E/K_E) * A / (d_P/(D_P K_P) + d_E/(D_E K_E))
    resistance = east_gaps[:-1] / dk[:-1]
    resistance += west_gaps[1:] / dk[1:]
    conductance = np.divide(face_areas[1:-1], resistance, out=resistance)
    np.divide(conductance, k[:-1], out=west[1:-1])
    np.divide(conductance, k[1:], out=east[1:-1])

    g_in, far_in, fixed_in = inner_faces
    west[firsts] = 0.0
    east[firsts] = g_in
    constant[firsts] = g_in * far_in + fixed_in
    g_out, far_out, fixed_out = outer_faces
    west[lasts] = g_out
    east[lasts] = 0.0
    constant[lasts] = -g_out * far_out - fixed_out

    ab = np.empty((3, n_cells))
    ab[0, 0] = 0.0
    np.negative(east[1:-1], out=ab[0, 1:])
    np.add(west[1:], east[:-1], out=ab[1])
    np.negative(west[1:-1], out=ab[2, :-1])
    ab[2, -1] = 0.0
    rhs = constant[:-1] - constant[1:]
    if source_terms is not None:
        rhs = rhs + source_terms
    if spacers.size:  # decoupled identity rows
        ab[1, spacers] = 1.0
        ab[0, spacers + 1] = 0.0
        ab[2, spacers - 1] = 0.0
        rhs[spacers] = 0.0
    return DiffusionOperator(
        ab=ab, rhs=rhs, west_coefficient=west, east_coefficient=east, face_constant=constant
    )


def _reaction_law(problem: Problem, j: int) -> ReactionKind:
    """The reaction kind of layer j; ValueError naming the field for an unknown kind."""
    try:
        return problem.layers[j].reaction.law
    except ValueError as exc:
        raise ValueError(f"layers[{j}].reaction.kind: {exc}") from None


def layer_reaction_constants(problem: Problem) -> tuple[list[float], ...]:
    """Per-layer (first-order k, vmax, km, zero-order Q), 0 where a layer lacks that kind.

    Raises
    ------
    ValueError
        For a Michaelis-Menten layer with km <= 0 or an unknown reaction kind.
    """
    first: list[float] = []
    vmax: list[float] = []
    km: list[float] = []
    zero: list[float] = []
    for j, layer in enumerate(problem.layers):
        values = _reaction_law(problem, j).fv_constants(layer.reaction, j)
        for per_layer, value in zip((first, vmax, km, zero), values, strict=True):
            per_layer.append(float(value))
    return first, vmax, km, zero


def reaction_terms(mesh: Mesh, problem: Problem) -> ReactionTerms:
    """Per-cell reaction constants of the problem on this mesh."""
    if not any(_reaction_law(problem, j).reacts for j in range(len(problem.layers))):
        nothing = np.zeros(mesh.n_cells)
        return ReactionTerms(first_order=nothing, vmax=nothing, km=nothing, zero_order=nothing)
    first, vmax, km, zero = layer_reaction_constants(problem)
    counts = [mesh.cells_per_layer or tuple(np.diff(mesh.layer_starts))]
    zeros = np.zeros(mesh.n_cells)  # shared by the kinds absent from every layer

    def per_cell(per_layer: list[float]) -> np.ndarray:
        return _spread(per_layer, counts, 0.0) if any(per_layer) else zeros

    return ReactionTerms(
        first_order=per_cell(first),
        vmax=per_cell(vmax),
        km=per_cell(km),
        zero_order=per_cell(zero),
        has_michaelis_menten=any(v > 0.0 for v in vmax),
        has_zero_order=any(q > 0.0 for q in zero),
    )


def face_flux_densities(mesh: Mesh | MeshStack, face_fluxes: np.ndarray) -> np.ndarray:
    """Outward flux density J = Q / r_f^n at every face (0 at a solid centre), amount/(m^2 s)."""
    if mesh.exponent == 0:
        return face_fluxes.copy()
    areas = mesh.face_areas
    if areas[0] > 0.0:
        return face_fluxes / areas
    return np.divide(face_fluxes, areas, out=np.zeros_like(face_fluxes), where=areas > 0.0)


def surface_values(mesh: Mesh, c: np.ndarray, flux_density: np.ndarray):
    """Material-side concentrations on both sides of every face from the half-cell relations.

    Parameters
    ----------
    mesh : Mesh
    c : ndarray, shape (N,)
        Cell concentrations.
    flux_density : ndarray, shape (N+1,)
        Outward flux density at the faces (``face_flux_densities``).

    Returns
    -------
    (west_side, east_side) : tuple of ndarray, shape (N+1,)
        ``west_side[f]`` is the value at face f seen from cell f-1 (``C - J d / D``),
        ``east_side[f]`` seen from cell f (``C + J d / D``); entries with no such cell are NaN.
    """
    d = mesh.diffusivity
    west_side = np.full(mesh.n_cells + 1, np.nan)
    east_side = np.full(mesh.n_cells + 1, np.nan)
    west_side[1:] = c - flux_density[1:] * mesh.east_gaps / d
    east_side[:-1] = c + flux_density[:-1] * mesh.west_gaps / d
    return west_side, east_side


def layer_profiles(mesh: Mesh, c: np.ndarray, flux_density: np.ndarray):
    """Nodes of the piecewise-linear profile of each layer.

    Returns a list, one entry per layer, of ``(positions, concentrations, face_positions,
    face_flux_densities)``: the layer's inner edge, its cell centres and its outer edge with the
    reconstructed edge values (so partition jumps are kept), and its faces with their outward
    flux densities.
    """
    d = mesh.diffusivity
    profiles = []
    for j in range(mesh.n_layers):
        first, last = int(mesh.layer_starts[j]), int(mesh.layer_starts[j + 1])
        positions = np.empty(last - first + 2)
        positions[0] = mesh.faces[first]
        positions[1:-1] = mesh.centres[first:last]
        positions[-1] = mesh.faces[last]
        values = np.empty(last - first + 2)
        # the edge values of ``surface_values``: east side of the inner face, west side of the
        # outer face (the same half-cell relations, for these two faces only)
        values[0] = c[first] + flux_density[first] * mesh.west_gaps[first] / d[first]
        values[1:-1] = c[first:last]
        values[-1] = c[last - 1] - flux_density[last] * mesh.east_gaps[last - 1] / d[last - 1]
        profiles.append(
            (positions, values, mesh.faces[first : last + 1], flux_density[first : last + 1])
        )
    return profiles


def _locate(edges: np.ndarray, r: np.ndarray, layer: int | None) -> np.ndarray:
    tolerance = 1e-12 * max(abs(edges[-1]), abs(edges[0]), edges[-1] - edges[0])
    if layer is not None:
        if not 0 <= layer < edges.size - 1:
            raise ValueError(f"layer: expected an index in 0..{edges.size - 2}, got {layer}")
        low, high = edges[layer] - tolerance, edges[layer + 1] + tolerance
        if np.any((r < low) | (r > high)):
            raise ValueError(
                f"r: expected positions within layer {layer} [{edges[layer]}, {edges[layer + 1]}] m"
            )
        return np.full(r.shape, layer, dtype=int)
    if np.any((r < edges[0] - tolerance) | (r > edges[-1] + tolerance)):
        raise ValueError(f"r: expected positions within the body [{edges[0]}, {edges[-1]}] m")
    # side="left": a position exactly on an interface belongs to the inner layer
    return np.clip(np.searchsorted(edges, r, side="left") - 1, 0, edges.size - 2)


class NodalProfile:
    """The piecewise-linear profile of a finite-volume solution, as ``SteadySolution``'s
    ``concentration_at``, ``flux_at`` and ``profile_at`` describe it.

    Each takes positions r (m, scalar or array) and an optional ``layer`` index, and
    interpolates linearly between the nodes of ``layer_profiles`` (flux: between faces).
    ``mesh`` may be given as a callable returning it, called on first use.
    """

    def __init__(self, mesh: Mesh | Callable[[], Mesh], c: np.ndarray,
                 flux_density: np.ndarray):
        self._mesh = mesh
        self.c = c
        self.flux_density = flux_density
        self._profiles = None
        self._intervals: list[tuple[float, float]] = []

    @property
    def mesh(self) -> Mesh:
        if not isinstance(self._mesh, Mesh):
            self._mesh = self._mesh()
        return self._mesh

    @property
    def edges(self) -> np.ndarray:
        return self.mesh.edges

    @property
    def profiles(self):
        if self._profiles is None:  # built on first use: many callers only read face figures
            self._profiles = layer_profiles(self.mesh, self.c, self.flux_density)
            bounds = self.edges.tolist()
            slack = 1e-12 * max(abs(bounds[-1]), abs(bounds[0]), bounds[-1] - bounds[0])
            # closed interval of each layer, widened by the round-off slack
            self._intervals = [(a - slack, b + slack)
                               for a, b in zip(bounds[:-1], bounds[1:], strict=True)]
        return self._profiles

    def _within(self, r_array: np.ndarray, layer: int | None) -> bool:
        """True when ``layer`` is a valid index and every r lies in its closed interval."""
        intervals = self._intervals
        if layer is None or not 0 <= layer < len(intervals) or not r_array.size:
            return False
        low, high = intervals[layer]
        return bool(low <= r_array.min() and r_array.max() <= high)

    def _evaluate(self, r, layer, which):
        profiles = self.profiles
        r_array = np.asarray(r, dtype=float)
        scalar = r_array.ndim == 0
        if scalar:
            r_array = r_array.reshape(1)
        if self._within(r_array, layer):
            positions, values = profiles[layer][2 * which], profiles[layer][1 + 2 * which]
            out = np.interp(r_array, positions, values)
            return out[0] if scalar else out
        owners = _locate(self.edges, r_array, layer)
        out = np.empty_like(r_array)
        for j in np.unique(owners):
            chosen = owners == j
            positions, values = profiles[j][0 + 2 * which], profiles[j][1 + 2 * which]
            out[chosen] = np.interp(r_array[chosen], positions, values)
        return out[0] if scalar else out

    def concentration_at(self, r, layer: int | None = None):
        return self._evaluate(r, layer, 0)

    def flux_at(self, r, layer: int | None = None):
        return self._evaluate(r, layer, 1)

    def profile_at(self, r, layer: int | None = None):
        """(concentration, outward flux) at positions r."""
        profiles = self.profiles
        r_array = np.asarray(r, dtype=float)
        if r_array.ndim == 1 and self._within(r_array, layer):
            positions, values, faces, fluxes = profiles[layer]
            return np.interp(r_array, positions, values), np.interp(r_array, faces, fluxes)
        return self.concentration_at(r, layer), self.flux_at(r, layer)


def make_profile_functions(mesh: Mesh, c: np.ndarray, flux_density: np.ndarray):
    """``(concentration_at, flux_at)`` callables as ``SteadySolution`` describes them (see
    ``NodalProfile``)."""
    profile = NodalProfile(mesh, c, flux_density)
    return profile.concentration_at, profile.flux_at


def boundary_concentration_scale(problem: Problem) -> float:
    """Largest material-side concentration fixed by a concentration or mass-transfer face.

    Returns 0.0 when no face fixes a concentration (flux or symmetry faces only).
    """
    scale = 0.0
    for side, boundary in (("inner", problem.inner_boundary), ("outer", problem.outer_boundary)):
        k_face = problem.face_partition(side)
        fluid = boundary.condition.fluid_concentration(boundary)
        if fluid is not None:
            scale = max(scale, abs(k_face * fluid))
    return scale


def default_cells_per_layer(problem: Problem) -> tuple[int, ...]:
    """Cells per layer by the rule documented at ``MIN_CELLS_PER_LAYER`` (module constants)."""
    n = problem.exponent
    edges = problem.edges
    resistances = np.array([
        layer.thickness
        / (layer.diffusivity * layer.partition * (0.5 * (edges[j] + edges[j + 1])) ** n)
        for j, layer in enumerate(problem.layers)
    ])
    shares = resistances / resistances.sum()
    c_scale = boundary_concentration_scale(problem)
    counts = []
    for j, layer in enumerate(problem.layers):
        cells = max(MIN_CELLS_PER_LAYER, int(np.ceil(RESISTANCE_CELLS * shares[j])))
        reaction = layer.reaction
        inverse_length = reaction.law.inverse_length(reaction, layer.diffusivity, c_scale)
        if inverse_length > 0.0:
            cells = max(cells, int(np.ceil(layer.thickness * inverse_length / THIELE_CELL_LIMIT)))
        counts.append(min(cells, MAX_CELLS_PER_LAYER))
    return tuple(counts)


def solve_tridiagonal(ab: np.ndarray, rhs: np.ndarray, *, overwrite_ab: bool = False
                      ) -> np.ndarray:
    """Solve ``ab @ x = rhs`` for a tridiagonal matrix in ``solve_banded((1, 1))`` layout.

    Calls LAPACK ``dgtsv`` (Gaussian elimination with partial pivoting), the routine that
    ``scipy.linalg.solve_banded`` itself uses for one sub- and one super-diagonal, directly,
    without the input checks that dominate its cost on small systems. ``ab`` is not modified
    unless ``overwrite_ab`` (a scratch matrix the caller no longer needs); ``rhs`` never is.

    Raises
    ------
    scipy.linalg.LinAlgError
        When the matrix is singular (e.g. a body with flux or symmetry faces only and no
        reaction, which has no unique steady state).
    """
    _, _, _, solution, info = dgtsv(ab[2, :-1], ab[1], ab[0, 1:], rhs, overwrite_ab,
                                    overwrite_ab, overwrite_ab)
    if info > 0:
        raise LinAlgError(f"singular tridiagonal matrix (zero pivot at row {info})")
    if info < 0:
        raise ValueError(f"illegal value in argument {-info} of dgtsv")
    return solution
