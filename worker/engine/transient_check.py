"""``run_transient``: the transient part of the check record.

A transient case is solved by the method of lines (``transient_fv``) on three meshes, always,
and by the exact eigenfunction series (``transient_exact``) where one exists (one layer, no or
first-order reaction, a concentration or mass-transfer face). The record gets the release
series at the requested times, t50/t90/time lag, the final profile and probe rows, and these
checks, each aggregated over the requested times with the worst time named in its detail:

* ``cross_check.release_fraction`` (``cross_check.released`` for an initially empty body),
  ``cross_check.flux_inner``/``flux_outer``, ``cross_check.probes``, ``cross_check.t50``,
  ``cross_check.t90``, ``cross_check.time_lag`` - series against the grid-extrapolated
  numerical values (Celik et al. 2008, eq. 4; the fine-mesh value where the three meshes do not
  converge monotonically). The error at each time is ``|a - b| / max(|b|, CROSS_CHECK_FLOOR *
  scale)``: relative where the value is large, absolute (a fraction of the load or throughput)
  where it is small, as the membrane series needs at small times;
* ``mass_balance``: initial = remaining + released + consumed, relative to the larger of the
  initial load and the throughput;
* ``convergence.space``: GCI_fine of the release at the final time (three meshes, ratio 2);
* ``convergence.time``: change of the amounts under a ``TIME_TIGHTENING`` times tighter
  integrator tolerance (on the coarse mesh), relative to the amount scale;
* ``steady_limit``: the state integrated ``STEADY_HORIZON`` capacity-resistance times past
  the duration against the steady engine (``exact_steady.solve_exact``, else
  ``fv_steady.solve_fv``);
* ``non_negativity``: the most negative cell concentration over the requested times.

Default limits are ``limits.TRANSIENT_LIMITS``; ``problem.tolerances`` overrides them by the check's
full name or by its family (``cross_check``, ``mass_balance``, ``gci`` for
``convergence.space``, ``convergence`` for ``convergence.time``, ``steady_limit``,
``non_negativity``).

These results support, and do not replace, design verification testing and qualified
review; local regulations and licensed practice govern.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field

import numpy as np
from scipy.optimize import brentq

from worker.engine import convergence, transient_exact, transient_fv
from worker.engine.fv_mesh import default_cells_per_layer
from worker.engine.limits import check_limit
from worker.engine.model import Problem, Regime
from worker.engine.outcome import Check, Outcome

#: Values below this fraction of their scale are compared absolutely (see module doc).
CROSS_CHECK_FLOOR = 1e-2
#: Cells per layer of the coarse mesh: the steady mesh rule divided by this (fine = steady mesh).
COARSE_DIVISOR = 4
#: Fewest cells per layer of the coarse mesh.
MIN_COARSE_CELLS = 10
#: Early-time resolution: a coarse cell is at most this fraction of the diffusion length
#: sqrt(D t) of its layer at the first positive requested time ...
EARLY_RESOLUTION = 0.35
#: ... up to this many coarse cells per layer (fine mesh: four times as many).
MAX_COARSE_CELLS = 250
#: Factor by which the integrator tolerance is tightened for ``convergence.time``.
TIME_TIGHTENING = 10.0
#: Capacity-resistance times integrated past the duration for ``steady_limit``.
STEADY_HORIZON = 40.0
#: Integrator tolerance of that continuation: only its end state is used, and the decaying
#: error of the path does not reach it.
CONTINUATION_RTOL = 1e-4
#: Points per layer of the reported profile (both layer ends included).
PROFILE_POINTS_PER_LAYER = 41
#: Scan points (log-spaced over the duration) used to bracket t50/t90 in the series.
EVENT_SCAN_POINTS = 400

__all__ = [
    "COARSE_DIVISOR",
    "CROSS_CHECK_FLOOR",
    "STEADY_HORIZON",
    "TIME_TIGHTENING",
    "TransientOutcome",
    "run_transient",
    "format_release_table",
]


@dataclass
class TransientOutcome:
    """What the orchestrator merges into the record for a transient case.

    ``quantities``: name -> {"value", "unit"} (t50, t90, time_lag, release_fraction_final);
    ``series``: DESIGN.md transient series (time, released_inner, released_outer,
    release_fraction or uptake, remaining, profile, probes); ``methods``: list of
    {role, name, reference}; ``checks``: list of ``outcome.Check``; ``warnings``: list of str;
    ``diagnostics``: solver facts (meshes, steps, terms) for the record's appendix.
    """

    quantities: dict = field(default_factory=dict)
    series: dict = field(default_factory=dict)
    methods: list = field(default_factory=list)
    checks: list[Check] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)
    diagnostics: dict = field(default_factory=dict)

    def as_outcome(self) -> Outcome:
        return Outcome(
            quantities=dict(self.quantities), series=dict(self.series),
            methods=list(self.methods), checks=list(self.checks), warnings=list(self.warnings),
        )

    def check(self, name: str) -> Check | None:
        """The check called ``name``, or None."""
        return next((c for c in self.checks if c.name == name), None)


# ---------------------------------------------------------------------------------------------
# limits, scales and small helpers
# ---------------------------------------------------------------------------------------------

def _size_factor(problem: Problem) -> tuple[float, str]:
    """Factor turning per-measure amounts into reported amounts, and the amount unit."""
    amount = problem.amount_unit
    if problem.geometry == "slab":
        return (problem.area, amount) if problem.area else (1.0, f"{amount}/m^2")
    if problem.geometry == "cylinder":
        return (problem.length, amount) if problem.length else (1.0, f"{amount}/m")
    return 1.0, amount


def _membrane(problem: Problem) -> bool:
    """Initially empty body, fixed source at the inner face, sink at the outer face."""
    inner, outer = problem.inner_boundary, problem.outer_boundary
    return (
        all(layer.initial == 0.0 for layer in problem.layers)
        and all(layer.reaction.kind == "none" for layer in problem.layers)
        and inner.kind == "concentration" and inner.value > 0.0
        and outer.kind == "concentration" and outer.value == 0.0
    )


def _capacity_resistance_time(problem: Problem) -> float:
    """Slowest relaxation time estimate, s: capacity sum(K L) times resistance sum(L/(K D)),
    plus film resistances K_face/h; for one layer it is L^2/D (above the slowest mode's
    4 L^2/(pi^2 D) of a sink-sealed layer)."""
    capacity = sum(ly.partition * ly.thickness for ly in problem.layers)
    resistance = sum(ly.thickness / (ly.partition * ly.diffusivity) for ly in problem.layers)
    for side, boundary in (("inner", problem.inner_boundary), ("outer", problem.outer_boundary)):
        if boundary.kind == "mass_transfer" and boundary.coefficient > 0.0:
            resistance += 1.0 / boundary.coefficient
    if all(b.kind in ("flux", "symmetry") or (b.kind == "mass_transfer" and b.coefficient <= 0)
           for b in (problem.inner_boundary, problem.outer_boundary)):
        resistance = math.inf
        rates = [ly.reaction.linear_rate_constant or 0.0 for ly in problem.layers]
        if any(rates):
            return 1.0 / min(r for r in rates if r > 0)
    return capacity * resistance


def _relative_errors(values, reference, scale: float) -> np.ndarray:
    values = np.asarray(values, dtype=float)
    reference = np.asarray(reference, dtype=float)
    floor = CROSS_CHECK_FLOOR * scale if scale > 0 else 1e-300
    return np.abs(values - reference) / np.maximum(np.abs(reference), floor)


def _worst(errors: np.ndarray, times: np.ndarray) -> tuple[float, float | None]:
    finite = np.isfinite(errors)
    if not np.any(finite):
        return math.nan, None
    index = int(np.nanargmax(np.where(finite, errors, -np.inf)))
    return float(errors[index]), float(times[index])


def _first_crossing(function, grid: np.ndarray, level: float) -> float | None:
    """First t on the grid interval where function(t) reaches level (refined by brentq)."""
    values = np.asarray(function(grid), dtype=float) - level
    above = np.nonzero(values >= 0.0)[0]
    if above.size == 0:
        return None
    k = int(above[0])
    if k == 0:
        return float(grid[0])
    return float(brentq(lambda t: float(np.asarray(function(np.array([t])))[0]) - level,
                        grid[k - 1], grid[k], xtol=1e-12 * grid[k], rtol=1e-12))


# ---------------------------------------------------------------------------------------------
# the solves
# ---------------------------------------------------------------------------------------------


def _mesh_sequence(problem: Problem, first_time: float | None) -> list[tuple[int, ...]]:
    """Coarse, medium and fine cells per layer (ratio 2). The coarse mesh is the steady mesh
    rule divided by ``COARSE_DIVISOR``, refined where needed so that the diffusion length at the
    first requested time spans several coarse cells (``EARLY_RESOLUTION``)."""
    base = default_cells_per_layer(problem)
    coarse = []
    for n, layer in zip(base, problem.layers, strict=True):
        cells = max(MIN_COARSE_CELLS, math.ceil(n / COARSE_DIVISOR))
        if first_time is not None and first_time > 0.0:
            length = math.sqrt(layer.diffusivity * first_time)
            early = math.ceil(layer.thickness / (EARLY_RESOLUTION * length))
            cells = max(cells, min(early, MAX_COARSE_CELLS))
        coarse.append(cells)
    coarse = tuple(coarse)
    return [coarse, tuple(2 * n for n in coarse), tuple(4 * n for n in coarse)]


def _fv_on_meshes(problem: Problem, times: np.ndarray, end: float):
    """Coarse, medium and fine solutions, integrated together (shared BDF steps)."""
    positive = times[times > 0.0]
    first = float(positive.min()) if positive.size else None
    return transient_fv.solve_transient_fv_meshes(problem, _mesh_sequence(problem, first), times,
                                                  end=end)


def _series_on_scan(problem: Problem, times: np.ndarray, end: float):
    """Series at the requested times plus a log-spaced scan (for t50/t90), or None."""
    if transient_exact.series_unsupported_reason(problem) is not None:
        return None, None
    positive = times[times > 0.0]
    low = min(positive.min() if positive.size else end, end) * 0.5
    scan = np.geomspace(max(low, end * 1e-7), end, EVENT_SCAN_POINTS)
    solution = transient_exact.solve_transient_exact(problem, np.union1d(times, scan))
    return solution, scan


def _pick(all_times: np.ndarray, wanted: np.ndarray) -> np.ndarray:
    return np.searchsorted(all_times, wanted)


# ---------------------------------------------------------------------------------------------
# run_transient
# ---------------------------------------------------------------------------------------------


def _validate(problem: Problem) -> tuple[np.ndarray, float]:
    regime = problem.regime
    if regime.kind != "transient":
        raise ValueError(f"regime.kind: expected 'transient', got {regime.kind!r}")
    times = np.asarray(regime.times, dtype=float)
    duration = regime.duration
    if times.size == 0:
        raise ValueError("regime.times: expected at least one time")
    if duration is None or not (duration > 0.0 and math.isfinite(duration)):
        raise ValueError(f"regime.duration: expected a positive finite time, got {duration!r}")
    if np.any(times < 0.0) or np.any(times > duration * (1 + 1e-12)):
        raise ValueError(f"regime.times: expected times within [0, duration = {duration} s]")
    return np.unique(times), float(duration)


def run_transient(problem: Problem) -> TransientOutcome:
    """Solve a transient case by every applicable method and check the results.

    Parameters
    ----------
    problem : Problem
        Normalised case with ``regime.kind == "transient"``, a duration and requested times.

    Returns
    -------
    TransientOutcome
        Quantities, series, methods, checks and warnings (see the class and module docs).
    """
    requested, duration = _validate(problem)
    outcome = TransientOutcome()
    factor, amount_unit = _size_factor(problem)
    c_unit = problem.concentration_unit
    internal = np.union1d(requested, [duration])

    fvs = _fv_on_meshes(problem, internal, duration)
    fine, medium, coarse = fvs[2], fvs[1], fvs[0]
    outcome.diagnostics["meshes"] = [f.diagnostics["cells_per_layer"] for f in fvs]
    outcome.diagnostics["fv_steps"] = [f.diagnostics["steps"] for f in fvs]
    if not all(f.success for f in fvs):
        failed = next(f for f in fvs if not f.success)
        outcome.checks.append(Check("solver.transient_fv", None, None, False,
                                    f"method of lines failed: {failed.message}"))
        outcome.warnings.append(f"numerical transient solve failed: {failed.message}")
        return outcome

    series, scan = _series_on_scan(problem, internal, duration)
    reason = transient_exact.series_unsupported_reason(problem)
    if series is not None:
        at = _pick(series.times, internal)
        if not np.all(series.release_converged[at]):
            outcome.warnings.append(
                "exact series not converged at some requested times (too early for the term "
                "budget); the numerical solution is reported")
        outcome.diagnostics["series_terms"] = series.terms
        outcome.diagnostics["series_notes"] = list(series.notes)
    else:
        at = None
        outcome.warnings.append(
            f"no exact series for this case ({reason}): checked by space and time refinement "
            "and by the steady limit")
    use_series = series is not None and bool(np.all(series.release_converged[at]))

    # values at the internal times from each method, per measure
    def fv_values(sol):
        return {"remaining": sol.remaining, "released_inner": sol.released_inner,
                "released_outer": sol.released_outer, "consumed": sol.consumed,
                "flux_inner": sol.flux_inner, "flux_outer": sol.flux_outer}

    numerical = _extrapolated(fvs, internal)
    if use_series:
        primary = {"remaining": series.remaining[at], "released_inner": series.released_inner[at],
                   "released_outer": series.released_outer[at], "consumed": series.consumed[at],
                   "flux_inner": series.flux_inner[at], "flux_outer": series.flux_outer[at]}
        initial_load = series.initial_load
        outcome.methods.append({"role": "primary", "name": series.method,
                                "reference": series.reference})
        outcome.methods.append({"role": "independent", "name": fine.method,
                                "reference": fine.reference + "; three meshes, Richardson "
                                "extrapolation (Celik et al., J. Fluids Eng. 130 (2008) 078001)"})
    else:
        primary = fv_values(fine)
        initial_load = fine.initial_load
        outcome.methods.append({"role": "primary", "name": fine.method,
                                "reference": fine.reference})
        outcome.methods.append({
            "role": "independent",
            "name": "three-mesh refinement study (GCI), tightened time tolerance, steady limit",
            "reference": "I.B. Celik et al., J. Fluids Eng. 130 (2008) 078001; P.J. Roache, "
                         "J. Fluids Eng. 116 (1994) 405",
        })

    requested_index = np.searchsorted(internal, requested)
    final_index = int(np.searchsorted(internal, duration))
    amount_scale = max(abs(initial_load), float(np.max(
        np.abs(primary["released_inner"]) + np.abs(primary["released_outer"])
        + np.abs(primary["consumed"]))))
    c_scale = transient_fv.concentration_scale(problem)

    _add_series(outcome, problem, primary, requested, requested_index, initial_load, factor,
                amount_unit)
    _add_profile_and_probes(outcome, problem, series if use_series else None, fine, internal,
                            requested, requested_index, final_index, c_unit)
    _add_events(outcome, problem, series if use_series else None, scan, fvs, initial_load,
                duration)

    if series is not None:
        _series_cross_checks(outcome, problem, series, at, numerical, internal, fine,
                             initial_load, amount_scale, c_scale)
    _mass_balance_check(outcome, problem, fine, internal)
    _space_check(outcome, problem, fvs, internal, final_index, initial_load, amount_scale)
    _time_check(outcome, problem, coarse, internal, duration, amount_scale)
    _steady_limit_check(outcome, problem, fine, duration, c_scale, amount_scale)
    _non_negativity_check(outcome, problem, fine, internal, c_scale)
    if not any(c.name.startswith("cross_check") for c in outcome.checks):
        outcome.warnings.append("no independent analytic solution: the numerical answer rests on "
                                "the refinement, balance and steady-limit checks")
    return outcome


def _extrapolated(fvs, times: np.ndarray) -> dict[str, np.ndarray]:
    """Per time, the Richardson-extrapolated value of each quantity (fine value where the three
    meshes do not converge monotonically)."""
    cells = [sum(f.diagnostics["cells_per_layer"]) for f in reversed(fvs)]  # fine first
    names = ("remaining", "released_inner", "released_outer", "consumed", "flux_inner",
             "flux_outer")
    out = {}
    for name in names:
        series = [getattr(f, name) for f in reversed(fvs)]  # fine, medium, coarse
        values = np.array(series[0], dtype=float)
        for k in range(times.size):
            triple = [float(s[k]) for s in series]
            if not all(math.isfinite(v) for v in triple):
                continue
            study = convergence.grid_study(triple, cells)
            if study.convergence == "monotonic" and math.isfinite(study.extrapolated):
                values[k] = study.extrapolated
        out[name] = values
    return out


# ---------------------------------------------------------------------------------------------
# record pieces
# ---------------------------------------------------------------------------------------------


def _add_series(outcome, problem, primary, requested, index, initial_load, factor, unit):
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


def _profile_positions(problem: Problem):
    edges = problem.edges
    return [(j, np.linspace(edges[j], edges[j + 1], PROFILE_POINTS_PER_LAYER))
            for j in range(len(problem.layers))]


def _add_profile_and_probes(outcome, problem, series, fine, internal, requested, index,
                            final_index, c_unit):
    positions, values, layers = [], [], []
    if series is not None:
        for j, r in _profile_positions(problem):
            c = series.concentration_at(r, [internal[final_index]])[0]
            positions += r.tolist()
            values += c.tolist()
            layers += [j] * r.size
    else:
        concentration_at, _ = fine.profile_at(final_index)
        for j, r in _profile_positions(problem):
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


def _fv_fraction(fine, initial_load, problem):
    n = fine.mesh.n_cells
    measure = problem.measure_factor

    def fraction(t):
        y = fine.state_at(np.asarray(t, dtype=float))
        return measure * (y[n] + y[n + 1]) / initial_load

    return fraction


def _add_events(outcome, problem, series, scan, fvs, initial_load, duration):
    """t50/t90 (series where it exists, else the method of lines; the numerical value is the
    three-mesh extrapolation when the meshes converge monotonically) and the time lag."""
    quantities = outcome.quantities
    fine = fvs[-1]
    if initial_load > 0.0:
        outcome.diagnostics["events"] = {}
        cells = [sum(f.diagnostics["cells_per_layer"]) for f in reversed(fvs)]
        for name, level in (("t50", 0.5), ("t90", 0.9)):
            per_mesh = []
            for sol in reversed(fvs):  # fine, medium, coarse
                grid = np.union1d(sol.step_times, [duration])
                per_mesh.append(_first_crossing(_fv_fraction(sol, sol.initial_load, problem),
                                                grid[grid <= duration], level))
            t_fv = per_mesh[0]
            if all(t is not None for t in per_mesh):
                study = convergence.grid_study(per_mesh, cells)
                if study.convergence == "monotonic" and math.isfinite(study.extrapolated):
                    t_fv = float(study.extrapolated)
            t_series = None
            if series is not None:
                def fraction_series(t):
                    _, out_a, out_b, _ = series.amounts_at(t)
                    return (out_a + out_b) / initial_load
                t_series = _first_crossing(fraction_series, scan, level)
            value = t_series if series is not None else per_mesh[0]
            quantities[name] = {"value": value, "unit": "s"}
            outcome.diagnostics["events"][name] = {"series": t_series, "numerical": t_fv,
                                                   "per_mesh": per_mesh}
            if value is None:
                outcome.warnings.append(
                    f"{name}: {int(level * 100)} % release is not reached within the duration "
                    f"({duration:.6g} s)")
    if _membrane(problem):
        lag = _numerical_time_lag(problem, fine, duration)
        exact = series.time_lag if series is not None else None
        quantities["time_lag"] = {"value": exact if exact is not None else lag, "unit": "s"}
        outcome.diagnostics["time_lag"] = {"series": exact, "numerical": lag}


def _late_state(problem: Problem, fine, duration: float):
    """FV state integrated STEADY_HORIZON relaxation times past the duration (cached)."""
    cached = getattr(fine, "_late", None)
    if cached is not None:
        return cached
    horizon = STEADY_HORIZON * _capacity_resistance_time(problem)
    end = duration + horizon
    y_end = fine.diagnostics["end_state"]
    late = transient_fv.solve_transient_fv(
        problem, [duration + 0.5 * horizon, end], fine.diagnostics["cells_per_layer"], end=end,
        initial_state=y_end, start=duration, rtol=CONTINUATION_RTOL)
    fine._late = late
    return late


def _numerical_time_lag(problem: Problem, fine, duration: float) -> float | None:
    """Intercept t - Q(t)/J_ss of the late-time cumulative outer release (method of lines)."""
    late = _late_state(problem, fine, duration)
    if not late.success:
        return None
    measure = problem.measure_factor
    weight = problem.outer ** problem.exponent
    rate = measure * weight * late.flux_outer[-1]
    if rate <= 0.0:
        return None
    return float(late.times[-1] - late.released_outer[-1] / rate)


# ---------------------------------------------------------------------------------------------
# checks
# ---------------------------------------------------------------------------------------------


def _add(outcome: TransientOutcome, name: str, value: float, limit: float, detail: str):
    passed = bool(value <= limit) if value is not None and math.isfinite(value) else False
    outcome.checks.append(Check(name, value, limit, passed, detail))


def _series_cross_checks(outcome, problem, series, at, numerical, internal, fine,
                         initial_load, amount_scale, c_scale):
    limit = check_limit
    positive = internal > 0.0
    usable = positive & series.release_converged[at]
    times = internal
    if initial_load > 0.0:
        a = (series.released_inner[at] + series.released_outer[at]) / initial_load
        b = (numerical["released_inner"] + numerical["released_outer"]) / initial_load
        errors = np.where(usable, _relative_errors(a, b, 1.0), np.nan)
        name = "cross_check.release_fraction"
    else:
        errors_each = [
            _relative_errors(series.released_outer[at], numerical["released_outer"], amount_scale),
            _relative_errors(series.released_inner[at], numerical["released_inner"], amount_scale),
            _relative_errors(series.remaining[at], numerical["remaining"], amount_scale),
        ]
        errors = np.where(usable, np.max(errors_each, axis=0), np.nan)
        name = "cross_check.released"
    value, worst = _worst(errors, times)
    _add(outcome, name, value, limit(problem, name),
         f"exact series vs method of lines (grid-extrapolated) at {int(np.sum(usable))} times; "
         f"worst at t = {worst} s; error relative to the value, absolute below "
         f"{CROSS_CHECK_FLOOR:g} of the scale")

    flux_usable = positive & series.converged[at]
    weight_inner = 0.0 if problem.solid_centre else problem.inner ** problem.exponent
    weight_outer = problem.outer ** problem.exponent
    flux_scale = max(
        float(np.nanmax(np.abs(weight_inner * series.flux_inner[at][flux_usable]), initial=0.0)),
        float(np.nanmax(np.abs(weight_outer * series.flux_outer[at][flux_usable]), initial=0.0)),
        1e-300)
    for side, weight in (("inner", weight_inner), ("outer", weight_outer)):
        if weight == 0.0:
            continue
        a = weight * series.__getattribute__(f"flux_{side}")[at]
        b = weight * numerical[f"flux_{side}"]
        errors = np.where(flux_usable, _relative_errors(a, b, flux_scale), np.nan)
        value, worst = _worst(errors, times)
        name = f"cross_check.flux_{side}"
        _add(outcome, name, value, limit(problem, name),
             f"face flux, exact series vs method of lines (grid-extrapolated); worst at t = "
             f"{worst} s; absolute below {CROSS_CHECK_FLOOR:g} of the largest face rate")

    if problem.probes:
        probes = np.asarray(problem.probes, dtype=float)
        exact_rows = series.concentration_at(probes, internal)
        fv_rows = np.array([np.atleast_1d(fine.profile_at(k)[0](probes))
                            for k in range(internal.size)])
        errors = np.max(_relative_errors(fv_rows, exact_rows, c_scale), axis=1)
        errors = np.where(flux_usable | (internal == 0.0), errors, np.nan)
        value, worst = _worst(errors, times)
        _add(outcome, "cross_check.probes", value, limit(problem, "cross_check.probes"),
             f"probe concentrations, exact series vs method of lines (fine mesh, linear "
             f"between cell centres); worst at t = {worst} s")

    events = outcome.diagnostics.get("events", {})
    for name in ("t50", "t90"):
        found = events.get(name)
        if found and found["series"] is not None and found["numerical"] is not None:
            value = abs(found["numerical"] - found["series"]) / found["series"]
            check_name = f"cross_check.{name}"
            _add(outcome, check_name, value, limit(problem, check_name),
                 f"{name}: series {found['series']:.9g} s, method of lines (three-mesh "
                 f"extrapolation) {found['numerical']:.9g} s")
    lag = outcome.diagnostics.get("time_lag")
    if lag and lag["series"] is not None and lag["numerical"] is not None:
        value = abs(lag["numerical"] - lag["series"]) / abs(lag["series"])
        _add(outcome, "cross_check.time_lag", value, limit(problem, "cross_check.time_lag"),
             f"time lag: series {lag['series']:.9g} s, method of lines late-time intercept "
             f"{lag['numerical']:.9g} s (Daynes 1920, Barrer 1939: L^2/(6D) for one layer)")


def _mass_balance_check(outcome, problem, fine, times):
    residual = fine.initial_load - fine.remaining - fine.released_inner - fine.released_outer \
        - fine.consumed
    scale = max(abs(fine.initial_load), float(np.max(
        np.abs(fine.released_inner) + np.abs(fine.released_outer) + np.abs(fine.consumed))))
    errors = np.abs(residual) / (scale if scale > 0 else 1.0)
    value, worst = _worst(errors, times)
    _add(outcome, "mass_balance", value, check_limit(problem, "mass_balance"),
         f"initial load = remaining + released (both faces) + consumed, method of lines on the "
         f"fine mesh, relative to the larger of load and throughput; worst at t = {worst} s")


def _space_check(outcome, problem, fvs, times, final_index, initial_load, amount_scale):
    """GCI of the release at every requested time (the amount held, for a body whose faces pass
    nothing), worst time reported; the final time's study goes to the diagnostics."""
    cells = [sum(f.diagnostics["cells_per_layer"]) for f in reversed(fvs)]
    released = np.array([f.released_inner + f.released_outer for f in reversed(fvs)])
    quantity = "release"
    if np.max(np.abs(released)) <= 1e-9 * amount_scale:
        released = np.array([f.remaining for f in reversed(fvs)])
        quantity = "amount held"
    limit = check_limit(problem, "convergence.space")
    gcis = np.full(times.size, np.nan)
    studies = []
    for k in range(times.size):
        study = convergence.grid_study([float(v) for v in released[:, k]], cells)
        studies.append(study)
        if study.convergence == "converged_to_roundoff":
            gcis[k] = 0.0
        elif math.isfinite(study.gci_fine):
            gcis[k] = study.gci_fine * abs(released[0, k]) / amount_scale
    outcome.diagnostics["grid_study_final"] = studies[final_index].as_dict()
    positive = times > 0.0
    failed = positive & ~np.isfinite(gcis)
    value, worst = _worst(np.where(positive, gcis, np.nan), times)
    if np.any(failed) or worst is None:
        bad = int(np.flatnonzero(failed)[0]) if np.any(failed) else final_index
        outcome.checks.append(Check(
            "convergence.space", None, limit, False,
            f"grid study gave no error band at t = {times[bad]:.6g} s: {studies[bad].message}"))
        return
    study = studies[int(np.searchsorted(times, worst))]
    _add(outcome, "convergence.space", value, limit,
         f"GCI_fine of the {quantity} on meshes of {cells} cells, worst at t = {worst:.6g} s "
         f"({study.convergence}, observed order {study.apparent_order:.3g}, extrapolated "
         f"{study.extrapolated:.9g}), relative to the amount scale (Celik et al. 2008)")


def _time_check(outcome, problem, coarse, times, duration, amount_scale):
    tight = transient_fv.solve_transient_fv(
        problem, times, coarse.diagnostics["cells_per_layer"], end=duration,
        rtol=coarse.rtol / TIME_TIGHTENING)
    limit = check_limit(problem, "convergence.time")
    if not tight.success:
        outcome.checks.append(Check("convergence.time", None, limit, False,
                                    f"tightened integration failed: {tight.message}"))
        return
    changes = np.max([np.abs(getattr(tight, n) - getattr(coarse, n))
                      for n in ("remaining", "released_inner", "released_outer", "consumed")],
                     axis=0) / amount_scale
    value, worst = _worst(changes, times)
    _add(outcome, "convergence.time", value, limit,
         f"largest change of the amounts when the BDF tolerance is tightened from "
         f"{coarse.rtol:g} to {tight.rtol:g} (coarse mesh), relative to the amount scale; "
         f"worst at t = {worst} s")


def _steady_reference(problem: Problem):
    steady_problem = dataclasses.replace(problem, regime=Regime("steady"))
    try:
        from worker.engine.exact_steady import solve_exact

        reference = solve_exact(steady_problem)
    except (ValueError, ArithmeticError):
        reference = None
    if reference is None or not reference.success:
        from worker.engine.fv_steady import solve_fv

        reference = solve_fv(steady_problem)
    return reference


def _steady_limit_check(outcome, problem, fine, duration, c_scale, amount_scale):
    """Long-time state against the steady engine. Face rates are compared relative to the
    larger of the steady throughput and the transient's own rate scale (amount scale over the
    relaxation time), so a case whose steady state carries nothing is not judged by the
    relative change of a number that is zero."""
    tau = _capacity_resistance_time(problem)
    limit = check_limit(problem, "steady_limit")
    if not math.isfinite(tau):
        outcome.warnings.append("steady_limit: no steady state (no concentration or "
                                "mass-transfer face and no first-order loss): not checked")
        return
    late = _late_state(problem, fine, duration)
    reference = _steady_reference(problem)
    if not late.success or reference is None or not reference.success:
        message = late.message if not late.success else getattr(reference, "message", "none")
        outcome.checks.append(Check("steady_limit", None, limit, False,
                                    f"could not compare with the steady state: {message}"))
        return
    weight_inner = 0.0 if problem.solid_centre else problem.inner ** problem.exponent
    weight_outer = problem.outer ** problem.exponent
    rates = [weight_inner * reference.flux_inner, weight_outer * reference.flux_outer,
             reference.consumption]
    throughput = max(max(abs(r) for r in rates),
                     amount_scale / problem.measure_factor / tau)
    flux_error = max(abs(weight_inner * (late.flux_inner[-1] - reference.flux_inner)),
                     abs(weight_outer * (late.flux_outer[-1] - reference.flux_outer))) / throughput
    centres = late.mesh.centres
    layers = late.mesh.layer_index
    steady_cells = np.empty_like(centres)
    for j in np.unique(layers):
        chosen = layers == j
        steady_cells[chosen] = reference.concentration_at(centres[chosen], layer=int(j))
    c_error = float(np.max(np.abs(late.cells[-1] - steady_cells))) / c_scale
    value = max(flux_error, c_error)
    _add(outcome, "steady_limit", value, limit,
         f"state at t = {late.times[-1]:.6g} s ({STEADY_HORIZON:g} relaxation times of "
         f"{tau:.4g} s past the duration) vs the steady engine ({reference.method}): face rates "
         f"{flux_error:.3g} of the throughput, cell concentrations {c_error:.3g} of the scale")


def _non_negativity_check(outcome, problem, fine, times, c_scale):
    lowest = float(np.min(fine.cells))
    value = max(0.0, -lowest) / c_scale
    _add(outcome, "non_negativity", value, check_limit(problem, "non_negativity"),
         f"lowest cell concentration {lowest:.6g} over the requested times (fine mesh), "
         f"relative to the concentration scale {c_scale:.6g}")


# ---------------------------------------------------------------------------------------------
# text report
# ---------------------------------------------------------------------------------------------


def format_release_table(outcome) -> str:
    """Plain-text release table for the CLI report.

    Columns: time, released out of the inner face, out of the outer face, release fraction
    (or uptake for an initially empty body), remaining; then the t50, t90 and time-lag lines.
    Accepts a ``TransientOutcome`` or a record/``Outcome`` with the same ``series`` and
    ``quantities``.
    """
    series = outcome["series"] if isinstance(outcome, dict) else outcome.series
    quantities = outcome["quantities"] if isinstance(outcome, dict) else outcome.quantities
    if "time" not in series:
        return ""
    times = series["time"]["values"]
    unit = series["released_outer"]["unit"]
    fraction_key = "uptake" if "uptake" in series else "release_fraction"
    fraction_unit = "-" if fraction_key == "release_fraction" else unit
    header = (f"{'time [s]':>14} {'out inner [' + unit + ']':>20} "
              f"{'out outer [' + unit + ']':>20} {fraction_key + ' [' + fraction_unit + ']':>22} "
              f"{'remaining [' + unit + ']':>20}")
    lines = ["Release", header, "-" * len(header)]
    for k, t in enumerate(times):
        lines.append(
            f"{t:>14.6g} {series['released_inner']['values'][k]:>20.6g} "
            f"{series['released_outer']['values'][k]:>20.6g} "
            f"{series[fraction_key]['values'][k]:>22.6g} "
            f"{series['remaining']['values'][k]:>20.6g}")
    for name, label in (("t50", "t50 (50 % released)"), ("t90", "t90 (90 % released)"),
                        ("time_lag", "time lag")):
        if name in quantities:
            value = quantities[name]["value"]
            text = "not reached within the duration" if value is None else f"{value:.6g} s"
            lines.append(f"{label}: {text}")
    return "\n".join(lines)
