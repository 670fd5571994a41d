"""The checks of a transient case (see :mod:`worker.engine.transient` for what each compares);
each is aggregated over the requested times with the worst time named in its detail."""

from __future__ import annotations

import math

import numpy as np

from worker.engine import convergence
from worker.engine.boundaries.compartment import compartment_sides
from worker.engine.limits import check_limit
from worker.engine.model import Problem
from worker.engine.outcome import Check, Outcome
from worker.engine.transient import method_of_lines, solve
from worker.engine.transient.method_of_lines import TransientFVSolution
from worker.engine.transient.refinement import FALLBACK_FACTOR, fallback_band
from worker.engine.transient.scales import (
    capacity_resistance_time,
    worst,
)

#: Factor by which the integrator tolerance is tightened for ``convergence.time``.
TIME_TIGHTENING = 10.0

__all__ = [
    "TIME_TIGHTENING",
    "mass_balance_check",
    "space_check",
    "steady_limit_check",
    "time_check",
    "time_lag_check",
]


def _add(outcome: Outcome, name: str, value: float, limit: float, detail: str) -> None:
    passed = bool(value <= limit) if value is not None and math.isfinite(value) else False
    outcome.checks.append(Check(name, value, limit, passed, detail))


def time_lag_check(outcome: Outcome, problem: Problem) -> None:
    """The membrane time lag: the series' exact value against the method of lines' late-time
    intercept (``diagnostics["time_lag"]``, from ``record.add_events``)."""
    lag = outcome.diagnostics.get("time_lag")
    if not lag or lag["series"] is None:
        return
    if lag["numerical"] is None:
        outcome.checks.append(Check(
            "cross_check.time_lag", None, check_limit(problem, "cross_check.time_lag"), False,
            f"time lag: series {lag['series']:.9g} s, the method of lines gave none"))
        return
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
    nothing), worst time reported; the final time's study goes to the diagnostics.

    A time whose three meshes show no order (Celik et al. 2008: oscillatory or divergent) gets
    ``refinement.FALLBACK_FACTOR`` times its larger mesh difference as its band (Roache 1994),
    as long as no more than half the requested times lack an order: where a moving front or two
    error terms of opposite sign make the mesh differences change sign over time, the study of
    the few times near the change cannot form an order though the meshes converge around them.
    When most times lack an order the check fails with no value."""
    cells = [sum(f.diagnostics["cells_per_layer"]) for f in reversed(fvs)]
    released = np.array([f.released_inner + f.released_outer for f in reversed(fvs)])
    quantity = "release"
    sides = compartment_sides(problem)
    if sides:  # the exchange with a compartment (the net release of a cell is near zero)
        side = max(sides, key=lambda s: float(np.max(np.abs(getattr(fvs[-1], f"released_{s}")))))
        released = np.array([getattr(f, f"released_{side}") for f in reversed(fvs)])
        quantity = f"amount through the {side} compartment face"
    if np.max(np.abs(released)) <= 1e-9 * amount_scale:
        released = np.array([f.remaining for f in reversed(fvs)])
        quantity = "amount held"
    limit = check_limit(problem, "convergence.space")
    gcis = np.full(times.size, np.nan)
    studies = []
    for k in range(times.size):
        # differences below round-off of the amount scale (not of the value: after a
        # zero-order depletion the amount through a compartment face is round-off itself)
        values = [float(v) for v in released[:, k]]
        magnitude = max(abs(v) for v in values)
        roundoff = convergence.ROUNDOFF_RTOL * max(1.0, amount_scale / magnitude) \
            if magnitude > 0.0 else convergence.ROUNDOFF_RTOL
        study = convergence.grid_study(values, cells, roundoff_rtol=roundoff)
        studies.append(study)
        if study.convergence == "converged_to_roundoff":
            gcis[k] = 0.0
        elif math.isfinite(study.gci_fine):
            gcis[k] = study.gci_fine * abs(released[0, k]) / amount_scale
    outcome.diagnostics["grid_study_final"] = studies[final_index].as_dict()
    positive = times > 0.0
    unbanded = positive & ~np.isfinite(gcis)
    # Most requested times converge with an order of their own: the few that do not are where
    # two error terms of opposite sign cancel (the mesh differences change sign over time),
    # and get Roache's band without an observed order.
    fallback = unbanded if np.count_nonzero(unbanded) <= np.count_nonzero(positive) // 2 \
        else np.zeros_like(unbanded)
    gcis[fallback] = fallback_band(released[:, fallback]) / amount_scale
    failed = positive & ~np.isfinite(gcis)
    value, at_worst = worst(np.where(positive, gcis, np.nan), times)
    if np.any(failed) or at_worst is None:
        bad = int(np.flatnonzero(failed)[0]) if np.any(failed) else final_index
        outcome.checks.append(Check(
            "convergence.space", None, limit, False,
            f"grid study gave no error band at t = {times[bad]:.6g} s: {studies[bad].message}"))
        return
    worst_index = int(np.searchsorted(times, at_worst))
    study = studies[worst_index]
    if fallback[worst_index]:
        how = (f"no observed order there ({study.convergence}): band {FALLBACK_FACTOR:g} times "
               f"the larger mesh difference, Roache 1994")
    else:
        how = (f"{study.convergence}, observed order {study.apparent_order:.3g}, extrapolated "
               f"{study.extrapolated:.9g}")
    _add(outcome, "convergence.space", value, limit,
         f"GCI_fine of the {quantity} on meshes of {cells} cells, worst at t = {at_worst:.6g} s "
         f"({how}), relative to the amount scale (Celik et al. 2008)"
         + (f"; {int(np.count_nonzero(fallback))} of {int(np.count_nonzero(positive))} times "
            f"without an observed order (the mesh differences change sign there or nearby) "
            f"banded by {FALLBACK_FACTOR:g} times the larger mesh difference (Roache 1994)"
            if np.any(fallback) else ""))


def time_check(outcome: Outcome, problem: Problem, coarse: TransientFVSolution,
               times: np.ndarray, duration: float, amount_scale: float) -> None:
    """Change of the amounts under a ``TIME_TIGHTENING`` times tighter integrator tolerance
    (coarse mesh), relative to the amount scale; for implicit steps (kinked systems) the
    change when every accepted step is halved, with the observed order in time from the
    steps quartered (:func:`implicit_time_check`)."""
    if getattr(coarse, "history", None) is not None:
        implicit_time_check(outcome, problem, coarse, times, amount_scale)
        return
    tight = method_of_lines.solve_transient_fv(
        problem, times, coarse.mesh.spec, end=duration,
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


def implicit_time_check(outcome: Outcome, problem: Problem, coarse: TransientFVSolution,
                        times: np.ndarray, amount_scale: float) -> None:
    """Time refinement of an implicit-step solution on the coarse mesh: its amounts against
    those with every accepted step halved (the value) and quartered (observed order
    p = log2(|A_1 - A_2| / |A_2 - A_4|) at the worst time), relative to the amount scale
    (Richardson; Roache 1998 for the observed order)."""
    limit = check_limit(problem, "convergence.time")
    halved = method_of_lines.time_refinement(problem, coarse, 2)
    quartered = method_of_lines.time_refinement(problem, coarse, 4) if halved else None
    if halved is None or quartered is None:
        outcome.checks.append(Check("convergence.time", None, limit, False,
                                    "the implicit steps halved or quartered did not converge"))
        return
    names = ("remaining", "released_inner", "released_outer", "consumed")
    first = np.array([getattr(coarse, n) for n in names])
    second = np.array([halved[n] for n in names])
    third = np.array([quartered[n] for n in names])
    changes = np.max(np.abs(first - second), axis=0) / amount_scale
    value, at_worst = worst(changes, times)
    k = int(np.argmax(np.where(np.isfinite(changes), changes, -1.0)))
    row = int(np.argmax(np.abs(first[:, k] - second[:, k])))
    e1, e2 = abs(first[row, k] - second[row, k]), abs(second[row, k] - third[row, k])
    order = math.log2(e1 / e2) if e1 > 0.0 and e2 > 0.0 else float("nan")
    outcome.diagnostics["time_study"] = {"changes_halved": float(value) if value else 0.0,
                                         "observed_order": order, "at": at_worst}
    tightened = coarse.diagnostics.get("time_tightening")
    again = "" if tightened is None else (
        f"; integrated at the implicit tolerance {tightened['implicit_rtol']:.3g} after the "
        f"default's time error of {tightened['first_error']:.3g} times what the record "
        f"resolves")
    _add(outcome, "convergence.time", value, limit,
         f"largest change of the amounts when every implicit step is halved (coarse mesh), "
         f"relative to the amount scale; worst at t = {at_worst} s, observed order in time "
         f"{order:.3g} (steps halved and quartered){again}")
