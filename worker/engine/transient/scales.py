"""Scales and small measures of a transient case: the reported amount's unit and size factor,
the relaxation time, and the error measures the checks share."""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable

import numpy as np
from scipy.optimize import brentq

from worker.engine.model import Problem

#: Values below this fraction of their scale are compared absolutely (see ``relative_errors``).
CROSS_CHECK_FLOOR = 1e-2

__all__ = [
    "CROSS_CHECK_FLOOR",
    "amount_scale",
    "capacity_resistance_time",
    "face_rate_scale",
    "face_weights",
    "first_crossing",
    "is_membrane",
    "relative_errors",
    "size_factor",
    "worst",
]


def size_factor(problem: Problem) -> tuple[float, str]:
    """Factor turning per-measure amounts into reported amounts, and the amount unit."""
    amount = problem.amount_unit
    if problem.geometry == "slab":
        return (problem.area, amount) if problem.area else (1.0, f"{amount}/m^2")
    if problem.geometry == "cylinder":
        return (problem.length, amount) if problem.length else (1.0, f"{amount}/m")
    return 1.0, amount


def is_membrane(problem: Problem) -> bool:
    """Initially empty body, fixed source at the inner face, sink at the outer face."""
    inner, outer = problem.inner_boundary, problem.outer_boundary
    return (
        all(layer.initial == 0.0 for layer in problem.layers)
        and all(not layer.reaction.reacts for layer in problem.layers)
        and inner.condition.holds_concentration and inner.value > 0.0
        and outer.condition.is_perfect_sink(outer)
    )


def capacity_resistance_time(problem: Problem) -> float:
    """Slowest relaxation time estimate, s: capacity sum(K L) times resistance sum(L/(K D)),
    plus film resistances K_face/h; for one layer it is L^2/D (above the slowest mode's
    4 L^2/(pi^2 D) of a sink-sealed layer)."""
    capacity = sum(ly.partition * ly.thickness for ly in problem.layers)
    resistance = sum(ly.thickness / (ly.partition * ly.diffusivity) for ly in problem.layers)
    for boundary in (problem.inner_boundary, problem.outer_boundary):
        h = boundary.condition.film_coefficient(boundary)
        if h is not None and h > 0.0:
            resistance += 1.0 / h
    if all(not b.condition.fixes_level(b)
           for b in (problem.inner_boundary, problem.outer_boundary)):
        resistance = math.inf
        rates = [ly.reaction.linear_rate_constant or 0.0 for ly in problem.layers]
        if any(rates):
            return 1.0 / min(r for r in rates if r > 0)
    return capacity * resistance


def amount_scale(initial_load: float, released_inner, released_outer, consumed) -> float:
    """The scale the amounts are judged on (mol, or mol per unit measure): the larger of the
    initial load and the largest throughput at any time, |released at either face| +
    |consumed| (the arrays over the times)."""
    return max(abs(initial_load), float(np.max(
        np.abs(np.asarray(released_inner)) + np.abs(np.asarray(released_outer))
        + np.abs(np.asarray(consumed)))))


def face_weights(problem: Problem) -> dict[str, float]:
    """Each face's weight r^n (``"inner"``, ``"outer"``; zero for a solid centre): a face's
    flux density times it, times the measure factor, is the rate through the face."""
    return {"inner": 0.0 if problem.solid_centre else problem.inner ** problem.exponent,
            "outer": problem.outer ** problem.exponent}


def face_rate_scale(rates: Iterable[np.ndarray], amount_scale: float, problem: Problem,
                    duration: float) -> float:
    """The scale the face rates are compared on: the largest |weighted rate| (``rates``:
    flux densities times :func:`face_weights`), at least the rate that, held over the whole
    ``duration`` (s), would move the amount scale (a face that passes nothing at every time,
    as after a zero-order depletion, is not judged by the relative size of two numbers that
    are both round-off)."""
    floor = amount_scale / (problem.measure_factor * duration)
    return max([float(np.nanmax(np.abs(r), initial=0.0)) for r in rates] + [floor])


def relative_errors(values, reference, scale: float) -> np.ndarray:
    """``|a - b| / max(|b|, CROSS_CHECK_FLOOR * scale)``: relative where the reference is
    large, absolute (a fraction of ``scale``) where it is small."""
    values = np.asarray(values, dtype=float)
    reference = np.asarray(reference, dtype=float)
    floor = CROSS_CHECK_FLOOR * scale if scale > 0 else 1e-300
    return np.abs(values - reference) / np.maximum(np.abs(reference), floor)


def worst(errors: np.ndarray, times: np.ndarray) -> tuple[float, float | None]:
    """The largest finite error and its time; (NaN, None) when none is finite."""
    finite = np.isfinite(errors)
    if not np.any(finite):
        return math.nan, None
    index = int(np.nanargmax(np.where(finite, errors, -np.inf)))
    return float(errors[index]), float(times[index])


#: Decades below a scan's first time searched for a crossing the scan starts after.
EARLIER_DECADES = 15


def first_crossing(function: Callable[[np.ndarray], np.ndarray], grid: np.ndarray,
                   level: float) -> float | None:
    """First t where the increasing ``function(t)`` reaches ``level``: the first grid interval
    where it does, refined by brentq; when it has already reached it at the grid's first time,
    searched decade by decade below that time (None: not reached on the grid)."""
    values = np.asarray(function(grid), dtype=float) - level
    above = np.nonzero(values >= 0.0)[0]
    if above.size == 0:
        return None

    def gap(t: float) -> float:
        return float(np.asarray(function(np.array([t])))[0]) - level

    k = int(above[0])
    if k > 0:
        return float(brentq(gap, grid[k - 1], grid[k], xtol=1e-12 * grid[k], rtol=1e-12))
    # Reached at the grid's first time: the crossing is earlier; step down a decade at a
    # time (the grid starts where the caller's solution is cheapest, not at t = 0).
    high = float(grid[0])
    for _ in range(EARLIER_DECADES):
        if high <= 0.0 or gap(high) == 0.0:
            return high
        low = high / 10.0
        if gap(low) < 0.0:
            return float(brentq(gap, low, high, xtol=1e-12 * high, rtol=1e-12))
        high = low
    return high
