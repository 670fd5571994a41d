"""``run_transient``: solve a transient case by every applicable method and check the results
(the package docstring says which methods and which checks)."""

from __future__ import annotations

import math

import numpy as np

from worker.engine.boundaries.compartment import compartment_sides
from worker.engine.model import Problem
from worker.engine.outcome import Outcome
from worker.engine.regime_notes import thiele_notes
from worker.engine.transient import (
    checks,
    compartment_checks,
    dispersed,
    dispersed_checks,
    exact_series,
    method_of_lines,
    scales,
    solve,
    uptake,
)
from worker.engine.transient.compare import (
    compare_fronts,
    compare_minima,
    compare_routes,
    compare_steady_times,
    reported_series_sign_check,
)
from worker.engine.transient.galerkin import galerkin_study
from worker.engine.transient.laplace import METHOD_NAME as LAPLACE_METHOD
from worker.engine.transient.laplace import laplace_unsupported_reason, solve_transient_laplace
from worker.engine.transient.record import (
    add_events,
    add_minimum_series,
    add_profile_and_probes,
    add_series,
    add_time_lag,
    probe_row,
    profile_positions,
    report_events,
)
from worker.engine.transient.routes import (
    add_flux_time_band,
    add_front_flux_band,
    fv_fronts,
    fv_route,
    galerkin_route,
    laplace_route,
    series_route,
)
from worker.engine.transient.scales import capacity_resistance_time, size_factor
from worker.engine.transient.solution import Route
from worker.engine.transient.solve import (
    extrapolated,
    extrapolated_compartments,
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
        solves it beside an exact primary, the Laplace route beside the series, and the
        Galerkin route always.

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
    independent = problem if independent is None else independent
    outcome = Outcome()
    factor, amount_unit = size_factor(problem)
    c_unit = problem.concentration_unit
    internal = np.union1d(requested, [duration])

    series, scan = series_on_scan(problem, internal, duration)
    at = np.searchsorted(series.times, internal) if series is not None else None
    use_series = series is not None and bool(np.all(series.release_converged[at]))
    # The exact Laplace-domain route for every linear case: on the independent reading when the
    # series is primary, else it is the primary itself.
    laplace = None
    if laplace_unsupported_reason(problem) is None:
        laplace_problem = independent if use_series else problem
        laplace = solve_transient_laplace(laplace_problem, internal)
    exact_primary = use_series or laplace is not None
    lines_problem = independent if exact_primary else problem
    fvs = fv_on_meshes(lines_problem, internal, duration)
    # Without an exact route (nonlinear kinetics) the second discretisation is the independent
    # route, on the independent reading.
    compartments = compartment_sides(problem)
    study = None
    if not exact_primary:
        study = galerkin_study(independent, internal, end=duration)
    fine, coarse = fvs[2], fvs[0]
    outcome.diagnostics["meshes"] = [f.diagnostics["cells_per_layer"] for f in fvs]
    if "grading" in fvs[0].diagnostics:  # only a very early first time grades (early_mesh)
        outcome.diagnostics["mesh_grading"] = fvs[0].diagnostics["grading"]
    if study is not None and "grading" in study.solutions[0].diagnostics:
        outcome.diagnostics["galerkin_grading"] = study.solutions[0].diagnostics["grading"]
    outcome.diagnostics["fv_steps"] = [f.diagnostics["steps"] for f in fvs]
    if not all(f.success for f in fvs):
        failed = next(f for f in fvs if not f.success)
        outcome.add_check("solver.transient_fv", None, None, False,
                          f"method of lines failed: {failed.message}")
        outcome.warnings.append(f"numerical transient solve failed: {failed.message}")
        return outcome

    if series is not None:
        outcome.diagnostics["series_terms"] = series.terms
        outcome.diagnostics["series_notes"] = list(series.notes)
        if not use_series:
            outcome.warnings.append(
                "exact series not converged at some requested times (too early for the term "
                "budget); it is compared where it converges")

    numerical = extrapolated(fvs, internal)
    fv_name = f"{fine.method} (three meshes, extrapolated)"
    releasing = uptake.releases(problem)
    if releasing:
        add_events(outcome, lines_problem, series, scan, fvs, duration)
    routes = [fv_route(fv_name, fine, numerical, internal, outcome, medium=fvs[1])]
    routes[0].compartments = extrapolated_compartments(fvs, internal)
    routes[0].fronts = fv_fronts(lines_problem, fvs)
    saturating_compartment = study is not None and bool(compartments) and problem.can_saturate
    if saturating_compartment:
        # the face rate behind a compartment falls towards zero where the fluid nears its
        # equilibrium or the solubility: there the step error sets it (compare._flux_offers)
        add_flux_time_band(routes[0], lines_problem, fine)
    if study is not None:
        if study.success:
            routes.append(galerkin_route(independent, study, internal, duration))
            # where a front moves: its nested meshes share the dissolving node, so their
            # difference can miss the step the front makes in the face rate
            add_front_flux_band(routes[-1], study)
        else:
            failed_mesh = next(s for s in study.solutions if not s.success)
            outcome.add_check("cross_check.independent", None, None, False,
                              f"the second discretisation failed: {failed_mesh.message}")
    if laplace is not None:
        routes.insert(0, laplace_route(laplace_problem, laplace, internal, duration))
        routes[0].compartments = dict(laplace.compartments)
    if series is not None and at is not None:
        routes.insert(0 if use_series else len(routes), series_route(series, at, internal,
                                                                     outcome))
    if not releasing:
        for route in routes:
            route.events = {}
    primary = routes[0]
    _record_methods(outcome, primary, routes[1:])
    if len(routes) == 1:
        reason = exact_series.series_unsupported_reason(problem)
        outcome.warnings.append(
            f"no exact solution for this case ({reason}): checked by space and time refinement "
            + ("and mass balance" if compartments else "and by the steady limit"))

    requested_index = np.searchsorted(internal, requested)
    final_index = int(np.searchsorted(internal, duration))
    amounts = primary.amounts
    initial_load = primary.initial_load
    amount_scale = scales.amount_scale(initial_load, amounts["released_inner"],
                                       amounts["released_outer"], amounts["consumed"])
    c_scale = method_of_lines.concentration_scale(problem)

    add_series(outcome, amounts, requested, requested_index, initial_load, factor, amount_unit,
               releasing)
    if not releasing:
        _uptake_note(outcome, problem)
    dispersed.add_dispersed(outcome, lines_problem, fvs, requested_index, duration)
    _closed_form_release_checks(outcome, problem, primary, requested, requested_index)
    add_profile_and_probes(outcome, problem, primary.profile, internal, requested,
                           requested_index, final_index, c_unit)
    if releasing:
        report_events(outcome, primary, duration)
    add_time_lag(outcome, lines_problem, series, fine, duration)

    compare_routes(outcome, problem, primary, routes[1:], internal, profile_positions(problem),
                   final_index, c_scale, amount_scale, releasing)
    compare_fronts(outcome, problem, primary, routes[1:], internal)
    minima = [uptake.route_minima(route.profile, problem, profile_positions(problem), internal,
                                  requested_index) for route in routes]
    spread = compare_minima(outcome, problem, routes, minima, internal, requested_index, c_scale)
    add_minimum_series(outcome, problem, minima[0], spread, c_unit)
    if compartments:
        compartment_checks.add_compartment_series(outcome, routes, requested_index, c_unit)
        compartment_checks.fed_zone_note(outcome, lines_problem, fine, internal,
                                         requested_index, amount_scale)
        compartment_checks.limited_volume_check(outcome, problem, routes, internal)
    else:  # a compartment's steady state is its equilibrium (checked below)
        _time_to_steady(outcome, problem, independent, routes, duration, c_scale)
    outcome.warnings.extend(thiele_notes(problem, _fed_levels(problem, primary, final_index),
                                         f" at t = {duration:.6g} s"))
    _annotate(outcome, routes, int(requested_index[-1]))
    _series_bands(outcome, problem, routes, requested_index, factor)
    if series is not None:
        checks.time_lag_check(outcome, problem)
    checks.mass_balance_check(outcome, lines_problem, fine, internal)
    checks.space_check(outcome, lines_problem, fvs, internal, final_index, amount_scale)
    checks.time_check(outcome, lines_problem, coarse, internal, duration, amount_scale)
    if compartments:
        compartment_checks.equilibrium_check(outcome, lines_problem, fine, duration, c_scale)
    else:
        checks.steady_limit_check(outcome, lines_problem, fine, duration, c_scale,
                                  amount_scale)
    time_check = outcome.check("convergence.time")
    time_error = 0.0
    if fine.history is not None and primary.name.startswith(fine.method) \
            and time_check is not None and time_check.value is not None:
        time_error = float(time_check.value)
    reported_series_sign_check(outcome, problem, float(np.min(fine.cells)), c_scale,
                               amount_scale, factor, time_error)
    return outcome


def _closed_form_release_checks(outcome: Outcome, problem: Problem, primary: Route,
                                requested: np.ndarray, index: np.ndarray) -> None:
    """The dispersed-drug closed forms (Paul & McSpadden; the pseudo-steady forms) against the
    primary's release and reported fronts, where a single loaded layer puts them in range."""
    front = outcome.series.get("front_position")
    if front is None or len(front["layers"]) != 1:
        return

    def column(entry: dict, key: str = "values") -> np.ndarray:
        return np.array([np.nan if row[0] is None else row[0] for row in entry[key]])

    inner = outcome.series.get("front_position_inner")
    band = column(front, "uncertainty")
    if inner is not None:
        band = np.fmax(band, column(inner, "uncertainty"))
    amounts = primary.amounts
    released = (amounts["released_inner"] + amounts["released_outer"])[index]
    dispersed_checks.add_dispersed_checks(
        outcome, problem, requested, released, column(front),
        None if inner is None else column(inner), band)


def _fed_levels(problem: Problem, route: Route, k: int) -> list[float | None]:
    """Per layer, the larger of the route's concentrations at the layer's two ends at internal
    time k (a consuming layer has no interior maximum)."""
    edges = problem.edges
    return [float(np.max(route.profile(np.array([edges[j], edges[j + 1]]), k, j)))
            for j in range(len(problem.layers))]


def _uptake_note(outcome: Outcome, problem: Problem) -> None:
    """Say why a record has no release fraction, t50 or t90, and what it reports instead."""
    faces = uptake.supplying_faces(problem)
    if not any(layer.initial > 0.0 for layer in problem.layers):
        why = "the body holds no initial load"
    else:
        named = " and ".join(faces)
        verb = "faces feed" if len(faces) > 1 else "face feeds"
        why = (f"the {named} {verb} solute into it, so released / initial load is no fraction "
               "of that load")
    outcome.warnings.append(
        f"uptake: no release_fraction, t50 or t90 ({why}); series.uptake is the net amount "
        "taken in through the faces, series.remaining the amount held")


def _time_to_steady(outcome: Outcome, problem: Problem, independent: Problem,
                    routes: list[Route], duration: float, c_scale: float) -> None:
    """The quantity ``time_to_steady`` of a case that approaches a nonzero steady state, from
    each route (the primary against the steady state of the case as read, the others against
    that of the independent reading), and ``cross_check.time_to_steady``."""
    if not math.isfinite(capacity_resistance_time(problem)):
        return
    positions = profile_positions(problem)
    steady = solve.steady_reference(problem)
    again = steady if independent is problem else solve.steady_reference(independent)
    if not (steady.success and again.success):
        return
    scale = uptake.steady_scale(steady, positions)
    if not scale > uptake.NONZERO_STEADY * c_scale:
        return  # the steady state holds nothing: a release to a sink, not an approach

    def initial(r: np.ndarray, layer: int) -> np.ndarray:
        return np.full(np.size(r), problem.layers[layer].initial)

    found = []
    for i, route in enumerate(routes):
        if route.concentration is None:
            continue
        found.append((route.name, uptake.time_to_steady(
            route.concentration, initial, steady if i == 0 else again, positions, duration,
            scale)))
    if not found:
        return
    first = found[0][1]
    entry: dict = {"value": first.value, "unit": "s"}
    if first.value is None:
        entry["reason"] = first.reason
        outcome.warnings.append(f"time_to_steady: {first.reason}")
    outcome.quantities["time_to_steady"] = entry
    if len(found) > 1:
        names = [name for name, _ in found]
        values = [approach.value for _, approach in found]
        compare_steady_times(outcome, problem, names, values)
        entry["routes"] = names
        entry["verified_by"] = "cross_check.time_to_steady"
        reached = [v for v in values[1:] if v is not None]
        if first.value is not None and len(reached) == len(values) - 1:
            entry["uncertainty"] = max(abs(first.value - v) for v in reached)


def _record_methods(outcome: Outcome, primary: Route, others: list[Route]) -> None:
    outcome.methods.append({"role": "primary", "name": primary.name,
                            "reference": primary.reference})
    for other in others:
        outcome.methods.append({"role": "independent", "name": other.name,
                                "reference": other.reference})
    if not others:
        outcome.methods.append(dict(_REFINEMENT_METHOD))


def _released_fraction(route: Route, index: np.ndarray) -> np.ndarray:
    released = route.amounts["released_inner"][index] + route.amounts["released_outer"][index]
    return released / route.initial_load


def _series_bands(outcome: Outcome, problem: Problem, routes: list[Route], index: np.ndarray,
                  factor: float) -> None:
    """Per requested time, the numerical uncertainty of each amount series (and of the
    release fraction, each route over its own load; of each probe's concentration): the
    largest difference between the primary route and another, in the series' unit."""
    if len(routes) < 2:
        return
    primary = routes[0]
    for name in ("released_inner", "released_outer", "remaining", "consumed"):
        entry = outcome.series.get(name)
        if isinstance(entry, dict):
            a = primary.amounts[name][index]
            band = np.max([np.abs(a - r.amounts[name][index]) for r in routes[1:]], axis=0)
            entry["uncertainty"] = (factor * band).tolist()
    entry = outcome.series.get("release_fraction")
    loaded = [r for r in routes[1:] if r.initial_load > 0.0]
    if isinstance(entry, dict) and primary.initial_load > 0.0 and loaded:
        a = _released_fraction(primary, index)
        band = np.max([np.abs(a - _released_fraction(r, index)) for r in loaded], axis=0)
        entry["uncertainty"] = band.tolist()
    probes = outcome.series.get("probes")
    if isinstance(probes, dict) and problem.probes:
        rows = [np.array([probe_row(r.profile, problem, int(k)) for k in index])
                for r in routes]
        probes["uncertainty"] = np.max([np.abs(rows[0] - other) for other in rows[1:]],
                                       axis=0).tolist()


def _annotate(outcome: Outcome, routes: list[Route], last: int) -> None:
    """Routes, uncertainty and the comparing check of the reported scalar figures."""
    if len(routes) < 2:
        return
    names = [route.name for route in routes]
    released = ("cross_check.release_fraction" if "release_fraction_final" in outcome.quantities
                else "cross_check.released")
    outcome.mark_verified(names, {
        "released_inner": released, "released_outer": released,
        "release_fraction": "cross_check.release_fraction", "uptake": "cross_check.released",
        "remaining": "cross_check.remaining", "consumed": "cross_check.consumed",
        "profile": "cross_check.profile", "probes": "cross_check.probes",
        "concentration_min": "cross_check.concentration_min",
        "concentration_min_layers": "cross_check.concentration_min",
        "front_position": "cross_check.front_position",
        "front_position_inner": "cross_check.front_position"})
    lag = outcome.quantities.get("time_lag")
    found = outcome.diagnostics.get("time_lag", {})
    if lag is not None and found.get("series") is not None:
        lag["routes"] = [name for name in names if name != LAPLACE_METHOD]
        lag["verified_by"] = "cross_check.time_lag"
        if found.get("numerical") is not None:
            lag["uncertainty"] = abs(found["series"] - found["numerical"])
    for event in ("t50", "t90"):
        entry = outcome.quantities.get(event)
        if entry is None:
            continue
        entry["routes"] = names
        entry["verified_by"] = f"cross_check.{event}"
        values = [route.events.get(event) for route in routes if event in route.events]
        if entry["value"] is not None and values and all(v is not None for v in values):
            entry["uncertainty"] = max(abs(entry["value"] - v) for v in values)
    fraction = outcome.quantities.get("release_fraction_final")
    if fraction is not None:
        finals = [float((r.amounts["released_inner"][last] + r.amounts["released_outer"][last])
                        / r.initial_load) for r in routes if r.initial_load > 0.0]
        fraction["routes"] = names
        fraction["verified_by"] = "cross_check.release_fraction"
        fraction["uncertainty"] = max(abs(fraction["value"] - f) for f in finals)
