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
root. The table is verified against direct solves midway between nodes (``tabulate``); where
it misses the tolerance the midpoints join the nodes, the worst first when the table has no
room for all. Pchip reproduces a straight line exactly, so for linear kinetics the table is the
closed-form law.

Two features of zero-order layers are not smooth, and pchip alone converges slowly across them
(it is second order in the node spacing only where the law is smooth):

* where a depleted zone first appears (``depletion_layers.depletion_onset``) the slope of
  j(c_w) jumps: a sealed body takes up the same amount at every level above it and less below
  it. That level becomes a node, and each side has its own interpolants (``breaks``).
* a zero-order layer at the wall, depleted beyond a front, takes up ``j ~ sqrt(2 D Q K c_w)``
  near c_w = 0 (the live zone's depth grows as sqrt(c_w); Hill 1928, Crank 1975 ch. 14): the
  table then interpolates over ``x = sqrt(c_w / top)``, in which that law is smooth (``root``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.interpolate import PchipInterpolator

from worker.engine.depletion_layers import depletion_onset
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
#: Nearest approach to c_w = 0, as a fraction of the top, of the slope of a table over
#: sqrt(c_w) (``WallTable.flux``).
SLOPE_FLOOR = 1e-12
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


def _nodes(low: float, high: float, count: int) -> np.ndarray:
    """Chebyshev-Lobatto points on [low, high]: closer near both ends, where a saturating or
    depleting law bends most."""
    return low + 0.5 * (high - low) * (1.0 - np.cos(np.pi * np.arange(count) / (count - 1)))


def _first_nodes(top: float, count: int, kink: float | None) -> list[float]:
    """The first table's nodes on [0, top]; with a kink inside, each side gets its own
    Chebyshev-Lobatto points, sharing the kink."""
    if kink is None:
        return [float(c) for c in _nodes(0.0, top, count)]
    side = count // 2 + 1
    return [float(c) for c in np.concatenate([_nodes(0.0, kink, side)[:-1],
                                              _nodes(kink, top, side)])]


class _Piecewise:
    """One monotone cubic per piece of the axis between ``splits`` (each a node shared by the
    pieces either side): a law with a kink there is interpolated on each side without rounding
    the kink off. ``values`` may have trailing axes (interpolated along the first)."""

    def __init__(self, splits: np.ndarray, parts: list) -> None:
        self.splits = splits
        self.parts = parts

    @classmethod
    def fit(cls, axis: np.ndarray, values, split_at: list[int]) -> _Piecewise:
        values = np.asarray(values, dtype=float)
        bounds = [0, *split_at, len(axis) - 1]
        parts = [PchipInterpolator(axis[a:b + 1], values[a:b + 1], axis=0)
                 for a, b in zip(bounds[:-1], bounds[1:], strict=True)]
        return cls(np.asarray(axis[split_at], dtype=float), parts)

    def derivative(self) -> _Piecewise:
        return _Piecewise(self.splits, [part.derivative() for part in self.parts])

    def __call__(self, x):
        x = np.asarray(x, dtype=float)
        if len(self.parts) == 1:
            return self.parts[0](x)
        which = np.searchsorted(self.splits, x, side="right")
        if x.ndim == 0:
            return self.parts[int(which)](x)
        out = np.empty(x.shape + self.parts[0](x.flat[0]).shape)
        for k, part in enumerate(self.parts):
            mask = which == k
            if np.any(mask):
                out[mask] = part(x[mask])
        return out


@dataclass
class WallTable:
    """Pchip interpolants of :class:`LayerAnswer` over c_w in [0, ``top``] (mol/m^3).

    ``verified`` lists (c_w, relative error of j) at the points checked against direct solves;
    ``worst_error`` is the largest, relative to the largest |j| of the table. With ``root`` the
    interpolants run over ``x = sqrt(c_w / top)`` instead of c_w; ``breaks`` are nodes where
    the law has a kink, and each side of one has its own interpolants (see :func:`tabulate`)."""

    nodes: np.ndarray
    answers: list[LayerAnswer]
    verified: list[tuple[float, float]]
    worst_error: float
    #: The lowest wall concentration of the verified range (mol/m^3).
    low: float = 0.0
    root: bool = False
    breaks: tuple[float, ...] = ()

    def _x(self, c_wall):
        """The interpolants' abscissa of wall concentrations in [0, top]."""
        return np.sqrt(c_wall / self.top) if self.root else c_wall

    def __post_init__(self) -> None:
        axis = self._x(np.asarray(self.nodes, dtype=float))
        split_at = sorted(int(np.searchsorted(self.nodes, c)) for c in self.breaks)
        if any(not 0 < i < len(self.nodes) - 1 or self.nodes[i] != c
               for i, c in zip(split_at, sorted(self.breaks), strict=True)):
            raise ValueError(f"breaks: expected inner nodes of the table, got {self.breaks!r}")

        def fit(values):
            return _Piecewise.fit(axis, values, split_at)
        self._flux = fit([a.wall_flux for a in self.answers])
        self._slope = self._flux.derivative()
        self._consumption = fit([a.consumption_per_length for a in self.answers])
        self._outer = fit([a.outer_per_length for a in self.answers])
        self._minimum = fit([a.minimum for a in self.answers])
        self._radius = fit([a.minimum_radius for a in self.answers])
        self._profile = fit([a.profile for a in self.answers])

    @property
    def top(self) -> float:
        return float(self.nodes[-1])

    def flux(self, c_wall: float) -> tuple[float, float]:
        """(j, dj/dc_w) at c_w; outside [0, top] continued linearly from the end."""
        at = min(max(c_wall, 0.0), self.top)
        if not self.root:
            j, slope = float(self._flux(at)), float(self._slope(at))
            return j + slope * (c_wall - at), slope
        # dj/dc_w = (dj/dx) / (2 sqrt(c_w top)): unbounded at c_w = 0 for a law that grows as
        # sqrt(c_w) there, so taken no nearer zero than ``SLOPE_FLOOR`` top
        x = math.sqrt(at / self.top)
        j = float(self._flux(x))
        x_slope = max(x, math.sqrt(SLOPE_FLOOR))
        slope = float(self._slope(x_slope)) / (2.0 * self.top * x_slope)
        return j + slope * (c_wall - at), slope

    def wall(self) -> FunctionWall:
        return FunctionWall(self.flux)

    def consumption_per_length(self, c_wall):
        return self._consumption(self._x(np.clip(c_wall, 0.0, self.top)))

    def outer_per_length(self, c_wall):
        return self._outer(self._x(np.clip(c_wall, 0.0, self.top)))

    def minimum(self, c_wall):
        return self._minimum(self._x(np.clip(c_wall, 0.0, self.top)))

    @property
    def profile_radii(self) -> np.ndarray:
        """The radii (m) of :meth:`profile`."""
        return np.array(self.answers[0].profile_radii)

    def profile(self, c_wall: float) -> np.ndarray:
        """The layers' concentration (material side) at :attr:`profile_radii` with the fluid at
        the wall at ``c_wall``, interpolated as the other figures are (pchip on the nodes)."""
        return np.asarray(self._profile(self._x(min(max(c_wall, 0.0), self.top))),
                          dtype=float)


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
    checked again, until all pass or the table holds ``max_nodes`` (with more failing than it
    has room for, the worst are refined). The level where a depleted zone first appears is a
    node with separate interpolants either side, and with a zero-order layer at the wall the
    table runs over sqrt(c_w) (module docstring). ``start``: a table to refine further (its
    nodes, answers and breaks are kept)."""
    if not (math.isfinite(top) and top > 0.0):
        raise LumenInputError(f"inlet: expected a positive concentration to tabulate up to, "
                              f"got {top!r}")
    if start is not None:
        nodes = [float(c) for c in start.nodes]
        answers = dict(zip(nodes, start.answers, strict=True))
        breaks = start.breaks
    else:
        kink = depletion_onset(problem, top)
        breaks = () if kink is None else (kink,)
        nodes = _first_nodes(top, 5 if problem.is_linear else FIRST_NODES, kink)
        try:
            first = layer_answer(problem, 0.0)
        except LumenInputError:
            # the finite volumes may not settle with the wall at exactly zero (a residual at
            # the underflow limit judged against a zero scale): start just above it
            nodes[0] = ZERO_NODE * top
            first = layer_answer(problem, nodes[0])
        answers = {nodes[0]: first} | {c: layer_answer(problem, c) for c in nodes[1:]}
    scale = max(abs(a.wall_flux) for a in answers.values()) or 1.0
    root = problem.layers[0].reaction.law.depletes
    errors: dict[float, tuple[float, float]] = {}  # left node -> (midpoint, error)
    pending = set(range(len(nodes) - 1))
    while True:
        table = WallTable(np.array(nodes), [answers[c] for c in nodes], [], math.nan,
                          root=root, breaks=breaks)
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
        room = max_nodes - len(nodes)
        if not failing or room <= 0:
            break
        if len(failing) > room:
            # more intervals miss than the table has room for: refine the worst ones
            failing = sorted(sorted(failing, key=lambda f: -errors[nodes[f[0]]][1])[:room],
                             key=lambda f: f[0])
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
