"""Transient trials: the primary figures of ``worker.engine.transient.run`` for many trials.

Three ways, the fastest that applies:

* **scaled series** (all trials at once): one layer without reaction, a plane sheet or a solid
  cylinder or sphere, a uniform initial concentration C0, and faces that are perfect sinks
  (``concentration`` 0), sealed (``flux`` 0) or ``symmetry``. Then C/C0 depends on r/L and
  tau = D t / L^2 alone (Crank 1975, ch. 4-6: the solutions are functions of D t / l^2), so the
  eigenfunction series of ``exact_series`` is evaluated once, on the unit body (L = 1, D = 1,
  C0 = 1), at every trial's tau: release fraction, amounts (times C0 L^(n+1) and the size factor)
  and extremes (times C0); t50 = tau50 L^2 / D with tau50 found once by the record's own
  root search (``scales.first_crossing``) on the unit series. The extremes of these bodies lie
  at a face, the centre or the mid-plane of the sheet, all of them profile points.
  Not for a layer with a solubility nor a compartment face.
* **series per trial**: other single-layer linear cases, the series of the record
  (``solve.series_on_scan``: the requested times with the event scan) trial by trial, where it
  converges at every requested time, as ``run_transient`` then takes it as primary.
* **full check per trial** (layered or nonlinear kinetics, or a series that does not
  converge): ``run_transient`` itself, one trial at a time, with the profile points as probes
  so that the extremes at a time are read from its probe rows (the sampled extremes of the
  primary profile, both ends of every layer included). Seconds per trial.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Sequence

import numpy as np

from worker.engine.design.paths import FieldRef, replaced, with_values
from worker.engine.design.requirements import read_figure
from worker.engine.design.targets import COMPARTMENT, Target
from worker.engine.model import Layer, Problem, Regime
from worker.engine.transient import exact_series
from worker.engine.transient.record import PROFILE_POINTS_PER_LAYER
from worker.engine.transient.run import run_transient
from worker.engine.transient.scales import first_crossing, size_factor
from worker.engine.transient.solve import requested_times, series_on_scan

__all__ = ["scaled_series_applies", "series_trial_applies", "transient_targets"]

#: Event scan of the unit body in tau = D t / L^2 (log-spaced), far past 90 % release.
TAU_SCAN = (1e-4, 1e2, 2000)
_LEVELS = {"t50": 0.5, "t90": 0.9}
_SCALED_FIELDS = {("layer", "thickness"), ("layer", "diffusivity"), ("layer", "initial"),
                  ("layer", "partition"), ("problem", "area"), ("problem", "length")}


def scaled_series_applies(problem: Problem, fields: Sequence[FieldRef]) -> bool:
    """True when every trial is the unit body's series rescaled (see the module docstring).

    Never for a layer with a solubility (a trial may load it above saturation, where the
    series, which knows no solubility, does not hold) nor for a compartment face (neither a
    sink nor sealed: its level follows the release)."""
    if len(problem.layers) != 1 or problem.layers[0].reaction.reacts:
        return False
    if problem.layers[0].solubility is not None:
        return False
    if any(b.kind == COMPARTMENT for b in (problem.inner_boundary, problem.outer_boundary)):
        return False
    if problem.geometry != "slab" and not problem.solid_centre:
        return False
    for boundary in (problem.inner_boundary, problem.outer_boundary):
        condition = boundary.condition
        if not (condition.is_perfect_sink(boundary) or condition.is_sealed(boundary)):
            return False
    if not any(b.condition.is_perfect_sink(b)
               for b in (problem.inner_boundary, problem.outer_boundary)):
        return False
    return all((f.part, f.name) in _SCALED_FIELDS for f in fields)


def transient_targets(problem: Problem, fields: Sequence[FieldRef], x: np.ndarray,
                      targets: Sequence[Target]) -> np.ndarray:
    """Targets (n, m) of the transient trials ``x`` (n, k); NaN where a trial fails. A probe's
    concentration is read per trial (the scaled series follows amounts and extremes only)."""
    if scaled_series_applies(problem, fields) and all(t.probe is None for t in targets):
        with np.errstate(all="ignore"):
            return _scaled_series(problem, fields, x, targets)
    out = np.full((x.shape[0], len(targets)), np.nan)
    for i in range(x.shape[0]):
        trial = with_values(problem, dict(zip(fields, x[i], strict=True)))
        try:
            out[i] = _one_trial(trial, targets)
        except (ValueError, ArithmeticError, np.linalg.LinAlgError):
            continue
    return out


# -- scaled series ------------------------------------------------------------------------------

def _unit_problem(problem: Problem, taus: np.ndarray) -> Problem:
    """The body with L = 1, D = 1, C0 = 1 (a sheet's inner face at 0), times ``taus``."""
    layer = problem.layers[0]
    unit_layer = Layer(layer.name, 1.0, 1.0, layer.partition, layer.reaction, 1.0)
    return dataclasses.replace(problem, inner=0.0, layers=(unit_layer,),
                               regime=Regime("transient", float(taus.max()), tuple(taus)))


def _scaled_series(problem: Problem, fields: Sequence[FieldRef], x: np.ndarray,
                   targets: Sequence[Target]) -> np.ndarray:
    n = x.shape[0]
    view = replaced(problem, {f: x[:, j] for j, f in enumerate(fields)})
    layer = view.layers[0]

    def full(value) -> np.ndarray:
        return np.broadcast_to(np.asarray(value, dtype=float), (n,)).copy()

    thickness, diffusivity = full(layer.thickness), full(layer.diffusivity)
    c0 = full(layer.initial)
    time_scale = thickness**2 / diffusivity
    extent = {"slab": view.area, "cylinder": view.length, "sphere": None}[problem.geometry]
    amount_scale = c0 * thickness ** (problem.exponent + 1) * full(extent or 1.0)
    duration = float(problem.regime.duration or 0.0)
    out = np.full((n, len(targets)), np.nan)
    series_targets = [j for j, t in enumerate(targets)
                      if t.at is not None or t.quantity == "release_fraction_final"]
    if series_targets:
        at = np.array([duration if targets[j].at is None else targets[j].at
                       for j in series_targets])
        taus = at[None, :] / time_scale[:, None]  # (n, targets)
        figures = _unit_figures(problem, taus.ravel())
        for column, j in enumerate(series_targets):
            quantity = targets[j].quantity
            found = figures[quantity].reshape(taus.shape)[:, column]
            if quantity.startswith("release_fraction"):
                out[:, j] = found
            elif quantity.startswith("concentration_"):
                out[:, j] = c0 * found
            else:
                out[:, j] = amount_scale * found
    events = [j for j, t in enumerate(targets) if t.quantity in _LEVELS]
    if events:
        tau_event = _unit_events(problem)
        for j in events:
            tau = tau_event[targets[j].quantity]
            if tau is not None:
                t = tau * time_scale
                out[:, j] = np.where(t <= duration, t, np.nan)
    out[~(time_scale > 0.0) | ~(c0 > 0.0)] = np.nan
    return out


def _unit_figures(problem: Problem, taus: np.ndarray) -> dict[str, np.ndarray]:
    """The unit body's series at every tau (amounts per measure for C0 = 1, L = 1; C/C0 at the
    profile points); NaN where the series does not converge (the full check would then take
    another route)."""
    distinct, inverse = np.unique(taus, return_inverse=True)
    finite = np.isfinite(distinct)
    times = np.where(finite, distinct, 1.0)
    unit = exact_series.solve_transient_exact(_unit_problem(problem, times), times)
    nan = np.full(distinct.shape, np.nan)
    if unit is None:
        return dict.fromkeys(_SERIES_QUANTITIES, nan[inverse])
    usable = finite & unit.release_converged
    released = unit.released_inner + unit.released_outer
    r = np.linspace(0.0, 1.0, PROFILE_POINTS_PER_LAYER)
    c = unit.concentration_at(r, times)
    shown = finite & (unit.converged | (times == 0.0))
    values = {"release_fraction": released / unit.initial_load,
              "released_inner": unit.released_inner, "released_outer": unit.released_outer,
              "remaining": unit.remaining,
              "concentration_min": np.where(shown, c.min(axis=1), np.nan),
              "concentration_max": np.where(shown, c.max(axis=1), np.nan)}
    values["release_fraction_final"] = values["release_fraction"]
    return {name: np.where(usable, value, np.nan)[inverse] for name, value in values.items()}


_SERIES_QUANTITIES = ("release_fraction", "release_fraction_final", "released_inner",
                      "released_outer", "remaining", "concentration_min", "concentration_max")


def _unit_events(problem: Problem) -> dict[str, float | None]:
    """tau50 and tau90 of the unit body, by the record's root search on a log scan."""
    scan = np.geomspace(*TAU_SCAN[:2], TAU_SCAN[2])
    unit = exact_series.solve_transient_exact(_unit_problem(problem, scan), scan)
    if unit is None:
        return dict.fromkeys(_LEVELS)

    def fraction(t: np.ndarray) -> np.ndarray:
        _, out_a, out_b, _ = unit.amounts_at(t)
        return (out_a + out_b) / unit.initial_load

    return {name: first_crossing(fraction, scan, level) for name, level in _LEVELS.items()}


# -- one trial ----------------------------------------------------------------------------------

def _one_trial(problem: Problem, targets: Sequence[Target]) -> np.ndarray:
    requested, duration = requested_times(problem)
    wanted = np.array(sorted({t.at for t in targets if t.at is not None}))
    if wanted.size and not np.all(np.isin(wanted, requested)):
        times = tuple(np.union1d(requested, wanted).tolist())
        problem = dataclasses.replace(problem, regime=dataclasses.replace(problem.regime,
                                                                          times=times))
        requested, duration = requested_times(problem)
    if series_trial_applies(problem):
        row = _series_trial(problem, targets, requested, duration)
        if row is not None:
            return row
    return _full_trial(problem, targets)


def series_trial_applies(problem: Problem) -> bool:
    """True when a trial may be read from the eigenfunction series: linear transport
    (``Problem.is_linear``: no layer that can saturate) and no compartment face (the series
    knows neither). Otherwise each trial is a full primary solve."""
    return problem.is_linear and not any(
        b.kind == COMPARTMENT for b in (problem.inner_boundary, problem.outer_boundary))


def _series_trial(problem: Problem, targets: Sequence[Target], requested: np.ndarray,
                  duration: float) -> np.ndarray | None:
    """The series figures of one trial where ``run_transient`` takes the series as primary
    (it converges at every internal time), else None."""
    internal = np.union1d(requested, [duration])
    series, scan = series_on_scan(problem, internal, duration)
    if series is None or scan is None:
        return None
    index = np.searchsorted(series.times, internal)
    if not bool(np.all(series.release_converged[index])):
        return None
    if any(t.quantity in ("concentration_min", "concentration_max") for t in targets):
        return None
    factor = size_factor(problem)[0]
    load = series.initial_load
    row = np.full(len(targets), np.nan)
    for j, target in enumerate(targets):
        if target.quantity in _LEVELS:
            def fraction(t: np.ndarray) -> np.ndarray:
                _, out_a, out_b, _ = series.amounts_at(t)
                return (out_a + out_b) / load
            found = first_crossing(fraction, scan, _LEVELS[target.quantity])
            row[j] = math.nan if found is None else found
            continue
        at = duration if target.at is None else target.at
        k = index[int(np.searchsorted(internal, at))]
        if target.probe is not None:
            if not bool(series.converged[k]):
                return None
            x = problem.probes[target.probe]
            row[j] = float(series.concentration_at(np.array([x]), np.array([at]))[0, 0])
            continue
        released = series.released_inner[k] + series.released_outer[k]
        if target.quantity in ("release_fraction", "release_fraction_final"):
            row[j] = released / load if load > 0.0 else math.nan
        elif target.quantity == "uptake":
            row[j] = -factor * released
        else:
            row[j] = factor * getattr(series, target.quantity)[k]
    return row


def _full_trial(problem: Problem, targets: Sequence[Target]) -> np.ndarray:
    """One trial by the full transient check; the figures read from its record as the design
    block reads them (a layer's minimum at a time from ``concentration_min_layers``)."""
    outcome = run_transient(problem)
    row = np.full(len(targets), np.nan)
    for j, target in enumerate(targets):
        reading = read_figure(target, outcome.quantities, outcome.series, problem.regime.duration)
        row[j] = math.nan if reading.value is None else reading.value
    return row
