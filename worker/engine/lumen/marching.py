"""Steady convection-diffusion in a tube's laminar flow by marching in the axial position.

Equation (axial diffusion neglected): ``u(r) dc/dz = D (1/r) d/dr (r dc/dr)`` on 0 < r < R,
``u = 2 u_m (1 - r^2/R^2)`` (Poiseuille), ``u_m = F / (pi R^2)``; c = c_in at z = 0; dc/dr = 0 at
the axis; at the wall the outward flux density ``j = -D dc/dr`` (mol/(m^2 s)) obeys a wall law
``j = j(c_w)`` of the fluid's wall concentration c_w (fixed c_w, a conductance, a uniform flux or
any callable with its derivative: a layered wall with reactions can be coupled here).

Radial discretisation: cell-centred finite volumes on N equal cells (R. Eymard, T. Gallouet,
R. Herbin, "Finite volume methods", *Handbook of Numerical Analysis* VII, 2000: two-point fluxes,
second order on uniform meshes), the convected weight of a cell the exact integral
``W_i = int u r dr`` over it (so that sum 2 pi W_i = F and the discrete amounts balance
exactly), the wall value from the half cell next to the wall ``j = 2 D (c_N - c_w) / dr``.

Axial marching: implicit Euler with local Richardson extrapolation; each interval h is taken
once whole and once as two half steps, and the result is ``2 c_half - c_whole`` (J.D. Lawson,
J.Ll. Morris, SIAM J. Numer. Anal. 15 (1978) 1212): second order, and L-stable (amplification
``2/(1 - x/2)^2 - 1/(1 - x)`` tends to 0 as x -> -inf), so the discontinuity at the inlet
corner is damped where Crank-Nicolson would carry an oscillation of the stiff wall modes down
the tube. The wall flux and the amount through the wall combine the same way, so the discrete
mass balance closes to round-off. Axial nodes may be graded towards the inlet,
``z_k = L (k/M)^g``. Each implicit step is one tridiagonal solve with two right-hand sides
(``c = a + b c_w``) and a scalar Newton iteration for c_w on the wall law.

Refinement: :func:`refinement_study` solves three meshes, refined by ``ratio`` in r, in z or in
both, and hands each outlet quantity to ``convergence.grid_study`` (Celik et al. 2008).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
from scipy.linalg import solve_banded

from worker.engine.convergence import GridStudy, grid_study
from worker.engine.lumen.graetz import dimensionless_length
from worker.engine.lumen.inputs import LumenInputError, non_negative, positive

__all__ = [
    "ConductanceWall",
    "FixedWall",
    "FunctionWall",
    "MarchSolution",
    "Tube",
    "UniformFluxWall",
    "axial_nodes",
    "march",
    "refinement_study",
]

#: Newton iteration on the wall concentration: relative step tolerance and iteration cap.
NEWTON_RTOL = 1e-12
NEWTON_MAX_ITERATIONS = 100
#: Default grading exponent of the axial nodes (1: equal steps). Outlet quantities converge
#: at second order for 1 <= g <= 3 (measured on the Graetz problem); g > 1 puts more nodes
#: where the wall's entrance layer is thin.
AXIAL_GRADING = 1.5
#: Quantities :func:`refinement_study` studies.
#: Axial schemes: implicit Euler with local Richardson extrapolation (two half steps against one
#: full step: second order and L-stable), and plain implicit Euler in half steps (first order).
SCHEMES = ("extrapolated_euler", "implicit_euler")
STUDIED = ("outlet_mixing_cup", "outlet_wall", "outlet_wall_flux", "through_wall")


@dataclass(frozen=True)
class Tube:
    """The lumen: radius (m), length (m), volume flow rate (m^3/s), diffusivity of the solute
    in the fluid (m^2/s), inlet concentration (mol/m^3, any consistent unit)."""

    radius: float
    length: float
    flow_rate: float
    diffusivity: float
    inlet: float

    def __post_init__(self) -> None:
        for name in ("radius", "length", "flow_rate", "diffusivity"):
            positive(name, getattr(self, name))
        if not math.isfinite(float(self.inlet)):
            raise LumenInputError(f"inlet: expected a finite concentration, got {self.inlet!r}")

    @property
    def mean_velocity(self) -> float:
        """u_m = F / (pi R^2), m/s."""
        return self.flow_rate / (math.pi * self.radius**2)

    def z_star(self, z):
        """``pi D z / (4 F)`` (dimensionless), see ``graetz.dimensionless_length``."""
        return dimensionless_length(z, self.flow_rate, self.diffusivity)


@dataclass(frozen=True)
class FixedWall:
    """The fluid at the wall held at ``value`` (mol/m^3)."""

    value: float

    def __post_init__(self) -> None:
        if not math.isfinite(float(self.value)):
            raise LumenInputError(f"value: expected a finite concentration, got {self.value!r}")


@dataclass(frozen=True)
class ConductanceWall:
    """Outward flux ``j = k (c_w - c_out)``: conductance k (m/s), outside concentration c_out
    referred to the fluid (mol/m^3)."""

    conductance: float
    outside: float

    def __post_init__(self) -> None:
        non_negative("conductance", self.conductance)
        if not math.isfinite(float(self.outside)):
            raise LumenInputError(f"outside: expected a finite concentration, got {self.outside!r}")

    def flux(self, c_wall: float) -> tuple[float, float]:
        return self.conductance * (c_wall - self.outside), self.conductance


@dataclass(frozen=True)
class UniformFluxWall:
    """Outward flux density ``j`` (mol/(m^2 s)), the same at every position (negative: into the
    fluid)."""

    flux_density: float

    def __post_init__(self) -> None:
        if not math.isfinite(float(self.flux_density)):
            raise LumenInputError(
                f"flux_density: expected a finite number, got {self.flux_density!r}")

    def flux(self, c_wall: float) -> tuple[float, float]:
        return self.flux_density, 0.0


@dataclass(frozen=True)
class FunctionWall:
    """Any wall law: ``law(c_wall) -> (j, dj/dc_wall)``, j the outward flux density
    (mol/(m^2 s)). For a unique wall concentration dj/dc_wall should be >= 0 (a wall that takes
    up more the more it is offered)."""

    law: Callable[[float], tuple[float, float]]

    def flux(self, c_wall: float) -> tuple[float, float]:
        j, slope = self.law(c_wall)
        return float(j), float(slope)


Wall = FixedWall | ConductanceWall | UniformFluxWall | FunctionWall


@dataclass
class MarchSolution:
    """Axial profiles (index k along ``position``, m) and the field ``concentration[k, i]`` at
    the cell centres ``radii`` (m). Concentrations in the inlet's unit; ``wall_flux`` outward
    (mol/(m^2 s)); rates in mol/s. ``through_wall`` is the cumulative amount per time that left
    through the wall, integrated as the scheme integrates it.

    At the inlet node (k = 0) the wall values are those of the uniform inlet against the wall
    law on the half cell: where the wall and inlet concentrations differ the true flux there is
    unbounded (z^(-1/3), Leveque), so ``wall_flux[0]`` depends on the mesh and is no result.
    With a nonlinear wall law the extrapolated ``wall_flux`` meets the law at ``wall`` to second
    order in the step, not exactly (both are combinations of the half- and whole-step values).
    """

    position: np.ndarray
    radii: np.ndarray
    concentration: np.ndarray
    mixing_cup: np.ndarray
    wall: np.ndarray
    wall_flux: np.ndarray
    through_wall: np.ndarray
    inlet_rate: float
    outlet_rate: float
    cells: tuple[int, int]
    diagnostics: dict = field(default_factory=dict)

    @property
    def mass_balance_residual(self) -> float:
        """(in - out - through the wall) / max(|in|, |out|, |through|): zero for a conservative
        scheme, whatever the mesh."""
        scale = max(abs(self.inlet_rate), abs(self.outlet_rate), abs(self.through_wall[-1]))
        if scale == 0.0:
            return 0.0
        return (self.inlet_rate - self.outlet_rate - self.through_wall[-1]) / scale

    def quantity(self, name: str) -> float:
        """An outlet quantity by name (one of ``STUDIED``)."""
        values = {
            "outlet_mixing_cup": self.mixing_cup[-1],
            "outlet_wall": self.wall[-1],
            "outlet_wall_flux": self.wall_flux[-1],
            "through_wall": self.through_wall[-1],
        }
        if name not in values:
            raise LumenInputError(f"quantity: expected one of {sorted(values)}, got {name!r}")
        return float(values[name])


def axial_nodes(length: float, steps: int, grading: float = AXIAL_GRADING) -> np.ndarray:
    """``z_k = L (k/M)^g``, k = 0..M (m)."""
    return length * (np.arange(steps + 1) / steps) ** grading


def _cell_weights(radius: float, cells: int, mean_velocity: float):
    """Faces of ``cells`` equal cells (m) and each cell's ``int u r dr`` (m^3/s per radian),
    exact for the parabola: ``2 u_m (r^2/2 - r^4/(4 R^2))`` between the faces."""
    faces = np.linspace(0.0, radius, cells + 1)
    primitive = 2.0 * mean_velocity * (faces**2 / 2.0 - faces**4 / (4.0 * radius**2))
    return faces, np.diff(primitive)


class _Wall:
    """Solves the wall law against the cell next to the wall: ``2D(c_N - c_w)/dr = j(c_w)``
    with c_N = a + b c_w."""

    def __init__(self, wall: Wall, half_cell_conductance: float) -> None:
        self.wall = wall
        self.g = half_cell_conductance

    def solve(self, a: float, b: float, guess: float) -> tuple[float, float, int]:
        if isinstance(self.wall, FixedWall):
            c_w = float(self.wall.value)
            return c_w, self.g * (a + (b - 1.0) * c_w), 0
        c_w = guess
        scale = max(abs(a), abs(guess), 1e-300)
        # The residual falls as c_w rises (b < 1, dj/dc_w >= 0): points where it is positive
        # and negative bracket the root, and once both are known a Newton step that leaves the
        # bracket or does not halve the previous step is replaced by bisection (safeguarded
        # Newton, "rtsafe": W.H. Press et al., *Numerical Recipes*, 3rd ed., 2007, §9.4).
        low, high = -math.inf, math.inf
        previous = math.inf
        for iteration in range(1, NEWTON_MAX_ITERATIONS + 1):
            j, slope = self.wall.flux(c_w)
            residual = self.g * (a + (b - 1.0) * c_w) - j
            if residual == 0.0:
                return c_w, j, iteration
            if residual > 0.0:
                low = max(low, c_w)
            elif residual < 0.0:
                high = min(high, c_w)
            step = -residual / (self.g * (b - 1.0) - slope)
            proposal = c_w + step
            bracketed = math.isfinite(low) and math.isfinite(high)
            if bracketed and (not low <= proposal <= high or abs(step) > 0.5 * previous):
                proposal = 0.5 * (low + high)
            previous = abs(proposal - c_w)
            if not math.isfinite(proposal):
                break
            change, c_w = abs(proposal - c_w), proposal
            if change <= NEWTON_RTOL * max(abs(c_w), scale):
                return c_w, self.wall.flux(c_w)[0], iteration
        raise LumenInputError(
            f"wall: the wall law gives no wall concentration (Newton did not settle in "
            f"{NEWTON_MAX_ITERATIONS} iterations; last c_w = {c_w!r}); expected a law with "
            f"dj/dc_w >= 0")


def _check_mesh(radial_cells: int, axial_steps: int, grading: float) -> None:
    if not isinstance(radial_cells, int | np.integer) or radial_cells < 2:
        raise LumenInputError(f"radial_cells: expected a whole number >= 2, got {radial_cells!r}")
    if not isinstance(axial_steps, int | np.integer) or axial_steps < 1:
        raise LumenInputError(f"axial_steps: expected a whole number >= 1, got {axial_steps!r}")
    if not (math.isfinite(grading) and grading >= 1.0):
        raise LumenInputError(f"grading: expected a number >= 1, got {grading!r}")


def march(tube: Tube, wall: Wall, radial_cells: int = 80, axial_steps: int = 200, *,
          grading: float = AXIAL_GRADING, scheme: str = "extrapolated_euler") -> MarchSolution:
    """March the lumen from the inlet to ``tube.length``.

    Parameters
    ----------
    tube : Tube
    wall : FixedWall, ConductanceWall, UniformFluxWall or FunctionWall
    radial_cells : int
        Equal cells across the radius.
    axial_steps : int
        Axial intervals, nodes graded as ``axial_nodes``.
    grading : float
        Exponent g >= 1 of the axial grading (1: equal steps).
    scheme : str
        ``"extrapolated_euler"`` (second order) or ``"implicit_euler"`` (first order).
    """
    _check_mesh(radial_cells, axial_steps, grading)
    if scheme not in SCHEMES:
        raise LumenInputError(f"scheme: expected one of {SCHEMES}, got {scheme!r}")
    radius, diffusivity = tube.radius, tube.diffusivity
    n = int(radial_cells)
    dr = radius / n
    faces, weights = _cell_weights(radius, n, tube.mean_velocity)
    face_g = diffusivity * faces[1:-1] / dr          # interior faces, per radian
    half_cell = 2.0 * diffusivity / dr               # j = half_cell (c_N - c_w)
    wall_g = radius * half_cell                      # the same, per radian of the wall face
    solver = _Wall(wall, half_cell)

    z = axial_nodes(tube.length, int(axial_steps), grading)
    c = np.full(n, float(tube.inlet))
    c_w, j, _ = solver.solve(c[-1], 0.0, c[-1])
    field_rows = [c.copy()]
    walls, fluxes = [c_w], [j]
    through = [0.0]
    newton_max = 0
    unit = np.zeros(n)
    unit[-1] = 1.0

    def step(c: np.ndarray, c_w_old: float, h: float):
        """One implicit Euler step of length h (m)."""
        band = np.zeros((3, n))
        diagonal = weights / h
        diagonal[:-1] += face_g
        diagonal[1:] += face_g
        diagonal[-1] += wall_g
        band[1] = diagonal
        band[0, 1:] = -face_g
        band[2, :-1] = -face_g
        solved = solve_banded((1, 1), band, np.column_stack([weights / h * c, wall_g * unit]))
        a, b = solved[:, 0], solved[:, 1]
        c_w, j, iterations = solver.solve(a[-1], b[-1], c_w_old)
        return a + b * c_w, c_w, j, iterations

    for k in range(int(axial_steps)):
        h = z[k + 1] - z[k]
        c_half, c_w_half, j_half, it1 = step(c, c_w, 0.5 * h)
        c_two, c_w_two, j_two, it2 = step(c_half, c_w_half, 0.5 * h)
        amount = 0.5 * h * (j_half + j_two)
        newton_max = max(newton_max, it1, it2)
        if scheme == "extrapolated_euler":
            c_one, c_w_one, j_one, it3 = step(c, c_w, h)
            newton_max = max(newton_max, it3)
            c, c_w, j = 2.0 * c_two - c_one, 2.0 * c_w_two - c_w_one, 2.0 * j_two - j_one
            amount = 2.0 * amount - h * j_one
        else:
            c, c_w, j = c_two, c_w_two, j_two
        field_rows.append(c.copy())
        walls.append(c_w)
        fluxes.append(j)
        through.append(through[-1] + 2.0 * math.pi * radius * amount)

    concentration = np.array(field_rows)
    mixing = concentration @ weights / weights.sum()
    flow = 2.0 * math.pi * weights.sum()
    return MarchSolution(
        position=z,
        radii=0.5 * (faces[:-1] + faces[1:]),
        concentration=concentration,
        mixing_cup=mixing,
        wall=np.array(walls),
        wall_flux=np.array(fluxes),
        through_wall=np.array(through),
        inlet_rate=flow * float(tube.inlet),
        outlet_rate=flow * float(mixing[-1]),
        cells=(n, int(axial_steps)),
        diagnostics={"newton_iterations_max": newton_max, "grading": grading,
                     "scheme": scheme},
    )


def refinement_study(tube: Tube, wall: Wall, radial_cells: int, axial_steps: int, *,
                     direction: str = "both", ratio: int = 2,
                     quantities: tuple[str, ...] = STUDIED, **options
                     ) -> tuple[dict[str, GridStudy], list[MarchSolution]]:
    """Three meshes refined by ``ratio`` in ``direction`` (``"r"``, ``"z"`` or ``"both"``) from
    the coarse mesh (``radial_cells``, ``axial_steps``); the direction not refined keeps the
    finest count. Returns the studies of each quantity (``convergence.grid_study``, grid 1
    finest) and the solutions, fine to coarse. ``options`` go to :func:`march`."""
    if direction not in ("r", "z", "both"):
        raise LumenInputError(f"direction: expected 'r', 'z' or 'both', got {direction!r}")
    if not isinstance(ratio, int | np.integer) or ratio < 2:
        raise LumenInputError(f"ratio: expected a whole number >= 2, got {ratio!r}")
    meshes = []
    for level in (2, 1, 0):
        n_r = radial_cells * ratio ** (level if direction in ("r", "both") else 2)
        n_z = axial_steps * ratio ** (level if direction in ("z", "both") else 2)
        meshes.append((n_r, n_z))
    solutions = [march(tube, wall, n_r, n_z, **options) for n_r, n_z in meshes]
    studies = {
        name: grid_study([s.quantity(name) for s in solutions], ratios=(ratio, ratio))
        for name in quantities
    }
    return studies, solutions
