"""Method of lines on the steady engine's finite-volume mesh: transient diffusion-reaction.

Space is discretised exactly as in the steady solver (``fv_mesh``: uniform cells per layer, or
cells graded towards a face where a very early first time asks for it, ``transient.early_mesh``;
series face conductances with the partition jump, half-cell boundary conductances). With the
r^n-weighted cell volumes V_i and outward face fluxes Q_f (``fv_mesh.DiffusionOperator``), each
cell obeys

    V_i dC_i/dt = -(Q_{i+1} - Q_i) - V_i R(C_i) = rhs_i - (A C)_i - V_i R(C_i),

and three more states are integrated with the cells, so that the amounts are exact in the
discretisation and the mass balance can be checked:

    d(out_inner)/dt = -Q_0,   d(out_outer)/dt = Q_N,   d(consumed)/dt = sum_i V_i R(C_i).

A ``compartment`` face (a well-stirred fluid of finite volume, ``boundaries.compartment``)
adds one state after those three, its fluid concentration C_f (inner face first): with the
face's half-cell conductance g, its partition K_face, the compartment's r^n-weighted capacity
W (``compartment.capacity``) and its clearance k_c, the outflow through the face is
``g (C_P - K_face C_f)`` and

    W dC_f/dt = g (C_P - K_face C_f) - W k_c C_f

(J. Crank, *The Mathematics of Diffusion*, 2nd ed., 1975, §4.3.5, the balance of a stirred
solution of limited volume). ``out_*`` stays the cumulative amount through the face, so the
mass balance of the body is unchanged; the compartment holds ``W C_f`` (times the measure).

The system is stiff; it is integrated by ``scipy.integrate.solve_ivp(method="BDF")`` (variable
order 1-5 backward differentiation with error control) with its exact sparse Jacobian, the
requested times in ``t_eval`` and dense output for event times (t50, t90).

Zero-order consumption stops where the solute is used up. In time the step ``Q [C > 0]`` is
replaced by the C^1 switch ``Q s(C/eps)``, ``s(x) = 3x^2 - 2x^3`` on [0, 1], 0 below and 1
above, with eps = ``ZERO_ORDER_SMOOTHING`` times the concentration scale of the case: the rate
is exactly Q wherever C >= eps, nothing is consumed at C <= 0, and the Jacobian stays
continuous for the BDF Newton iteration. The steady solver treats the same step as an exact
complementarity condition; the two agree except in cells with 0 < C < eps.

Kinked cases (zero-order consumption, a layer whose solubility can be reached:
``uses_implicit_steps``) are integrated instead by ``implicit_steps``: implicit Euler with a
semismooth Newton solve, step doubling and the Richardson combination of the half-step and
whole-step paths. There the zero-order step is exact (a complementarity variable per cell, see
``_Rhs``) and a cell's state is its total content u, dissolved c = min(u, S) (Paul & McSpadden
1976's dispersed matrix on finite volumes): the undissolved reserve u - c does not diffuse,
reactions act on c, and the amount held counts both, so the mass balance covers the reserve.
Orders measured on the Paul & McSpadden slab (tests/unit/worker/engine/transient/
test_nonsmooth_steps.py): the released amount converges at about second order in the cell size
despite the front, the front position at first to second order; in time the Richardson
combination is about second order.

Amounts are reported per measure: per m^2 of a slab, per m of a cylinder, total for a sphere
(r^n-weighted sums times 1, 2 pi, 4 pi).

References
----------
W.E. Schiesser, *The Numerical Method of Lines*, Academic Press, 1991.
S.V. Patankar, *Numerical Heat Transfer and Fluid Flow*, Hemisphere, 1980, ch. 4.
L.F. Shampine, M.W. Reichelt, "The MATLAB ODE suite", SIAM J. Sci. Comput. 18 (1997) 1-22
(the variable-order BDF/NDF scheme of ``solve_ivp``).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from types import SimpleNamespace
from typing import Any

import numpy as np
from numpy.typing import ArrayLike
from scipy import sparse
from scipy.integrate import BDF, solve_ivp
from scipy.interpolate import PchipInterpolator

from worker.engine.boundaries.compartment import capacity as compartment_capacity
from worker.engine.boundaries.compartment import compartment_sides
from worker.engine.fv_mesh import (
    Mesh,
    assemble_diffusion,
    boundary_concentration_scale,
    build_mesh,
    face_flux_densities,
    make_profile_functions,
    reaction_terms,
)
from worker.engine.model import Problem
from worker.engine.transient import implicit_steps
from worker.engine.transient.solution import TransientSolution

#: Relative tolerance of the BDF integration: its time error (about 1e-6 of the amounts) stays
#: far below the space error of the meshes used and the cross-check limit (1e-3).
RTOL = 1e-6
#: Absolute tolerance of the concentrations, as a fraction of the concentration scale (the
#: amounts, not single cells near a sink, are what the checks need to ~1e-6).
ATOL_CONCENTRATION = 1e-8
#: Absolute tolerance of the cumulative amounts, as a fraction of the amount scale.
ATOL_AMOUNT = 1e-11
#: Smoothing width of the zero-order switch, as a fraction of the concentration scale.
ZERO_ORDER_SMOOTHING = 1e-6
#: Tolerance of the implicit steps' local error estimate (first-order half steps) that stands
#: for ``RTOL``. Measured: the Richardson-combined released fraction is then within about 1e-5
#: (layered coating with zero-order consumption), 5e-6 (zero-order depletion of a slab) and
#: 1e-7 (dispersed slab) of its value with a 100 times tighter tolerance; at 1e-3 the coating
#: case misses the 1e-5 time check ...
IMPLICIT_RTOL = 3e-4
#: ... and its loosest value (a looser ``rtol`` asked of the method of lines is capped here).
IMPLICIT_RTOL_MAX = 1e-2
#: Cells on either side of a cell whose piece changes within an implicit step that share its
#: loosened error weight (``implicit_steps.SWITCH_TOLERANCE``): the kink's error spreads over
#: a few cells within the step (``galerkin.SWITCH_NEIGHBOURS``, the same number for the same
#: reason; on the dispersed-drug bench case, 1300 steps and 446 rejections without the
#: loosened weight, 1176 and 373 with it on the switching cells alone, 969 and 214 with two
#: neighbours, 869 and 159 with four).
SWITCH_NEIGHBOURS = 4

METHOD_NAME = "finite-volume method of lines, implicit BDF (solve_ivp) with error control"
METHOD_REFERENCE = (
    "S.V. Patankar, Numerical Heat Transfer and Fluid Flow, 1980, ch. 4 (finite volumes, "
    "harmonic interface conductance); W.E. Schiesser, The Numerical Method of Lines, 1991; "
    "L.F. Shampine, M.W. Reichelt, SIAM J. Sci. Comput. 18 (1997) 1 (BDF with error control)"
)


@dataclass
class TransientFVSolution(TransientSolution):
    """Method-of-lines solution at the requested times (amounts and fluxes: see
    :class:`~worker.engine.transient.solution.TransientSolution`).

    ``cells`` holds the cell concentrations (dissolved), shape (len(times), N); ``contents``
    the solute per volume of each cell (dissolved plus undissolved) and ``undissolved`` the
    undissolved amount per measure at each time. ``history`` (implicit steps only) is the
    :class:`StepHistory` of every accepted step.
    ``profile_at(index)`` gives ``(concentration_at, flux_at)`` callables (see
    ``fv_mesh.make_profile_functions``) of the state at ``times[index]``;
    ``state_at(t)`` evaluates the dense output (cells, then out_inner, out_outer, consumed,
    r^n-weighted, without the measure factor) at any t in [start, end];
    ``profile_at_time(t)`` gives the ``(concentration_at, flux_at)`` callables of the dense
    output's cells at any such t; ``step_times`` are the integrator's step times.
    """

    success: bool
    message: str
    mesh: Mesh
    cells: np.ndarray
    end: float
    rtol: float
    state_at: Callable[[ArrayLike], np.ndarray]
    profile_at: Callable[[int], tuple[Callable[..., Any], Callable[..., Any]]]
    step_times: np.ndarray | None = None
    diagnostics: dict = field(default_factory=dict)
    profile_at_time: Callable[[float], tuple[Callable[..., Any], Callable[..., Any]]] | None = None
    contents: np.ndarray | None = None
    undissolved: np.ndarray | None = None
    history: Any = None
    #: Fluid concentration of each compartment face at the times (``"inner"``/``"outer"``).
    compartments: dict[str, np.ndarray] = field(default_factory=dict)


def concentration_scale(problem: Problem) -> float:
    """Largest of the boundary-set and initial concentrations (material side), or 1 if none
    (a scale below the smallest normal double, such as a subnormal initial level, counts as
    none: the tolerances built on it would underflow to zero)."""
    scale = max(boundary_concentration_scale(problem),
                max(abs(layer.initial) for layer in problem.layers))
    if scale == 0.0:
        # flux-driven with an empty body: use the flux over the conductance of the body
        imposed = (b.condition.imposed_flux(b)
                   for b in (problem.inner_boundary, problem.outer_boundary))
        flux = max(abs(value) if value is not None else 0.0 for value in imposed)
        d_min = min(layer.diffusivity for layer in problem.layers)
        scale = flux * problem.total_thickness / d_min
    return scale if scale >= np.finfo(float).tiny else 1.0


@dataclass(frozen=True)
class _CompartmentFace:
    """One compartment face in the state: its side, its state index, the boundary cell and the
    released state it feeds, the half-cell conductance g (r^n-weighted), g * K_face, the
    compartment's r^n-weighted capacity W, its clearance (1/s) and starting level."""

    side: str
    state: int
    cell: int
    released: int
    conductance: float
    coupling: float
    capacity: float
    clearance: float
    start: float
    partition: float


def _compartment_couplings(problem: Problem, system: _Rhs) -> list[_CompartmentFace]:
    """The compartment faces of ``problem`` on the system's mesh (inner first)."""
    faces: list[_CompartmentFace] = []
    n = system.n
    for side in compartment_sides(problem):
        boundary = problem.inner_boundary if side == "inner" else problem.outer_boundary
        k_face = problem.face_partition(side)
        inner = side == "inner"
        g = float(system.operator.east_coefficient[0] if inner
                  else system.operator.west_coefficient[-1])
        faces.append(_CompartmentFace(
            side=side, state=n + 3 + len(faces), cell=0 if inner else n - 1,
            released=n if inner else n + 1, conductance=g, coupling=g * k_face,
            capacity=compartment_capacity(problem, side), clearance=float(boundary.clearance),
            start=float(boundary.initial), partition=float(k_face)))
    return faces


class _Rhs:
    """Right-hand side and sparse Jacobian of the method-of-lines system.

    The cell states are the solute content per volume u (dissolved plus undissolved); the
    dissolved concentration is c = min(u, S) with S the layer's solubility (u where it has
    none). With ``exact`` (the implicit-step integrator) a zero-order cell's state is instead
    the complementarity variable w of Hintermueller, Ito & Kunisch (2002): u = max(w, 0) and
    the consumption rate Q + kappa min(w, 0), both piecewise linear, so that the rate is
    exactly Q wherever solute is left and at most Q (what reaches the cell) where it is used
    up; ``content`` and ``content_slope`` give u(w) and du/dw. Without ``exact`` the zero-order
    step is the smooth switch of the module docstring (for BDF).
    """

    def __init__(self, problem: Problem, mesh: Mesh, c_scale: float, exact: bool = False):
        self.mesh = mesh
        self.operator = assemble_diffusion(mesh, problem)
        self.terms = reaction_terms(mesh, problem)
        self.volumes = mesh.volumes
        self.n = mesh.n_cells
        self.epsilon = ZERO_ORDER_SMOOTHING * c_scale
        #: the concentration scale (mol/m^3) of the integrator's loosened weight at a switch
        self.switch_scale = c_scale
        ab = self.operator.ab
        n = self.n
        laplacian = sparse.diags(
            [ab[2, :-1], ab[1], ab[0, 1:]], [-1, 0, 1], shape=(n, n), format="csr"
        )
        self.cell_block = (-sparse.diags(1.0 / self.volumes) @ laplacian).tocsr()
        self.q0_slope = -self.operator.east_coefficient[0]  # dQ_0/dC_0
        self.qn_slope = self.operator.west_coefficient[-1]  # dQ_N/dC_{N-1}
        self.source = self.operator.rhs / self.volumes
        self.inverse_volumes = 1.0 / self.volumes
        self.compartments = _compartment_couplings(problem, self)
        self.size = n + 3 + len(self.compartments)
        self.solubility = np.array([
            np.inf if problem.layers[j].solubility is None else problem.layers[j].solubility
            for j in mesh.layer_index], dtype=float)
        self.has_solubility = bool(np.any(np.isfinite(self.solubility)))
        self.exact = exact
        self.switched = (self.terms.zero_order > 0.0) if exact else np.zeros(n, dtype=bool)
        self.any_switched = bool(np.any(self.switched))
        self.smooth_reacts = bool(np.any(self.terms.first_order != 0.0)) or \
            self.terms.has_michaelis_menten
        # any positive kappa gives the same solution; the cells' own diffusion rate keeps the
        # rows of the Newton matrix on one scale
        diagonal = np.abs(self.cell_block.diagonal())
        self.kappa = float(np.max(diagonal)) if np.max(diagonal) > 0.0 else 1.0
        # per cell: the floor of the content (0 where switched, else none), the exact
        # zero-order rate and kappa (0 where not switched)
        self.floor = np.where(self.switched, 0.0, -np.inf)
        self.switched_rate = np.where(self.switched, self.terms.zero_order, 0.0)
        self.switched_kappa = np.where(self.switched, self.kappa, 0.0)
        #: the system is affine on each piece of ``pieces`` (no Michaelis-Menten term, no
        #: smoothed zero-order switch)
        self.piecewise_linear = not self.terms.has_michaelis_menten and (
            exact or not self.terms.has_zero_order)

    def pieces(self, y: np.ndarray) -> np.ndarray:
        """Per cell, the piece of the piecewise-linear terms the state is on (content above
        its floor, content below the solubility): where two states agree the system is affine
        between them."""
        cells = y[: self.n]
        if not self.any_switched:
            return cells < self.solubility if self.has_solubility else np.zeros(0, dtype=bool)
        above = cells > self.floor
        if not self.has_solubility:
            return above
        return np.concatenate((above, np.maximum(cells, self.floor) < self.solubility))

    def switched_states(self, y: np.ndarray, y_new: np.ndarray) -> np.ndarray:
        """Per state, whether it is a cell whose piece (:meth:`pieces`) differs between y and
        ``y_new`` or one of the ``SWITCH_NEIGHBOURS`` cells on either side of such a cell in
        the mesh (the integrator's loosened weight, ``implicit_steps.SWITCH_TOLERANCE``)."""
        out = np.zeros(y.size, dtype=bool)
        before, after = self.pieces(y), self.pieces(y_new)
        if before.size == 0:
            return out
        out[: self.n] = _with_neighbours((before != after).reshape(-1, self.n).any(axis=0),
                                         [0, self.n])
        return out

    def pieces_of_copies(self, states: np.ndarray) -> np.ndarray:
        """:meth:`pieces` of each row of ``states`` (states of copies of this system), as
        rows."""
        cells = states[:, : self.n]
        if not self.any_switched:
            return cells < self.solubility if self.has_solubility else \
                np.zeros((states.shape[0], 0), dtype=bool)
        above = cells > self.floor
        if not self.has_solubility:
            return above
        return np.concatenate((above, np.maximum(cells, self.floor) < self.solubility), axis=1)

    def content(self, y: np.ndarray) -> np.ndarray:
        """Conserved content of each state (cells: solute per volume; other states as they
        are)."""
        if not self.any_switched:
            return y
        out = y.copy()
        out[: self.n] = np.maximum(y[: self.n], self.floor)
        return out

    def content_slope(self, y: np.ndarray) -> np.ndarray:
        """Diagonal of d(content)/dy (a generalised derivative at the kink)."""
        out = np.ones_like(y)
        if self.any_switched:
            out[: self.n] = y[: self.n] > self.floor
        return out

    def cell_contents(self, y: np.ndarray) -> np.ndarray:
        """Solute content per volume u of each cell (dissolved plus undissolved)."""
        cells = y[: self.n]
        return np.maximum(cells, self.floor) if self.any_switched else cells

    def dissolved(self, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Dissolved concentration c = min(u, S) per cell and dc/dy (generalised)."""
        return _dissolved_cells(self, y[: self.n])

    def reaction(self, c: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Consumption R(C) and dR/dC per cell (zero order through the smooth switch, where
        the switch is not exact)."""
        if not self.smooth_reacts:
            rate, slope = np.zeros(self.n), np.zeros(self.n)
        else:
            rate, slope = self.terms.smooth_rate(c)
        if self.terms.has_zero_order and not self.exact:
            z = self.terms.zero_order > 0.0
            x = np.clip(c[z] / self.epsilon, 0.0, 1.0)
            rate = rate.copy()
            slope = slope.copy()
            rate[z] += self.terms.zero_order[z] * x * x * (3.0 - 2.0 * x)
            slope[z] += self.terms.zero_order[z] * 6.0 * x * (1.0 - x) / self.epsilon
        return rate, slope

    def _rate(self, y: np.ndarray, c: np.ndarray, dc: np.ndarray
              ) -> tuple[np.ndarray, np.ndarray]:
        """Consumption per cell and its derivative with respect to the cell state."""
        if self.smooth_reacts or (self.terms.has_zero_order and not self.exact):
            rate, slope = self.reaction(c)
            slope = slope * dc
        else:
            rate, slope = np.zeros(self.n), np.zeros(self.n)
        if self.any_switched:
            cells = y[: self.n]
            rate = rate + self.switched_rate + self.switched_kappa * np.minimum(cells, 0.0)
            slope = slope + self.switched_kappa * (cells <= 0.0)
        return rate, slope

    def __call__(self, t: float, y: np.ndarray) -> np.ndarray:
        c, dc = self.dissolved(y)
        rate, _ = self._rate(y, c, dc)
        return self._rhs(y, c, rate)

    def newton_terms(self, t: float, y: np.ndarray
                     ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """``(content(y), f(t, y), jacobian_values(t, y), content_slope(y))`` from one
        evaluation of the dissolved part and the consumption (what a Newton iteration needs;
        an exact system's through :class:`_StackedTerms` of itself alone, the same
        arithmetic)."""
        if self.exact:
            alone = getattr(self, "_alone", None)
            if alone is None:
                alone = self._alone = _StackedTerms([self], np.array([0, self.size]))
            return alone.newton_terms(y)
        c, dc = self.dissolved(y)
        rate, slope = self._rate(y, c, dc)
        return self.content(y), self._rhs(y, c, rate), self._values(c, dc, slope), \
            self.content_slope(y)

    def _rhs(self, y: np.ndarray, c: np.ndarray, rate: np.ndarray) -> np.ndarray:
        out = np.empty_like(y)
        out[: self.n] = self.source - self.operator.apply(c) * self.inverse_volumes - rate
        q0 = self.q0_slope * c[0] + self.operator.face_constant[0]
        qn = self.qn_slope * c[-1] + self.operator.face_constant[-1]
        out[self.n] = -q0
        out[self.n + 1] = qn
        out[self.n + 2] = float(np.dot(self.volumes, rate))
        for face in self.compartments:
            level = y[face.state]
            shift = face.coupling * (level - face.start)
            out[face.cell] += shift * self.inverse_volumes[face.cell]
            out[face.released] -= shift
            out[face.state] = (face.conductance * c[face.cell] - face.coupling * level) \
                / face.capacity - face.clearance * level
        return out

    def face_fluxes(self, y: np.ndarray) -> np.ndarray:
        """r^n-weighted outward face fluxes Q of state ``y`` (each compartment's level in)."""
        return _compartment_face_fluxes(self, self.dissolved(y)[0], y)

    def _build_pattern(self) -> None:
        """CSC matrix of the full Jacobian pattern, with the positions of the entries that
        depend on the state (cell block, face rows and the consumption row)."""
        n = self.n
        block = self.cell_block.tocoo()
        rows = np.concatenate((block.row, np.arange(n), [n, n + 1], np.full(n, n + 2)))
        cols = np.concatenate((block.col, np.arange(n), [0, n - 1], np.arange(n)))
        data = np.concatenate((block.data, np.zeros(n), [-self.q0_slope, self.qn_slope],
                               np.zeros(n)))
        extra_rows, extra_cols, extra_data = [], [], []
        for face in self.compartments:  # constant entries: the coupling is linear
            p, f = face.cell, face.state
            extra_rows += [p, face.released, f, f]
            extra_cols += [f, f, p, f]
            extra_data += [face.coupling / self.volumes[p], -face.coupling,
                           face.conductance / face.capacity,
                           -face.coupling / face.capacity - face.clearance]
        rows = np.concatenate((rows, extra_rows)).astype(int)
        cols = np.concatenate((cols, extra_cols)).astype(int)
        data = np.concatenate((data, extra_data))
        base = sparse.csc_matrix((data, (rows, cols)), shape=(self.size, self.size))
        base.sum_duplicates()
        base.sort_indices()
        self._base_data = base.data.copy()
        self._pattern = base
        diagonal_at = np.empty(n, dtype=int)
        consumed_at = np.empty(n, dtype=int)
        indptr, indices = base.indptr, base.indices
        column_of = np.repeat(np.arange(self.size), np.diff(indptr))
        for col in range(n):
            segment = slice(indptr[col], indptr[col + 1])
            rows_here = indices[segment]
            diagonal_at[col] = indptr[col] + int(np.flatnonzero(rows_here == col)[0])
            consumed_at[col] = indptr[col] + int(np.flatnonzero(rows_here == n + 2)[0])
        self._diagonal_at = diagonal_at
        self._consumed_at = consumed_at
        # entries that scale with dc/dy of their column: the cell block and the face rows
        self._column_of = column_of
        self._scaled = (column_of < n) & (indices != n + 2)

    def jacobian_pattern(self):
        """The Jacobian's fixed sparsity pattern (CSC, sorted indices)."""
        if not hasattr(self, "_pattern"):
            self._build_pattern()
        return self._pattern

    def jacobian_values(self, t: float, y: np.ndarray) -> np.ndarray:
        """The Jacobian's entries in the order of ``jacobian_pattern().data``."""
        if not hasattr(self, "_pattern"):
            self._build_pattern()
        c, dc = self.dissolved(y)
        _, slope = self._rate(y, c, dc)
        return self._values(c, dc, slope)

    def _values(self, c: np.ndarray, dc: np.ndarray, slope: np.ndarray) -> np.ndarray:
        if not hasattr(self, "_pattern"):
            self._build_pattern()
        data = self._base_data.copy()
        if self.has_solubility or self.any_switched:
            scaled = self._scaled
            data[scaled] *= dc[self._column_of[scaled]]
        data[self._diagonal_at] -= slope
        data[self._consumed_at] = self.volumes * slope
        return data

    def chain_order(self) -> np.ndarray:
        """The states every other state depends on, in an order in which the Jacobian among
        them is tridiagonal: the inner compartment's level, the cells, the outer compartment's
        level (the amounts, which nothing depends on, are left out)."""
        inner = [f.state for f in self.compartments if f.side == "inner"]
        outer = [f.state for f in self.compartments if f.side == "outer"]
        return np.concatenate((inner, np.arange(self.n), outer)).astype(np.int64)

    def jacobian(self, t: float, y: np.ndarray):
        """Exact (generalised) Jacobian as a CSC matrix (fixed pattern, state-dependent
        entries updated)."""
        matrix = self.jacobian_pattern().copy()
        matrix.data = self.jacobian_values(t, y)
        return matrix


def _with_neighbours(moved: np.ndarray, starts) -> np.ndarray:
    """``moved`` (one flag per cell of meshes laid end to end, mesh k the cells
    ``starts[k]:starts[k + 1]``) with the ``SWITCH_NEIGHBOURS`` cells on either side of each
    flagged cell flagged too, within its own mesh."""
    if not moved.any():
        return moved
    out = moved.copy()
    for low, high in zip(starts[:-1], starts[1:], strict=True):
        part, flags = out[low:high], moved[low:high]
        for k in range(1, SWITCH_NEIGHBOURS + 1):
            part[k:] |= flags[:-k]
            part[:-k] |= flags[k:]
    return out


class _Stack:
    """Several meshes' systems integrated as one block-diagonal system (shared time steps)."""

    def __init__(self, systems: list[_Rhs]):
        self.systems = systems
        sizes = [system.size for system in systems]
        self.offsets = np.concatenate(([0], np.cumsum(sizes)))
        # whether some state's content differs from the state itself
        self.switching = any(getattr(system, "any_switched", True) for system in systems)
        self.stacked = _StackedTerms(systems, self.offsets) \
            if len(systems) > 1 and all(system.exact for system in systems) else None

    def __call__(self, t: float, y: np.ndarray) -> np.ndarray:
        if len(self.systems) == 1:
            return self.systems[0](t, y)
        return np.concatenate([
            system(t, y[self.offsets[k]: self.offsets[k + 1]])
            for k, system in enumerate(self.systems)
        ])

    def _each(self, name: str, y: np.ndarray) -> np.ndarray:
        if not self.switching:
            return y
        parts = []
        for k, system in enumerate(self.systems):
            part = y[self.offsets[k]: self.offsets[k + 1]]
            method = getattr(system, name, None)
            parts.append(part if method is None else method(part))
        return parts[0] if len(parts) == 1 else np.concatenate(parts)

    def content(self, y: np.ndarray) -> np.ndarray:
        """Conserved content of every state (see ``_Rhs.content``)."""
        return self._each("content", y)

    def content_slope(self, y: np.ndarray) -> np.ndarray:
        """Diagonal of d(content)/dy of every state."""
        if not self.switching:
            return np.ones_like(y)
        parts = []
        for k, system in enumerate(self.systems):
            part = y[self.offsets[k]: self.offsets[k + 1]]
            method = getattr(system, "content_slope", None)
            parts.append(np.ones_like(part) if method is None else method(part))
        return np.concatenate(parts)

    def jacobian_pattern(self):
        """Block-diagonal pattern of the systems' patterns (CSC, columns in block order)."""
        cached = getattr(self, "_pattern", None)
        if cached is not None:
            return cached
        blocks = [sparse.csc_matrix(system.jacobian_pattern()) for system in self.systems]
        indptr = [np.zeros(1, dtype=np.int64)]
        indices = []
        nnz = 0
        for k, block in enumerate(blocks):
            indptr.append(block.indptr[1:].astype(np.int64) + nnz)
            indices.append(block.indices.astype(np.int64) + int(self.offsets[k]))
            nnz += block.nnz
        size = int(self.offsets[-1])
        self._pattern = sparse.csc_matrix(
            (np.concatenate([block.data for block in blocks]), np.concatenate(indices),
             np.concatenate(indptr)), shape=(size, size))
        return self._pattern

    def newton_terms(self, t: float, y: np.ndarray
                     ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """Each system's ``_Rhs.newton_terms``, joined in block order (every mesh at once
        where the systems are exact, see :class:`_StackedTerms`)."""
        if self.stacked is not None:
            return self.stacked.newton_terms(y)
        parts = [system.newton_terms(t, y[self.offsets[k]: self.offsets[k + 1]])
                 for k, system in enumerate(self.systems)]
        if len(parts) == 1:
            return parts[0]
        return tuple(np.concatenate(terms) for terms in zip(*parts, strict=True))  # type: ignore[return-value]

    @property
    def piecewise_linear(self) -> bool:
        """Whether every system is affine on each of its pieces."""
        return all(system.piecewise_linear for system in self.systems)

    def pieces(self, y: np.ndarray) -> np.ndarray:
        """Each system's ``_Rhs.pieces`` (in another order where the meshes are evaluated at
        once: only compared with itself)."""
        if self.stacked is not None:
            return self.stacked.pieces(y)
        return np.concatenate([system.pieces(y[self.offsets[k]: self.offsets[k + 1]])
                               for k, system in enumerate(self.systems)])

    def switched_states(self, y: np.ndarray, y_new: np.ndarray) -> np.ndarray:
        """Each system's ``_Rhs.switched_states``, in block order (every mesh's cells at once
        where the systems are exact, see :class:`_StackedTerms`)."""
        stacked = self.stacked
        if stacked is not None:
            out = np.zeros(y.size, dtype=bool)
            before, after = stacked.pieces(y), stacked.pieces(y_new)
            if before.size:
                moved = (before != after).reshape(-1, stacked.cells.size).any(axis=0)
                out[stacked.cells] = _with_neighbours(moved, stacked.cell_starts)
            return out
        return np.concatenate([
            system.switched_states(y[self.offsets[k]: self.offsets[k + 1]],
                                   y_new[self.offsets[k]: self.offsets[k + 1]])
            for k, system in enumerate(self.systems)])

    @property
    def switch_scale(self) -> float:
        """The systems' concentration scale (mol/m^3; the same case on every mesh)."""
        return max(system.switch_scale for system in self.systems)

    def chain_order(self) -> np.ndarray:
        """Each system's chain (``_Rhs.chain_order``) in block order."""
        return np.concatenate([system.chain_order() + int(self.offsets[k])
                               for k, system in enumerate(self.systems)])

    def jacobian_values(self, t: float, y: np.ndarray) -> np.ndarray:
        """The entries in the order of ``jacobian_pattern().data``."""
        return np.concatenate([
            system.jacobian_values(t, y[self.offsets[k]: self.offsets[k + 1]])
            for k, system in enumerate(self.systems)])

    def jacobian(self, t: float, y: np.ndarray):
        if len(self.systems) == 1:
            return self.systems[0].jacobian(t, y)
        matrix = self.jacobian_pattern().copy()
        matrix.data = self.jacobian_values(t, y)
        return matrix


class _StackedTerms:
    """``_Rhs.newton_terms`` and ``_Rhs.pieces`` of several exact systems of one problem
    (meshes of the same layers) evaluated at once on their states laid end to end: the cells of
    every mesh in one array (the diffusion operators' bands joined, which couple no two meshes:
    each band is zero at its mesh's ends), element by element the arithmetic of each system
    alone."""

    def __init__(self, systems: list[_Rhs], offsets: np.ndarray):
        first = systems[0]
        self.systems = systems
        self.offsets = offsets
        self.any_switched = first.any_switched
        self.has_solubility = first.has_solubility
        self.smooth_reacts = first.smooth_reacts
        self.has_michaelis_menten = first.terms.has_michaelis_menten
        if any((s.any_switched, s.has_solubility, s.smooth_reacts,
                s.terms.has_michaelis_menten) != (self.any_switched, self.has_solubility,
                                                  self.smooth_reacts, self.has_michaelis_menten)
               for s in systems):
            raise ValueError("the systems do not share their kinds of terms")
        counts = [s.n for s in systems]
        self.cell_starts = np.concatenate(([0], np.cumsum(counts))).astype(np.int64)
        self.cells = np.concatenate([int(offsets[k]) + np.arange(s.n)
                                     for k, s in enumerate(systems)])

        def joined(name: str) -> np.ndarray:
            return np.concatenate([getattr(s, name) for s in systems])

        self.ab = np.concatenate([s.operator.ab for s in systems], axis=1)
        self.source = joined("source")
        self.inverse_volumes = joined("inverse_volumes")
        self.volumes = joined("volumes")
        self.solubility = joined("solubility")
        self.floor = joined("floor")
        self.switched_rate = joined("switched_rate")
        self.switched_kappa = joined("switched_kappa")
        self.first_order = np.concatenate([s.terms.first_order for s in systems])
        self.vmax = np.concatenate([s.terms.vmax for s in systems])
        self.km = np.concatenate([s.terms.km for s in systems])
        self.mm = self.vmax > 0.0
        firsts, lasts = self.cell_starts[:-1], self.cell_starts[1:] - 1
        self.first_cell, self.last_cell = firsts, lasts
        self.q0_slope = np.array([s.q0_slope for s in systems])
        self.qn_slope = np.array([s.qn_slope for s in systems])
        self.q0_constant = np.array([s.operator.face_constant[0] for s in systems])
        self.qn_constant = np.array([s.operator.face_constant[-1] for s in systems])
        self.out_inner = np.array([int(offsets[k]) + s.n for k, s in enumerate(systems)])
        # the Jacobian values: the blocks' data joined (the stack's pattern), positions global
        data_starts = np.concatenate(([0], np.cumsum([s.jacobian_pattern().nnz
                                                       for s in systems]))).astype(np.int64)
        self.base_data = np.concatenate([s._base_data for s in systems])
        scaled = [np.flatnonzero(s._scaled) for s in systems]
        self.scaled_at = np.concatenate([data_starts[k] + at for k, at in enumerate(scaled)])
        self.scaled_cell = np.concatenate([self.cell_starts[k] + s._column_of[at]
                                           for k, (s, at) in enumerate(zip(systems, scaled,
                                                                           strict=True))])
        self.diagonal_at = np.concatenate([data_starts[k] + s._diagonal_at
                                           for k, s in enumerate(systems)])
        self.consumed_at = np.concatenate([data_starts[k] + s._consumed_at
                                           for k, s in enumerate(systems)])
        self.faces = [(k, face) for k, s in enumerate(systems) for face in s.compartments]
        #: whether any cell consumes (else the rate and its slope are zero everywhere: the
        #: terms they add are left out, the same numbers)
        self.consumes = self.smooth_reacts or self.any_switched
        self.scaled_base = self.base_data[self.scaled_at]
        size = int(offsets[-1])
        # the diffusion bands as they multiply the cells (fixed views), the states the face
        # rows and the consumption land in, and one system's cells as a slice of its state
        self.ab_upper, self.ab_main, self.ab_lower = self.ab[0, 1:], self.ab[1], self.ab[2, :-1]
        self.out_outer = self.out_inner + 1
        self.out_consumed = self.out_inner + 2
        self.cell_slice = slice(0, counts[0]) if len(systems) == 1 and offsets[0] == 0 \
            else None
        # the content's slope where no content switches: one, read only (shared by calls)
        self.unit_slope = np.ones(size)
        self.unit_slope.flags.writeable = False

    def newton_terms(self, y: np.ndarray
                     ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        at = self.cells if self.cell_slice is None else self.cell_slice
        cells = y[at]
        c, dc = _dissolved_cells(self, cells)
        if self.smooth_reacts:
            rate = self.first_order * c
            slope = self.first_order.copy()
            if self.has_michaelis_menten:
                mm = self.mm
                denominator = self.km[mm] + c[mm]
                rate[mm] += self.vmax[mm] * c[mm] / denominator
                slope[mm] += self.vmax[mm] * self.km[mm] / denominator**2
            slope = slope * dc
        else:
            rate, slope = np.zeros(cells.size), np.zeros(cells.size)
        if self.any_switched:
            rate = rate + self.switched_rate + self.switched_kappa * np.minimum(cells, 0.0)
            slope = slope + self.switched_kappa * (cells <= 0.0)
        # the right-hand side (``_Rhs._rhs``)
        applied = self.ab_main * c
        applied[:-1] += self.ab_upper * c[1:]
        applied[1:] += self.ab_lower * c[:-1]
        out = np.empty_like(y)
        if self.consumes:
            out[at] = self.source - applied * self.inverse_volumes - rate
        else:
            out[at] = self.source - applied * self.inverse_volumes
        q0 = self.q0_slope * c[self.first_cell] + self.q0_constant
        qn = self.qn_slope * c[self.last_cell] + self.qn_constant
        out[self.out_inner] = -q0
        out[self.out_outer] = qn
        starts = self.cell_starts
        if self.consumes:
            for k in range(len(self.systems)):
                out[self.out_inner[k] + 2] = float(np.dot(
                    self.volumes[starts[k]:starts[k + 1]], rate[starts[k]:starts[k + 1]]))
        else:
            out[self.out_consumed] = 0.0
        for k, face in self.faces:
            low = int(self.offsets[k])
            level = y[low + face.state]
            shift = face.coupling * (level - face.start)
            cell = int(starts[k]) + face.cell
            out[low + face.cell] += shift * self.inverse_volumes[cell]
            out[low + face.released] -= shift
            out[low + face.state] = (face.conductance * c[cell] - face.coupling * level) \
                / face.capacity - face.clearance * level
        # the Jacobian's values (``_Rhs._values``)
        data = self.base_data.copy()
        if self.has_solubility or self.any_switched:
            data[self.scaled_at] = self.scaled_base * dc[self.scaled_cell]
        if self.consumes:
            data[self.diagonal_at] -= slope
            data[self.consumed_at] = self.volumes * slope
        # the content and its slope
        if self.any_switched:
            content = y.copy()
            content[at] = np.maximum(cells, self.floor)
            content_slope = np.ones_like(y)
            content_slope[at] = cells > self.floor
        else:
            content = y
            content_slope = self.unit_slope
        return content, out, data, content_slope

    def pieces(self, y: np.ndarray) -> np.ndarray:
        cells = y[self.cells]
        if not self.any_switched:
            return cells < self.solubility if self.has_solubility else np.zeros(0, dtype=bool)
        above = cells > self.floor
        if not self.has_solubility:
            return above
        return np.concatenate((above, np.maximum(cells, self.floor) < self.solubility))


class _ClearedHistoryBDF(BDF):
    """``scipy.integrate.BDF`` with the unused rows of its difference array set to zero.

    scipy allocates the array with ``np.empty`` and its first step subtracts a row it has not
    written yet. The values never reach the solution (the row is overwritten before it is
    used), but whatever bits the fresh memory holds decide whether numpy raises an "invalid
    value" flag, so a run could warn, or fail where warnings are errors, by chance. Zeroed rows
    make every integration read the same numbers. Steps and results are otherwise scipy's.
    """

    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        self.D[2:] = 0.0


def _check_times(problem: Problem, times, end, start):
    times = np.asarray(problem.regime.times if times is None else times, dtype=float)
    if times.ndim != 1 or times.size == 0 or not np.all(np.isfinite(times)):
        raise ValueError(f"times: expected a non-empty list of finite times in s, got {times!r}")
    if np.any(np.diff(times) < 0.0):
        raise ValueError("times: expected increasing times")
    duration = problem.regime.duration
    if end is None:
        end = float(max(times[-1], duration if duration is not None else times[-1]))
    if times[0] < start or times[-1] > end * (1.0 + 1e-12):
        raise ValueError(f"times: expected values within [{start}, {end}] s, got {times!r}")
    return times, float(end)


def solve_transient_fv(
    problem: Problem,
    times=None,
    cells_per_layer=None,
    *,
    rtol: float = RTOL,
    end: float | None = None,
    initial_state: np.ndarray | None = None,
    start: float = 0.0,
) -> TransientFVSolution:
    """Integrate the method-of-lines system and evaluate it at the requested times.

    Parameters
    ----------
    problem : Problem
        Normalised case (SI), any number of layers and every boundary and reaction kind.
    times : array_like, optional
        Output times in s (default ``problem.regime.times``), increasing, within [start, end].
    cells_per_layer : int, sequence of int or GradedCells, optional
        Mesh (default ``fv_mesh.default_cells_per_layer``; a ``fv_grading.GradedCells``
        grades the cells towards faces).
    rtol : float
        Relative tolerance of the integrator (absolute tolerances scale with it).
    end : float, optional
        End of the integration, s (default: the regime's duration, or the last time).
    initial_state : ndarray, optional
        State vector to start from (cells, then the three amount states, r^n-weighted);
        default: the layers' initial concentrations and zero amounts.
    start : float
        Time of ``initial_state``, s.

    Returns
    -------
    TransientFVSolution
        ``success`` False (with the integrator's message) when the integration failed.
    """
    states = None if initial_state is None else [initial_state]
    return solve_transient_fv_meshes(problem, [cells_per_layer], times, rtol=rtol, end=end,
                                     initial_states=states, start=start)[0]


def solve_transient_fv_meshes(
    problem: Problem,
    meshes,
    times=None,
    *,
    rtol: float = RTOL,
    end: float | None = None,
    initial_states=None,
    start: float = 0.0,
) -> list[TransientFVSolution]:
    """Integrate the system on several meshes at once, as one block-diagonal ODE system.

    The meshes share the integrator's steps (one error-controlled BDF integration whose error
    norm covers every mesh), which costs far less than one integration per mesh; each mesh's
    discrete solution is otherwise independent of the others. Parameters as
    ``solve_transient_fv``; ``meshes`` is a list of ``cells_per_layer`` specifications (each
    an int, one int per layer or a ``fv_grading.GradedCells``) and
    ``initial_states`` an optional list of state vectors, one per mesh.
    """
    times, end = _check_times(problem, times, end, start)
    c_scale = concentration_scale(problem)
    measure = problem.measure_factor
    built = [build_mesh(problem, cells) for cells in meshes]
    exact = uses_implicit_steps(problem)
    systems = [_Rhs(problem, mesh, c_scale, exact=exact) for mesh in built]
    stack = _Stack(systems)
    y0_parts, atol_parts, loads = [], [], []
    for k, mesh in enumerate(built):
        n = mesh.n_cells
        faces = systems[k].compartments
        if initial_states is None:
            initial_cells = np.array([problem.layers[j].initial for j in mesh.layer_index])
            y0 = np.concatenate((initial_cells, np.zeros(3), [f.start for f in faces]))
        else:
            y0 = np.asarray(initial_states[k], dtype=float)
        load = float(np.dot(mesh.volumes, y0[:n]))
        amount_scale = max(abs(load), c_scale * float(np.sum(mesh.volumes)))
        y0_parts.append(y0)
        loads.append(load)
        atol_parts.append(np.concatenate((
            np.full(n, ATOL_CONCENTRATION * c_scale * rtol / RTOL),
            np.full(3, ATOL_AMOUNT * amount_scale * rtol / RTOL),
            [ATOL_CONCENTRATION * c_scale / f.partition * rtol / RTOL for f in faces],
        )))
    if exact:
        factor = implicit_rtol(rtol) / rtol
        return _solve_implicit(problem, built, systems, stack, times, end, start,
                               implicit_rtol(rtol), np.concatenate(y0_parts),
                               factor * np.concatenate(atol_parts), loads)
    span_end = max(end, start + 1e-300)
    result = solve_ivp(
        stack, (start, span_end), np.concatenate(y0_parts), method=_ClearedHistoryBDF,
        t_eval=np.clip(times, start, span_end), dense_output=True, rtol=rtol,
        atol=np.concatenate(atol_parts), jac=stack.jacobian,
    )
    success = bool(result.success) and result.y.shape[1] == times.size
    dense = result.sol
    end_state = dense(end) if dense is not None else None
    solutions = []
    for k, (mesh, system) in enumerate(zip(built, systems, strict=True)):
        low, high = int(stack.offsets[k]), int(stack.offsets[k + 1])
        states = result.y[low:high] if success else np.full((high - low, times.size), np.nan)
        solutions.append(_package(problem, mesh, system, times, states, success, result, dense,
                                  low, high, end, rtol, measure * loads[k], end_state,
                                  len(built)))
    return solutions


def _package(problem, mesh, system, times, states, success, result, dense, low, high, end,
             rtol, initial_load, end_state, meshes_together=1) -> TransientFVSolution:
    """One mesh's solution at the requested times: ``states`` (its rows ``low:high`` of the
    stacked system's states, columns at ``times``) read through ``system``."""
    n = mesh.n_cells
    measure = problem.measure_factor
    cells = np.array([system.dissolved(states[:, k])[0] for k in range(times.size)]) \
        if states.shape[1] else states[:n].T
    contents = np.array([system.cell_contents(states[:, k]) for k in range(times.size)]) \
        if states.shape[1] else states[:n].T
    remaining = measure * (contents @ mesh.volumes)
    flux_inner = np.empty(times.size)
    flux_outer = np.empty(times.size)
    for k in range(times.size):
        densities = face_flux_densities(mesh, system.face_fluxes(states[:, k]))
        flux_inner[k] = densities[0]
        flux_outer[k] = densities[-1]

    def profile_at(index: int):
        y = states[:, index]
        return make_profile_functions(mesh, cells[index],
                                      face_flux_densities(mesh, system.face_fluxes(y)))

    def state_at(t):
        if dense is None:
            raise ValueError("no dense output: the integration failed")
        return dense(np.asarray(t, dtype=float))[low:high]

    def profile_at_time(t: float):
        y = np.asarray(state_at(float(t)), dtype=float)
        return make_profile_functions(mesh, system.dissolved(y)[0],
                                      face_flux_densities(mesh, system.face_fluxes(y)))

    return TransientFVSolution(
        method=METHOD_NAME,
        reference=METHOD_REFERENCE,
        success=success,
        message=str(result.message),
        mesh=mesh,
        times=times,
        remaining=remaining,
        released_inner=measure * states[n],
        released_outer=measure * states[n + 1],
        consumed=measure * states[n + 2],
        flux_inner=flux_inner,
        flux_outer=flux_outer,
        cells=cells,
        contents=contents,
        undissolved=measure * ((contents - cells) @ mesh.volumes),
        initial_load=float(initial_load),
        end=float(end),
        rtol=float(rtol),
        state_at=state_at,
        profile_at=profile_at,
        profile_at_time=profile_at_time,
        compartments={face.side: states[face.state].copy() for face in system.compartments},
        step_times=None if dense is None else np.asarray(dense.ts, dtype=float),
        diagnostics={
            "cells": int(n),
            "cells_per_layer": list(mesh.cells_per_layer),
            "steps": int(dense.ts.size - 1) if dense is not None else 0,
            "rhs_evaluations": int(result.nfev),
            "jacobian_evaluations": int(result.njev),
            "lu_decompositions": int(result.nlu),
            "rtol": float(rtol),
            "meshes_integrated_together": meshes_together,
            "zero_order_smoothing": system.epsilon if system.terms.has_zero_order else None,
            "final_state": states[:, -1].copy() if success else None,
            "end_state": None if end_state is None else end_state[low:high].copy(),
            **({"grading": mesh.grading.describe()} if mesh.grading is not None else {}),
        },
    )


def implicit_rtol(rtol: float) -> float:
    """The implicit steps' tolerance that stands for the BDF tolerance ``rtol``."""
    return min(IMPLICIT_RTOL * rtol / RTOL, IMPLICIT_RTOL_MAX)


def uses_implicit_steps(problem: Problem) -> bool:
    """True when the system has kinks (zero-order consumption, a solubility that can be
    reached): then it is integrated by :mod:`~worker.engine.transient.implicit_steps`."""
    return problem.can_saturate or any(layer.reaction.kind == "zero_order"
                                       for layer in problem.layers)


class StepHistory:
    """Interpolant of the reported state over the accepted steps ``ts``: the cells' dissolved
    concentrations (linear in time) then the other states (the cumulative amounts: monotone
    cubic, Fritsch & Carlson, SIAM J. Numer. Anal. 17 (1980) 238), all from the Richardson
    combination of the half-step and whole-step paths, the cells clipped to [0, solubility].
    ``contents`` holds the cells' solute per volume (dissolved plus undissolved) of the
    half-step path at each step, shape (N, len(ts))."""

    def __init__(self, ts: np.ndarray, values: np.ndarray, contents: np.ndarray, cells: int):
        self.ts = ts
        self.values = values
        self.contents = contents
        self.cells = cells
        # the cumulative amounts are smooth and monotone between steps: shape-preserving cubic
        self._amounts = PchipInterpolator(ts, values[cells:], axis=1) if ts.size > 1 else None

    def _interpolate(self, array: np.ndarray, t: ArrayLike) -> np.ndarray:
        t_array = np.asarray(t, dtype=float)
        flat = np.atleast_1d(t_array)
        out = np.empty((array.shape[0], flat.size))
        for row in range(array.shape[0]):
            out[row] = np.interp(flat, self.ts, array[row])
        return out[:, 0] if t_array.ndim == 0 else out

    def __call__(self, t: ArrayLike) -> np.ndarray:
        t_array = np.asarray(t, dtype=float)
        out = self._interpolate(self.values, t_array)
        if self._amounts is not None:
            out[self.cells:] = self._amounts(np.clip(t_array, self.ts[0], self.ts[-1]))
        return out


def _compartment_face_fluxes(system: Any, c: np.ndarray, y: np.ndarray) -> np.ndarray:
    """r^n-weighted outward face fluxes Q of the dissolved concentrations ``c``, each
    compartment face's level (in state ``y``) taken in."""
    q = system.operator.face_fluxes(c)
    for face in system.compartments:
        shift = face.coupling * (y[face.state] - face.start)
        if face.side == "inner":
            q[0] += shift
        else:
            q[-1] -= shift
    return q


def _dissolved_cells(terms: _Rhs | _StackedTerms, cells: np.ndarray
                     ) -> tuple[np.ndarray, np.ndarray]:
    """Dissolved concentration c = min(u, S) of cell states, u = max(y, floor) where the
    content switches off at zero, and dc/dy (generalised derivative at the kinks)."""
    if not terms.any_switched:
        if not terms.has_solubility:
            return cells, np.ones(cells.size)
        return np.minimum(cells, terms.solubility), (cells < terms.solubility).astype(float)
    u = np.maximum(cells, terms.floor)
    slope = (cells > terms.floor).astype(float)
    if not terms.has_solubility:
        return u, slope
    return np.minimum(u, terms.solubility), slope * (u < terms.solubility)


class _ConcentrationView:
    """A system whose cell states are already the dissolved concentrations (for packaging the
    reported, extrapolated values)."""

    def __init__(self, system: _Rhs):
        self.operator = system.operator
        self.terms = system.terms
        self.epsilon = system.epsilon
        self.n = system.n
        self.compartments = system.compartments

    def face_fluxes(self, y: np.ndarray) -> np.ndarray:
        return _compartment_face_fluxes(self, y[: self.n], y)

    def dissolved(self, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        return y[: self.n], np.ones(self.n)

    def cell_contents(self, y: np.ndarray) -> np.ndarray:
        return y[: self.n]


def _cell_parts(system: _Rhs, cells: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Contents and dissolved concentrations of cell states (rows: cells, columns: times)."""
    contents = cells.copy()
    if system.any_switched:
        contents[system.switched] = np.maximum(cells[system.switched], 0.0)
    return contents, np.minimum(contents, system.solubility[:, None])


def _reported(system: _Rhs, fine: np.ndarray, coarse: np.ndarray, ts: np.ndarray
              ) -> tuple[StepHistory, np.ndarray]:
    """The reported path of one mesh: cells' dissolved concentrations and contents from the
    half-step path (it keeps the implicit Euler's maximum principle), the other states the
    Richardson combination 2 fine - coarse (the cells' and compartment levels' combination
    clipped to their range: at least zero, at most the solubility); and the combined cell
    contents (for the amount held, so the mass balance holds with the combined amounts)."""
    n = system.n
    u_fine, c_fine = _cell_parts(system, fine[:n])
    u_coarse, c_coarse = _cell_parts(system, coarse[:n])
    values = 2.0 * fine - coarse
    values[:n] = np.clip(2.0 * c_fine - c_coarse, 0.0, system.solubility[:, None])
    _clip_levels(system, values)
    return StepHistory(ts, values, u_fine, n), 2.0 * u_fine - u_coarse


def _clip_levels(system: _Rhs, values: np.ndarray) -> None:
    """Each compartment level of the combined path ``values`` (rows: states) raised to zero
    where it fell below: a fluid level, like a cell, is never negative on the half-step path
    (implicit Euler keeps the maximum principle), but the combination 2 fine - coarse
    overshoots below zero where the level decays faster than a step resolves, as after the
    solute has run out (the face flux read from it then points the wrong way). The cumulative
    amounts are states of their own and keep the combination."""
    for face in system.compartments:
        values[face.state] = np.maximum(values[face.state], 0.0)


def _solve_implicit(problem, built, systems, stack, times, end, start, rtol, y0, atol, loads):
    """Integrate the stacked system with implicit steps (shared by every mesh) and package each
    mesh's Richardson-extrapolated solution at the requested times."""
    found = implicit_steps.integrate(stack, y0, start, end, times, atol, rtol)
    measure = problem.measure_factor
    ts = found.ts
    at = np.clip(np.searchsorted(ts, times - 1e-9 * max(abs(end), 1.0)), 0, ts.size - 1)
    success = found.success and bool(np.all(np.abs(ts[at] - times) <= 1e-9 * max(abs(end), 1.0)))
    result = SimpleNamespace(message=found.message, nfev=found.counts.get("rhs_evaluations", 0),
                             njev=found.counts.get("jacobian_evaluations", 0),
                             nlu=found.counts.get("lu_decompositions", 0))
    solutions = []
    for k, (mesh, system) in enumerate(zip(built, systems, strict=True)):
        low, high = int(stack.offsets[k]), int(stack.offsets[k + 1])
        fine, coarse = found.fine[low:high], found.coarse[low:high]
        history, extrapolated_contents = _reported(system, fine, coarse, ts)
        states = history.values[:, at] if success else np.full((high - low, times.size), np.nan)
        solution = _package(problem, mesh, _ConcentrationView(system), times, states, success,
                            result, history, low=0, high=high - low, end=end, rtol=rtol,
                            initial_load=measure * loads[k], end_state=None,
                            meshes_together=len(built))
        if success:
            solution.contents = history.contents[:, at].T
            solution.remaining = measure * (extrapolated_contents[:, at].T @ mesh.volumes)
            solution.undissolved = measure * (np.maximum(
                extrapolated_contents[:, at].T - solution.cells, 0.0) @ mesh.volumes)
        solution.history = history
        solution.diagnostics.update({
            "integrator": "implicit Euler, step doubling, Richardson extrapolation",
            "end_state": fine[:, -1].copy() if found.success else None,
            "final_state": fine[:, at[-1]].copy() if success else None,
            "step_sequence": ts.copy(),
            "initial_state": y0[low:high].copy(),
            "atol": atol[low:high].copy(),
            "rejected_steps": found.counts.get("rejected_steps", 0),
            "newton_iterations": found.counts.get("newton_iterations", 0),
            "zero_order_smoothing": None,
        })
        solutions.append(solution)
    return solutions


def time_refinement(problem: Problem, solution: TransientFVSolution, parts: int
                    ) -> dict[str, np.ndarray] | None:
    """The amounts and face flux densities of an implicit-step solution integrated again on its
    own accepted steps cut into ``parts`` (same mesh, same Richardson combination), at its
    requested times; None when the solution was not integrated by implicit steps or the replay
    failed."""
    diagnostics = solution.diagnostics
    if solution.history is None or diagnostics.get("step_sequence") is None:
        return None
    ts = diagnostics["step_sequence"]
    system = _Rhs(problem, solution.mesh, concentration_scale(problem), exact=True)
    fine = _replayed(problem, system, solution, 2 * parts)
    coarse = _replayed(problem, system, solution, parts) if fine is not None else None
    if fine is None or coarse is None:
        return None
    history, contents = _reported(system, fine, coarse, ts)
    at = np.clip(np.searchsorted(ts, solution.times - 1e-9 * max(abs(solution.end), 1.0)), 0,
                 ts.size - 1)
    n = solution.mesh.n_cells
    measure = problem.measure_factor
    view = _ConcentrationView(system)
    faces = np.array([face_flux_densities(solution.mesh, view.face_fluxes(history.values[:, k]))
                      [[0, -1]] for k in at])
    return {
        "remaining": measure * (contents[:, at].T @ solution.mesh.volumes),
        "released_inner": measure * history.values[n, at],
        "released_outer": measure * history.values[n + 1, at],
        "consumed": measure * history.values[n + 2, at],
        "flux_inner": faces[:, 0],
        "flux_outer": faces[:, 1],
    }


def _replayed(problem: Problem, system: _Rhs, solution: TransientFVSolution, parts: int
              ) -> np.ndarray | None:
    """The implicit Euler path of ``solution`` on its accepted steps cut into ``parts`` (None
    when a step did not converge), kept on the solution per case: the paths with the steps cut
    into 2, 4 and 8 (the steps halved and quartered) are integrated together on first use."""
    cache = getattr(solution, "_replayed", None)
    if cache is None:
        cache = {}
        setattr(solution, "_replayed", cache)  # noqa: B010 - a cache the type does not declare
    key = (id(problem), parts)  # the case is held with its path, so its id stays its own
    if key not in cache:
        diagnostics = solution.diagnostics
        wanted = tuple(sorted({2, 4, 8, parts}, reverse=True))

        def copies(k: int) -> _Stack:
            return _Stack([system] * k)

        found = implicit_steps.paths(system, copies, diagnostics["initial_state"],
                                     diagnostics["step_sequence"], wanted, diagnostics["atol"],
                                     implicit_rtol(solution.rtol))
        for count, (states, ok) in found.items():
            cache[(id(problem), count)] = (problem, states if ok else None)
    return cache[key][1]
