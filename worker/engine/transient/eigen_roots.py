"""Bracketed roots of the transcendental eigenvalue equations of transient diffusion.

Every root is found by Brent's method (``scipy.optimize.brentq``) inside a bracket across which
the characteristic function changes sign, so no root is taken from an unguarded Newton step.
Two ways of bracketing are offered:

* fixed brackets between the asymptotes of a tangent form (``sheet_surface_film_roots``:
  the n-th root of ``beta * tan(beta) = L`` lies in ``((n-1)*pi, (n-1)*pi + pi/2)``);
* a scan (``scanned_roots``) of a smooth characteristic function, written as a determinant
  with no poles, on a grid finer than the smallest spacing of its roots.

References
----------
J. Crank, *The Mathematics of Diffusion*, 2nd ed., Oxford, 1975, section 4.3.5 (roots of
beta tan beta = L) and ch. 5 (roots of J0 and of Bessel cross products).
H.S. Carslaw, J.C. Jaeger, *Conduction of Heat in Solids*, 2nd ed., Oxford, 1959, ch. 3 and 7.
R.P. Brent, *Algorithms for Minimization without Derivatives*, Prentice-Hall, 1973, ch. 4.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
from scipy.optimize import brentq

#: Absolute tolerance of a root in the scaled variable (dimensionless, beta or lambda*L).
ROOT_XTOL = 1e-14
#: Relative tolerance of a root.
ROOT_RTOL = 4.0 * np.finfo(float).eps
#: Grid points per expected root spacing when scanning for sign changes.
SCAN_POINTS_PER_SPACING = 16


def sheet_surface_film_roots(film_number: float, count: int) -> np.ndarray:
    """The first ``count`` positive roots of ``beta * tan(beta) = L``.

    Parameters
    ----------
    film_number : float
        ``L = l * h / D`` (dimensionless): half-thickness l (m), surface-film coefficient h (m/s),
        diffusivity D (m^2/s). Must be positive and finite.
    count : int
        Number of roots wanted (>= 1).

    Returns
    -------
    numpy.ndarray
        Roots beta_1 < beta_2 < ..., dimensionless.

    Notes
    -----
    Written as ``f(beta) = beta * sin(beta) - L * cos(beta)``, which has the same roots in
    ``((n-1)*pi, (n-1)*pi + pi/2)`` and no poles: at the left end f = -L*(-1)^(n-1), at the right
    end f = beta*(-1)^(n-1), and f is monotone there, so each bracket holds exactly one root.

    References
    ----------
    J. Crank, *The Mathematics of Diffusion*, 2nd ed., 1975, section 4.3.5 (from memory).
    """
    if not np.isfinite(film_number) or film_number <= 0.0:
        raise ValueError(f"film_number must be a positive finite number, got {film_number!r}")
    if count < 1:
        raise ValueError(f"count must be at least 1, got {count!r}")

    def characteristic(beta: float) -> float:
        return beta * np.sin(beta) - film_number * np.cos(beta)

    roots = np.empty(count)
    for index in range(count):
        lower = index * np.pi
        upper = lower + 0.5 * np.pi
        roots[index] = brentq(characteristic, lower, upper, xtol=ROOT_XTOL, rtol=ROOT_RTOL)
    return roots


def scanned_roots(
    characteristic: Callable[[np.ndarray], np.ndarray],
    upper: float,
    spacing: float,
    lower: float = 0.0,
) -> np.ndarray:
    """All roots of a smooth characteristic function in ``(lower, upper]``.

    Parameters
    ----------
    characteristic : callable
        Vectorised ``f(lam) -> array``, continuous and without poles on ``(lower, upper]``.
    upper : float
        End of the search interval (same unit as ``lam``, e.g. 1/m).
    spacing : float
        A lower estimate of the spacing between consecutive roots (for Sturm-Liouville problems
        on an interval of length L, about pi/L). The scan step is ``spacing /
        SCAN_POINTS_PER_SPACING``.
    lower : float
        Start of the search interval (excluded).

    Returns
    -------
    numpy.ndarray
        Increasing roots, each refined by Brent's method in its sign-change bracket.
    """
    if not (np.isfinite(upper) and np.isfinite(spacing) and spacing > 0.0 and upper > lower):
        raise ValueError(
            f"need finite upper > lower and spacing > 0, got lower={lower!r}, upper={upper!r}, "
            f"spacing={spacing!r}"
        )
    step = spacing / SCAN_POINTS_PER_SPACING
    # An irrational offset keeps grid points off roots that fall on round multiples of pi/L.
    grid = lower + step * (0.3819660112501051 + np.arange(int(np.ceil((upper - lower) / step)) + 1))
    values = np.asarray(characteristic(grid), dtype=float)
    if not np.all(np.isfinite(values)):
        raise ValueError("characteristic function is not finite on the scan grid")
    exact = grid[values == 0.0]
    change = np.nonzero(np.sign(values[:-1]) * np.sign(values[1:]) < 0.0)[0]

    def scalar(lam: float) -> float:
        return float(np.asarray(characteristic(np.array([lam])), dtype=float)[0])

    roots = [
        brentq(scalar, grid[i], grid[i + 1], xtol=ROOT_XTOL * spacing, rtol=ROOT_RTOL)
        for i in change
    ]
    return np.sort(np.concatenate((np.asarray(roots, dtype=float), exact)))
