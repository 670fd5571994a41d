"""The checks of a transient case (see :mod:`worker.engine.transient` for what each compares);
each is aggregated over the requested times with the worst time named in its detail."""

from __future__ import annotations

import math

import numpy as np

from worker.engine import convergence
from worker.engine.limits import check_limit
from worker.engine.model import Problem
from worker.engine.outcome import Check, Outcome
from worker.engine.transient import method_of_lines, solve
from worker.engine.transient.exact_series import TransientSeriesSolution
from worker.engine.transient.method_of_lines import TransientFVSolution
from worker.engine.transient.scales import (
    CROSS_CHECK_FLOOR,
    capacity_resistance_time,
    relative_errors,
    worst,
)

#: Factor by which the integrator tolerance is tightened for ``convergence.time``.
TIME_TIGHTENING = 10.0

__all__ = [
    "TIME_TIGHTENING",
    "mass_balance_check",
    "non_negativity_check",
    "series_cross_checks",
    "space_check",
    "steady_limit_check",
    "time_check",
]


def _add(outcome: Outcome, name: str, value: float, limit: float, detail: str) -> None:
    passed = bool(value <= limit) if value is not None and math.isfinite(value) else False
    outcome.checks.append(Check(name, value, limit, passed, detail))


def series_cross_checks(outcome: Outcome, problem: Problem, series: TransientSeriesSolution,
                        at: np.ndarray, numerical: dict[str, np.ndarray], internal: np.ndarray,
                        fine: TransientFVSolution, initial_load: float, amount_scale: float,
                        c_scale: float) -> None:
    """Release (or the amounts of an initially empty body), face fluxes, probes, t50, t90 and
    time lag: exact series against the grid-extrapolated method of lines."""
    positive = internal > 0.0
    usable = positive & series.release_converged[at]
    times = internal
    if initial_load > 0.0:
        a = (series.released_inner[at] + series.released_outer[at]) / initial_load
        b = (numerical["released_inner"] + numerical["released_outer"]) / initial_load
        errors = np.where(usable, relative_errors(a, b, 1.0), np.nan)
        name = "cross_check.release_fraction"
    else:
        errors_each = [
            relative_errors(series.released_outer[at], numerical["released_outer"], amount_scale),
            relative_errors(series.released_inner[at], numerical["released_inner"], amount_scale),
            relative_errors(series.remaining[at], numerical["remaining"], amount_scale),
        ]
        errors = np.where(usable, np.max(errors_each, axis=0), np.nan)
        name = "cross_check.released"
    value, at_worst = worst(errors, times)
    _add(outcome, name, value, check_limit(problem, name),
         f"exact series vs method of lines (grid-extrapolated) at {int(np.sum(usable))} times; "
         f"worst at t = {at_worst} s; error relative to the value, absolute below "
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
        a = weight * getattr(series, f"flux_{side}")[at]
        b = weight * numerical[f"flux_{side}"]
        errors = np.where(flux_usable, relative_errors(a, b, flux_scale), np.nan)
        value, at_worst = worst(errors, times)
        name = f"cross_check.flux_{side}"
        _add(outcome, name, value, check_limit(problem, name),
             f"face flux, exact series vs method of lines (grid-extrapolated); worst at t = "
             f"{at_worst} s; absolute below {CROSS_CHECK_FLOOR:g} of the largest face rate")

    if problem.probes:
        probes = np.asarray(problem.probes, dtype=float)
        exact_rows = series.concentration_at(probes, internal)
        fv_rows = np.array([np.atleast_1d(fine.profile_at(k)[0](probes))
                            for k in range(internal.size)])
        errors = np.max(relative_errors(fv_rows, exact_rows, c_scale), axis=1)
        errors = np.where(flux_usable | (internal == 0.0), errors, np.nan)
        value, at_worst = worst(errors, times)
        _add(outcome, "cross_check.probes", value, check_limit(problem, "cross_check.probes"),
             f"probe concentrations, exact series vs method of lines (fine mesh, linear "
             f"between cell centres); worst at t = {at_worst} s")

    events = outcome.diagnostics.get("events", {})
    for name in ("t50", "t90"):
        found = events.get(name)
        if found and found["series"] is not None and found["numerical"] is not None:
            value = abs(found["numerical"] - found["series"]) / found["series"]
            check_name = f"cross_check.{name}"
            _add(outcome, check_name, value, check_limit(problem, check_name),
                 f"{name}: series {found['series']:.9g} s, method of lines (three-mesh "
                 f"extrapolation) {found['numerical']:.9g} s")
    lag = outcome.diagnostics.get("time_lag")
    if lag and lag["series"] is not None and lag["numerical"] is not None:
        value = abs(lag["numerical"] - lag["series"]) / abs(lag["series"])
        _add(outcome, "cross_check.time_lag", value, check_limit(problem, "cross_check.time_lag"),
             f"time lag: series {lag['series']:.9g} s, method of lines late-time intercept "
             f"{lag['numerical']:.9g} s (Daynes 1920, Barrer 1939: L^2/(6D) for one layer)")


def mass_balance_check(outcome: Outcome, problem: Problem, fine: TransientFVSolution,
                       times: np.ndarray) -> None:
    """initial = remaining + released + consumed on the fine mesh, relative to the larger of
    the initial load and the throughput."""
    residual = fine.initial_load - fine.remaining - fine.released_inner - fine.released_outer \
        - fine.consumed
    scale = max(abs(fine.initial_load), float(np.max(
        np.abs(fine.released_inner) + np.abs(fine.released_outer) + np.abs(fine.consumed))))
    errors = np.abs(residual) / (scale if scale > 0 else 1.0)
    value, at_worst = worst(errors, times)
    _add(outcome, "mass_balance", value, check_limit(problem, "mass_balance"),
         f"initial load = remaining + released (both faces) + consumed, method of lines on the "
         f"fine mesh, relative to the larger of load and throughput; worst at t = {at_worst} s")


def space_check(outcome: Outcome, problem: Problem, fvs: list[TransientFVSolution],
                times: np.ndarray, final_index: int, amount_scale: float) -> None:
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
    value, at_worst = worst(np.where(positive, gcis, np.nan), times)
    if np.any(failed) or at_worst is None:
        bad = int(np.flatnonzero(failed)[0]) if np.any(failed) else final_index
        outcome.checks.append(Check(
            "convergence.space", None, limit, False,
            f"grid study gave no error band at t = {times[bad]:.6g} s: {studies[bad].message}"))
        return
    study = studies[int(np.searchsorted(times, at_worst))]
    _add(outcome, "convergence.space", value, limit,
         f"GCI_fine of the {quantity} on meshes of {cells} cells, worst at t = {at_worst:.6g} s "
         f"({study.convergence}, observed order {study.apparent_order:.3g}, extrapolated "
         f"{study.extrapolated:.9g}), relative to the amount scale (Celik et al. 2008)")


def time_check(outcome: Outcome, problem: Problem, coarse: TransientFVSolution,
               times: np.ndarray, duration: float, amount_scale: float) -> None:
    """Change of the amounts under a ``TIME_TIGHTENING`` times tighter integrator tolerance
    (coarse mesh), relative to the amount scale."""
    tight = method_of_lines.solve_transient_fv(
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
    value, at_worst = worst(changes, times)
    _add(outcome, "convergence.time", value, limit,
         f"largest change of the amounts when the BDF tolerance is tightened from "
         f"{coarse.rtol:g} to {tight.rtol:g} (coarse mesh), relative to the amount scale; "
         f"worst at t = {at_worst} s")


def steady_limit_check(outcome: Outcome, problem: Problem, fine: TransientFVSolution,
                       duration: float, c_scale: float, amount_scale: float) -> None:
    """Long-time state against the steady engine. Face rates are compared relative to the
    larger of the steady throughput and the transient's own rate scale (amount scale over the
    relaxation time), so a case whose steady state carries nothing is not judged by the
    relative change of a number that is zero."""
    tau = capacity_resistance_time(problem)
    limit = check_limit(problem, "steady_limit")
    if not math.isfinite(tau):
        outcome.warnings.append("steady_limit: no steady state (no concentration or "
                                "mass-transfer face and no first-order loss): not checked")
        return
    late = solve.late_state(problem, fine, duration)
    reference = solve.steady_reference(problem)
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
         f"state at t = {late.times[-1]:.6g} s ({solve.STEADY_HORIZON:g} relaxation times of "
         f"{tau:.4g} s past the duration) vs the steady engine ({reference.method}): face rates "
         f"{flux_error:.3g} of the throughput, cell concentrations {c_error:.3g} of the scale")


def non_negativity_check(outcome: Outcome, problem: Problem, fine: TransientFVSolution,
                         times: np.ndarray, c_scale: float) -> None:
    """The most negative cell concentration over the requested times (fine mesh)."""
    lowest = float(np.min(fine.cells))
    value = max(0.0, -lowest) / c_scale
    _add(outcome, "non_negativity", value, check_limit(problem, "non_negativity"),
         f"lowest cell concentration {lowest:.6g} over the requested times (fine mesh), "
         f"relative to the concentration scale {c_scale:.6g}")
