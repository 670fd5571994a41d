"""Dispersed (undissolved) solute in the method of lines: the dissolution front of each loaded
layer and the time its undissolved solute is gone, read from the finite-volume contents.

The method of lines integrates the total content u per cell (dissolved plus undissolved); the
dissolved part is min(u, S) (``method_of_lines._Rhs``). A layer loaded with u0 > S holds the
undissolved excess d = max(u - S, 0) per cell. Its front is placed by the undissolved amount
itself: the part of the layer on the far side of a front that has moved holds the volume
sum((1 - d_i / d0) V_i) of fully dissolved matrix (d0 = u0 - S), so the front sits where that
much r^n-weighted volume has been measured from the layer edge it left. Within the one partly
dissolved cell of a sharp front this is the linear interpolation of the cell's undissolved
fraction; over a smeared front it keeps the amount exact. Where both edges have moved the
layer is split at its most loaded cell.

``time_depleted`` of a layer is when its undissolved amount reaches zero: found on the
accepted implicit steps (not only the requested times), within the step where it vanishes by
continuing the rate of the step before (the amount falls linearly in time at the end of a
planar front's travel, Higuchi 1961).

Convergence: the finite volumes on the total content converge at first order in the cell size
at the front for the front position and the depletion time (the partly dissolved cell moves
in jumps of one cell, each smoothed by the dissolution within it); the released amount, an
integral, converges at about first to second order. The observed orders of each case are
reported (three meshes, ratio 2).

References
----------
T. Higuchi, J. Pharm. Sci. 50 (1961) 874 (the receding front of a dispersed matrix).
D.R. Paul, S.K. McSpadden, J. Membr. Sci. 1 (1976) 33 (the exact similarity solution).
"""

from __future__ import annotations

import math

import numpy as np

from worker.engine import convergence
from worker.engine.fv_mesh import Mesh
from worker.engine.model import Problem
from worker.engine.outcome import Outcome

#: An edge cell holding less than this fraction of the initial excess has let its front go.
MOVED = 1e-9

__all__ = ["add_dispersed", "depletion_times", "front_positions", "loaded_layers"]


def loaded_layers(problem: Problem) -> list[int]:
    """Indices of the layers that hold undissolved solute at t = 0."""
    return [j for j, layer in enumerate(problem.layers) if layer.is_loaded_above_solubility]


def _position(mesh: Mesh, edge: float, volume: float, outward: bool) -> float:
    """The position at r^n-weighted ``volume`` from ``edge`` (outward or inward)."""
    n = mesh.exponent
    power = edge ** (n + 1) + (n + 1) * volume * (1.0 if outward else -1.0)
    return float(max(power, 0.0) ** (1.0 / (n + 1)))


def _fronts_of(mesh: Mesh, problem: Problem, layer: int, contents: np.ndarray
               ) -> tuple[float | None, float | None]:
    """(front that left the outer edge, front that left the inner edge) of one layer at one
    time; None where that edge has not moved; (None, None) when nothing is left."""
    cells = mesh.layer_cells(layer)
    data = problem.layers[layer]
    assert data.solubility is not None
    excess0 = data.initial - data.solubility
    fraction = np.clip((contents[cells] - data.solubility) / excess0, 0.0, 1.0)
    volumes = mesh.volumes[cells]
    if not np.any(fraction > 0.0):
        return None, None
    inner_moved = fraction[0] < 1.0 - MOVED
    outer_moved = fraction[-1] < 1.0 - MOVED
    split = int(np.argmax(fraction)) if inner_moved and outer_moved else (
        -1 if outer_moved else fraction.size)
    inner_edge, outer_edge = mesh.edges[layer], mesh.edges[layer + 1]
    outer = inner = None
    if outer_moved:
        dissolved = float(np.sum((1.0 - fraction[split + 1:]) * volumes[split + 1:]))
        outer = _position(mesh, outer_edge, dissolved, outward=False)
    if inner_moved:
        dissolved = float(np.sum((1.0 - fraction[:max(split, 0)]) * volumes[:max(split, 0)]))
        inner = _position(mesh, inner_edge, dissolved, outward=True)
    return outer, inner


def front_positions(mesh: Mesh, problem: Problem, contents: np.ndarray
                    ) -> tuple[np.ndarray, np.ndarray]:
    """Outer and inner fronts, m, per time (rows of ``contents``) and loaded layer (columns);
    NaN where the edge has not moved or the layer is depleted."""
    layers = loaded_layers(problem)
    outer = np.full((contents.shape[0], len(layers)), np.nan)
    inner = np.full_like(outer, np.nan)
    for k in range(contents.shape[0]):
        for i, j in enumerate(layers):
            o, n = _fronts_of(mesh, problem, j, contents[k])
            outer[k, i] = np.nan if o is None else o
            inner[k, i] = np.nan if n is None else n
    return outer, inner


def depletion_times(mesh: Mesh, problem: Problem, ts: np.ndarray, contents: np.ndarray
                    ) -> list[float | None]:
    """Per loaded layer, the time its undissolved amount reaches zero, s, from the step
    history (``contents``: cells by steps); None when some is left at the last step."""
    found: list[float | None] = []
    for j in loaded_layers(problem):
        cells = mesh.layer_cells(j)
        solubility = problem.layers[j].solubility
        assert solubility is not None
        amount = np.maximum(contents[cells] - solubility, 0.0).T @ mesh.volumes[cells]
        gone = np.flatnonzero(amount <= 0.0)
        if gone.size == 0:
            found.append(None)
            continue
        k = int(gone[0])
        if k == 0:
            found.append(float(ts[0]))
            continue
        t_found = float(ts[k])
        if k >= 2 and amount[k - 2] > amount[k - 1]:
            rate = (amount[k - 2] - amount[k - 1]) / (ts[k - 1] - ts[k - 2])
            t_found = min(float(ts[k - 1] + amount[k - 1] / rate), float(ts[k]))
        found.append(t_found)
    return found


def _reported_fronts(outer: np.ndarray, inner: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The reported front (the outer one where both edges moved, else the one that moved) and
    the inner one where both moved."""
    both = np.isfinite(outer) & np.isfinite(inner)
    return np.where(np.isfinite(outer), outer, inner), np.where(both, inner, np.nan)


def _table(values: np.ndarray) -> list[list[float | None]]:
    return [[None if not math.isfinite(v) else float(v) for v in row] for row in values]


def add_dispersed(outcome: Outcome, problem: Problem, fvs: list, requested_index: np.ndarray,
                  duration: float) -> None:
    """``series.front_position`` (and ``front_position_inner`` where an inner edge moved),
    ``quantities.time_depleted`` and ``time_depleted_layers`` of a case loaded above
    solubility, from the three meshes (fine values, uncertainty |fine - medium|; observed
    orders in the diagnostics). The method of lines' front account compared with the Galerkin
    route's (``routes.fv_fronts``: ``cross_check.front_position``, ``time_depleted``) reads
    the same meshes the same way and holds their best estimate with the band |best - fine| +
    |fine - medium|, so these fine values lie inside its band. The reported front is the
    account's outer edge where it moved, else its inner one."""
    layers = loaded_layers(problem)
    if not layers or any(f.contents is None or f.history is None for f in fvs):
        return
    names = [problem.layers[j].name for j in layers]
    fronts = [_reported_fronts(*front_positions(f.mesh, problem, f.contents[requested_index]))
              for f in fvs]
    fine_outer, fine_inner = fronts[-1]
    band_outer = np.abs(fine_outer - fronts[-2][0])
    band_inner = np.abs(fine_inner - fronts[-2][1])
    outcome.series["front_position"] = {
        "values": _table(fine_outer), "unit": "m", "layers": names,
        "uncertainty": _table(band_outer)}
    if np.any(np.isfinite(fine_inner)):
        outcome.series["front_position_inner"] = {
            "values": _table(fine_inner), "unit": "m", "layers": names,
            "uncertainty": _table(band_inner)}
    per_mesh = [depletion_times(f.mesh, problem, f.history.ts, f.history.contents)
                for f in fvs]
    cells = [sum(f.diagnostics["cells_per_layer"]) for f in reversed(fvs)]
    layer_values: list[float | None] = []
    studies = []
    for i in range(len(layers)):
        triple = [per_mesh[m][i] for m in (2, 1, 0)]  # fine, medium, coarse
        value = triple[0]
        if value is not None and all(t is not None for t in triple):
            study = convergence.grid_study([float(t) for t in triple if t is not None], cells)
            studies.append({"layer": names[i], "fine": triple[0], "medium": triple[1],
                            "coarse": triple[2], "observed_order": study.apparent_order,
                            "convergence": study.convergence})
        layer_values.append(None if value is None or value > duration else float(value))
    outcome.quantities["time_depleted_layers"] = {"value": layer_values, "unit": "s",
                                                  "layers": names}
    outcome.diagnostics["time_depleted_study"] = studies
    if all(v is not None for v in layer_values):
        last = max(v for v in layer_values if v is not None)
        medium = [per_mesh[1][i] for i in range(len(layers))]
        entry: dict = {"value": last, "unit": "s"}
        if all(v is not None for v in medium):
            entry["uncertainty"] = abs(last - max(v for v in medium if v is not None))
        outcome.quantities["time_depleted"] = entry
    else:
        outcome.warnings.append(
            "time_depleted: undissolved solute remains at the end of the duration "
            f"({duration:.6g} s) in layer(s) "
            + ", ".join(n for n, v in zip(names, layer_values, strict=True) if v is None))
