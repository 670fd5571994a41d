"""Galerkin finite elements in space, extrapolated implicit Euler in time: a second transient
discretisation.

This solver shares no discretisation with the method of lines (``method_of_lines``: cell-centred
finite volumes, BDF). It exists so that transient cases without an exact series (zero-order
consumption with exhaustion, Michaelis-Menten, several layers) are checked by a second method of
another family, with its own three-mesh convergence study.

Weak form
---------
The unknown is the continuous potential ``u = C/K`` (K the layer's partition coefficient), so the
equilibrium jump ``C_a/K_a = C_b/K_b`` at an interface is built into the trial space: ``u`` is
continuous and piecewise linear (P1) on elements that are uniform within each layer (graded
towards an exchanging face for a very early first time, ``galerkin_grading``), with a node
at the inner face, at every interface and at the outer face. Multiplying
``K du/dt = (1/r^n) d/dr(r^n D K du/dr) - R(K u)`` by a test function ``v`` and ``r^n`` and
integrating by parts over [a, b] gives

    int K u_t v r^n dr + int D K u' v' r^n dr + int R(K u) v r^n dr
        = a^n N_a v(a) + b^n N_b v(b),

with ``N_a``, ``N_b`` the flux densities *into* the body through the inner and outer face
(V. Thomee, *Galerkin Finite Element Methods for Parabolic Problems*, 2nd ed., Springer, 2006,
ch. 1 and 15; K. Eriksson, D. Estep, P. Hansbo, C. Johnson, *Computational Differential
Equations*, Cambridge, 1996, ch. 15). Every element integral is taken with the three-point
Gauss-Legendre rule, exact for the r^n-weighted mass and stiffness (degree <= 5) and applied to
the first-order and Michaelis-Menten reaction at the Gauss points (the consistent reaction load).

Zero-order consumption jumps from Q to 0 where C reaches 0, where no Gauss rule gains accuracy;
its load is taken by nodal quadrature, ``Q int phi_i r^n`` while the node holds solute (the
product approximation of the lumped mass method, Thomee 2006, ch. 15 and 14), and a node that
has run out consumes what reaches it and no more: a complementarity condition solved exactly in
each implicit substep (``galerkin_steps``), so the scheme keeps the maximum principle. A node
held by a concentration face cannot run out, so on the elements next to such a face the
zero-order load is taken at the Gauss points instead, with the rate switched off smoothly over
``ZERO_ORDER_SWITCH`` of the concentration scale (the nodal rule there would drop the
consumption of the face's half element, an O(h) error in the amounts).

Solubility
----------
A layer with a solubility S holds dissolved solute up to S and undissolved solute beyond it,
which does not diffuse. The lumped scheme carries per node the dissolved potential u and the
undissolved amount s >= 0 (r^n-weighted): the node's content is ``m_i u_i + s_i``, and
``u_i <= S/K`` with ``s_i (S/K - u_i) = 0`` (an enthalpy-type formulation on the total
content, as for the Stefan problem: C.M. Elliott, J.R. Ockendon, *Weak and Variational Methods
for Moving Boundary Problems*, Pitman, 1982, ch. 2). An interface node's undissolved solute
belongs to the layer whose limit binds there. The edge of a layer's undissolved region is read
from the partly dissolved node at each end of it: its fraction ``s_i / ((C0 - S) int phi_i
r^n)`` of its dual cell (element midpoints), taken in the r^n measure. That node holds S/K at
its own position while the front lies anywhere in its cell, so a face rate steps each time
the front leaves a node; ``flux_front_band`` of the solution bounds the step
(``front_staircase``).

Mass matrix: lumped (row sums of the consistent matrix, ``m_i = int K phi_i r^n``). Lumping keeps
the P1 scheme second order in the L2 norm and in the amounts (Thomee 2006, ch. 15, Theorem
15.1), and with the M-matrix stiffness of P1 in one dimension it keeps the discrete maximum
principle, so that a released or consumed solute does not undershoot below zero through mass
coupling (Thomee 2006, ch. 15 shows the consistent mass matrix does not), which the exhaustion
of zero-order consumption and the Michaelis-Menten rate need. It also gives an ODE system
``du/dt = f(u)`` without a mass matrix, which the substeps solve as a tridiagonal system.

Faces
-----
* ``concentration``: ``u`` is held at ``K_face C_fluid / K`` (strong Dirichlet); the face flux is
  the *consistent* flux, the residual of the weak form at that node,
  ``r^n N = (A u)_b + F_b(u)`` (the node's time derivative is zero), so the released amount is
  exactly what the discrete balance lost (T.J.R. Hughes, L.P. Franca, I. Harari, M. Mallet,
  F. Shakib, T.E. Spelce, "Consistent flux boundary conditions", in *Finite Element Analysis
  for Fluid Dynamics*, ASME FED 43, 1986; P.M. Gresho, R.L. Sani, *Incompressible Flow and the
  Finite Element Method*, Wiley, 1998, section 3.13).
* ``mass_transfer``: ``N = h (C_bulk - K u / K_face)`` enters the weak form (Robin).
* ``flux``: ``N`` = the value; ``symmetry``: ``N = 0``. A solid centre has zero area and carries
  nothing, whatever its face says.
* ``compartment``: the well-stirred fluid is at equilibrium with the face node (the node holds
  the surface concentration exactly, no film: the compartment's definition), C_f = u_b K / K_face.
  The fluid is then extra lumped capacity of that node, ``W K / K_face`` with W the
  compartment's r^n-weighted volume per measure (derived here, ``_fluid_per_weight``), and its
  clearance a first-order sink ``W k_c K / K_face u_b`` at that node that leaves the system;
  the tridiagonal structure is kept. Released through the face = what the fluid holds now
  less what it held at t = 0, plus what the clearance removed (the cumulative flux into the
  fluid), so the balance of the body closes as for the other faces. At 0+ the face node and
  the fluid share their content (the discrete form of the instant the fluid touches the body).

Initial state
-------------
The piecewise-constant initial concentration is projected with the lumped mass,
``u_i = (int C_0 phi_i r^n) / m_i``, which conserves the load ``int C_0 r^n`` exactly; the load
itself is this module's own Gauss quadrature of the initial state. A concentration face whose
value differs from the initial state takes its value at 0+: the amount this removes from (or
adds to) its node, ``int C_0 phi_b r^n - m_b u_b``, is booked as released through that face at
0+, the discrete form of the flux impulse at the instant the face is applied. At t = 0 itself
the pre-impulse amounts are reported (nothing released).

Time
----
``galerkin_steps``: implicit Euler with 1, 2, 3 and 4 substeps per step, extrapolated (Hairer &
Wanner 1996, section IV.9), the smooth balance linearised once per step with its exact
tridiagonal Jacobian (LAPACK ``dgtsv``), the switching terms exact; error control on the nodal
values and the cumulative amounts, steps landing on every requested time. Several meshes are
stepped together (shared steps, one error norm).

Amounts are per measure: per m^2 (slab), per m (cylinder), total (sphere).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import ArrayLike
from scipy.interpolate import CubicSpline

from worker.engine.limits import TRANSIENT_LIMITS, check_limit, regime_defaults
from worker.engine.model import Boundary, Problem
from worker.engine.transient.front_staircase import staircase_inflow_band
from worker.engine.transient.galerkin_grading import GradedElements, graded_elements
from worker.engine.transient.galerkin_steps import integrate
from worker.engine.transient.method_of_lines import concentration_scale
from worker.engine.transient.refinement import AmountStudy, amount_study
from worker.engine.transient.solution import TransientSolution

#: Relative tolerance of the time integration (absolute tolerances scale with it).
RTOL = 1e-6
#: The limit that sets the route's own tolerance (``route_rtol``): RTOL stands for its
#: transient default.
RTOL_LIMIT = "cross_check.release_fraction"
#: Absolute tolerance of the nodal concentrations, as a fraction of the concentration scale.
ATOL_CONCENTRATION = 1e-8
#: Absolute tolerance of the cumulative amounts, as a fraction of the amount scale.
ATOL_AMOUNT = 1e-11
#: Width of the Gauss-point zero-order switch next to a held face, as a fraction of the
#: concentration scale.
ZERO_ORDER_SWITCH = 1e-6

#: Neighbours on either side of a switching node that share its loose step tolerance (the
#: kink's error decays over a few nodes; see ``galerkin_steps.SWITCH_TOLERANCE``).
SWITCH_NEIGHBOURS = 4
#: A layer's undissolved solute counts as gone below this fraction of its initial amount.
DEPLETED = 1e-10
#: A step is not shortened toward a depletion closer than this fraction of the time.
MIN_DEPLETION_STEP = 1e-6
#: A step in which a layer's undissolved solute would run out ends this factor past that
#: instant (``_System.event_spans``).
DEPLETION_LANDING = 1.02
#: A step in which a node's undissolved solute would run out at its present dissolution rate
#: ends at this fraction of the span to that instant (``_System.event_spans``), unless the span
#: is below ``SWITCH_SLIVER`` of the step: the node then switches at the very start of a step
#: instead of anywhere in it (measured on the dispersed-drug bench case: fewer implicit Euler
#: substeps than landing just past the instant or not landing at all).
SWITCH_LANDING = 0.99
SWITCH_SLIVER = 0.1

#: Mesh rule of the coarse mesh (``coarse_elements``): at least ``MIN_ELEMENTS`` per layer;
#: ``RESISTANCE_ELEMENTS`` shared in proportion to each layer's share of the diffusion
#: resistance; a reacting layer's element at most ``REACTION_RESOLUTION`` reaction lengths long;
#: an element at most ``EARLY_RESOLUTION`` diffusion lengths sqrt(D t) at the first positive
#: requested time, up to ``MAX_EARLY_ELEMENTS`` per layer. The medium and fine meshes have
#: ``REFINEMENT_RATIO`` and its square as many elements per layer.
MIN_ELEMENTS = 8
RESISTANCE_ELEMENTS = 48
REACTION_RESOLUTION = 0.4
EARLY_RESOLUTION = 0.5
MAX_EARLY_ELEMENTS = 200
MAX_ELEMENTS = 2000
REFINEMENT_RATIO = 2

#: Three-point Gauss-Legendre rule on [-1, 1] (exact to degree 5).
_GAUSS_POINTS = np.array([-math.sqrt(0.6), 0.0, math.sqrt(0.6)])
_GAUSS_WEIGHTS = np.array([5.0, 8.0, 5.0]) / 9.0
#: P1 shape functions of the element's inner and outer node at the Gauss points.
_PHI_INNER = 0.5 * (1.0 - _GAUSS_POINTS)
_PHI_OUTER = 0.5 * (1.0 + _GAUSS_POINTS)

METHOD_NAME = ("Galerkin finite elements (continuous P1 in C/K, lumped mass, consistent "
               "boundary flux), extrapolated implicit Euler with error control")
METHOD_REFERENCE = (
    "V. Thomee, Galerkin Finite Element Methods for Parabolic Problems, 2nd ed., 2006, ch. 1 "
    "and 15 (lumped mass); T.J.R. Hughes et al., consistent flux boundary conditions, ASME FED "
    "43 (1986); E. Hairer, G. Wanner, Solving Ordinary Differential Equations II, 1996, "
    "section IV.9 (extrapolated implicit Euler); M. Hintermueller, K. Ito, K. Kunisch, SIAM J. "
    "Optim. 13 (2002) 865 (active sets)"
)

__all__ = [
    "METHOD_NAME",
    "METHOD_REFERENCE",
    "GalerkinMesh",
    "GalerkinStudy",
    "TransientGalerkinSolution",
    "build_galerkin_mesh",
    "coarse_elements",
    "galerkin_study",
    "route_rtol",
    "solve_transient_galerkin",
    "solve_transient_galerkin_meshes",
]


@dataclass(frozen=True)
class GalerkinMesh:
    """P1 elements of the layered body: uniform within each layer (or in geometric progression
    from a face, ``galerkin_grading``), a node on every edge.

    ``nodes`` (m), ``element_layer`` (layer index of each element), ``node_layer`` (the layer of
    each node; an interface node belongs to the inner layer), ``elements_per_layer``,
    ``grading`` (None for uniform elements in every layer).
    """

    nodes: np.ndarray
    element_layer: np.ndarray
    node_layer: np.ndarray
    elements_per_layer: tuple[int, ...]
    grading: GradedElements | None = None

    @property
    def n_nodes(self) -> int:
        return int(self.nodes.size)

    @property
    def n_elements(self) -> int:
        return int(self.nodes.size - 1)


def build_galerkin_mesh(problem: Problem, elements_per_layer) -> GalerkinMesh:
    """The mesh with ``elements_per_layer`` (an int for every layer, one per layer, or a
    ``galerkin_grading.GradedElements``)."""
    count = len(problem.layers)
    grading = elements_per_layer if isinstance(elements_per_layer, GradedElements) else None
    if grading is not None:
        elements_per_layer = grading.elements
    if isinstance(elements_per_layer, int | np.integer):
        counts = (int(elements_per_layer),) * count
    else:
        counts = tuple(int(n) for n in elements_per_layer)
    if len(counts) != count or min(counts) < 1:
        raise ValueError(f"elements_per_layer: expected {count} positive integers (one per "
                         f"layer), got {elements_per_layer!r}")
    edges = problem.edges
    pieces = [np.array([edges[0]])]
    for j, n in enumerate(counts):
        inner, outer = float(edges[j]), float(edges[j + 1])
        if grading is not None and grading.spreads[j]:
            interior = inner + (outer - inner) * grading.layer_nodes(j)[1:-1]
        else:
            interior = inner + (outer - inner) * np.arange(1, n) / n
        pieces.append(np.concatenate((interior, [outer])))
    nodes = np.concatenate(pieces)
    element_layer = np.repeat(np.arange(count), counts)
    node_layer = np.concatenate(([0], element_layer))
    return GalerkinMesh(nodes, element_layer, node_layer, counts,
                        grading if grading is not None and any(grading.spreads) else None)


@dataclass(frozen=True)
class _Face:
    """One face in the form the weak form takes it: kind ``dirichlet`` (u held at ``value``),
    ``robin`` (r^n N = weight h (bulk - K u / K_face)), ``flux`` (r^n N = weight value),
    ``compartment`` (extra lumped ``capacity`` at the node, sink ``clearance capacity u``) or
    ``none`` (no area, or sealed)."""

    kind: str
    weight: float = 0.0
    value: float = 0.0
    coefficient: float = 0.0
    bulk: float = 0.0
    ratio: float = 1.0  # K_layer / K_face
    capacity: float = 0.0  # a compartment's W K_layer / K_face (r^n-weighted)
    clearance: float = 0.0  # a compartment's clearance, 1/s
    initial: float = 0.0  # a compartment's starting concentration, amount/m^3


def _fluid_per_weight(problem: Problem, side: str, radius: float, weight: float) -> float:
    """A compartment's fluid in this route's r^n-weighted units, derived here from the face's
    physical area rather than taken from the other routes' ``boundaries.compartment.capacity``
    (an error there would reach them all alike): V r^n / A_face, with A_face the slab's
    ``area``, 2 pi r L of a cylinder, 4 pi r^2 of a sphere; so that ``W dC/dt`` balances the
    r^n-weighted flux r^n J through the face (the fluid's amount V C changes by A_face J)."""
    boundary = problem.inner_boundary if side == "inner" else problem.outer_boundary
    if not (math.isfinite(boundary.volume) and boundary.volume > 0.0):
        raise ValueError(f"{side}_boundary.volume: expected a positive volume in m^3, got "
                         f"{boundary.volume!r}")
    extent = {"slab": problem.area, "cylinder": problem.length, "sphere": 1.0}[problem.geometry]
    if extent is None or not extent > 0.0:
        field = "area" if problem.geometry == "slab" else "length"
        raise ValueError(f"{field}: a compartment face needs the body's {field}")
    face_area = {"slab": float(extent), "cylinder": 2.0 * math.pi * radius * float(extent),
                 "sphere": 4.0 * math.pi * radius * radius}[problem.geometry]
    return float(boundary.volume) * weight / face_area


def _face(problem: Problem, side: str) -> _Face:
    boundary: Boundary = problem.inner_boundary if side == "inner" else problem.outer_boundary
    edge = problem.inner if side == "inner" else problem.outer
    weight = float(edge) ** problem.exponent
    if side == "inner" and problem.solid_centre:
        return _Face("none")
    try:
        condition = boundary.condition
    except ValueError as exc:
        raise ValueError(f"{side}_boundary.kind: {exc}") from None
    layer = problem.layers[0] if side == "inner" else problem.layers[-1]
    k_face = problem.face_partition(side)
    if not (k_face > 0.0):
        raise ValueError(f"{side}_boundary.partition: expected a positive partition "
                         f"coefficient, got {k_face!r}")
    fluid = condition.fluid_concentration(boundary)
    if getattr(condition, "finite_volume", False):
        volume = _fluid_per_weight(problem, side, float(edge), weight)
        return _Face("compartment", weight, ratio=layer.partition / k_face,
                     capacity=volume * layer.partition / k_face,
                     clearance=float(boundary.clearance), initial=float(boundary.initial))
    if condition.holds_concentration and fluid is not None:
        return _Face("dirichlet", weight, value=k_face * fluid / layer.partition)
    film = condition.film_coefficient(boundary)
    if film is not None:
        if film < 0.0 or not math.isfinite(film):
            raise ValueError(f"{side}_boundary.coefficient: expected a non-negative "
                             f"mass-transfer coefficient (m/s), got {film!r}")
        return _Face("robin", weight, coefficient=film, bulk=float(fluid or 0.0),
                     ratio=layer.partition / k_face)
    imposed = condition.imposed_flux(boundary)
    if imposed is not None:
        return _Face("flux", weight, value=imposed)
    if condition.is_sealed(boundary):
        return _Face("none")
    raise ValueError(f"{side}_boundary.kind: {boundary.kind!r} has no form in the Galerkin "
                     "solver (expected concentration, mass_transfer, flux, symmetry or "
                     "compartment)")


class _System:
    """Lumped-mass P1 systems of several meshes as one block-diagonal ODE system (shared
    steps, one error norm over all meshes; each mesh's discrete solution is otherwise its own).

    State of the stepper: the nodal u of every mesh, then the undissolved s of every node, then per
    mesh (out_inner, out_outer, consumed), r^n-weighted without the measure factor.
    """

    def __init__(self, problem: Problem, meshes: list[GalerkinMesh], c_scale: float):
        exponent = problem.exponent
        self.problem = problem
        self.c_scale = c_scale
        self.meshes = meshes
        self._replicas: dict[int, _System] = {}
        self.count = len(meshes)
        sizes = [mesh.n_nodes for mesh in meshes]
        self.node_offsets = np.concatenate(([0], np.cumsum(sizes))).astype(np.intp)
        self.size = int(self.node_offsets[-1])
        size = self.size
        nodes = np.concatenate([mesh.nodes for mesh in meshes])
        self.left = np.concatenate([offset + np.arange(mesh.n_elements) for offset, mesh
                                    in zip(self.node_offsets[:-1], meshes, strict=True)])
        self.right = self.left + 1
        index = np.concatenate([mesh.element_layer for mesh in meshes])
        self.node_mesh = np.repeat(np.arange(self.count), sizes)
        element_mesh = self.node_mesh[self.left]
        r1, r2 = nodes[self.left], nodes[self.right]
        self.element_r1, self.element_r2 = r1, r2
        length = r2 - r1
        points = 0.5 * (r1 + r2)[:, None] + 0.5 * length[:, None] * _GAUSS_POINTS
        #: r^n-weighted quadrature weights at the Gauss points, shape (elements, 3)
        weights = 0.5 * length[:, None] * _GAUSS_WEIGHTS * points**exponent
        layers = problem.layers
        self.partition = np.array([ly.partition for ly in layers])[index]
        diffusivity = np.array([ly.diffusivity for ly in layers])[index]
        weighted_length = weights.sum(axis=1)  # int r^n dr over each element
        self.stiffness = diffusivity * self.partition * weighted_length / length**2
        self.inner_load = (weights * _PHI_INNER).sum(axis=1)  # int phi_inner r^n
        self.outer_load = (weights * _PHI_OUTER).sum(axis=1)
        self.lumped = self._gather(self.partition * self.inner_load,
                                   self.partition * self.outer_load)
        initial = np.array([ly.initial for ly in layers])[index]
        self.initial_nodal_load = self._gather(initial * self.inner_load,
                                               initial * self.outer_load)
        self.initial_loads = np.bincount(element_mesh, initial * weighted_length,
                                         minlength=self.count)
        constants = np.array([ly.reaction.law.fv_constants(ly.reaction, j)
                              for j, ly in enumerate(layers)], dtype=float).reshape(-1, 4)
        self.inner = _face(problem, "inner")
        self.outer = _face(problem, "outer")
        self.inner_nodes = self.node_offsets[:-1].copy()
        self.outer_nodes = self.node_offsets[1:] - 1
        #: the body's own lumped mass; ``lumped`` (the stepping mass) adds a compartment's
        #: capacity at its face node
        self.body_lumped = self.lumped.copy()
        self.initial_content = self.initial_nodal_load.copy()
        for face, nodes_of_face in self._compartments():
            self.lumped[nodes_of_face] += face.capacity
            self.initial_content[nodes_of_face] += face.capacity / face.ratio * face.initial
        held = np.zeros(size, dtype=bool)
        for face, nodes_of_face in ((self.inner, self.inner_nodes),
                                    (self.outer, self.outer_nodes)):
            if face.kind == "dirichlet":
                held[nodes_of_face] = True
        self.free = ~held
        # first order, Michaelis-Menten, and zero order next to a held face: Gauss quadrature
        zero_rate = constants[index, 3]
        by_node = (zero_rate > 0.0) & ~held[self.left] & ~held[self.right]
        gauss = (constants[index, 0] > 0.0) | (constants[index, 1] > 0.0) | (
            (zero_rate > 0.0) & ~by_node)
        self.smooth = np.flatnonzero(gauss)
        self.smooth_weights = weights[gauss]
        self.first_order = constants[index, 0][gauss]
        self.vmax = constants[index, 1][gauss]
        self.km = np.where(self.vmax > 0.0, constants[index, 2][gauss], 1.0)
        self.smooth_zero_rate = np.where(by_node[gauss], 0.0, zero_rate[gauss])
        self.has_saturable = bool(np.any(self.vmax > 0.0))
        self.has_smooth_zero = bool(np.any(self.smooth_zero_rate > 0.0))
        # zero order elsewhere: nodal quadrature (see ``_zero_order``)
        self.zero = np.flatnonzero(by_node)
        self.zero_rate = zero_rate[by_node]
        self.has_zero_order = bool(np.any(zero_rate > 0.0))
        self.epsilon = ZERO_ORDER_SWITCH * c_scale  # the Gauss-point switch next to a held face
        self.reacts = bool(self.smooth.size or self.zero.size)
        #: nodal zero-order rate q_i = Q int phi_i r^n (a switch solved by complementarity)
        self.nodal_zero = self._gather(
            np.bincount(self.zero, self.zero_rate * self.inner_load[self.zero],
                        minlength=self.left.size),
            np.bincount(self.zero, self.zero_rate * self.outer_load[self.zero],
                        minlength=self.left.size))
        self.nonlinear = self.has_saturable or self.has_smooth_zero
        self.newton_tolerance = 1e-3 * ATOL_CONCENTRATION * c_scale / float(
            np.min(self.partition))
        self.held_value = np.zeros(size)
        for face, nodes_of_face in ((self.inner, self.inner_nodes),
                                    (self.outer, self.outer_nodes)):
            if face.kind == "dirichlet":
                self.held_value[nodes_of_face] = face.value
        self._saturation(problem, index, element_mesh)
        self.u_scale = c_scale / float(np.min(self.partition))
        self.stiffness_diagonal = self._gather(self.stiffness, self.stiffness)
        #: the stiffness of the element between node k and k + 1, zero between two meshes
        self.chain_stiffness = np.zeros(max(size - 1, 0))
        self.chain_stiffness[self.left] = self.stiffness
        #: undissolved scale of each node for the step tolerance (set by the driver)
        self.solid_scale = np.ones(size)
        self.zero_nodes = (self.nodal_zero > 0.0) & self.free
        self.limited = np.isfinite(self.saturation_potential)
        self.any_zero = bool(np.any(self.zero_nodes))
        #: the held nodes, and no node (read-only masks of the substeps)
        self.held = ~self.free
        self.nothing = np.zeros(size, dtype=bool)
        self.any_limited = bool(np.any(self.limited))
        self.first_elements = self.inner_nodes - np.arange(self.count)
        self.last_elements = self.outer_nodes - 1 - np.arange(self.count)
        free = self.free
        self.inverse_mass = np.where(free, 1.0 / self.lumped, 0.0)
        #: the value a fixed node is first set to: its held value, or its saturation potential
        #: (read by a substep's first sweep)
        self.fixed_target = np.where(free, self.saturation_potential, self.held_value)

    def replica(self, copies: int) -> _System:
        """The system of ``copies`` copies of these meshes one after the other (the substeps
        of several implicit Euler sequences solved together; cached)."""
        if copies == 1:
            return self
        if copies not in self._replicas:
            self._replicas[copies] = _System(self.problem, self.meshes * copies, self.c_scale)
        return self._replicas[copies]

    def _compartments(self) -> list[tuple[_Face, np.ndarray]]:
        """The compartment faces with their node in every mesh."""
        return [(face, nodes) for face, nodes in ((self.inner, self.inner_nodes),
                                                  (self.outer, self.outer_nodes))
                if face.kind == "compartment"]

    def _compartment_out(self, u: np.ndarray, amounts: np.ndarray) -> None:
        """Book as released through each compartment face what its fluid holds at state u less
        what it held at t = 0 (the exchange at 0+ between the face node and the fluid)."""
        for k, (face, held) in enumerate(((self.inner, self.inner_nodes),
                                          (self.outer, self.outer_nodes))):
            if face.kind == "compartment":
                amounts[:, k] = face.capacity * u[held] - face.capacity / face.ratio * face.initial

    def _gather(self, at_left: np.ndarray, at_right: np.ndarray) -> np.ndarray:
        """Element contributions to their inner and outer node, summed per node."""
        return (np.bincount(self.left, at_left, minlength=self.size)
                + np.bincount(self.right, at_right, minlength=self.size))

    # ---------------------------------------------------------------------------------------
    def initial_state(self) -> np.ndarray:
        """State at 0+: lumped projection of the initial state, concentration faces at their
        value and the amount that moves at that instant booked as released there."""
        u = self.initial_content / self.lumped
        amounts = np.zeros((self.count, 3))
        for k, (face, held) in enumerate(((self.inner, self.inner_nodes),
                                          (self.outer, self.outer_nodes))):
            if face.kind == "dirichlet":
                amounts[:, k] = self.initial_nodal_load[held] - self.lumped[held] * face.value
                u[held] = face.value
        self._compartment_out(u, amounts)
        return np.concatenate((u, amounts.ravel()))

    def start_state(self) -> np.ndarray:
        """The stepping state at 0+: (u, s, amounts), the content of each node split into
        dissolved (at most its saturation potential) and undissolved; otherwise as
        :meth:`initial_state`."""
        ode = self.initial_state()
        u = ode[: self.size]
        solid = np.zeros(self.size)
        amounts = ode[self.size:].reshape(self.count, 3).copy()
        if self.can_saturate:
            content = self.initial_content
            limited = np.isfinite(self.saturation_potential)
            dissolved = np.minimum(content, self.lumped * np.where(
                limited, self.saturation_potential, np.inf))
            solid = np.where(limited, content - dissolved, 0.0)
            u = np.where(limited, dissolved / self.lumped, u)
            self._compartment_out(u, amounts)
        self.initial_undissolved = self.layer_undissolved(solid)
        return np.concatenate((u, solid, amounts.ravel()))

    def stiffness_apply(self, u: np.ndarray) -> np.ndarray:
        """A u with A the r^n-weighted stiffness matrix int D K phi_i' phi_j' r^n."""
        # each element's flow taken from its inner node and given to its outer one: what
        # ``_gather(-flow, flow)`` sums (each node gets 0 + its part, then the two parts are
        # added), along the chain of nodes (zero flow between two meshes)
        flow = self.chain_stiffness * (u[1:] - u[:-1])
        out = np.empty(u.size)
        out[:-1] = 0.0 - flow
        out[-1] = 0.0
        out[1:] += 0.0 + flow
        return out

    def _saturation(self, problem: Problem, index: np.ndarray, element_mesh: np.ndarray) -> None:
        """Saturation potential U_i = S/K of each node (the smaller of its elements' layers;
        inf where no layer limits it), the layer that holds a node's undissolved solute (an
        interface node: the layer whose limit binds) and each node's undissolved capacity
        ``(C0 - S) int phi_i r^n`` over that layer's elements (the reference of a front)."""
        size = self.size
        layers = problem.layers
        count = len(layers)
        limits = np.array([np.inf if ly.solubility is None else ly.solubility / ly.partition
                           for ly in layers])
        element_limit = limits[index]
        self.saturation_potential = np.full(size, np.inf)
        np.minimum.at(self.saturation_potential, self.left, element_limit)
        np.minimum.at(self.saturation_potential, self.right, element_limit)
        self.saturation_potential[~self.free] = np.inf
        self.can_saturate = bool(np.any(np.isfinite(self.saturation_potential)))
        # owner: the inner layer, unless the outer one's limit binds
        right_layer = np.full(size, -1)
        right_layer[self.left] = index
        left_layer = np.full(size, -1)
        left_layer[self.right] = index
        owner = np.where(left_layer >= 0, left_layer, right_layer)
        both = (left_layer >= 0) & (right_layer >= 0) & (left_layer != right_layer)
        outer_binds = both & (limits[np.maximum(right_layer, 0)]
                              < limits[np.maximum(left_layer, 0)])
        owner = np.where(outer_binds, right_layer, owner)
        self.node_owner = owner
        excess = np.array([max(ly.initial - ly.solubility, 0.0) if ly.solubility is not None
                           else 0.0 for ly in layers])
        mine_left = index == owner[self.left]
        mine_right = index == owner[self.right]
        self.undissolved_capacity = (
            np.bincount(self.left, np.where(mine_left, excess[index] * self.inner_load, 0.0),
                        minlength=size)
            + np.bincount(self.right, np.where(mine_right, excess[index] * self.outer_load,
                                               0.0), minlength=size))
        #: per node, the span of its dual cell (element midpoints) inside its owner layer
        nodes = np.zeros(size)
        nodes[self.left] = self.element_r1
        nodes[self.right] = self.element_r2
        self.node_r = nodes
        low = nodes.copy()
        high = nodes.copy()
        mid = 0.5 * (self.element_r1 + self.element_r2)
        low[self.right] = np.where(mine_right, mid, nodes[self.right])
        high[self.left] = np.where(mine_left, mid, nodes[self.left])
        self.cell_low, self.cell_high = low, high
        self.layer_count = count
        self.loaded_layers = [j for j, ly in enumerate(layers) if ly.is_loaded_above_solubility]

    def balance(self, u: np.ndarray, tau: float, slopes: bool = True):
        """``(A u + F(u) - B(u), d/du diagonal, d/du coupling of node k with k + 1)``: the
        nodal balance without the time derivative and the switching terms (F the Gauss-point
        reaction load and a compartment's clearance, B the Robin or imposed-flux inflow at a
        face that holds no value); the
        coupling has size - 1 entries (zero between meshes). ``tau`` is unused (kept for the
        callers' symmetry)."""
        size = self.size
        flow = self.stiffness_apply(u)
        diag = self.stiffness_diagonal.copy() if slopes else np.zeros(0)
        off_e = -self.stiffness if slopes else np.zeros(0)
        if self.smooth.size:
            e = self.smooth
            values = self._smooth(u, slopes)
            flow += (np.bincount(self.left[e], values[0], minlength=size)
                     + np.bincount(self.right[e], values[1], minlength=size))
            if slopes:
                diag += (np.bincount(self.left[e], values[2], minlength=size)
                         + np.bincount(self.right[e], values[3], minlength=size))
                off_e = off_e.copy()
                off_e[e] += values[4]
        for face, held in ((self.inner, self.inner_nodes), (self.outer, self.outer_nodes)):
            if face.kind == "robin":
                flow[held] -= face.weight * face.coefficient * (face.bulk - face.ratio * u[held])
                if slopes:
                    diag[held] = diag[held] + face.weight * face.coefficient * face.ratio
            elif face.kind == "flux":
                flow[held] -= face.weight * face.value
            elif face.kind == "compartment" and face.clearance > 0.0:
                flow[held] += face.capacity * face.clearance * u[held]
                if slopes:
                    diag[held] = diag[held] + face.capacity * face.clearance
        if slopes:
            off = np.zeros(size - 1)
            off[self.left] = off_e
            return flow, diag, off
        return flow, None, None

    def substep_amounts(self, u: np.ndarray, flow: np.ndarray, rate: np.ndarray,
                        u0: np.ndarray, tau: float | np.ndarray):
        """Per mesh: inflow through the inner and outer face and the consumption rate of a
        substep of size tau from u0 to u (``flow`` the balance of :meth:`balance` at u,
        ``rate`` the nodal zero-order rates). The stiffness rows sum to zero, so the
        Gauss-point consumption is the sum of ``flow`` plus the Robin and imposed inflows less
        a compartment's clearance; a compartment's inflow is minus what its fluid gained and
        what its clearance removed."""
        inflows: list[np.ndarray] = []
        consumption: np.ndarray = np.bincount(self.node_mesh, flow + rate, minlength=self.count)
        for face, held in ((self.inner, self.inner_nodes), (self.outer, self.outer_nodes)):
            if face.kind == "dirichlet":
                inflows.append(flow[held])
                continue
            if face.kind == "compartment":
                cleared = face.capacity * face.clearance * u[held]
                step = tau[held] if isinstance(tau, np.ndarray) else tau
                inflows.append(-face.capacity * (u[held] - u0[held]) / step - cleared)
                consumption = consumption - cleared
                continue
            if face.kind == "robin":
                inflow = face.weight * face.coefficient * (face.bulk - face.ratio * u[held])
            elif face.kind == "flux":
                inflow = np.full(self.count, face.weight * face.value)
            else:
                # no inflow (adding zero would change nothing: a weighted bincount is never -0)
                inflows.append(np.zeros(self.count))
                continue
            inflows.append(np.asarray(inflow, dtype=float))
            consumption = consumption + inflow
        return inflows[0], inflows[1], consumption

    def project(self, y: np.ndarray) -> np.ndarray:
        """Split each node's content ``m u + s`` again into dissolved (at most the saturation
        potential) and undissolved (non-negative), keeping the content."""
        size = self.size
        if self.zero.size:
            # a node that has run out holds nothing: an extrapolated overshoot below zero is
            # taken back from the consumed amount, so the balance stays closed
            below = (self.nodal_zero > 0.0) & (y[:size] < 0.0)
            if below.any():
                y = y.copy()
                back = self.lumped * np.where(below, -y[:size], 0.0)
                y[:size][below] = 0.0
                y[2 * size + 2 + 3 * np.arange(self.count)] -= np.bincount(
                    self.node_mesh, back, minlength=self.count)
        if not self.can_saturate:
            return y
        u, s = y[:size], y[size:2 * size]
        content = self.lumped * u + s
        limited = np.isfinite(self.saturation_potential)
        solid = np.where(limited, np.maximum(
            content - self.lumped * np.where(limited, self.saturation_potential, 0.0), 0.0), 0.0)
        out = y.copy()
        out[:size] = np.where(limited, (content - solid) / self.lumped, u)
        out[size:2 * size] = solid
        return out

    def switching_nodes(self, y0: np.ndarray, y1: np.ndarray) -> np.ndarray:
        """Nodes (and their neighbours) where a switching term changes between two states:
        a zero-order node running out or coming back, a node's undissolved solute appearing
        or running out."""
        size = self.size
        changed = np.zeros(size, dtype=bool)
        if self.zero.size:
            changed |= (self.nodal_zero > 0.0) & ((y0[:size] > 0.0) != (y1[:size] > 0.0))
        if self.can_saturate:
            changed |= (y0[size:2 * size] > 0.0) != (y1[size:2 * size] > 0.0)
        if self.zero.size:
            # a node that ran out within the step, seen from either end (an extrapolated
            # state may bring it back a little)
            changed |= (self.nodal_zero > 0.0) & ((y0[:size] <= 0.0) | (y1[:size] <= 0.0)) & (
                np.maximum(y0[:size], y1[:size]) > 0.0)
        for _ in range(SWITCH_NEIGHBOURS):
            if not changed.any():
                break
            spread = changed.copy()
            spread[self.left] |= changed[self.right]
            spread[self.right] |= changed[self.left]
            changed = spread
        return changed

    def layer_undissolved(self, s: np.ndarray) -> np.ndarray:
        """Undissolved amount (r^n-weighted) per mesh and layer, shape (meshes, layers)."""
        key = self.node_mesh * self.layer_count + self.node_owner
        return np.bincount(key, s, minlength=self.count * self.layer_count).reshape(
            self.count, self.layer_count)

    def event_spans(self, y: np.ndarray, t: float, history, flow: np.ndarray
                    ) -> list[tuple[float, float, float]]:
        """The spans ahead of state y (at t, ``flow`` its balance) to the events a step lands
        on, each as (span, landing factor, sliver): a step longer than the span ends at the
        factor times the span, unless the span is below the sliver fraction of the step. The
        events: a layer's undissolved solute running out at the rate of the last step
        (``DEPLETION_LANDING``, just past it: its time is then read within a short step), and a
        node's undissolved solute running out at the rate diffusion now carries it away,
        ``-ds_i/dt`` = the node's balance while it is saturated (``SWITCH_LANDING``,
        ``SWITCH_SLIVER``)."""
        spans: list[tuple[float, float, float]] = []
        if not self.can_saturate:
            return spans
        size = self.size
        solid = y[size:2 * size]
        if self.loaded_layers and len(history.states) >= 2:
            now = self.layer_undissolved(solid)
            before = self.layer_undissolved(history.states[-2][size:2 * size])
            span = t - history.ts[-2]
            rate = (before - now) / span if span > 0.0 else np.zeros_like(now)
            live = (now > DEPLETED * self.initial_undissolved) & (rate > 0.0)
            if np.any(live):
                spans.append((float(np.min(now[live] / rate[live])), DEPLETION_LANDING, 0.0))
        present = solid > 0.0
        if present.any():
            rate = (flow + self.nodal_zero)[present]
            going = rate > 0.0
            if going.any():
                spans.append((float(np.min(solid[present][going] / rate[going])),
                              SWITCH_LANDING, SWITCH_SLIVER))
        return spans

    @staticmethod
    def limit_to_events(spans: list[tuple[float, float, float]], t: float, h: float) -> float:
        """Step size h shortened to land on each event of ``event_spans`` that falls within it
        (never on one closer than ``MIN_DEPLETION_STEP`` of the time or than its sliver of
        h)."""
        for ahead, factor, sliver in spans:
            if sliver * h < ahead < h and ahead > MIN_DEPLETION_STEP * max(t, h):
                h = min(h, factor * ahead)
        return h

    def _smooth(self, u: np.ndarray, slopes: bool):
        """First-order and Michaelis-Menten load by three-point Gauss quadrature,
        ``int R(K u_h) phi_i r^n``, and with ``slopes`` the element Jacobian blocks."""
        e = self.smooth
        k = self.partition[e][:, None]
        c = k * (u[self.left[e], None] * _PHI_INNER + u[self.right[e], None] * _PHI_OUTER)
        rate = self.first_order[:, None] * c
        slope = np.broadcast_to(self.first_order[:, None], c.shape)
        if self.has_saturable:
            live = np.maximum(c, 0.0)
            km = self.km[:, None]
            vmax = self.vmax[:, None]
            rate = rate + vmax * live / (km + live)
            if slopes:
                slope = slope + np.where(c > 0.0, vmax * km / (km + live) ** 2, 0.0)
        if self.has_smooth_zero:
            x = np.clip(c / self.epsilon, 0.0, 1.0)
            q = self.smooth_zero_rate[:, None]
            rate = rate + q * x * x * (3.0 - 2.0 * x)
            if slopes:
                slope = slope + q * 6.0 * x * (1.0 - x) / self.epsilon
        weighted = self.smooth_weights * rate
        values = [weighted @ _PHI_INNER, weighted @ _PHI_OUTER]
        if slopes:
            weighted_slope = self.smooth_weights * slope * k
            values += [weighted_slope @ (_PHI_INNER * _PHI_INNER),
                       weighted_slope @ (_PHI_OUTER * _PHI_OUTER),
                       weighted_slope @ (_PHI_INNER * _PHI_OUTER)]
        return values

    def reaction_load(self, u: np.ndarray) -> np.ndarray:
        """Nodal reaction load F_i (r^n-weighted consumption per node)."""
        load = np.zeros(self.size)
        if self.smooth.size:
            inner, outer = self._smooth(u, False)
            load += (np.bincount(self.left[self.smooth], inner, minlength=self.size)
                     + np.bincount(self.right[self.smooth], outer, minlength=self.size))
        if self.zero.size:
            load += np.where(u > 0.0, self.nodal_zero, 0.0)
        return load

    def face_inflows(self, u: np.ndarray, balance: np.ndarray, solid: np.ndarray | None = None
                     ) -> tuple[np.ndarray, np.ndarray]:
        """r^n-weighted inflow through the inner and outer face of each mesh; ``balance`` is
        A u + F(u), whose row at a held node is its consistent flux. At a compartment's node
        (body mass m, fluid capacity W'), M du/dt = -(balance + W' k_c u) with M = m + W' while
        no undissolved solute sits there (``solid``), else du/dt = 0; the inflow is
        -W' du/dt - W' k_c u."""
        inflows = []
        for face, held in ((self.inner, self.inner_nodes), (self.outer, self.outer_nodes)):
            if face.kind == "dirichlet":
                inflows.append(balance[held])
            elif face.kind == "compartment":
                cleared = face.capacity * face.clearance * u[held]
                rate = -(balance[held] + cleared) / self.lumped[held]
                if solid is not None:
                    rate = np.where(solid[held] > 0.0, 0.0, rate)
                inflows.append(-face.capacity * rate - cleared)
            elif face.kind == "robin":
                inflows.append(face.weight * face.coefficient
                               * (face.bulk - face.ratio * u[held]))
            elif face.kind == "flux":
                inflows.append(np.full(self.count, face.weight * face.value))
            else:
                inflows.append(np.zeros(self.count))
        return inflows[0], inflows[1]


@dataclass
class TransientGalerkinSolution(TransientSolution):
    """Galerkin solution at the requested times (amounts and fluxes: see
    :class:`~worker.engine.transient.solution.TransientSolution`).

    ``nodal`` holds C/K at the nodes, shape (len(times), nodes); ``mesh`` the elements.
    ``concentration_at(r, times, layer=None)`` gives C (amount/m^3), shape (len(times), len(r)),
    read in ``layer`` when given (both sides of a partition jump), at any
    times in [start, end] (the integrator's dense output; an r on an interface takes the inner
    layer's value). ``state_at(t)`` is the dense output of (u, out_inner, out_outer, consumed),
    r^n-weighted without the measure factor.
    """

    success: bool
    message: str
    mesh: GalerkinMesh
    nodal: np.ndarray
    concentration_at: Callable[..., np.ndarray]
    state_at: Callable[[ArrayLike], np.ndarray]
    diagnostics: dict = field(default_factory=dict)
    #: undissolved amount per measure at the times (zeros where no layer can saturate)
    undissolved: np.ndarray | None = None
    #: indices of the layers loaded above their solubility at t = 0
    loaded_layers: list[int] = field(default_factory=list)
    #: per time and loaded layer (columns as ``loaded_layers``), the outer and the inner edge
    #: of the layer's undissolved region, m (NaN once its undissolved solute is gone)
    front_outer: np.ndarray | None = None
    front_inner: np.ndarray | None = None
    #: per loaded layer, the time its undissolved solute ran out, s (None: not within the
    #: integration)
    time_depleted_layers: list[float | None] = field(default_factory=list)
    #: Fluid concentration of each compartment face (``"inner"``/``"outer"``) at the times,
    #: amount/m^3 (its starting level at t = 0; empty without compartments).
    compartments: dict[str, np.ndarray] = field(default_factory=dict)
    #: Per face (``"inner"``/``"outer"``) that exchanges with a fluid (holds a value, a
    #: compartment or a mass-transfer film), where a layer is loaded above its solubility: the
    #: bound of the face flux density's error from the step
    #: the dissolution front makes on this mesh (``front_staircase``), amount/(m^2 s), at the
    #: times.
    flux_front_band: dict[str, np.ndarray] = field(default_factory=dict)


def coarse_elements(problem: Problem, first_time: float | None = None) -> tuple[int, ...]:
    """Elements per layer of the coarse mesh of ``galerkin_study`` (see the ``MIN_ELEMENTS``
    group of constants for the rule)."""
    _check_case(problem)
    layers = problem.layers
    resistances = [ly.thickness / (ly.diffusivity * ly.partition) for ly in layers]
    total = sum(resistances)
    c_scale = concentration_scale(problem)
    counts = []
    for layer, resistance in zip(layers, resistances, strict=True):
        n = max(MIN_ELEMENTS, math.ceil(RESISTANCE_ELEMENTS * resistance / total))
        inverse = layer.reaction.law.inverse_length(layer.reaction, layer.diffusivity, c_scale)
        if inverse > 0.0:
            n = max(n, math.ceil(layer.thickness * inverse / REACTION_RESOLUTION))
        if first_time is not None and first_time > 0.0:
            early = math.ceil(layer.thickness
                              / (EARLY_RESOLUTION * math.sqrt(layer.diffusivity * first_time)))
            n = max(n, min(early, MAX_EARLY_ELEMENTS))
        counts.append(min(n, MAX_ELEMENTS))
    return tuple(counts)


def _coarse_mesh(problem: Problem, first_time: float | None
                 ) -> tuple[int, ...] | GradedElements:
    """The coarse mesh of ``galerkin_study``: ``coarse_elements``, graded towards the
    exchanging face(s) where the first time needs it (``galerkin_grading``)."""
    uniform = coarse_elements(problem, first_time)
    graded = graded_elements(problem, first_time, uniform, EARLY_RESOLUTION)
    return uniform if graded is None else graded


def _check_case(problem: Problem) -> None:
    """ValueError naming the field of a layer or face that cannot be used."""
    for j, ly in enumerate(problem.layers):
        for name, value in (("partition", ly.partition), ("diffusivity", ly.diffusivity),
                            ("thickness", ly.thickness)):
            if not (value > 0.0 and math.isfinite(value)):
                raise ValueError(f"layers[{j}].{name}: expected a positive finite value, "
                                 f"got {value!r}")
    _face(problem, "inner")
    _face(problem, "outer")


def _times(problem: Problem, times, end, start) -> tuple[np.ndarray, float]:
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


def solve_transient_galerkin(
    problem: Problem,
    times=None,
    elements_per_layer=None,
    *,
    rtol: float = RTOL,
    end: float | None = None,
) -> TransientGalerkinSolution:
    """Solve a transient case by P1 Galerkin elements and extrapolated implicit Euler, at the
    requested times.

    Parameters
    ----------
    problem : Problem
        Normalised case (SI): any number of layers, every reaction and boundary kind, slab,
        cylinder or sphere (a solid centre included), piecewise-constant initial state.
    times : array_like, optional
        Output times in s (default ``problem.regime.times``), increasing, within [0, end].
    elements_per_layer : int or sequence of int, optional
        Elements per layer (default: the fine mesh of ``galerkin_study``, four times
        ``coarse_elements``).
    rtol : float
        Relative tolerance of the integrator (absolute tolerances scale with it).
    end : float, optional
        End of the integration, s (default: the regime's duration, or the last time).

    Returns
    -------
    TransientGalerkinSolution
        ``success`` False (with the integrator's message) when the integration failed.
    """
    if elements_per_layer is None:
        times_array = np.asarray(problem.regime.times if times is None else times, dtype=float)
        positive = times_array[times_array > 0.0]
        first = float(positive.min()) if positive.size else None
        elements_per_layer = _coarse_mesh(problem, first)
        elements_per_layer = elements_per_layer.refined(REFINEMENT_RATIO**2) \
            if isinstance(elements_per_layer, GradedElements) \
            else tuple(REFINEMENT_RATIO**2 * n for n in elements_per_layer)
    return solve_transient_galerkin_meshes(problem, [elements_per_layer], times, rtol=rtol,
                                           end=end)[0]


def solve_transient_galerkin_meshes(
    problem: Problem,
    meshes: Sequence,
    times=None,
    *,
    rtol: float = RTOL,
    end: float | None = None,
) -> list[TransientGalerkinSolution]:
    """Integrate several meshes as one block-diagonal system (shared steps, one error norm over
    all); each mesh's discrete solution is otherwise its own. Parameters as
    ``solve_transient_galerkin``; ``meshes`` is a list of ``elements_per_layer``."""
    _check_case(problem)
    times, end = _times(problem, times, end, 0.0)
    c_scale = concentration_scale(problem)
    built = [build_galerkin_mesh(problem, spec) for spec in meshes]
    system = _System(problem, built, c_scale)
    y0 = system.start_state()
    total_load = system.initial_loads
    amount_scale = np.maximum(np.abs(total_load),
                              c_scale * np.bincount(system.node_mesh, system.lumped)
                              / max(ly.partition for ly in problem.layers))
    u_scale = c_scale / min(ly.partition for ly in problem.layers)
    solid_scale = np.maximum(system.undissolved_capacity, ATOL_CONCENTRATION * u_scale
                             * system.lumped)
    system.solid_scale = solid_scale
    atol = np.concatenate((np.full(system.size, ATOL_CONCENTRATION * u_scale),
                           ATOL_CONCENTRATION * solid_scale,
                           np.repeat(ATOL_AMOUNT * amount_scale, 3))) * (rtol / RTOL)
    span_end = max(end, 1e-300)
    history = integrate(system, y0, np.clip(times, 0.0, span_end), span_end, rtol, atol)
    ts = np.asarray(history.ts)
    stored = np.array(history.states)  # (steps + 1, state)
    success = history.success and ts[-1] >= times[-1] * (1.0 - 1e-12)
    size = system.size
    if success:
        at = np.searchsorted(ts, times * (1.0 - 1e-12), side="left")
        at = np.minimum(at, ts.size - 1)
        states = stored[at].T
    else:
        states = np.full((y0.size, times.size), np.nan)
    dense = _dense(ts, stored, size) if success else None
    inflows = np.zeros((2, times.size, system.count))
    for k in range(times.size):
        u = states[:size, k]
        load = system.reaction_load(u) if system.reacts else np.zeros(size)
        inflows[:, k] = system.face_inflows(u, system.stiffness_apply(u) + load,
                                            states[size:2 * size, k])
    return [_package(problem, system, g, times, states, inflows[:, :, g], success, history,
                     dense, stored, rtol) for g in range(system.count)]


def _dense(ts: np.ndarray, stored: np.ndarray, size: int):
    """Dense output of (u, amounts) over the accepted steps: the not-a-knot cubic spline
    through the step ends (exact at every step end, fourth order between smooth steps)."""
    keep = np.concatenate((np.arange(size), np.arange(2 * size, stored.shape[1])))
    values = stored[:, keep]
    if ts.size >= 4:
        spline = CubicSpline(ts, values, axis=0)
        return lambda t: spline(np.asarray(t, dtype=float)).T
    return lambda t: np.array([np.interp(np.asarray(t, dtype=float), ts, column)
                               for column in values.T])


def _fronts(system: _System, g: int, solid: np.ndarray, exponent: int):
    """Outer and inner edge of each loaded layer's undissolved region on mesh g, from the
    partly dissolved node at each end: its undissolved fraction of the dual cell, read in the
    r^n measure (the region holds its initial excess over the solubility, so a node's fraction
    f = s / capacity occupies that fraction of the cell's volume)."""
    low, high = int(system.node_offsets[g]), int(system.node_offsets[g + 1])
    owner = system.node_owner[low:high]
    capacity = system.undissolved_capacity[low:high]
    a = system.cell_low[low:high]
    b = system.cell_high[low:high]
    power = exponent + 1
    outer, inner = [], []
    for j in system.loaded_layers:
        mine = np.flatnonzero(owner == j)
        total0 = float(system.initial_undissolved[g, j])
        here = solid[mine]
        if not np.sum(here) > DEPLETED * total0:
            outer.append(math.nan)
            inner.append(math.nan)
            continue
        present = mine[here > DEPLETED * capacity[mine]]
        if present.size == 0:
            present = mine[here > 0.0]
        last, first = int(present.max()), int(present.min())
        f_out = min(1.0, solid[last] / capacity[last]) if capacity[last] > 0.0 else 1.0
        f_in = min(1.0, solid[first] / capacity[first]) if capacity[first] > 0.0 else 1.0
        lo, hi = a[last] ** power, b[last] ** power
        outer.append(float((lo + f_out * (hi - lo)) ** (1.0 / power)))
        lo, hi = a[first] ** power, b[first] ** power
        inner.append(float((hi - f_in * (hi - lo)) ** (1.0 / power)))
    return outer, inner


def _depletion_times(system: _System, g: int, ts: np.ndarray, stored: np.ndarray
                     ) -> list[float | None]:
    """Per loaded layer, when its undissolved solute ran out on mesh g: within the step where
    it did, at the rate of the step before (None where it did not)."""
    size = system.size
    low, high = int(system.node_offsets[g]), int(system.node_offsets[g + 1])
    key = system.node_owner[low:high]
    totals = np.array([np.bincount(key, row[size + low:size + high],
                                   minlength=system.layer_count) for row in stored])
    found: list[float | None] = []
    for j in system.loaded_layers:
        series = totals[:, j]
        gone = series <= DEPLETED * float(system.initial_undissolved[g, j])
        if not np.any(gone):
            found.append(None)
            continue
        n = int(np.argmax(gone))
        if n == 0:
            found.append(0.0)
            continue
        start, stop = float(ts[n - 1]), float(ts[n])
        left = float(series[n - 1])
        if n >= 2 and ts[n - 1] > ts[n - 2] and series[n - 2] > left:
            rate = (float(series[n - 2]) - left) / float(ts[n - 1] - ts[n - 2])
            found.append(min(stop, start + left / rate))
        else:
            found.append(stop)
    return found


def _package(problem: Problem, system: _System, g: int, times: np.ndarray, states: np.ndarray,
             inflows: np.ndarray, success: bool, history, dense, stored: np.ndarray,
             rtol: float) -> TransientGalerkinSolution:
    mesh = system.meshes[g]
    low, high = int(system.node_offsets[g]), int(system.node_offsets[g + 1])
    size = system.size
    row = 2 * size + 3 * g
    n = high - low
    measure = problem.measure_factor
    nodal = states[low:high].T
    solid = states[size + low:size + high].T
    undissolved = measure * solid.sum(axis=1)
    remaining = measure * (nodal @ system.body_lumped[low:high]) + undissolved
    out_inner, out_outer, consumed = (measure * states[row + k].copy() for k in range(3))
    initial_load = measure * float(system.initial_loads[g])
    at_start = times == 0.0
    remaining[at_start] = initial_load
    out_inner[at_start] = 0.0
    out_outer[at_start] = 0.0
    weight_inner = float(problem.inner) ** problem.exponent
    weight_outer = float(problem.outer) ** problem.exponent
    # outward flux density J (toward larger r): J_inner = inflow, J_outer = -inflow
    flux_inner = inflows[0] / weight_inner if weight_inner > 0.0 else np.zeros(times.size)
    flux_outer = -inflows[1] / weight_outer
    partitions = np.array([ly.partition for ly in problem.layers])
    ode_row = size + 3 * g  # in the dense output: u of every mesh, then the amounts

    def state_at(t):
        if dense is None:
            raise ValueError("no dense output: the integration failed")
        values = dense(np.asarray(t, dtype=float))
        return np.concatenate((values[low:high], values[ode_row:ode_row + 3]))

    def concentration_at(r, at_times, layer: int | None = None):
        r = np.atleast_1d(np.asarray(r, dtype=float))
        t = np.atleast_1d(np.asarray(at_times, dtype=float))
        span = mesh.nodes[-1] - mesh.nodes[0]
        if np.any(r < mesh.nodes[0] - 1e-12 * span) or np.any(r > mesh.nodes[-1] + 1e-12 * span):
            raise ValueError(f"r: expected positions within [{mesh.nodes[0]}, "
                             f"{mesh.nodes[-1]}] m, got {r!r}")
        layers = np.clip(np.searchsorted(problem.edges, r, side="left") - 1, 0,
                         len(problem.layers) - 1) if layer is None else np.full(r.size, layer)
        rows = np.array([state_at(tk)[:n] for tk in t])
        return np.array([np.interp(r, mesh.nodes, u) for u in rows]) * partitions[layers]

    loaded = list(system.loaded_layers)
    front_outer = np.full((times.size, len(loaded)), np.nan)
    front_inner = np.full((times.size, len(loaded)), np.nan)
    depleted: list[float | None] = [None] * len(loaded)
    staircase: dict[str, np.ndarray] = {}
    if loaded and success:
        full = states[size:2 * size].T
        for k in range(times.size):
            front_outer[k], front_inner[k] = _fronts(system, g, full[k][low:high],
                                                     problem.exponent)
        depleted = _depletion_times(system, g, np.asarray(history.ts), stored)
        staircase = _staircase_bands(system, g, nodal, full[:, low:high])
    ts = np.asarray(history.ts, dtype=float)
    compartments = {}
    for side, face, local in (("inner", system.inner, 0), ("outer", system.outer, n - 1)):
        if face.kind == "compartment":
            level = nodal[:, local] * face.ratio
            level[at_start] = face.initial
            compartments[side] = level
    return TransientGalerkinSolution(
        method=METHOD_NAME,
        reference=METHOD_REFERENCE,
        times=times,
        remaining=remaining,
        released_inner=out_inner,
        released_outer=out_outer,
        consumed=consumed,
        flux_inner=flux_inner,
        flux_outer=flux_outer,
        initial_load=initial_load,
        success=success,
        message=history.message,
        mesh=mesh,
        nodal=nodal,
        concentration_at=concentration_at,
        state_at=state_at,
        diagnostics={
            "nodes": n,
            "elements_per_layer": list(mesh.elements_per_layer),
            **({"grading": mesh.grading.describe()} if mesh.grading is not None else {}),
            "steps": int(ts.size - 1),
            "step_times": ts,
            "rejected_steps": history.rejected,
            "euler_substeps": history.substeps,
            "linear_solves": history.solves,
            "rtol": float(rtol),
            "meshes_integrated_together": system.count,
            "zero_order_switch": system.epsilon if system.has_smooth_zero else None,
        },
        undissolved=undissolved,
        loaded_layers=loaded,
        front_outer=front_outer,
        front_inner=front_inner,
        time_depleted_layers=depleted,
        compartments=compartments,
        flux_front_band=staircase,
    )


def _staircase_bands(system: _System, g: int, nodal: np.ndarray, solid: np.ndarray
                     ) -> dict[str, np.ndarray]:
    """Per face that exchanges with a fluid (a value, a compartment or a mass-transfer film),
    the band of mesh g's face flux density at each time from the step its dissolution front
    makes (``front_staircase``; behind a film the chain to the face node bounds it, see there);
    ``nodal`` and ``solid`` are the mesh's u and undissolved amounts, one row per time."""
    low, high = int(system.node_offsets[g]), int(system.node_offsets[g + 1])
    first = low - g  # the mesh's first element
    stiffness = system.stiffness[first:first + high - low - 1]
    present = DEPLETED * system.undissolved_capacity[low:high]
    saturation = system.saturation_potential[low:high]
    bands = {}
    for side, face in (("inner", system.inner), ("outer", system.outer)):
        if face.kind not in ("compartment", "dirichlet", "robin") or not face.weight > 0.0:
            continue
        bands[side] = np.array([staircase_inflow_band(stiffness, solid[k], present, nodal[k],
                                                      saturation, side)
                                for k in range(nodal.shape[0])]) / face.weight
    return bands


@dataclass
class GalerkinStudy:
    """Three-mesh study of the Galerkin solution (coarse, medium, fine: ratio 2).

    ``solutions`` coarse to fine; ``amounts`` the :class:`~worker.engine.transient.refinement.
    AmountStudy` of every amount and face flux at each requested time (extrapolated values,
    GCI and its absolute band, observed orders).
    """

    solutions: list[TransientGalerkinSolution]
    amounts: AmountStudy

    @property
    def fine(self) -> TransientGalerkinSolution:
        return self.solutions[-1]

    @property
    def success(self) -> bool:
        return all(s.success for s in self.solutions)


def route_rtol(problem: Problem) -> float:
    """The time tolerance of the route for ``problem``: ``RTOL`` scaled by the case's limit
    of ``RTOL_LIMIT`` (its own where the case tightens it, never above the default of its
    regime) over the transient default, so that the time error keeps the same share of the
    limits the route is compared against. Where a front moves (``limits.FRONT_LIMITS``: 10
    times the release-fraction limit) that is 1e-5 by default: on the dispersed-drug slab its
    change of the extrapolated amounts against 1e-7 stays below 2 % of the route's own grid
    bands (tests/unit/worker/engine/transient/test_galerkin_time_error.py), and the whole
    study takes about a third of the steps of 1e-6."""
    default = TRANSIENT_LIMITS[RTOL_LIMIT]
    regime = regime_defaults(problem).get(RTOL_LIMIT, default)
    return RTOL * min(check_limit(problem, RTOL_LIMIT), regime) / default


def galerkin_study(problem: Problem, times=None, coarse=None, *, rtol: float | None = None,
                   end: float | None = None) -> GalerkinStudy:
    """Solve on three meshes (``coarse`` elements per layer, default ``coarse_elements``; then
    twice and four times as many) and study each amount per requested time by
    ``convergence.grid_study`` (Celik et al. 2008): observed order, Richardson extrapolation,
    GCI. ``rtol``: the time tolerance, default :func:`route_rtol` of the case."""
    rtol = route_rtol(problem) if rtol is None else rtol
    times_array, end = _times(problem, times, end, 0.0)
    if coarse is None:
        positive = times_array[times_array > 0.0]
        coarse = _coarse_mesh(problem, float(positive.min()) if positive.size else None)
    elif isinstance(coarse, int | np.integer):
        coarse = (int(coarse),) * len(problem.layers)
    meshes: list = [coarse.refined(REFINEMENT_RATIO**k) for k in range(3)] \
        if isinstance(coarse, GradedElements) \
        else [tuple(REFINEMENT_RATIO**k * int(n) for n in coarse) for k in range(3)]
    solutions = solve_transient_galerkin_meshes(problem, meshes, times_array, rtol=rtol,
                                                end=end)
    sizes = [sum(s.mesh.elements_per_layer) for s in solutions]
    return GalerkinStudy(solutions, amount_study(solutions, sizes))
