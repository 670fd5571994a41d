"""The true extremes of a continuous solution, not the smallest or largest sampled point.

A profile sampled at a few dozen points per layer misses the minimum of a thin reacting layer
by a fraction of its curvature times the spacing squared. Each layer's sampled extreme is
refined by a bounded scalar minimisation (Brent's method on the bracketing interval,
``scipy.optimize.minimize_scalar(method="bounded")``; R.P. Brent, *Algorithms for Minimization
without Derivatives*, 1973, ch. 5) of the solution's own ``concentration_at`` between the
sampled neighbours of the extreme, and the layer's two ends are kept as candidates (an extreme
on a face or an interface is found there).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from scipy.optimize import minimize_scalar

#: Absolute position tolerance of the search, as a fraction of the bracketing interval: the
#: value's error is of the order of C'' (tolerance * interval)^2, far below round-off of C.
POSITION_TOLERANCE = 1e-7

__all__ = ["Extreme", "layer_extremes", "true_extreme"]


@dataclass(frozen=True)
class Extreme:
    """An extreme of the concentration: its value (amount/m^3), where (m) and in which layer."""

    value: float
    position: float
    layer: int


def _refine(evaluate: Callable[[float], float], r: np.ndarray, c: np.ndarray, j: int,
            sign: float, end_slopes: tuple[float, float] | None) -> tuple[float, float]:
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
    if high > low:
        found = minimize_scalar(lambda x: sign * evaluate(x), bounds=(low, high),
                                method="bounded",
                                options={"xatol": POSITION_TOLERANCE * (high - low)})
        if found.success and sign * float(found.fun) < sign * best_c:
            best_r, best_c = float(found.x), float(sign * found.fun)
    return best_r, best_c


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

        def evaluate(x: float, i: int = i) -> float:
            return float(np.asarray(concentration_at(np.array([x]), layer=i)).ravel()[0])

        slopes = end_slopes[i] if end_slopes is not None else None
        where, value = _refine(evaluate, np.asarray(r, dtype=float), c, j, sign, slopes)
        out.append(Extreme(value, where, i))
    return out


def true_extreme(extremes: list[Extreme], *, lowest: bool) -> Extreme:
    """The lowest (or highest) of the per-layer extremes."""
    return (min if lowest else max)(extremes, key=lambda e: e.value)
