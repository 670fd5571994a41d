"""``run_transient``: solve a transient case by every applicable method and check the results
(the package docstring says which methods and which checks)."""

from __future__ import annotations

import numpy as np

from worker.engine.model import Problem
from worker.engine.outcome import Outcome
from worker.engine.transient import checks, exact_series, method_of_lines
from worker.engine.transient.record import add_events, add_profile_and_probes, add_series
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
    if series is not None and use_series:
        primary = series.amounts(at)
        initial_load = series.initial_load
        outcome.methods.append({"role": "primary", "name": series.method,
                                "reference": series.reference})
        outcome.methods.append({"role": "independent", "name": fine.method,
                                "reference": fine.reference + "; three meshes, Richardson "
                                "extrapolation (Celik et al., J. Fluids Eng. 130 (2008) 078001)"})
    else:
        primary = fine.amounts()
        initial_load = fine.initial_load
        outcome.methods.append({"role": "primary", "name": fine.method,
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
    add_events(outcome, problem, used_series, scan, fvs, initial_load, duration)

    if series is not None:
        checks.series_cross_checks(outcome, problem, series, at, numerical, internal, fine,
                                   initial_load, amount_scale, c_scale)
    checks.mass_balance_check(outcome, problem, fine, internal)
    checks.space_check(outcome, problem, fvs, internal, final_index, amount_scale)
    checks.time_check(outcome, problem, coarse, internal, duration, amount_scale)
    checks.steady_limit_check(outcome, problem, fine, duration, c_scale, amount_scale)
    checks.non_negativity_check(outcome, problem, fine, internal, c_scale)
    if not any(c.name.startswith("cross_check") for c in outcome.checks):
        outcome.warnings.append("no independent analytic solution: the numerical answer rests on "
                                "the refinement, balance and steady-limit checks")
    return outcome
