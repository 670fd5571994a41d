"""The record's parts of a transient case: the release series at the requested times, the
final profile and the probe rows, and the event times t50, t90 and the time lag."""

from __future__ import annotations

import math

import numpy as np

from worker.engine import convergence
from worker.engine.model import Problem
from worker.engine.outcome import Outcome
from worker.engine.transient.exact_series import TransientSeriesSolution
from worker.engine.transient.method_of_lines import TransientFVSolution
from worker.engine.transient.scales import first_crossing, is_membrane
from worker.engine.transient.solve import numerical_time_lag

#: Points per layer of the reported profile (both layer ends included).
PROFILE_POINTS_PER_LAYER = 41

__all__ = ["PROFILE_POINTS_PER_LAYER", "add_events", "add_profile_and_probes", "add_series",
           "profile_positions"]


def add_series(outcome: Outcome, primary: dict[str, np.ndarray], requested: np.ndarray,
               index: np.ndarray, initial_load: float, factor: float, unit: str) -> None:
    """Released (each face), remaining and consumed amounts at the requested times, and the
    release fraction (or, for an initially empty body, the uptake); ``primary`` holds the
    per-measure amounts at the internal times, ``index`` picks the requested ones."""
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
    if initial_load > 0.0:
        fraction = (primary["released_inner"][index] + primary["released_outer"][index]) / \
            initial_load
        series["release_fraction"] = {"values": fraction.tolist(), "unit": "1"}
        outcome.quantities["release_fraction_final"] = {"value": float(fraction[-1]),
                                                        "unit": "1"}
    else:
        # No initial load: a fraction of it is undefined (null, kept so the series has the
        # documented shape); the amount taken up is reported instead.
        series["release_fraction"] = {"values": [None] * len(index), "unit": "1"}
        uptake = remaining - factor * initial_load
        series["uptake"] = {"values": uptake.tolist(), "unit": unit}


def profile_positions(problem: Problem) -> list[tuple[int, np.ndarray]]:
    """(layer, positions) of the reported profile: evenly spaced, both layer ends included."""
    edges = problem.edges
    return [(j, np.linspace(edges[j], edges[j + 1], PROFILE_POINTS_PER_LAYER))
            for j in range(len(problem.layers))]


def add_profile_and_probes(outcome: Outcome, problem: Problem,
                           series: TransientSeriesSolution | None, fine: TransientFVSolution,
                           internal: np.ndarray, requested: np.ndarray, index: np.ndarray,
                           final_index: int, c_unit: str) -> None:
    """The profile at the final time and the probe rows at the requested times, from the
    series where it is used, else from the fine method-of-lines solution."""
    positions, values, layers = [], [], []
    if series is not None:
        for j, r in profile_positions(problem):
            c = series.concentration_at(r, [internal[final_index]])[0]
            positions += r.tolist()
            values += c.tolist()
            layers += [j] * r.size
    else:
        concentration_at, _ = fine.profile_at(final_index)
        for j, r in profile_positions(problem):
            positions += r.tolist()
            values += np.asarray(concentration_at(r, layer=j)).tolist()
            layers += [j] * r.size
    outcome.series["profile"] = {
        "position": positions, "concentration": values, "layer": layers,
        "time": float(internal[final_index]),
        "units": {"position": "m", "concentration": c_unit, "time": "s"},
    }
    if problem.probes:
        probes = np.asarray(problem.probes, dtype=float)
        if series is not None:
            rows = series.concentration_at(probes, requested)
        else:
            rows = np.array([np.atleast_1d(fine.profile_at(int(k))[0](probes)) for k in index])
        outcome.series["probes"] = {
            "position": probes.tolist(), "concentration": np.asarray(rows).tolist(),
            "time": [float(t) for t in requested],
            "units": {"position": "m", "concentration": c_unit, "time": "s"},
        }


def _fv_fraction(fine: TransientFVSolution, initial_load: float, problem: Problem):
    n = fine.mesh.n_cells
    measure = problem.measure_factor

    def fraction(t):
        y = fine.state_at(np.asarray(t, dtype=float))
        return measure * (y[n] + y[n + 1]) / initial_load

    return fraction


def add_events(outcome: Outcome, problem: Problem, series: TransientSeriesSolution | None,
               scan: np.ndarray | None, fvs: list[TransientFVSolution], initial_load: float,
               duration: float, use_series: bool) -> None:
    """t50/t90 by each route (the series, with its own load, where it exists; the method of
    lines, three-mesh extrapolated when the meshes converge monotonically) and the time lag.
    The record takes the series' value where the series is the primary method, else the
    extrapolated numerical one; ``diagnostics["events"]`` keeps both."""
    quantities = outcome.quantities
    fine = fvs[-1]
    if initial_load > 0.0:
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
                if study.convergence == "monotonic" and math.isfinite(study.extrapolated):
                    t_fv = float(study.extrapolated)
            t_series = None
            if series is not None and series.initial_load > 0.0:
                assert scan is not None, "series_on_scan gives a scan with every series"

                def fraction_series(t, series=series):
                    _, out_a, out_b, _ = series.amounts_at(t)
                    return (out_a + out_b) / series.initial_load
                t_series = first_crossing(fraction_series, scan, level)
            value = t_series if use_series else t_fv
            quantities[name] = {"value": value, "unit": "s"}
            outcome.diagnostics["events"][name] = {"series": t_series, "numerical": t_fv,
                                                   "per_mesh": per_mesh}
            if value is None:
                outcome.warnings.append(
                    f"{name}: {int(level * 100)} % release is not reached within the duration "
                    f"({duration:.6g} s)")
    if is_membrane(problem):
        lag = numerical_time_lag(problem, fine, duration)
        exact = series.time_lag if series is not None else None
        quantities["time_lag"] = {"value": exact if exact is not None else lag, "unit": "s"}
        outcome.diagnostics["time_lag"] = {"series": exact, "numerical": lag}
