"""``run_transient``: solve a transient case by every applicable method and check the results
(the package docstring says which methods and which checks)."""

from __future__ import annotations

import numpy as np

from worker.engine.model import Problem
from worker.engine.outcome import Outcome
from worker.engine.transient import checks, exact_series, method_of_lines
from worker.engine.transient.compare import Route, compare_routes, reported_series_sign_check
from worker.engine.transient.exact_series import TransientSeriesSolution
from worker.engine.transient.method_of_lines import TransientFVSolution
from worker.engine.transient.record import (
    add_events,
    add_profile_and_probes,
    add_series,
    profile_positions,
)
from worker.engine.transient.scales import size_factor
from worker.engine.transient.solve import (
    extrapolated,
    fv_on_meshes,
    requested_times,
    series_on_scan,
)

__all__ = ["run_transient"]

#: The method of lines, when the series is not used: the independent checks are its own.
_REFINEMENT_METHOD = {
    "role": "independent",
    "name": "three-mesh refinement study (GCI), tightened time tolerance, steady limit",
    "reference": "I.B. Celik et al., J. Fluids Eng. 130 (2008) 078001; P.J. Roache, "
                 "J. Fluids Eng. 116 (1994) 405",
}


def run_transient(problem: Problem, independent: Problem | None = None) -> Outcome:
    """Solve a transient case by every applicable method and check the results.

    Parameters
    ----------
    problem : Problem
        Normalised case with ``regime.kind == "transient"``, a duration and requested times.
    independent : Problem, optional
        The case as the independent methods read it (default ``problem``): the method of lines
        solves it when the exact series is primary.

    Returns
    -------
    Outcome
        Quantities, series, methods, checks and warnings, and in ``diagnostics`` the meshes,
        steps, series terms and event times of each method.

    Raises
    ------
    ValueError
        Naming the ``regime`` field when the regime is not a valid transient one.
    """
    requested, duration = requested_times(problem)
    outcome = Outcome()
    factor, amount_unit = size_factor(problem)
    c_unit = problem.concentration_unit
    internal = np.union1d(requested, [duration])

    series, scan = series_on_scan(problem, internal, duration)
    series_primary = series is not None and bool(
        np.all(series.release_converged[np.searchsorted(series.times, internal)]))
    lines_problem = independent if series_primary and independent is not None else problem
    fvs = fv_on_meshes(lines_problem, internal, duration)
    fine, coarse = fvs[2], fvs[0]
    outcome.diagnostics["meshes"] = [f.diagnostics["cells_per_layer"] for f in fvs]
    outcome.diagnostics["fv_steps"] = [f.diagnostics["steps"] for f in fvs]
    if not all(f.success for f in fvs):
        failed = next(f for f in fvs if not f.success)
        outcome.add_check("solver.transient_fv", None, None, False,
                          f"method of lines failed: {failed.message}")
        outcome.warnings.append(f"numerical transient solve failed: {failed.message}")
        return outcome

    if series is not None:
        at = np.searchsorted(series.times, internal)
        if not np.all(series.release_converged[at]):
            outcome.warnings.append(
                "exact series not converged at some requested times (too early for the term "
                "budget); the numerical solution is reported")
        outcome.diagnostics["series_terms"] = series.terms
        outcome.diagnostics["series_notes"] = list(series.notes)
        use_series = bool(np.all(series.release_converged[at]))
    else:
        reason = exact_series.series_unsupported_reason(problem)
        outcome.warnings.append(
            f"no exact series for this case ({reason}): checked by space and time refinement "
            "and by the steady limit")
        use_series = False

    numerical = extrapolated(fvs, internal)
    fv_route_name = f"{fine.method} (three meshes, extrapolated)"
    if series is not None and use_series:
        primary = series.amounts(at)
        initial_load = series.initial_load
        outcome.methods.append({"role": "primary", "name": series.method,
                                "reference": series.reference})
        outcome.methods.append({"role": "independent", "name": fine.method,
                                "reference": fine.reference + "; three meshes, Richardson "
                                "extrapolation (Celik et al., J. Fluids Eng. 130 (2008) 078001)"})
    else:
        # the best numerical estimate: the three-mesh extrapolation (fine mesh where the
        # meshes do not converge monotonically)
        primary = numerical
        initial_load = fine.initial_load
        outcome.methods.append({"role": "primary", "name": fv_route_name,
                                "reference": fine.reference})
        outcome.methods.append(dict(_REFINEMENT_METHOD))

    requested_index = np.searchsorted(internal, requested)
    final_index = int(np.searchsorted(internal, duration))
    amount_scale = max(abs(initial_load), float(np.max(
        np.abs(primary["released_inner"]) + np.abs(primary["released_outer"])
        + np.abs(primary["consumed"]))))
    c_scale = method_of_lines.concentration_scale(problem)
    used_series = series if use_series else None

    add_series(outcome, primary, requested, requested_index, initial_load, factor, amount_unit)
    add_profile_and_probes(outcome, problem, used_series, fine, internal, requested,
                           requested_index, final_index, c_unit)
    add_events(outcome, problem, series, scan, fvs, initial_load, duration, use_series)

    routes = [_fv_route(fv_route_name, fine, numerical, internal, outcome)]
    if series is not None:
        routes.insert(0 if use_series else 1, _series_route(series, at, internal, outcome))
    compare_routes(outcome, problem, routes[0], routes[1:], internal,
                   profile_positions(problem), final_index, c_scale, amount_scale)
    _annotate(outcome, routes, int(requested_index[-1]))
    if series is not None:
        checks.time_lag_check(outcome, problem)
    checks.mass_balance_check(outcome, problem, fine, internal)
    checks.space_check(outcome, problem, fvs, internal, final_index, amount_scale)
    checks.time_check(outcome, problem, coarse, internal, duration, amount_scale)
    checks.steady_limit_check(outcome, problem, fine, duration, c_scale, amount_scale)
    reported_series_sign_check(outcome, problem, float(np.min(fine.cells)), c_scale,
                               amount_scale, factor)
    if not any(c.name.startswith("cross_check") for c in outcome.checks):
        outcome.warnings.append("no independent analytic solution: the numerical answer rests on "
                                "the refinement, balance and steady-limit checks")
    return outcome


def _events(outcome: Outcome, key: str) -> dict[str, float | None]:
    events = outcome.diagnostics.get("events")
    if not events:
        return {}
    return {name: found[key] for name, found in events.items()}


def _fv_route(name: str, fine: TransientFVSolution, numerical: dict[str, np.ndarray],
              internal: np.ndarray, outcome: Outcome) -> Route:
    """The method of lines as a route: extrapolated amounts, the fine mesh's own load and
    profiles (linear between cell centres), its extrapolated t50/t90."""
    everywhere = np.ones(internal.size, dtype=bool)

    def profile(r: np.ndarray, k: int, layer: int) -> np.ndarray:
        return np.asarray(fine.profile_at(k)[0](r, layer=layer), dtype=float)

    return Route(name, numerical, float(fine.initial_load), everywhere, everywhere, profile,
                 _events(outcome, "numerical"))


def _series_route(series: TransientSeriesSolution, at: np.ndarray, internal: np.ndarray,
                  outcome: Outcome) -> Route:
    """The exact series as a route: usable where its terms (or the short-time form) converge."""

    def profile(r: np.ndarray, k: int, layer: int) -> np.ndarray:
        return np.asarray(series.concentration_at(r, [internal[k]])[0], dtype=float)

    return Route(series.method, series.amounts(at), float(series.initial_load),
                 series.release_converged[at] | (internal == 0.0),
                 series.converged[at], profile, _events(outcome, "series"))


def _annotate(outcome: Outcome, routes: list[Route], last: int) -> None:
    """Routes, uncertainty and the comparing check of the reported scalar figures."""
    if len(routes) < 2:
        return
    names = [route.name for route in routes]
    for event in ("t50", "t90"):
        entry = outcome.quantities.get(event)
        if entry is None:
            continue
        entry["routes"] = names
        entry["verified_by"] = f"cross_check.{event}"
        values = [route.events.get(event) for route in routes]
        if entry["value"] is not None and all(v is not None for v in values):
            entry["uncertainty"] = max(abs(entry["value"] - v) for v in values)
    fraction = outcome.quantities.get("release_fraction_final")
    if fraction is not None:
        finals = [float((r.amounts["released_inner"][last] + r.amounts["released_outer"][last])
                        / r.initial_load) for r in routes if r.initial_load > 0.0]
        fraction["routes"] = names
        fraction["verified_by"] = "cross_check.release_fraction"
        fraction["uncertainty"] = max(abs(fraction["value"] - f) for f in finals)
