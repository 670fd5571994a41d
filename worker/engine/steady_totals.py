"""The totals a steady record reports (rates through the faces, consumption; per length, per
area or for the whole body), computed by a route of their own.

The record's totals come from the primary solution's face fluxes and consumption with the
factors of :mod:`worker.engine.steady_check`. Here the same figures are formed from another
solution (the independent method's face fluxes and its own quadrature of the consumption) with
the shell measures written out afresh: a face of radius r has area A (slab, per m^2 of face
when no area is given), circumference 2 pi r per unit length (cylinder) or area 4 pi r^2
(sphere), and the body's volume element is dV = A dr, 2 pi r L dr, 4 pi r^2 dr (Crank,
*The Mathematics of Diffusion*, 2nd ed., 1975, §5.2 and §6.2, the cylinder's and sphere's
shell balances). A slip in either set of factors shows as a disagreement.
"""

from __future__ import annotations

import math

from worker.engine.model import Problem

__all__ = ["shell_factor", "totals_by_second_route"]


def shell_factor(geometry: str) -> float:
    """dV / (r^n dr) of a unit-size shell: 1 (slab), 2 pi (cylinder), 4 pi (sphere)."""
    if geometry == "slab":
        return 1.0
    if geometry == "cylinder":
        return math.tau
    if geometry == "sphere":
        return 2.0 * math.tau
    raise ValueError(f"geometry: expected slab, cylinder or sphere, got {geometry!r}")


def totals_by_second_route(problem: Problem, flux_inner: float, flux_outer: float,
                           consumption: float) -> dict[str, float]:
    """Every total the record reports, by name, in SI.

    Parameters
    ----------
    problem : Problem
        The case (its geometry, faces, length or area).
    flux_inner, flux_outer : float
        Outward flux densities at the faces, amount/(m^2*s), of the solution used.
    consumption : float
        That solution's r^n-weighted consumption integral, amount/(m^(2-n)*s).
    """
    geometry = problem.geometry
    exponent = {"slab": 0, "cylinder": 1, "sphere": 2}[geometry]
    r_in = problem.inner
    r_out = r_in + sum(layer.thickness for layer in problem.layers)
    factor = shell_factor(geometry)
    per_measure_in = factor * r_in**exponent * flux_inner
    per_measure_out = factor * r_out**exponent * flux_outer
    per_measure_consumed = factor * consumption
    out: dict[str, float] = {}
    size: float | None
    if geometry == "cylinder":
        out["rate_per_length_inner"] = per_measure_in
        out["rate_per_length_outer"] = per_measure_out
        out["consumption_per_length"] = per_measure_consumed
        size = problem.length
    elif geometry == "slab":
        out["consumption_per_area"] = per_measure_consumed
        size = problem.area
    else:
        size = 1.0
    if size is not None:
        out["rate_inner"] = size * per_measure_in
        out["rate_outer"] = size * per_measure_out
        out["consumption"] = size * per_measure_consumed
    return out
