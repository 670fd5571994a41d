"""Design limit: the value of one input at which a requirement's margin crosses zero.

The margin (> 0 met) is scanned on a grid over the range, log-spaced by default (design inputs
such as thicknesses and diffusivities span decades), for a change of sign; Brent's method
(Brent 1973, *Algorithms for Minimization without Derivatives*, ch. 4; ``scipy.optimize.brentq``)
then finds the zero inside the bracket. A range without a limit is a result, not an error: the
margin is positive everywhere, negative everywhere, or not finite where it would matter.

With several sign changes the one nearest ``nominal`` (the current design, distance measured on
the scan's scale) is refined, or the lowest one when no nominal is given: the engineer asks how
far the design may move before the requirement fails. The other brackets are listed in
``other_brackets`` and named in ``reason``.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any, Literal

import numpy as np
from scipy.optimize import brentq

DEFAULT_GRID_POINTS = 25
DEFAULT_XTOL_RELATIVE = 1e-6


@dataclass(frozen=True)
class LimitResult:
    """``value`` (SI) where the margin is zero, or None with the ``reason``.

    ``bracket``: the scan interval holding the zero (the whole range when none);
    ``met_side``: ``"below"`` when the margin is positive for values below the limit,
    ``"above"`` when above; ``evaluations``: calls of the margin.
    """

    value: float | None
    bracket: tuple[float, float]
    met_side: Literal["below", "above"] | None
    reason: str
    evaluations: int
    other_brackets: tuple[tuple[float, float], ...] = field(default=())

    def as_dict(self) -> dict[str, Any]:
        return {"value": self.value, "bracket": list(self.bracket), "met_side": self.met_side,
                "reason": self.reason, "evaluations": self.evaluations,
                "other_brackets": [list(b) for b in self.other_brackets]}


class _NotFinite(Exception):
    def __init__(self, at: float) -> None:
        super().__init__(at)
        self.at = at


def _grid(low: float, high: float, points: int, logarithmic: bool) -> np.ndarray:
    if logarithmic:
        grid = np.geomspace(low, high, points)
    else:
        grid = np.linspace(low, high, points)
    grid[0], grid[-1] = low, high
    return grid


def _format(values: list[float]) -> str:
    return ", ".join(f"{v:.6g}" for v in values)


def find_limit(margin: Callable[[float], float], low: float, high: float, *,
               scale: Literal["log", "linear"] = "log",
               grid_points: int = DEFAULT_GRID_POINTS,
               xtol_relative: float = DEFAULT_XTOL_RELATIVE,
               nominal: float | None = None) -> LimitResult:
    """Find where ``margin(x)`` (> 0: requirement met) changes sign in ``[low, high]``.

    ``scale="log"`` spaces the scan geometrically when ``low > 0`` (linearly otherwise);
    the zero is refined to ``|error| <= xtol_relative * |value|`` (plus the absolute part
    ``xtol_relative * max(|a|, |b|)`` of the bracket [a, b]). A margin of exactly zero at a scan
    point is that point's limit.
    """
    low, high = float(low), float(high)
    if not (math.isfinite(low) and math.isfinite(high) and low < high):
        raise ValueError(f"design_limit.range: expected two finite values low < high, got "
                         f"[{low!r}, {high!r}]")
    if grid_points < 2:
        raise ValueError(f"grid_points: expected at least 2, got {grid_points}")
    if not 0.0 < xtol_relative < 0.1:
        raise ValueError(f"xtol_relative: expected a value in (0, 0.1), got {xtol_relative}")
    if scale not in ("log", "linear"):
        raise ValueError(f"scale: expected 'log' or 'linear', got {scale!r}")
    logarithmic = scale == "log" and low > 0.0
    grid = _grid(low, high, grid_points, logarithmic)
    values = np.array([float(margin(float(x))) for x in grid])
    evaluations = grid.size
    finite = np.isfinite(values)
    not_finite = [float(x) for x in grid[~finite]]

    crossings: list[tuple[float, float]] = []
    for i in range(grid.size - 1):
        a, b = values[i], values[i + 1]
        if not (finite[i] and finite[i + 1]):
            continue
        if a == 0.0:
            crossings.append((float(grid[i]), float(grid[i])))
        elif a * b < 0.0:
            crossings.append((float(grid[i]), float(grid[i + 1])))
    if finite[-1] and values[-1] == 0.0:
        crossings.append((float(grid[-1]), float(grid[-1])))

    note = f"; margin not finite at {_format(not_finite)}" if not_finite else ""
    whole = (low, high)
    if not crossings:
        finite_values = values[finite]
        if finite_values.size == 0:
            reason = f"no limit in range: margin not finite at every scan point{note}"
        elif np.all(finite_values > 0.0):
            reason = f"no limit in range: requirement met everywhere{note}"
        elif np.all(finite_values < 0.0):
            reason = f"no limit in range: requirement missed everywhere{note}"
        else:
            reason = f"no limit in range: the sign changes only across failed points{note}"
        return LimitResult(None, whole, None, reason, evaluations)

    chosen = _nearest(crossings, nominal, logarithmic)
    others = tuple(c for c in crossings if c != chosen)
    a, b = chosen
    if a == b:
        value = a
    else:
        tolerance = xtol_relative * max(abs(a), abs(b))

        def guarded(x: float) -> float:
            number = float(margin(x))
            if not math.isfinite(number):
                raise _NotFinite(x)
            return number

        try:
            value, report = brentq(guarded, a, b, xtol=tolerance,
                                   rtol=max(xtol_relative, 4.0 * np.finfo(float).eps),
                                   full_output=True)
        except _NotFinite as failure:
            return LimitResult(None, chosen, None,
                               f"no limit found: margin not finite at {failure.at:.6g} inside "
                               f"the bracket [{a:.6g}, {b:.6g}]{note}", evaluations,
                               others)
        evaluations += report.function_calls
        value = float(value)
    met_side = _met_side(grid, values, finite, a, b)
    reason = "limit found"
    if others:
        reason += (f"; {len(others)} other sign change(s) in "
                   + ", ".join(f"[{lo:.6g}, {hi:.6g}]" for lo, hi in others)
                   + (" (the one nearest the nominal value is given)" if nominal is not None
                      else " (the lowest is given)"))
    return LimitResult(value, chosen, met_side, reason + note, evaluations, others)


def _nearest(crossings: list[tuple[float, float]], nominal: float | None,
             logarithmic: bool) -> tuple[float, float]:
    if nominal is None:
        return crossings[0]

    def position(x: float) -> float:
        return math.log(x) if logarithmic and x > 0.0 else x

    target = position(nominal) if (not logarithmic or nominal > 0.0) else nominal
    return min(crossings, key=lambda c: abs(0.5 * (position(c[0]) + position(c[1])) - target))


def _met_side(grid: np.ndarray, values: np.ndarray, finite: np.ndarray, a: float,
              b: float) -> Literal["below", "above"] | None:
    """Which side of the zero the margin is positive, read from the nearest finite, nonzero
    scan values on either side."""
    below = [v for x, v, ok in zip(grid, values, finite, strict=True)
             if ok and x <= a and v != 0.0]
    above = [v for x, v, ok in zip(grid, values, finite, strict=True)
             if ok and x >= b and v != 0.0]
    if below and below[-1] > 0.0:
        return "below"
    if above and above[0] > 0.0:
        return "above"
    if below:
        return "above"
    if above:
        return "below"
    return None
