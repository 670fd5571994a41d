"""Composite Gauss-Legendre rule graded towards thin boundary layers.

Used to integrate closed-form profiles (for instance the consumption ``∫ k C r^n dr``) by a route
independent of the fluxes. A profile such as ``exp(-m (r - a))`` varies on the length ``1/m``
near an edge; the panels are therefore graded geometrically from each edge in steps of that
width, and, for a hollow layer much thicker than its inner radius, geometrically from the inner
radius too (where ln r varies fastest). Gauss-Legendre rules: M. Abramowitz, I.A. Stegun,
*Handbook of Mathematical Functions*, 1964, 25.4.29 (number from memory; the rule is numpy's
``leggauss``).
"""

from __future__ import annotations

import math

import numpy as np

POINTS_PER_PANEL = 16
# Edge grading, in boundary-layer widths: exp(-64) is far below double precision.
_EDGE_STEPS = tuple(2.0**k for k in range(-3, 7))

_LEGENDRE_NODES, _LEGENDRE_WEIGHTS = np.polynomial.legendre.leggauss(POINTS_PER_PANEL)


def graded_gauss_rule(
    inner_edge: float, outer_edge: float, boundary_width: float | None = None
) -> tuple[np.ndarray, np.ndarray]:
    """Nodes and weights of a composite Gauss-Legendre rule on ``[inner_edge, outer_edge]``.

    Parameters
    ----------
    inner_edge, outer_edge : float
        Interval ends a < b, m.
    boundary_width : float, optional
        Length (m) on which the integrand may vary exponentially near either edge, e.g. 1/m for
        a first-order layer; None for smooth integrands.

    Returns
    -------
    nodes, weights : ndarray
        ``sum(weights * f(nodes))`` approximates the integral of f over the interval.
    """
    a, b = float(inner_edge), float(outer_edge)
    length = b - a
    # panel ends as plain floats: a handful of them, sorted once
    ends = {a, 0.5 * (a + b), b}
    if boundary_width is not None and boundary_width < length:
        steps = [boundary_width * s for s in _EDGE_STEPS]
        steps = [s for s in steps if s < 0.5 * length]
        ends.update(a + s for s in steps)
        ends.update(b - s for s in steps)
    if a > 0.0 and b > 4.0 * a:
        ratios = (a * 2.0**k for k in range(1, int(math.log2(b / a)) + 1))
        ends.update(r for r in ratios if r < b)
    edges = np.array(sorted(ends))
    half = 0.5 * (edges[1:] - edges[:-1])
    middle = edges[:-1] + half
    nodes = (middle[:, None] + half[:, None] * _LEGENDRE_NODES).ravel()
    weights = (half[:, None] * _LEGENDRE_WEIGHTS).ravel()
    return nodes, weights
