"""The true extremes of a continuous solution, not the smallest or largest sampled point.

A profile sampled at a few dozen points per layer misses the minimum of a thin reacting layer
by a fraction of its curvature times the spacing squared. Each layer's sampled extreme is
refined on the solution's own ``concentration_at`` between the sampled neighbours of the
extreme: one evenly spaced grid (one call of the solution for the whole grid, where a scalar
minimiser would call it a dozen times) and a parabolic step through the grid's best point
(R.P. Brent, *Algorithms for Minimization without Derivatives*, 1973, ch. 5); the layer's two
ends are kept as candidates (an extreme on a face or an interface is found there).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

#: Points of the grid laid over the bracket of the sampled extreme; the vertex of the parabola
#: through the grid's best point and its two neighbours (parabolic interpolation, Brent 1973,
#: ch. 5) then lands the extreme to round-off of C for a smooth solution.
GRID_POINTS = 65

__all__ = ["Extreme", "layer_extremes", "true_extreme"]


@dataclass(frozen=True)
class Extreme:
    """An extreme of the concentration: its value (amount/m^3), where (m) and in which layer."""

    value: float
    position: float
    layer: int


def _refine(evaluate: Callable[[np.ndarray], np.ndarray], r: np.ndarray, c: np.ndarray,
            j: int, sign: float, end_slopes: tuple[float, float] | None) -> tuple[float, float]:
    """Refine the sampled extreme at index ``j`` of ``(r, c)``; ``sign`` +1 for a minimum,
    -1 for a maximum. Returns (position, value), never worse than the sample. A sampled extreme
    at a layer end whose slope there (``end_slopes``, dC/dr at the two ends) points into the
    layer is the extreme itself: no search."""
    best_r, best_c = float(r[j]), float(c[j])
    if end_slopes is not None:
        if j == 0 and sign * end_slopes[0] >= 0.0:
            return best_r, best_c
        if j == r.size - 1 and sign * end_slopes[1] <= 0.0:
            return best_r, best_c
    low, high = float(r[max(j - 1, 0)]), float(r[min(j + 1, r.size - 1)])
    if not high > low:
        return best_r, best_c
    grid = np.linspace(low, high, GRID_POINTS)
    values = sign * np.asarray(evaluate(grid), dtype=float)
    k = int(np.argmin(values))
    if values[k] < sign * best_c:
        best_r, best_c = float(grid[k]), float(sign * values[k])
    if 0 < k < grid.size - 1:
        vertex = _parabola_vertex(evaluate, grid[k - 1:k + 2], values[k - 1:k + 2], sign)
        if vertex is not None and sign * vertex[1] < sign * best_c:
            best_r, best_c = vertex
    return best_r, best_c


def _parabola_vertex(evaluate: Callable[[np.ndarray], np.ndarray], x: np.ndarray,
                     f: np.ndarray, sign: float) -> tuple[float, float] | None:
    """The vertex of the parabola through three evenly spaced points ``x`` with (signed)
    values ``f`` around the grid's best point, evaluated on the solution itself (None when
    the three points do not bracket an interior extreme)."""
    curvature = f[0] - 2.0 * f[1] + f[2]
    if not curvature > 0.0:
        return None
    step = x[1] - x[0]
    where = float(min(max(x[1] + 0.5 * step * (f[0] - f[2]) / curvature, x[0]), x[2]))
    return where, float(np.asarray(evaluate(np.array([where])), dtype=float)[0])


def layer_extremes(concentration_at: Callable[..., np.ndarray], positions: list[np.ndarray],
                   sampled: list[np.ndarray], *, lowest: bool,
                   end_slopes: list[tuple[float, float]] | None = None) -> list[Extreme]:
    """Per layer, the true minimum (``lowest=True``) or maximum of a continuous solution.

    Parameters
    ----------
    concentration_at : callable
        ``(r, layer=i) -> C`` of the solution (m -> amount/m^3).
    positions, sampled : list of ndarray
        Per layer, the sample positions (both ends included) and the solution's values there;
        the search starts from the sampled extreme.
    end_slopes : list of (float, float), optional
        Per layer, dC/dr at its two ends (amount/m^4), when known: an extreme at an end where
        the profile rises (minimum) or falls (maximum) into the layer needs no search.
    """
    sign = 1.0 if lowest else -1.0
    out = []
    for i, (r, c) in enumerate(zip(positions, sampled, strict=True)):
        c = np.asarray(c, dtype=float)
        j = int(np.argmin(sign * c))

        def evaluate(x: np.ndarray, i: int = i) -> np.ndarray:
            return np.asarray(concentration_at(x, layer=i), dtype=float).ravel()

        slopes = end_slopes[i] if end_slopes is not None else None
        where, value = _refine(evaluate, np.asarray(r, dtype=float), c, j, sign, slopes)
        out.append(Extreme(value, where, i))
    return out


def true_extreme(extremes: list[Extreme], *, lowest: bool) -> Extreme:
    """The lowest (or highest) of the per-layer extremes."""
    return (min if lowest else max)(extremes, key=lambda e: e.value)
