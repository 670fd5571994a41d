"""Comparison bounds for Michaelis-Menten consumption from exactly solvable problems.

Michaelis-Menten uptake ``R(C) = Vmax C/(Km + C)`` has no closed-form steady solution. For
``0 <= C <= Cs`` it is bracketed by rates that do:

    Vmax C / (Km + Cs)  <=  R(C)  <=  min(Vmax, Vmax C / Km).

Comparison principle (M.H. Protter, H.F. Weinberger, *Maximum Principles in Differential
Equations*, Prentice-Hall, 1967; R. Aris, *The Mathematical Theory of Diffusion and Reaction in
Permeable Catalysts*, Oxford, 1975): if ``C`` solves ``-div(D grad C) + R(C) = 0`` and ``C_k``
solves the same problem with a rate ``k C`` (same boundary data), then ``L_k[C] = k C - R(C)``;
with ``k = Vmax/(Km + Cs)`` this is <= 0, so ``L_k[C_k - C] >= 0`` and ``C <= C_k``: the slower
first-order rate gives the UPPER solution. With ``k = Vmax/Km`` the sign flips and
``C >= C_k``. Where ``C0`` solves the zero-order problem with rate Vmax, on the set where
``C0 > C`` the rate of C0 is Vmax >= R(C), so ``C0 - C`` is subharmonic there and cannot have a
positive maximum: ``C >= C0``. The LOWER solution is therefore ``max(C0, C_{Vmax/Km})``.

``Cs`` must bound C. Consumption is non-negative, so ``C/K`` (continuous across interfaces) is
largest on a face: Cs in layer i is ``K_i`` times the largest face value of ``C/K``
(``reaction_measures.largest_surface_concentration``). The bracket does not apply, and None is
returned, when a face has a prescribed non-zero flux (an influx makes Cs unknown, an outflux can
drive C negative), when a fluid concentration is negative, when no face imposes a concentration,
or when the problem has no Michaelis-Menten layer.

Results support, and do not replace, design verification testing and qualified review.
"""

from __future__ import annotations

import dataclasses
import math
from typing import cast

import numpy as np

from worker.engine.exact_steady import solve_exact, validate_problem
from worker.engine.model import Problem, Reaction, SteadySolution
from worker.engine.reaction_measures import largest_surface_concentration
from worker.engine.reactions.michaelis_menten import KIND as MICHAELIS_MENTEN

REFERENCE = ("M.H. Protter, H.F. Weinberger, Maximum Principles in Differential Equations, 1967; "
             "R. Aris, The Mathematical Theory of Diffusion and Reaction in Permeable Catalysts, "
             "Oxford, 1975")
UPPER_METHOD = "mm-upper-bound-first-order-vmax-over-km-plus-cs"
LOWER_METHOD = "mm-lower-bound-max-of-zero-order-vmax-and-first-order-vmax-over-km"
LOWER_METHOD_FIRST_ORDER_ONLY = "mm-lower-bound-first-order-vmax-over-km-only"


def _applies(problem: Problem) -> bool:
    if not any(ly.reaction.law is MICHAELIS_MENTEN for ly in problem.layers):
        return False
    fed = False
    for boundary in (problem.inner_boundary, problem.outer_boundary):
        condition = boundary.condition
        flux = condition.imposed_flux(boundary)
        if flux is not None and flux != 0.0:
            return False
        if condition.fixes_level(boundary):
            fluid = condition.fluid_concentration(boundary)
            if fluid is None or fluid < 0.0:
                return False
            fed = True
    return fed


def _substitute(problem: Problem, rate_for) -> Problem:
    """The problem with each Michaelis-Menten layer's reaction replaced by rate_for(i, layer)."""
    layers = tuple(
        dataclasses.replace(layer, reaction=rate_for(i, layer))
        if layer.reaction.law is MICHAELIS_MENTEN else layer
        for i, layer in enumerate(problem.layers))
    return dataclasses.replace(problem, layers=layers)


def _nan_field(r, layer=None):
    return np.full(np.shape(r), np.nan)


def michaelis_menten_bracket(problem: Problem) -> tuple[SteadySolution, SteadySolution] | None:
    """Lower and upper steady solutions enclosing the Michaelis-Menten solution.

    Parameters
    ----------
    problem : Problem
        A case (SI units) with at least one Michaelis-Menten layer.

    Returns
    -------
    (lower, upper) or None
        ``lower.concentration_at(r) <= C(r) <= upper.concentration_at(r)`` for the true
        Michaelis-Menten profile C. ``upper`` is the full first-order solution with
        ``k = Vmax/(Km + Cs)`` in each Michaelis-Menten layer (its fluxes are those of that
        comparison problem). ``lower`` is the pointwise maximum of the zero-order (rate Vmax,
        depleted where needed) and the first-order (``k = Vmax/Km``) solutions; its
        ``flux_at`` returns NaN and its ``flux_inner``, ``flux_outer`` and ``consumption`` are
        NaN, since a maximum of two profiles is not a solution of one problem. Where the
        zero-order problem has no exact solution here (depletion in a multi-layer body), the
        first-order solution alone is the (looser) lower bound and the method name says so.
        None where the bracket does not apply (see the module docstring) or a comparison problem
        has no closed form.
    """
    validate_problem(problem)
    if not _applies(problem):
        return None
    # a fed face exists (``_applies``), so every layer has a surface bound
    surface = cast(dict[int, float], {i: largest_surface_concentration(problem, i)
                                      for i in range(len(problem.layers))})

    def slow(i, layer):
        r = layer.reaction
        return Reaction("first_order", rate_constant=r.vmax / (r.km + surface[i]))

    def fast(i, layer):
        r = layer.reaction
        return Reaction("first_order", rate_constant=r.vmax / r.km)

    def saturated(i, layer):
        return Reaction("zero_order", rate=layer.reaction.vmax)

    upper = solve_exact(_substitute(problem, slow))
    lower_linear = solve_exact(_substitute(problem, fast))
    if upper is None or lower_linear is None or not (upper.success and lower_linear.success):
        return None
    lower_zero = solve_exact(_substitute(problem, saturated))
    if lower_zero is not None and not lower_zero.success:
        lower_zero = None
    bounds = [float(surface[i]) for i, ly in enumerate(problem.layers)
              if ly.reaction.law is MICHAELIS_MENTEN]
    upper = dataclasses.replace(
        upper, method=UPPER_METHOD, reference=f"{REFERENCE}; {upper.reference}",
        message="upper comparison solution of the Michaelis-Menten problem",
        diagnostics={**upper.diagnostics, "surface_bound": bounds})
    parts: tuple[SteadySolution, ...]
    if lower_zero is None:
        method, parts = LOWER_METHOD_FIRST_ORDER_ONLY, (lower_linear,)
    else:
        method, parts = LOWER_METHOD, (lower_zero, lower_linear)

    def lower_concentration(r, layer=None):
        return np.maximum.reduce([p.concentration_at(r, layer) for p in parts])

    lower = SteadySolution(
        method=method, reference=f"{REFERENCE}; {lower_linear.reference}", success=True,
        message="lower comparison bound of the Michaelis-Menten problem (pointwise maximum; "
                "no flux field)",
        concentration_at=lower_concentration, flux_at=_nan_field, flux_inner=math.nan,
        flux_outer=math.nan, consumption=math.nan,
        depletion_front=None,
        diagnostics={"components": [p.method for p in parts], "surface_bound": bounds})
    return lower, upper
