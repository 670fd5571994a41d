"""The layers' steady answer to the lumen, tabulated once over the wall concentrations the
lumen can reach.

At each axial position the layers are in their steady radial state for the fluid's wall
concentration c_w (``layer_walls``), so everything the lumen needs of them is a function of
c_w alone: the outward flux density at the wall j(c_w) (mol/(m^2 s)), what they consume per
unit length and what leaves through their outer face per unit length (mol/(m s)), and their
minimum concentration (material side) with its radius. For kinetics without a closed form each
evaluation is a finite-volume solve; tabulating them on ``[0, inlet]`` once and interpolating
with a monotone piecewise-cubic Hermite interpolant (F.N. Fritsch, R.E. Carlson, "Monotone
piecewise cubic interpolation", SIAM J. Numer. Anal. 17 (1980) 238; ``scipy.interpolate.
PchipInterpolator``) keeps a monotone law monotone, so the lumen's Newton iteration keeps one
root. The table is verified against direct solves midway between nodes (``verify``); where it
misses the tolerance the nodes are doubled. Pchip reproduces a straight line exactly, so for
linear kinetics the table is the closed-form law.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.interpolate import PchipInterpolator

from worker.engine.extremes import layer_extremes, true_extreme
from worker.engine.lumen.inputs import LumenInputError
from worker.engine.lumen.layer_accuracy import accurate_answer
from worker.engine.lumen.marching import FunctionWall
from worker.engine.model import Problem, SteadySolution

__all__ = ["LayerAnswer", "WallTable", "answer_of", "layer_answer", "tabulate"]

#: Nodes of the first table, and the most the table may grow to.
FIRST_NODES = 17
MAX_NODES = 257
#: Nodes of the first pass, before the lumen has shown which wall concentrations it reaches.
FIRST_PASS_NODES = 65
#: Where the table starts, as a fraction of the inlet, when the layers cannot be solved with
#: the wall at exactly zero.
ZERO_NODE = 1e-9
#: Samples per layer before the search for the layer minimum.
SAMPLES_PER_LAYER = 81
#: Radii per layer (both ends included, a subset of the samples) at which the table also keeps
#: the layers' profile, for the record's picture of the body along the lumen.
PROFILE_POINTS_PER_LAYER = 11


@dataclass(frozen=True)
class LayerAnswer:
    """The layers' steady state at one wall concentration: flux density at the wall (outward,
    mol/(m^2 s)), consumption and outer-face rate per unit length (mol/(m s)), the minimum
    concentration (material side, mol/m^3) and its radius (m)."""

    wall_flux: float
    consumption_per_length: float
    outer_per_length: float
    minimum: float
    minimum_radius: float
    #: The layers' concentration (material side) at ``profile_radii`` (both sides of each
    #: interface: each layer's own ends).
    profile: tuple[float, ...] = ()
    profile_radii: tuple[float, ...] = ()


def layer_answer(problem: Problem, c_wall: float) -> LayerAnswer:
    """The layers' steady answer with the fluid at the wall at ``c_wall``, as accurate as the
    table must be: a closed form where the engine has one, else finite volumes on two meshes,
    Richardson-extrapolated (``layer_accuracy.accurate_answer``). Every direct solve of the
    lumen's layers (the table's nodes and its verification, the body's minimum, a trial
    model's layers) goes through here."""
    return accurate_answer(problem, c_wall, answer_of)


def answer_of(problem: Problem, solution: SteadySolution) -> LayerAnswer:
    """The figures of one steady solution of the layers (``problem``)."""
    edges = problem.edges
    positions, sampled = [], []
    for index in range(len(problem.layers)):
        r = np.linspace(edges[index], edges[index + 1], SAMPLES_PER_LAYER)
        positions.append(r)
        sampled.append(np.asarray(solution.concentration_at(r, layer=index), dtype=float))
    lowest = true_extreme(layer_extremes(solution.concentration_at, positions, sampled,
                                         lowest=True), lowest=True)
    picks = np.linspace(0, SAMPLES_PER_LAYER - 1, PROFILE_POINTS_PER_LAYER).round().astype(int)
    return LayerAnswer(
        wall_flux=float(solution.flux_inner),
        consumption_per_length=2.0 * math.pi * float(solution.consumption),
        outer_per_length=2.0 * math.pi * problem.outer * float(solution.flux_outer),
        minimum=float(lowest.value),
        minimum_radius=float(lowest.position),
        profile=tuple(float(v) for values in sampled for v in values[picks]),
        profile_radii=tuple(float(r) for radii in positions for r in radii[picks]),
    )


def _nodes(top: float, count: int) -> np.ndarray:
    """Chebyshev-Lobatto points on [0, top]: closer near both ends, where a saturating or
    depleting law bends most."""
    return 0.5 * top * (1.0 - np.cos(np.pi * np.arange(count) / (count - 1)))


@dataclass
class WallTable:
    """Pchip interpolants of :class:`LayerAnswer` over c_w in [0, ``top``] (mol/m^3).

    ``verified`` lists (c_w, relative error of j) at the points checked against direct solves;
    ``worst_error`` is the largest, relative to the largest |j| of the table."""

    nodes: np.ndarray
    answers: list[LayerAnswer]
    verified: list[tuple[float, float]]
    worst_error: float
    #: The lowest wall concentration of the verified range (mol/m^3).
    low: float = 0.0

    def __post_init__(self) -> None:
        def fit(values):
            return PchipInterpolator(self.nodes, np.asarray(values, dtype=float))
        self._flux = fit([a.wall_flux for a in self.answers])
        self._slope = self._flux.derivative()
        self._consumption = fit([a.consumption_per_length for a in self.answers])
        self._outer = fit([a.outer_per_length for a in self.answers])
        self._minimum = fit([a.minimum for a in self.answers])
        self._radius = fit([a.minimum_radius for a in self.answers])
        self._profile = PchipInterpolator(
            self.nodes, np.array([a.profile for a in self.answers], dtype=float), axis=0)

    @property
    def top(self) -> float:
        return float(self.nodes[-1])

    def flux(self, c_wall: float) -> tuple[float, float]:
        """(j, dj/dc_w) at c_w; outside [0, top] continued linearly from the end."""
        at = min(max(c_wall, 0.0), self.top)
        j, slope = float(self._flux(at)), float(self._slope(at))
        return j + slope * (c_wall - at), slope

    def wall(self) -> FunctionWall:
        return FunctionWall(self.flux)

    def consumption_per_length(self, c_wall):
        return self._consumption(np.clip(c_wall, 0.0, self.top))

    def outer_per_length(self, c_wall):
        return self._outer(np.clip(c_wall, 0.0, self.top))

    def minimum(self, c_wall):
        return self._minimum(np.clip(c_wall, 0.0, self.top))

    @property
    def profile_radii(self) -> np.ndarray:
        """The radii (m) of :meth:`profile`."""
        return np.array(self.answers[0].profile_radii)

    def profile(self, c_wall: float) -> np.ndarray:
        """The layers' concentration (material side) at :attr:`profile_radii` with the fluid at
        the wall at ``c_wall``, interpolated as the other figures are (pchip on the nodes)."""
        return np.asarray(self._profile(min(max(c_wall, 0.0), self.top)), dtype=float)


def _table_error(table: WallTable, direct: LayerAnswer, c: float, scale: float,
                 radius: float) -> float:
    """The table's largest difference from a direct solve at c: of the wall flux, relative to
    the largest |j| (``scale``), and of the consumption and the outer-face rate per unit
    length, relative to the largest rate through the wall, ``2 pi R scale``."""
    per_length = 2.0 * math.pi * radius * scale
    return max(abs(table.flux(c)[0] - direct.wall_flux) / scale,
               abs(float(table.consumption_per_length(c)) - direct.consumption_per_length)
               / per_length,
               abs(float(table.outer_per_length(c)) - direct.outer_per_length) / per_length)


def tabulate(problem: Problem, top: float, tolerance: float, *, low: float = 0.0,
             start: WallTable | None = None, max_nodes: int = MAX_NODES) -> WallTable:
    """Tabulate the layers over c_w in [0, top] (``problem``: the layers with the lumen wall
    as a ``concentration`` face), verified over [``low``, top].

    Every interval reaching into [low, top] has its midpoint checked against a direct solve;
    where j, the consumption or the outer-face rate misses ``tolerance`` (relative to the
    largest |j| or the largest rate through the wall) the midpoint joins the nodes
    and the intervals whose interpolant that changes (pchip slopes use the neighbours) are
    checked again, until all pass or the table holds ``max_nodes``. A law with a kink (a
    zero-order layer whose dry zone reaches a face) is so refined around the kink alone; one
    steep at c_w = 0 (a zero-order layer's flux grows as the square root of c_w there) is
    verified only down to the lowest wall concentration the lumen reaches (``low``).
    ``start``: a table to refine further (its nodes and answers are kept)."""
    if not (math.isfinite(top) and top > 0.0):
        raise LumenInputError(f"inlet: expected a positive concentration to tabulate up to, "
                              f"got {top!r}")
    if start is not None:
        nodes = [float(c) for c in start.nodes]
        answers = dict(zip(nodes, start.answers, strict=True))
    else:
        nodes = [float(c) for c in _nodes(top, 5 if problem.is_linear else FIRST_NODES)]
        try:
            first = layer_answer(problem, 0.0)
        except LumenInputError:
            # the finite volumes may not settle with the wall at exactly zero (a residual at
            # the underflow limit judged against a zero scale): start just above it
            nodes[0] = ZERO_NODE * top
            first = layer_answer(problem, nodes[0])
        answers = {nodes[0]: first} | {c: layer_answer(problem, c) for c in nodes[1:]}
    scale = max(abs(a.wall_flux) for a in answers.values()) or 1.0
    errors: dict[float, tuple[float, float]] = {}  # left node -> (midpoint, error)
    pending = set(range(len(nodes) - 1))
    while True:
        table = WallTable(np.array(nodes), [answers[c] for c in nodes], [], math.nan)
        failing = []
        for i in sorted(pending):
            if nodes[i + 1] < low:
                continue
            c = 0.5 * (nodes[i] + nodes[i + 1])
            direct = layer_answer(problem, c)
            error = _table_error(table, direct, c, scale, problem.inner)
            errors[nodes[i]] = (c, error)
            if error > tolerance:
                failing.append((i, c, direct))
        if not failing or len(nodes) + len(failing) > max_nodes:
            break
        for i, c, direct in reversed(failing):
            answers[c] = direct
            nodes.insert(i + 1, c)
        inserted = [nodes.index(c) for _, c, _ in failing]
        pending = {j for k in inserted for j in range(max(k - 3, 0), min(k + 3, len(nodes) - 1))}
        for j in pending:
            errors.pop(nodes[j], None)
    table.verified = [errors[left] for left, right in zip(nodes[:-1], nodes[1:], strict=True)
                      if left in errors and right >= low]
    table.low = low
    table.worst_error = max((e for _, e in table.verified), default=0.0)
    return table
