"""Thiele moduli and Biot numbers by a second route: from their definitions, written out here
without the reaction and boundary kind objects, on whichever problem the caller gives (the
independent one, in a check).

Definitions (the record's): Thiele modulus ``phi = L sqrt(k/D)`` of a layer of thickness L and
diffusivity D, with k the first-order constant, ``vmax/km`` for Michaelis-Menten kinetics, and
``Q/Cs`` for a zero-order rate Q against the largest concentration Cs the faces impose in that
layer (E.W. Thiele, Ind. Eng. Chem. 31 (1939) 916; R. Aris, *The Mathematical Theory of
Diffusion and Reaction in Permeable Catalysts*, 1975; A.V. Hill, Proc. R. Soc. B 104 (1928) 39
for the zero-order form). Biot number of a film face ``Bi = h L_total / (K_face D)``, with D the
diffusivity of the layer at that face and ``K_face`` the face's layer/fluid partition
(Bird, Stewart & Lightfoot, *Transport Phenomena*, 2nd ed., 2002, §10.6 by analogy with heat).
"""

from __future__ import annotations

import math

from worker.engine.model import Problem

__all__ = ["biot_by_definition", "thiele_by_definition"]


def _face(problem: Problem, side: str):
    """(boundary, layer at the face, the face's partition) resolved here, not by the problem."""
    if side == "inner":
        boundary, layer = problem.inner_boundary, problem.layers[0]
    else:
        boundary, layer = problem.outer_boundary, problem.layers[-1]
    partition = layer.partition if boundary.partition is None else boundary.partition
    return boundary, layer, partition


def _imposed_level(problem: Problem, layer_index: int) -> float | None:
    """Largest material-side concentration the faces impose in layer ``layer_index``: a fixed
    concentration K_face C, or K_face C_bulk through a film with h > 0, carried across the
    interfaces by continuity of C/K."""
    levels = []
    for side in ("inner", "outer"):
        boundary, layer, partition = _face(problem, side)
        if boundary.kind == "concentration":
            fluid = boundary.value
        elif boundary.kind == "mass_transfer" and boundary.coefficient > 0.0:
            fluid = boundary.bulk
        else:
            continue
        levels.append(partition * fluid / layer.partition)
    if not levels:
        return None
    return problem.layers[layer_index].partition * max(levels)


def thiele_by_definition(problem: Problem, layer_index: int) -> float | None:
    """Thiele modulus (1) of layer ``layer_index``; None where the layer has none (no reaction,
    or a zero-order layer without a positive imposed concentration)."""
    layer = problem.layers[layer_index]
    reaction = layer.reaction
    if reaction.kind == "first_order":
        k = reaction.rate_constant
    elif reaction.kind == "michaelis_menten":
        k = reaction.vmax / reaction.km
    elif reaction.kind == "zero_order":
        level = _imposed_level(problem, layer_index)
        if level is None or level <= 0.0:
            return None
        k = reaction.rate / level
    else:
        return None
    return layer.thickness * math.sqrt(k / layer.diffusivity)


def biot_by_definition(problem: Problem, side: str) -> float | None:
    """Biot number (1) of the ``inner`` or ``outer`` face; None without a film there."""
    boundary, layer, partition = _face(problem, side)
    if boundary.kind != "mass_transfer":
        return None
    thickness = sum(ly.thickness for ly in problem.layers)
    return boundary.coefficient * thickness / (partition * layer.diffusivity)
