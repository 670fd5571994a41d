"""The record's parts of a transient case: the release series at the requested times, the
final profile and the probe rows, and the event times t50, t90 and the time lag."""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np

from worker.engine import convergence
from worker.engine.extremes import Extreme
from worker.engine.model import Problem
from worker.engine.outcome import Outcome
from worker.engine.transient.exact_series import TransientSeriesSolution
from worker.engine.transient.method_of_lines import TransientFVSolution
from worker.engine.transient.scales import first_crossing, is_membrane
from worker.engine.transient.solution import Route
from worker.engine.transient.solve import numerical_time_lag

#: Points per layer of the reported profile (both layer ends included).
PROFILE_POINTS_PER_LAYER = 41

__all__ = ["PROFILE_POINTS_PER_LAYER", "add_events", "add_minimum_series",
           "add_profile_and_probes", "add_series",
           "add_time_lag", "probe_layers", "probe_row", "profile_positions", "report_events"]


def add_series(outcome: Outcome, primary: dict[str, np.ndarray], requested: np.ndarray,
               index: np.ndarray, initial_load: float, factor: float, unit: str,
               releasing: bool = True) -> None:
    """Released (each face), remaining and consumed amounts at the requested times, and the
    release fraction of a releasing body (``releasing``: it holds an initial load and no face
    feeds it, :func:`worker.engine.transient.uptake.releases`) or else the uptake: the net
    amount taken in through the faces, -(released_inner + released_outer). ``primary`` holds
    the per-measure amounts at the internal times, ``index`` picks the requested ones."""
    released_inner = factor * primary["released_inner"][index]
    released_outer = factor * primary["released_outer"][index]
    remaining = factor * primary["remaining"][index]
    series = outcome.series
    series["time"] = {"values": [float(t) for t in requested], "unit": "s"}
    series["released_inner"] = {"values": released_inner.tolist(), "unit": unit}
    series["released_outer"] = {"values": released_outer.tolist(), "unit": unit}
    series["remaining"] = {"values": remaining.tolist(), "unit": unit}
    consumed = factor * primary["consumed"][index]
    if np.any(consumed != 0.0):
        series["consumed"] = {"values": consumed.tolist(), "unit": unit}
    if releasing and initial_load > 0.0:
        fraction = (primary["released_inner"][index] + primary["released_outer"][index]) / \
            initial_load
        series["release_fraction"] = {"values": fraction.tolist(), "unit": "1"}
        outcome.quantities["release_fraction_final"] = {"value": float(fraction[-1]),
                                                        "unit": "1"}
    else:
        uptake = -(released_inner + released_outer)
        series["uptake"] = {"values": uptake.tolist(), "unit": unit}


def profile_positions(problem: Problem) -> list[tuple[int, np.ndarray]]:
    """(layer, positions) of the reported profile: evenly spaced, both layer ends included."""
    edges = problem.edges
    return [(j, np.linspace(edges[j], edges[j + 1], PROFILE_POINTS_PER_LAYER))
            for j in range(len(problem.layers))]


def probe_layers(problem: Problem) -> list[int]:
    """The layer of each probe (a probe on an interface belongs to the inner layer)."""
    edges = problem.edges
    return [int(np.clip(np.searchsorted(edges, p, side="left") - 1, 0, len(problem.layers) - 1))
            for p in problem.probes]


def probe_row(profile: Callable[[np.ndarray, int, int], np.ndarray], problem: Problem,
              k: int) -> np.ndarray:
    """The probe concentrations of a route's ``profile(r, k, layer)`` at internal time k,
    one evaluation per layer that holds probes."""
    probes = np.asarray(problem.probes, dtype=float)
    layers = np.asarray(probe_layers(problem))
    row = np.empty(probes.size)
    for j in np.unique(layers):
        chosen = layers == j
        row[chosen] = profile(probes[chosen], k, int(j))
    return row


def add_profile_and_probes(outcome: Outcome, problem: Problem,
                           profile: Callable[[np.ndarray, int, int], np.ndarray],
                           internal: np.ndarray, requested: np.ndarray, index: np.ndarray,
                           final_index: int, c_unit: str) -> None:
    """The profile at the final time and the probe rows at the requested times, from the
    primary route's ``profile(r, k, layer)`` (k: index of the internal time)."""
    positions, values, layers = [], [], []
    for j, r in profile_positions(problem):
        positions += r.tolist()
        values += np.asarray(profile(r, final_index, j), dtype=float).tolist()
        layers += [j] * r.size
    outcome.series["profile"] = {
        "position": positions, "concentration": values, "layer": layers,
        "time": float(internal[final_index]),
        "units": {"position": "m", "concentration": c_unit, "time": "s"},
    }
    if problem.probes:
        rows = np.array([probe_row(profile, problem, int(k)) for k in index])
        outcome.series["probes"] = {
            "position": list(problem.probes), "concentration": rows.tolist(),
            "time": [float(t) for t in requested],
            "units": {"position": "m", "concentration": c_unit, "time": "s"},
        }


def add_minimum_series(outcome: Outcome, problem: Problem, minima: list[list[Extreme]],
                       uncertainty: np.ndarray, c_unit: str) -> None:
    """``series.concentration_min`` (the body's true minimum at each requested time, with its
    position and layer) and ``series.concentration_min_layers`` (one row per requested time,
    one value per layer), each with its numerical uncertainty (None where no second route
    could be compared); ``minima[t][j]`` is the primary route's minimum of layer j at time t."""
    def finite(value: float) -> float | None:
        return float(value) if math.isfinite(value) else None

    lowest = [min(row, key=lambda e: e.value) for row in minima]
    outcome.series["concentration_min"] = {
        "values": [e.value for e in lowest], "unit": c_unit,
        "position": [e.position for e in lowest], "layer": [e.layer for e in lowest],
        "uncertainty": [finite(uncertainty[t, e.layer]) for t, e in enumerate(lowest)]}
    outcome.series["concentration_min_layers"] = {
        "values": [[e.value for e in row] for row in minima], "unit": c_unit,
        "layers": [layer.name for layer in problem.layers],
        "uncertainty": [[finite(u) for u in row] for row in uncertainty]}


def _fv_fraction(fine: TransientFVSolution, initial_load: float, problem: Problem):
    n = fine.mesh.n_cells
    measure = problem.measure_factor

    def fraction(t):
        y = fine.state_at(np.asarray(t, dtype=float))
        return measure * (y[n] + y[n + 1]) / initial_load

    return fraction


def add_events(outcome: Outcome, problem: Problem, series: TransientSeriesSolution | None,
               scan: np.ndarray | None, fvs: list[TransientFVSolution], duration: float) -> None:
    """t50/t90 of the series (each its own load; on its scan) and of the method of lines
    (three-mesh extrapolation where the meshes converge monotonically, else the fine mesh) into
    ``diagnostics["events"]`` (name -> {"series", "numerical", "per_mesh"}); nothing for a body
    the method of lines finds empty."""
    fine = fvs[-1]
    if fine.initial_load <= 0.0:
        return
    outcome.diagnostics["events"] = {}
    cells = [sum(f.diagnostics["cells_per_layer"]) for f in reversed(fvs)]
    for name, level in (("t50", 0.5), ("t90", 0.9)):
        per_mesh = []
        for sol in reversed(fvs):  # fine, medium, coarse
            assert sol.step_times is not None, "a successful integration has its steps"
            grid = np.union1d(sol.step_times, [duration])
            per_mesh.append(first_crossing(_fv_fraction(sol, sol.initial_load, problem),
                                           grid[grid <= duration], level))
        t_fv = per_mesh[0]
        reached = [t for t in per_mesh if t is not None]
        if len(reached) == len(per_mesh):
            study = convergence.grid_study(reached, cells)
            t_fv = float(study.best_estimate)
        t_series = None
        if series is not None and series.initial_load > 0.0:
            assert scan is not None, "series_on_scan gives a scan with every series"

            def fraction_series(t, series=series):
                _, out_a, out_b, _ = series.amounts_at(t)
                return (out_a + out_b) / series.initial_load
            t_series = first_crossing(fraction_series, scan, level)
        outcome.diagnostics["events"][name] = {"series": t_series, "numerical": t_fv,
                                               "per_mesh": per_mesh}


def report_events(outcome: Outcome, primary: Route, duration: float) -> None:
    """The record's t50/t90: the primary route's, for an initially loaded body."""
    if primary.initial_load <= 0.0:
        return
    for name, level in (("t50", 0.5), ("t90", 0.9)):
        value = primary.events.get(name)
        outcome.quantities[name] = {"value": value, "unit": "s"}
        if value is None:
            outcome.warnings.append(
                f"{name}: {int(level * 100)} % release is not reached within the duration "
                f"({duration:.6g} s)")


def add_time_lag(outcome: Outcome, problem: Problem, series: TransientSeriesSolution | None,
                 fine: TransientFVSolution, duration: float) -> None:
    """The membrane time lag: the series' exact value where it exists, else the method of
    lines' late-time intercept (both in ``diagnostics["time_lag"]``)."""
    if not is_membrane(problem):
        return
    lag = numerical_time_lag(problem, fine, duration)
    exact = series.time_lag if series is not None else None
    outcome.quantities["time_lag"] = {"value": exact if exact is not None else lag, "unit": "s"}
    outcome.diagnostics["time_lag"] = {"series": exact, "numerical": lag}
