"""A second, independent diffusivity estimate from early release: Crank's short-time form.

For a plane sheet of thickness l releasing through one face into a perfect sink, the other face
sealed (equivalently, half-thickness l of a sheet releasing from both faces), uniform initial
load, the released fraction at early times is

    M_t / M_inf = 2 (D t / (pi l^2))^(1/2)

(J. Crank, *The Mathematics of Diffusion*, 2nd ed., 1975, §4.3, the leading term of eq. 4.20).
The fraction is a straight line through the origin in sqrt(t) with slope
``s = 2 sqrt(D) / (l sqrt(pi))``, so ``D = pi l^2 s^2 / 4``.

The slope is a weighted linear fit through the origin of the points with measured fraction
<= ``FRACTION_LIMIT`` (0.5): ``s = sum(w x y) / sum(w x^2)``, ``u(s)^2 = 1 / sum(w x^2)`` with
``x = sqrt(t)``, ``w = 1/u^2`` (Press et al. 2007, *Numerical Recipes*, 3rd ed., §15.2, the
straight line without intercept; stated uncertainties, not rescaled by the scatter), and
``u(D) = (pi l^2 s / 2) u(s)`` by first-order propagation (JCGM 100:2008 §5.1.2).

Why 0.5: the leading term exceeds Crank's full series (eq. 4.18) by 0.097 % of the fraction at
M_t/M_inf = 0.5 (a D from a single point there would be 0.19 % low), by 0.0038 % at 0.4 and by
less than 1e-7 below 0.3 (checked against the series in the tests); beyond 0.5 the error grows
fast (0.64 % at 0.6, 2.3 % at 0.7).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

#: Largest measured release fraction the short-time fit uses.
FRACTION_LIMIT = 0.5
SOURCE = ("Crank 1975, The Mathematics of Diffusion, 2nd ed., §4.3: "
          "M_t/M_inf = 2 (D t / (pi l^2))^(1/2)")


@dataclass(frozen=True)
class ShortTimeEstimate:
    """D (m^2/s) and its standard error from early release; both None (with ``reason``) when
    fewer than two points qualify."""

    diffusivity: float | None
    standard_error: float | None
    slope: float | None  # s^(-1/2)
    points: int
    thickness: float  # m, the diffusion length l
    reason: str | None = None
    fraction_limit: float = FRACTION_LIMIT
    source: str = SOURCE

    @property
    def available(self) -> bool:
        return self.diffusivity is not None

    def agrees_with(self, estimate: float, standard_error: float, *,
                    coverage_factor: float = 2.0) -> bool | None:
        """Whether another estimate of D lies within ``coverage_factor`` combined standard
        uncertainties of this one (``|D1 - D2| <= k sqrt(u1^2 + u2^2)``, the two taken as
        independent; None when this estimate is not available)."""
        if self.diffusivity is None or self.standard_error is None:
            return None
        combined = math.hypot(self.standard_error, standard_error)
        return abs(self.diffusivity - estimate) <= coverage_factor * combined

    def as_dict(self) -> dict[str, Any]:
        return {
            "estimate": self.diffusivity,
            "standard_error": self.standard_error,
            "unit": "m^2/s",
            "points": self.points,
            "fraction_limit": self.fraction_limit,
            "thickness": self.thickness,
            "reason": self.reason,
            "source": self.source,
        }


def short_time_diffusivity(times: Any, fractions: Any, standard_uncertainty: Any,
                           thickness: float) -> ShortTimeEstimate:
    """D of a plane sheet from release fractions ``fractions`` (1) at ``times`` (s) with
    standard uncertainties (1, one per point or one for all), diffusion length ``thickness``
    (m: the thickness of a sheet sealed on one face, the half-thickness of one releasing from
    both). Uses the points with 0 < t and fraction <= ``FRACTION_LIMIT``."""
    t = np.asarray(times, dtype=float)
    y = np.asarray(fractions, dtype=float)
    if t.ndim != 1 or t.shape != y.shape or t.size == 0:
        raise ValueError(f"times, fractions: expected two lists of equal, non-zero length, got "
                         f"{t.size} and {y.size}")
    if np.ndim(standard_uncertainty) == 0:
        u = np.full(t.shape, float(standard_uncertainty))
    else:
        u = np.asarray(standard_uncertainty, dtype=float)
    if u.shape != t.shape:
        raise ValueError(f"standard_uncertainty: expected {t.size} values (one per point), "
                         f"got {u.size}")
    if not (np.all(np.isfinite(t)) and np.all(np.isfinite(y))):
        raise ValueError("times, fractions: expected finite numbers")
    if not np.all(np.isfinite(u) & (u > 0.0)):
        raise ValueError("standard_uncertainty: expected positive finite values")
    if not (math.isfinite(thickness) and thickness > 0.0):
        raise ValueError(f"thickness: expected a positive length in m, got {thickness!r}")
    use = (t > 0.0) & (y <= FRACTION_LIMIT)
    count = int(np.sum(use))
    if count < 2:
        return ShortTimeEstimate(
            None, None, None, count, thickness,
            reason=f"{count} point(s) at t > 0 with release fraction <= {FRACTION_LIMIT:g}; "
                   "the short-time estimate needs at least 2")
    x = np.sqrt(t[use])
    w = 1.0 / u[use] ** 2
    sxx = float(np.sum(w * x * x))
    slope = float(np.sum(w * x * y[use])) / sxx
    slope_se = 1.0 / math.sqrt(sxx)
    if slope <= 0.0:
        return ShortTimeEstimate(
            None, None, slope, count, thickness,
            reason=f"the fitted slope {slope:.3g} s^-1/2 is not positive: the early data show "
                   "no release")
    diffusivity = math.pi * thickness**2 * slope**2 / 4.0
    se = math.pi * thickness**2 * abs(slope) / 2.0 * slope_se
    return ShortTimeEstimate(diffusivity, se, slope, count, thickness)
