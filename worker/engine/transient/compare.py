"""Every figure of a transient record by two routes: the primary solution against each
independent one, figure by figure.

A route is what one method says of the case (:class:`Route`): its amounts at the internal
times, its own initial load (each route divides by its own load: a wrong load shows), the
profile it gives at any requested time, and its t50/t90. The checks, each the worst over the
independent routes and the usable times (the worst named in its detail):

* ``cross_check.initial_load``: the loads, relative;
* ``cross_check.release_fraction`` (initially loaded body) or ``cross_check.released`` (empty
  body): released / own load, or the released amounts against the amount scale;
* ``cross_check.remaining``, ``cross_check.consumed``: the amounts held and consumed;
* ``cross_check.flux_inner``/``flux_outer``: face rates against the largest face rate (at least
  the rate that would move the amount scale over the duration); where a dissolution front
  moves, each numerical route's fine-mesh rate, the difference counted beyond both routes'
  grid bands |fine - medium| (the band of the fine value, not of a Richardson value);
* ``cross_check.profile``: the reported profile (final time), every point, against the
  concentration scale; ``cross_check.probes``: the probe rows at every requested time; for a
  numerical route the difference counts beyond its pointwise grid band (|fine - medium|, the
  GCI of a second-order scheme at ratio 2 with Roache's safety factor 3);
* ``cross_check.t50``, ``cross_check.t90``: reached by one route and not by the other fails;
* ``cross_check.concentration_min`` (:func:`compare_minima`): each route's true minimum of each
  layer at every requested time (its own bounded search on its own solution), against the
  concentration scale, beyond the grid bands at the two minima as for the profile;
* ``cross_check.time_to_steady`` (:func:`compare_steady_times`): relative to the primary's.
* ``cross_check.front_position`` (:func:`compare_fronts`): each loaded layer's undissolved
  region, its outer and inner edge at every internal time where both routes give it, the
  difference beyond both routes' grid bands as a fraction of the layer's thickness;
  ``cross_check.time_depleted``: when each layer's undissolved solute ran out, beyond both
  bands, relative to the primary's (ran out in one route only fails). Each band counts at most
  half the check's limit, so together they never forgive more than the limit itself.

Errors are ``|a - b| / max(|b|, CROSS_CHECK_FLOOR * scale)`` (:func:`scales.relative_errors`).
"""

from __future__ import annotations

import math

import numpy as np

from worker.engine.extremes import Extreme
from worker.engine.limits import check_limit
from worker.engine.model import Problem
from worker.engine.outcome import Check, Outcome
from worker.engine.transient.record import probe_row
from worker.engine.transient.scales import (
    CROSS_CHECK_FLOOR,
    face_rate_scale,
    face_weights,
    relative_errors,
    worst,
)
from worker.engine.transient.solution import Route

__all__ = ["compare_fronts", "compare_minima", "compare_routes", "compare_steady_times",
           "reported_series_sign_check"]


def _add(outcome: Outcome, name: str, value: float | None, problem: Problem,
         detail: str) -> None:
    limit = check_limit(problem, name)
    passed = value is not None and math.isfinite(value) and value <= limit
    outcome.checks.append(Check(name, value, limit, bool(passed), detail))


class _Worst:
    """The worst error of one check over the independent routes."""

    def __init__(self) -> None:
        self.value = -math.inf
        self.detail = ""
        self.failed: str | None = None

    def offer(self, value: float, detail: str) -> None:
        if not math.isfinite(value):
            if self.failed is None:
                self.failed = detail
            return
        if value > self.value:
            self.value, self.detail = value, detail

    def report(self, outcome: Outcome, problem: Problem, name: str) -> None:
        if self.failed is not None:
            _add(outcome, name, None, problem, self.failed)
        elif self.value > -math.inf:
            _add(outcome, name, self.value, problem, self.detail)


def compare_routes(outcome: Outcome, problem: Problem, primary: Route, others: list[Route],
                   internal: np.ndarray, profile_positions: list[tuple[int, np.ndarray]],
                   final_index: int, c_scale: float, amount_scale: float,
                   releasing: bool = True) -> None:
    """Every cross-check of ``primary`` against each of ``others`` (see the module notes);
    ``releasing`` False (a body fed through a face) compares the released amounts, not the
    fractions of the initial load, whatever that load."""
    checks: dict[str, _Worst] = {}

    def offer(name: str, value: float, detail: str) -> None:
        checks.setdefault(name, _Worst()).offer(value, detail)

    positive = internal > 0.0
    loaded = primary.initial_load > 0.0 or any(o.initial_load > 0.0 for o in others)
    for other in others:
        label = f"{primary.name} vs {other.name}"
        usable = positive & primary.usable & other.usable
        load_error = abs(primary.initial_load - other.initial_load) / max(
            abs(primary.initial_load), abs(other.initial_load), 1e-300)
        if loaded:
            offer("cross_check.initial_load", load_error,
                  f"{label}: initial load {primary.initial_load:.9g} vs "
                  f"{other.initial_load:.9g} (per measure), relative")
        if loaded and releasing:
            a = _released(primary) / primary.initial_load if primary.initial_load > 0 else None
            b = _released(other) / other.initial_load if other.initial_load > 0 else None
            if a is None or b is None:
                offer("cross_check.release_fraction", math.inf,
                      f"{label}: one route has no initial load to release")
            else:
                errors = np.where(usable, relative_errors(a, b, 1.0), np.nan)
                value, at = worst(errors, internal)
                offer("cross_check.release_fraction", value,
                      f"{label}: released / own initial load at {int(np.sum(usable))} times; "
                      f"worst at t = {at} s")
        else:
            errors_each = [relative_errors(primary.amounts[n], other.amounts[n], amount_scale)
                           for n in ("released_outer", "released_inner")]
            errors = np.where(usable, np.max(errors_each, axis=0), np.nan)
            value, at = worst(errors, internal)
            offer("cross_check.released", value,
                  f"{label}: released amounts at {int(np.sum(usable))} times, worst at t = "
                  f"{at} s, absolute below {CROSS_CHECK_FLOOR:g} of the amount scale")
        for name in ("remaining", "consumed"):
            a, b = primary.amounts[name], other.amounts[name]
            if name == "consumed" and not (np.any(a != 0.0) or np.any(b != 0.0)):
                continue
            errors = np.where(usable, relative_errors(a, b, amount_scale), np.nan)
            value, at = worst(errors, internal)
            offer(f"cross_check.{name}", value,
                  f"{label}: amount {name} at {int(np.sum(usable))} times, worst at t = {at} s, "
                  f"absolute below {CROSS_CHECK_FLOOR:g} of the amount scale")
        _flux_offers(offer, problem, primary, other, internal, label)
        _profile_offer(offer, problem, profile_positions, primary, other, final_index, c_scale,
                       label, internal)
        if problem.probes:
            _probe_offer(offer, problem, primary, other, internal, c_scale, label)
        for event in ("t50", "t90"):
            if event not in primary.events or event not in other.events:
                continue
            a_t, b_t = primary.events[event], other.events[event]
            if a_t is None and b_t is None:
                continue
            if a_t is None or b_t is None:
                offer(f"cross_check.{event}", math.inf,
                      f"{label}: {event} reached by one route only ({a_t} s vs {b_t} s)")
                continue
            offer(f"cross_check.{event}", abs(a_t - b_t) / abs(a_t),
                  f"{label}: {event} {a_t:.9g} s vs {b_t:.9g} s, relative to the first")
    for name, found in checks.items():
        found.report(outcome, problem, name)


def _released(route: Route) -> np.ndarray:
    return route.amounts["released_inner"] + route.amounts["released_outer"]


def _flux_offers(offer, problem: Problem, primary: Route, other: Route, internal: np.ndarray,
                 label: str) -> None:
    usable = (internal > 0.0) & primary.flux_usable & other.flux_usable
    weights = face_weights(problem)
    amounts = [np.abs(primary.amounts[name]) for name in
               ("released_inner", "released_outer", "consumed")]
    amount_scale = max([abs(primary.initial_load)] + [float(np.nanmax(a, initial=0.0))
                                                      for a in amounts])
    duration = float(internal[-1]) if internal.size and internal[-1] > 0.0 else 1.0
    scale = face_rate_scale([w * primary.amounts[f"flux_{s}"][usable]
                             for s, w in weights.items()], amount_scale, problem,
                            duration) or 1e-300
    for side, weight in weights.items():
        if weight == 0.0:
            continue
        a = weight * primary.amounts[f"flux_{side}"]
        b = weight * other.amounts[f"flux_{side}"]
        beyond = ""
        if problem.can_saturate:
            # a dissolution front makes a face rate step each time it leaves a cell, so the
            # meshes are not in their asymptotic range and a Richardson value can lie farther
            # from the truth than the fine mesh's: each numerical route's fine-mesh rate is
            # compared, and the difference counts beyond both routes' bands of those fine
            # values: the grid band (Roache 1994), as for the profile, plus, where added, the
            # Galerkin fine mesh's front step (``routes.add_front_flux_band``) and behind a
            # compartment the method of lines' time band (``routes.add_flux_time_band``)
            a = weight * primary.flux_fine.get(side, primary.amounts[f"flux_{side}"])
            b = weight * other.flux_fine.get(side, other.amounts[f"flux_{side}"])
            bands = [weight * route.flux_band.get(side, np.zeros(internal.size))
                     for route in (primary, other)]
            b = b + np.clip(a - b, -(bands[0] + bands[1]), bands[0] + bands[1])
            terms = "; ".join(dict.fromkeys(route.flux_band_terms for route in (primary, other)
                                            if route.flux_band))
            beyond = (" (each numerical route's fine mesh) beyond the routes' bands ("
                      f"{terms}; a dissolution front crosses cells)")
        errors = np.where(usable, relative_errors(a, b, scale), np.nan)
        value, at = worst(errors, internal)
        offer(f"cross_check.flux_{side}", value,
              f"{label}: face flux at {int(np.sum(usable))} times{beyond}, worst at t = {at} "
              f"s; absolute below {CROSS_CHECK_FLOOR:g} of the largest face rate")


def _profile_offer(offer, problem: Problem, positions: list[tuple[int, np.ndarray]],
                   primary: Route, other: Route, final_index: int, c_scale: float, label: str,
                   internal: np.ndarray) -> None:
    if not (primary.usable[final_index] and other.usable[final_index]):
        return
    worst_error, where = 0.0, math.nan
    cap = 0.5 * check_limit(problem, "cross_check.profile") * c_scale
    for layer, r in positions:
        diff = _beyond_bands(primary, other, r, final_index, layer, cap) / c_scale
        j = int(np.argmax(diff))
        if not diff[j] <= worst_error:
            worst_error, where = float(diff[j]), float(r[j])
    offer("cross_check.profile", worst_error,
          f"{label}: the reported profile at t = {internal[final_index]:.6g} s, worst at "
          f"r = {where:.6g} m, relative to the concentration scale {c_scale:.4g}")


def _band(route: Route, r: np.ndarray, k: int, layer: int, cap: float) -> np.ndarray:
    """A numerical route's grid band at r, at most ``cap`` (half the check's allowance: a band
    never forgives more than the limit itself); zero for an exact route."""
    if route.profile_band is None:
        return np.zeros(np.size(r))
    return np.minimum(np.asarray(route.profile_band(r, k, layer), dtype=float), cap)


def _beyond_bands(primary: Route, other: Route, r: np.ndarray, k: int, layer: int,
                  cap: float) -> np.ndarray:
    """|a - b| less the grid bands of the numerical routes (never below zero): two numerical
    solutions agree where their difference is inside their own discretisation uncertainty."""
    gap = np.abs(np.asarray(primary.profile(r, k, layer), dtype=float)
                 - np.asarray(other.profile(r, k, layer), dtype=float))
    gap = gap - _band(primary, r, k, layer, cap) - _band(other, r, k, layer, cap)
    return np.maximum(gap, 0.0)


def _probe_offer(offer, problem: Problem, primary: Route, other: Route, internal: np.ndarray,
                 c_scale: float, label: str) -> None:
    errors = np.full(internal.size, np.nan)
    floor = CROSS_CHECK_FLOOR * c_scale
    limit = check_limit(problem, "cross_check.probes")
    for k in range(internal.size):
        if not (primary.flux_usable[k] and other.flux_usable[k]) and internal[k] != 0.0:
            continue  # pointwise values converge with the fluxes, not with the amounts
        a = probe_row(primary.profile, problem, k)
        b = probe_row(other.profile, problem, k)
        reference = np.maximum(np.abs(a), floor)  # the primary: the exact route where one exists
        allowance = 0.5 * limit * reference
        band = sum(np.minimum(probe_row(route.profile_band, problem, k), allowance)
                   for route in (primary, other) if route.profile_band is not None)
        gap = np.maximum(np.abs(a - b) - band, 0.0)
        errors[k] = float(np.max(gap / reference))
    value, at = worst(errors, internal)
    offer("cross_check.probes", value,
          f"{label}: probe concentrations at every requested time, worst at t = {at} s")


def compare_minima(outcome: Outcome, problem: Problem, routes: list[Route],
                   minima: list[list[list[Extreme]]], internal: np.ndarray, index: np.ndarray,
                   c_scale: float) -> np.ndarray:
    """``cross_check.concentration_min``: the primary's (``routes[0]``) true minimum of each
    layer at each requested time against each other route's, where both routes' pointwise
    values are usable (at t = 0 the minima are the initial state's).

    ``minima[i][t][j]`` is route i's minimum of layer j at requested time t. The error is
    |a - b| less the grid bands of numerical routes at their minima (each at most half the
    allowance), over ``c_scale``. Returns the numerical uncertainty of each of the primary's
    minima, shape (times, layers): the larger of |a - b| over the other routes and the
    primary's own grid band there; NaN where no route could be compared.
    """
    primary, others = routes[0], routes[1:]
    mine = minima[0]
    shape = (len(mine), len(problem.layers))
    uncertainty = np.full(shape, np.nan)
    if not others:
        return uncertainty
    cap = 0.5 * check_limit(problem, "cross_check.concentration_min") * c_scale
    found = _Worst()
    for other, theirs in zip(others, minima[1:], strict=True):
        label = f"{primary.name} vs {other.name}"
        errors = np.full(len(mine), np.nan)
        for t, k in enumerate(int(i) for i in index):
            if internal[k] != 0.0 and not (primary.flux_usable[k] and other.flux_usable[k]):
                continue  # pointwise values converge with the fluxes, not with the amounts
            worst_layer = 0.0
            for j, (a, b) in enumerate(zip(mine[t], theirs[t], strict=True)):
                own = float(_band(primary, np.array([a.position]), k, j, math.inf)[0]) \
                    if internal[k] != 0.0 else 0.0
                spread = abs(a.value - b.value)
                previous = uncertainty[t, j]
                uncertainty[t, j] = max(spread, own, 0.0 if np.isnan(previous) else previous)
                if internal[k] != 0.0:
                    spread -= float(_band(primary, np.array([a.position]), k, j, cap)[0])
                    spread -= float(_band(other, np.array([b.position]), k, j, cap)[0])
                worst_layer = max(worst_layer, max(spread, 0.0) / c_scale)
            errors[t] = worst_layer
        value, at = worst(errors, internal[index])
        if at is not None:
            found.offer(value, f"{label}: true minimum of each layer (bounded search on each "
                               f"route's own solution) at every requested time, worst at "
                               f"t = {at} s, relative to the concentration scale {c_scale:.4g}")
    found.report(outcome, problem, "cross_check.concentration_min")
    return uncertainty


def compare_steady_times(outcome: Outcome, problem: Problem, names: list[str],
                         values: list[float | None]) -> None:
    """``cross_check.time_to_steady``: the primary's (first) time to steady against each other
    route's, relative to the primary's; reached by one route only fails."""
    found = _Worst()
    first = values[0]
    for name, value in zip(names[1:], values[1:], strict=True):
        label = f"{names[0]} vs {name}"
        if first is None and value is None:
            continue
        if first is None or value is None:
            found.offer(math.inf, f"{label}: the steady state is reached within the duration "
                                  f"by one route only ({first} s vs {value} s)")
            continue
        error = abs(first - value) / abs(first) if first != 0.0 else abs(first - value)
        found.offer(error, f"{label}: time to steady {first:.9g} s vs {value:.9g} s, "
                           "relative to the first")
    found.report(outcome, problem, "cross_check.time_to_steady")


def reported_series_sign_check(outcome: Outcome, problem: Problem, extra_lowest: float,
                               c_scale: float, amount_scale: float, size: float,
                               amount_time_error: float = 0.0) -> None:
    """``non_negativity`` over every reported series that cannot be negative: the profile, the
    probe rows and the amount held (relative to their scales; ``size`` turns the per-measure
    amount scale into the reported unit), and ``extra_lowest`` (the lowest cell concentration
    of the numerical solution). ``amount_time_error``: where the amounts are a Richardson
    combination of two time paths (implicit steps), their measured time error as a fraction of
    the amount scale (``convergence.time``): an amount held that has run out may fall below
    zero by that much, and only what lies beyond it counts."""
    series = outcome.series
    candidates = [("numerical cells", extra_lowest / c_scale)]
    if "profile" in series:
        candidates.append(("reported profile",
                           float(np.min(series["profile"]["concentration"])) / c_scale))
    if "probes" in series:
        rows = np.asarray(series["probes"]["concentration"], dtype=float)
        candidates.append(("reported probes", float(np.min(rows)) / c_scale))
    if "remaining" in series:
        values = np.asarray(series["remaining"]["values"], dtype=float)
        candidates.append(("reported amount held" + (
            f" (beyond its time error {amount_time_error:.2g})" if amount_time_error else ""),
            min(0.0, float(np.min(values)) / (size * amount_scale or 1.0)
                + amount_time_error)))
    name, lowest = min(candidates, key=lambda item: item[1])
    _add(outcome, "non_negativity", max(0.0, -lowest), problem,
         f"most negative of the reported profile, probe rows, amount held and the numerical "
         f"cells: {name} at {lowest:.3g} of its scale")


def compare_fronts(outcome: Outcome, problem: Problem, primary: Route, others: list[Route],
                   internal: np.ndarray) -> None:
    """``cross_check.front_position`` and ``cross_check.time_depleted`` of every route that
    gives fronts (:class:`~worker.engine.transient.solution.FrontAccount`) against the
    primary's, each difference less both accounts' grid bands (each at most half the limit;
    a NaN band counts as none); nothing where the primary or no other route gives them."""
    mine = primary.fronts
    if mine is None:
        return
    front_cap = 0.5 * check_limit(problem, "cross_check.front_position")
    time_cap = 0.5 * check_limit(problem, "cross_check.time_depleted")
    checks: dict[str, _Worst] = {}

    def offer(name: str, value: float, detail: str) -> None:
        checks.setdefault(name, _Worst()).offer(value, detail)

    for other in others:
        theirs = other.fronts
        if theirs is None:
            continue
        label = f"{primary.name} vs {other.name}"
        for column, layer in enumerate(mine.layers):
            if layer not in theirs.layers:
                offer("cross_check.front_position", math.inf,
                      f"{label}: layer {problem.layers[layer].name!r} has undissolved solute "
                      "in one route only")
                continue
            at = theirs.layers.index(layer)
            thickness = problem.layers[layer].thickness
            name = problem.layers[layer].name
            for side in ("outer", "inner"):
                a = getattr(mine, side)[:, column]
                b = getattr(theirs, side)[:, at]
                both = np.isfinite(a) & np.isfinite(b) & (internal > 0.0)
                if not np.any(both):
                    continue
                band = (_front_band(getattr(mine, f"band_{side}"), column, a.size,
                                    front_cap * thickness)
                        + _front_band(getattr(theirs, f"band_{side}"), at, a.size,
                                      front_cap * thickness))
                gap = np.maximum(np.abs(a - b) - band, 0.0)
                errors = np.where(both, gap / thickness, np.nan)
                value, when = worst(errors, internal)
                offer("cross_check.front_position", value,
                      f"{label}: {side} edge of the undissolved region of layer {name!r} at "
                      f"{int(np.sum(both))} times, beyond both routes' grid bands, worst at "
                      f"t = {when} s, as a fraction of its thickness {thickness:.6g} m")
            t_a, t_b = mine.time_depleted[column], theirs.time_depleted[at]
            if t_a is None and t_b is None:
                continue
            if t_a is None or t_b is None:
                offer("cross_check.time_depleted", math.inf,
                      f"{label}: the undissolved solute of layer {name!r} runs out within the "
                      f"duration in one route only ({t_a} s vs {t_b} s)")
                continue
            cap = time_cap * abs(t_a)
            band = sum(min(found[i], cap) for found, i in ((mine.band_depleted, column),
                                                          (theirs.band_depleted, at))
                       if found is not None and math.isfinite(found[i]))
            offer("cross_check.time_depleted",
                  max(abs(t_a - t_b) - band, 0.0) / max(abs(t_a), 1e-300),
                  f"{label}: layer {name!r} runs out of undissolved solute at {t_a:.9g} s vs "
                  f"{t_b:.9g} s (bands {band:.3g} s together), the difference beyond the "
                  "bands relative to the first")
    for name, found in checks.items():
        found.report(outcome, problem, name)


def _front_band(bands: np.ndarray | None, column: int, size: int, cap: float) -> np.ndarray:
    """One account's band of one layer's edge at each internal time, at most ``cap`` (zero for
    an exact account or where the band is not finite)."""
    if bands is None:
        return np.zeros(size)
    found = np.asarray(bands[:, column], dtype=float)
    return np.minimum(np.where(np.isfinite(found), found, 0.0), cap)
