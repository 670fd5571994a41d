"""Each transient method as a :class:`~worker.engine.transient.compare.Route`: its amounts at
the internal times, its own initial load, its profile at any internal time and its t50/t90.

* the exact series (one layer, linear kinetics): usable where its terms (or the short-time
  form) converge; events by a log scan of its closed-form amounts, each divided by its own load;
* the exact Laplace-domain solution (any layers, linear kinetics): usable at every time; events
  by a scan of its inverted amounts refined by ``brentq``;
* the Galerkin second discretisation: its three-mesh extrapolated amounts and compartment
  levels, the fine mesh's load and profiles with the band |fine - medium|, its extrapolated
  events;
* the method of lines: the three-mesh extrapolated amounts, the fine mesh's load and profiles
  with the band |fine - medium|, its extrapolated events (``record.add_events``).

Each numerical route also gives its fine mesh's face rates with their band |fine - medium|
(compared where a dissolution front moves); behind a compartment the method of lines' band
also holds its time error (:func:`add_flux_time_band`), and where a front moves the Galerkin
route's band holds the step the front makes on its fine mesh (:func:`add_front_flux_band`).
Where a layer is loaded above its solubility, each numerical route gives its front account
from its own three meshes (:func:`galerkin_fronts`, :func:`fv_fronts`, both through
:func:`front_account`).
"""

from __future__ import annotations

import math

import numpy as np

from worker.engine import convergence
from worker.engine.model import Problem
from worker.engine.outcome import Outcome
from worker.engine.transient import dispersed, method_of_lines
from worker.engine.transient.exact_series import TransientSeriesSolution
from worker.engine.transient.galerkin import GalerkinStudy, TransientGalerkinSolution
from worker.engine.transient.laplace import TransientLaplaceSolution, solve_transient_laplace
from worker.engine.transient.method_of_lines import TransientFVSolution
from worker.engine.transient.scales import first_crossing
from worker.engine.transient.solution import FrontAccount, Route, TransientSolution

#: Log-spaced scan points (over the duration) that bracket t50/t90 of the Laplace route.
LAPLACE_EVENT_SCAN_POINTS = 48
#: Release levels of the events.
EVENT_LEVELS = (("t50", 0.5), ("t90", 0.9))

__all__ = ["EVENT_LEVELS", "add_flux_time_band", "add_front_flux_band", "front_account",
           "fv_fronts", "fv_route", "galerkin_compartments", "galerkin_fronts",
           "galerkin_route", "laplace_route", "series_route"]


def _events(outcome: Outcome, key: str) -> dict[str, float | None]:
    events = outcome.diagnostics.get("events")
    if not events:
        return {}
    return {name: found[key] for name, found in events.items()}


def fv_route(name: str, fine: TransientFVSolution, numerical: dict[str, np.ndarray],
             internal: np.ndarray, outcome: Outcome,
             medium: TransientFVSolution | None = None) -> Route:
    """The method of lines: extrapolated amounts, the fine mesh's own load and profiles (linear
    between cell centres) with the band |fine - medium|, its extrapolated t50/t90 (from
    ``diagnostics["events"]``)."""
    everywhere = np.ones(internal.size, dtype=bool)

    def profile(r: np.ndarray, k: int, layer: int) -> np.ndarray:
        return np.asarray(fine.profile_at(k)[0](r, layer=layer), dtype=float)

    def band(r: np.ndarray, k: int, layer: int) -> np.ndarray:
        assert medium is not None
        return np.abs(profile(r, k, layer)
                      - np.asarray(medium.profile_at(k)[0](r, layer=layer), dtype=float))

    def concentration(r: np.ndarray, t: float, layer: int) -> np.ndarray:
        assert fine.profile_at_time is not None, "a successful integration has dense output"
        return np.asarray(fine.profile_at_time(t)[0](r, layer=layer), dtype=float)

    reference = (fine.reference + "; three meshes, Richardson extrapolation (Celik et al., "
                 "J. Fluids Eng. 130 (2008) 078001)")
    route = Route(name, reference, numerical, float(fine.initial_load), everywhere, everywhere,
                  profile, _events(outcome, "numerical"), band if medium is not None else None,
                  concentration)
    if medium is not None:
        route.flux_band = _flux_band(fine, medium)
        route.flux_fine = _fine_flux(fine)
    return route


def _flux_band(fine: TransientSolution, medium: TransientSolution) -> dict[str, np.ndarray]:
    """|fine - medium| of each face's flux density at the internal times."""
    return {side: np.abs(np.asarray(getattr(fine, f"flux_{side}"), dtype=float)
                         - np.asarray(getattr(medium, f"flux_{side}"), dtype=float))
            for side in ("inner", "outer")}


def add_flux_time_band(route: Route, problem: Problem, fine: TransientFVSolution) -> bool:
    """Widen the method of lines' face-flux bands by the fine mesh's own time error: |its flux
    - its flux with every accepted step halved| (``method_of_lines.time_refinement``, the
    estimator of ``convergence.time``; the GCI of a second-order step at ratio 2 with Roache's
    safety factor 3, as the grid band). Behind a compartment the face rate falls towards zero
    as the fluid nears its equilibrium or the solubility, and there the step error of the
    shared steps, not the mesh, sets the fine mesh's rate (measured on a sphere whose medium
    reaches the solubility: 1.1e-4 of the peak rate, the replay's change 1.1e-4, the mesh
    band 5e-5). False (bands unchanged) where the solution has no implicit steps to replay."""
    halved = method_of_lines.time_refinement(problem, fine, 2)
    if halved is None:
        return False
    for side in ("inner", "outer"):
        own = np.asarray(getattr(fine, f"flux_{side}"), dtype=float)
        route.flux_band[side] = route.flux_band.get(side, np.zeros(own.size)) + np.abs(
            own - np.asarray(halved[f"flux_{side}"], dtype=float))
    route.flux_band_terms = ("grid band |fine - medium| plus the fine mesh's time band "
                             "|h - h/2|")
    return True


def add_front_flux_band(route: Route, study: GalerkinStudy) -> bool:
    """Widen the Galerkin route's face-flux bands by its fine mesh's front step
    (``TransientGalerkinSolution.flux_front_band``, ``front_staircase``): the dissolving node
    holds the solubility at its own position, not at the front, and the nested meshes share
    that node wherever it is a coarse node, so |fine - medium| can be round-off while the fine
    rate is off by up to half a cell over the distance to the front (measured at 6 h on a
    coating 40 times above its solubility behind a stirred medium: the three meshes within
    7e-7 of the peak rate, the fine mesh 1.26e-2 from a mesh eight times finer, its front band
    2.5e-2; the same coating into a perfect sink with D 3 % higher: |fine - medium| 0, the
    fine mesh 1.7e-2 off, its front band 2.5e-2). False (bands unchanged) where the fine mesh
    has no such band (no layer loaded above its solubility, or no face that exchanges with a
    fluid: a value, a compartment or a mass-transfer film)."""
    own = study.fine.flux_front_band
    if not own:
        return False
    for side, band in own.items():
        route.flux_band[side] = route.flux_band.get(side, np.zeros(band.size)) + band
    route.flux_band_terms = ("grid band |fine - medium| plus the fine mesh's front step "
                             "(half a cell over the distance to the front)")
    return True


def _fine_flux(fine: TransientSolution) -> dict[str, np.ndarray]:
    """Each face's flux density on the fine mesh at the internal times."""
    return {side: np.asarray(getattr(fine, f"flux_{side}"), dtype=float)
            for side in ("inner", "outer")}


def series_route(series: TransientSeriesSolution, at: np.ndarray, internal: np.ndarray,
                 outcome: Outcome) -> Route:
    """The exact series, usable where its terms (or the short-time form) converge."""

    def profile(r: np.ndarray, k: int, layer: int) -> np.ndarray:
        return np.asarray(series.concentration_at(r, [internal[k]])[0], dtype=float)

    def concentration(r: np.ndarray, t: float, layer: int) -> np.ndarray:
        return np.asarray(series.concentration_at(r, [t])[0], dtype=float)

    return Route(series.method, series.reference, series.amounts(at),
                 float(series.initial_load),
                 series.release_converged[at] | (internal == 0.0),
                 series.converged[at], profile, _events(outcome, "series"),
                 concentration=concentration)


def laplace_events(problem: Problem, solution: TransientLaplaceSolution, duration: float
                   ) -> dict[str, float | None]:
    """t50/t90 of the Laplace route: released / its own load, first crossing on a log scan of
    the duration refined by ``brentq`` (None: not reached; nothing for an empty body)."""
    load = solution.initial_load
    if load <= 0.0:
        return {}
    positive = solution.times[solution.times > 0.0]
    low = float(min(positive.min() if positive.size else duration, duration)) * 0.5
    scan = np.union1d(np.geomspace(max(low, duration * 1e-7), duration,
                                   LAPLACE_EVENT_SCAN_POINTS), positive)
    scan = scan[scan <= duration]
    at_scan = solve_transient_laplace(problem, scan)
    values = (at_scan.released_inner + at_scan.released_outer) / load

    def fraction(t: np.ndarray) -> np.ndarray:
        t = np.atleast_1d(np.asarray(t, dtype=float))
        if t.size == scan.size and np.array_equal(t, scan):
            return values
        found = solve_transient_laplace(problem, t)
        return (found.released_inner + found.released_outer) / load

    return {name: first_crossing(fraction, scan, level) for name, level in EVENT_LEVELS}


def laplace_route(problem: Problem, solution: TransientLaplaceSolution, internal: np.ndarray,
                  duration: float) -> Route:
    """The exact Laplace-domain solution at the internal times (``solution.times``)."""
    everywhere = np.ones(internal.size, dtype=bool)

    def profile(r: np.ndarray, k: int, layer: int) -> np.ndarray:
        return np.asarray(solution.concentration_at(r, [internal[k]], layer)[0], dtype=float)

    def concentration(r: np.ndarray, t: float, layer: int) -> np.ndarray:
        return np.asarray(solution.concentration_at(r, [t], layer)[0], dtype=float)

    return Route(solution.method, solution.reference, solution.amounts(),
                 float(solution.initial_load), everywhere, everywhere, profile,
                 laplace_events(problem, solution, duration), concentration=concentration)


def _galerkin_fraction(solution: TransientGalerkinSolution, problem: Problem):
    """Released / own load of one Galerkin mesh at any t, from its dense output."""
    nodes = solution.mesh.nodes.size
    measure = problem.measure_factor

    def fraction(t: np.ndarray) -> np.ndarray:
        state = solution.state_at(np.asarray(t, dtype=float))
        return measure * (state[nodes] + state[nodes + 1]) / solution.initial_load

    return fraction


def galerkin_events(problem: Problem, study: GalerkinStudy, duration: float
                    ) -> dict[str, float | None]:
    """t50/t90 of the Galerkin route: the first crossing on each mesh's step times (refined by
    ``brentq`` on its dense output), Richardson-extrapolated over the three meshes where they
    converge monotonically (Celik et al. 2008), else the fine mesh's."""
    fine = study.fine
    if fine.initial_load <= 0.0:
        return {}
    meshes = list(reversed(study.solutions))  # fine, medium, coarse
    sizes = [float(sum(s.mesh.elements_per_layer)) for s in meshes]
    events: dict[str, float | None] = {}
    for name, level in EVENT_LEVELS:
        per_mesh = []
        for solution in meshes:
            steps = solution.diagnostics.get("step_times")
            grid = np.union1d(np.asarray(steps if steps is not None else solution.times,
                                         dtype=float), solution.times)
            grid = grid[(grid > 0.0) & (grid <= duration)]
            per_mesh.append(first_crossing(_galerkin_fraction(solution, problem), grid, level)
                            if grid.size else None)
        value = per_mesh[0]
        if all(t is not None for t in per_mesh):
            found = convergence.grid_study([float(t) for t in per_mesh if t is not None], sizes)
            value = float(found.best_estimate)
        events[name] = value
    return events


def galerkin_route(problem: Problem, study: GalerkinStudy, internal: np.ndarray,
                   duration: float) -> Route:
    """The Galerkin second discretisation: its three-mesh extrapolated amounts
    (``refinement.amount_study``), the fine mesh's own load and profiles."""
    fine, medium = study.fine, study.solutions[-2]
    everywhere = np.ones(internal.size, dtype=bool)

    def profile(r: np.ndarray, k: int, layer: int) -> np.ndarray:
        return np.asarray(fine.concentration_at(r, [internal[k]], layer)[0], dtype=float)

    def band(r: np.ndarray, k: int, layer: int) -> np.ndarray:
        return np.abs(profile(r, k, layer) - np.asarray(
            medium.concentration_at(r, [internal[k]], layer)[0], dtype=float))

    def concentration(r: np.ndarray, t: float, layer: int) -> np.ndarray:
        return np.asarray(fine.concentration_at(r, [t], layer)[0], dtype=float)

    route = Route(f"{fine.method} (three meshes, extrapolated)",
                 fine.reference + "; three meshes, Richardson extrapolation (Celik et al., "
                 "J. Fluids Eng. 130 (2008) 078001)",
                 dict(study.amounts.extrapolated), float(fine.initial_load), everywhere,
                 everywhere, profile, galerkin_events(problem, study, duration), band,
                 concentration)
    route.fronts = galerkin_fronts(study)
    route.flux_band = _flux_band(fine, medium)
    route.flux_fine = _fine_flux(fine)
    route.compartments = galerkin_compartments(study)
    return route


def galerkin_compartments(study: GalerkinStudy) -> dict[str, np.ndarray]:
    """Fluid concentration of each compartment face at the internal times, extrapolated over
    the three meshes where it converges monotonically, else the fine mesh's."""
    meshes = list(reversed(study.solutions))  # fine, medium, coarse
    sizes = [float(sum(s.mesh.elements_per_layer)) for s in meshes]
    out = {}
    for side, fine in study.fine.compartments.items():
        values = np.array(fine, dtype=float)
        for k in range(values.size):
            found = _extrapolated([float(s.compartments[side][k]) for s in meshes], sizes)
            if found is not None:
                values[k] = found
        out[side] = values
    return out


def _extrapolated(per_mesh: list[float | None], sizes: list[float]) -> float | None:
    """Richardson value of a figure over the fine, medium and coarse mesh where it converges
    monotonically (Celik et al. 2008), else the fine mesh's; None where the fine has none."""
    fine = per_mesh[0]
    if fine is None or not math.isfinite(fine):
        return None
    if all(v is not None and math.isfinite(v) for v in per_mesh):
        found = convergence.grid_study([float(v) for v in per_mesh if v is not None], sizes)
        return float(found.best_estimate)
    return float(fine)


def galerkin_fronts(study: GalerkinStudy) -> FrontAccount | None:
    """The Galerkin route's fronts and depletion times on its three meshes
    (:func:`front_account`); None where no layer starts above its solubility."""
    fine = study.fine
    if not fine.loaded_layers or fine.front_outer is None or fine.front_inner is None:
        return None
    meshes = list(reversed(study.solutions))  # fine, medium, coarse
    return front_account(list(fine.loaded_layers),
                         [np.asarray(s.front_outer, dtype=float) for s in meshes],
                         [np.asarray(s.front_inner, dtype=float) for s in meshes],
                         [list(s.time_depleted_layers) for s in meshes],
                         [float(sum(s.mesh.elements_per_layer)) for s in meshes])


def fv_fronts(problem: Problem, fvs: list[TransientFVSolution]) -> FrontAccount | None:
    """The method of lines' fronts and depletion times on its three meshes (``fvs``: coarse,
    medium, fine), each mesh's read by ``dispersed.front_positions`` (at the internal times)
    and ``dispersed.depletion_times`` (on its accepted steps), through :func:`front_account`;
    None where no layer starts above its solubility or a mesh kept no contents. An edge that
    has not moved is NaN here (the Galerkin account places it at the layer's edge): compared
    only where both routes give it."""
    layers = dispersed.loaded_layers(problem)
    if not layers or any(f.contents is None or f.history is None for f in fvs):
        return None
    meshes = list(reversed(fvs))  # fine, medium, coarse
    edges = [dispersed.front_positions(f.mesh, problem, np.asarray(f.contents))
             for f in meshes]
    depleted = [dispersed.depletion_times(f.mesh, problem, f.history.ts, f.history.contents)
                for f in meshes]
    return front_account(layers, [e[0] for e in edges], [e[1] for e in edges], depleted,
                         [float(sum(f.diagnostics["cells_per_layer"])) for f in meshes])


def front_account(layers: list[int], outer: list[np.ndarray], inner: list[np.ndarray],
                  depleted: list[list[float | None]], sizes: list[float]) -> FrontAccount:
    """A numerical route's :class:`FrontAccount` from its fine, medium and coarse mesh (in that
    order; ``sizes`` their element or cell counts): per time and loaded layer each edge, and
    per layer the depletion time, extrapolated where the three meshes converge monotonically,
    else the fine mesh's (:func:`_extrapolated`; Celik et al., J. Fluids Eng. 130 (2008)
    078001), with the band |best - fine| + |fine - medium| (the fine mesh's GCI at ratio 2 and
    formal order 2 with Roache's safety factor 3, widened by the step to the best estimate)."""
    edges: dict[str, tuple[np.ndarray, np.ndarray]] = {}
    for side, per_mesh in (("outer", outer), ("inner", inner)):
        shape = per_mesh[0].shape
        values = np.full(shape, np.nan)
        bands = np.full(shape, np.nan)
        for k in range(shape[0]):
            for j in range(shape[1]):
                triple = [float(m[k, j]) for m in per_mesh]
                found = _extrapolated([v if math.isfinite(v) else None for v in triple], sizes)
                if found is None:
                    continue
                values[k, j] = found
                bands[k, j] = abs(found - triple[0]) + abs(triple[0] - triple[1])
        edges[side] = values, bands
    times: list[float | None] = []
    time_bands: list[float] = []
    for j in range(len(layers)):
        triple_t = [mesh[j] for mesh in depleted]
        found = _extrapolated(triple_t, sizes)
        times.append(found)
        fine, medium = triple_t[0], triple_t[1]
        time_bands.append(math.nan if found is None or fine is None or medium is None
                          else abs(found - fine) + abs(fine - medium))
    return FrontAccount(list(layers), edges["outer"][0], edges["inner"][0], times,
                        edges["outer"][1], edges["inner"][1], time_bands)
