"""Thiele modulus and the classical effectiveness factors.

Thiele modulus (Thiele 1939; Aris 1975; both below): ``phi = thickness * sqrt(k / D)`` with k
the first-order constant or ``vmax / km``; for the innermost layer of a solid cylinder or sphere
the thickness is its outer radius. Effectiveness factors of a single first-order body with a
fixed surface concentration (E.W. Thiele, "Relation between catalytic activity and size of
particle", Ind. Eng. Chem. 31 (1939) 916-920; R. Aris, *The Mathematical Theory of Diffusion
and Reaction in Permeable Catalysts*, Oxford, 1975): slab of half-thickness L sealed at the
mid-plane ``tanh(phi)/phi``; solid cylinder ``2 I1(phi) / (phi I0(phi))``; sphere
``(3/phi^2) (phi coth(phi) - 1)``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import special

from worker.engine.model import Layer, Problem

#: Michaelis-Menten regimes by the saturation C/km at the fed face: at or below FIRST_ORDER_LIKE
#: the rate is within 10 % of vmax C/km (first order); at or above SATURATED within 10 % of
#: vmax (zero order). Common practice.
FIRST_ORDER_LIKE = 0.1
SATURATED = 10.0

# Below this phi the sphere factor uses its Taylor series (phi coth phi - 1 cancels); the
# series terms fall like 2 (phi/pi)^(2k), so _SPHERE_SERIES_TERMS terms reach double precision.
_SPHERE_SERIES_LIMIT = 1.0
_SPHERE_SERIES_TERMS = 17


def largest_surface_concentration(problem: Problem, layer_index: int) -> float | None:
    """Largest concentration the faces can impose, expressed in layer ``layer_index``.

    Each concentration or mass-transfer face imposes at most ``K_face * C_fluid`` on the layer at
    that face (``K_face * bulk`` through a film); since ``C/K`` is continuous between layers, the
    bound in layer i is ``K_i`` times the largest of ``K_face * C_fluid / K_face_layer``.
    None when no face imposes a concentration.
    """
    candidates = []
    faces = ((problem.inner_boundary, "inner", problem.layers[0]),
             (problem.outer_boundary, "outer", problem.layers[-1]))
    for boundary, side, face_layer in faces:
        fluid = boundary.condition.fluid_concentration(boundary)
        if fluid is None or not boundary.condition.fixes_level(boundary):
            continue
        candidates.append(problem.face_partition(side) * fluid / face_layer.partition)
    if not candidates:
        return None
    return problem.layers[layer_index].partition * max(candidates)


def thiele_modulus(layer: Layer, problem: Problem) -> float | None:
    """Thiele modulus of one layer (dimensionless), None where it does not react.

    Parameters
    ----------
    layer : Layer
        One of ``problem.layers``.
    problem : Problem
        The case it belongs to (for the largest surface concentration of a zero-order layer).

    Returns
    -------
    float or None
        ``thickness * sqrt(k/D)``, k = rate_constant (first order) or vmax/km
        (Michaelis-Menten). For a zero-order layer ``thickness * sqrt(Q / (D * Cs))`` with Cs
        from ``largest_surface_concentration`` (None when no face imposes a positive one); its
        square is the ratio of consumption to diffusive supply, and depletion sets in at
        phi^2 = 2, 4, 6 for a sealed slab, solid cylinder, solid sphere (A.V. Hill, Proc. R. Soc.
        B 104 (1928) 39). The thickness of the innermost layer of a solid body is its radius,
        which is its thickness since ``inner = 0``.
    """
    index = problem.layers.index(layer)
    reaction = layer.reaction
    k = reaction.law.thiele_rate_constant(
        reaction, lambda: largest_surface_concentration(problem, index)
    )
    if k is None:
        return None
    return float(layer.thickness * math.sqrt(k / layer.diffusivity))


def _sphere_series(phi: np.ndarray) -> np.ndarray:
    """(3/phi^2)(phi coth phi - 1) from phi coth phi = 1 + sum_k (-1)^(k+1) 2 zeta(2k) (phi/pi)^2k.

    (The Laurent series of coth, Abramowitz & Stegun 1964, 4.5.67, with 2^2k |B_2k| / (2k)! =
    2 zeta(2k) / pi^2k, 23.2.16; equation numbers from memory, the series is checked against
    mpmath in tests/unit/worker/engine/test_basis_functions.py.)
    """
    total = np.zeros_like(phi)
    ratio_squared = (phi / np.pi) ** 2
    for k in range(_SPHERE_SERIES_TERMS, 0, -1):
        coefficient = (-1) ** (k + 1) * 2.0 * special.zeta(2 * k) / np.pi**2
        total += coefficient * ratio_squared ** (k - 1)
    return 3.0 * total


def effectiveness_factor(geometry: str, phi) -> np.ndarray:
    """Effectiveness factor of a first-order slab, solid cylinder or sphere.

    Parameters
    ----------
    geometry : {"slab", "cylinder", "sphere"}
        Slab: half-thickness L sealed at the mid-plane (or one face sealed); cylinder and sphere:
        solid, radius R. The surface concentration is fixed.
    phi : float or array
        Thiele modulus ``L sqrt(k/D)`` or ``R sqrt(k/D)``, >= 0.

    Returns
    -------
    ndarray
        Actual consumption over the consumption at the surface concentration throughout.
        Thiele 1939; Aris 1975. Scaled Bessel functions keep large phi finite.
    """
    phi = np.asarray(phi, dtype=float)
    if np.any(~np.isfinite(phi)) or np.any(phi < 0.0):
        raise ValueError(f"phi: expected finite values >= 0, got {phi!r}")
    safe = np.where(phi > 0.0, phi, 1.0)
    if geometry == "slab":
        return np.where(phi > 0.0, np.tanh(safe) / safe, 1.0)
    if geometry == "cylinder":
        return np.where(phi > 0.0, 2.0 * special.i1e(safe) / (safe * special.i0e(safe)), 1.0)
    if geometry == "sphere":
        direct = 3.0 / safe**2 * (safe / np.tanh(safe) - 1.0)
        small = np.minimum(phi, _SPHERE_SERIES_LIMIT)
        return np.where(phi < _SPHERE_SERIES_LIMIT, _sphere_series(small), direct)
    raise ValueError(f"geometry: expected slab, cylinder or sphere, got {geometry!r}")


@dataclass(frozen=True)
class MichaelisMentenRegime:
    """Where a Michaelis-Menten layer's solution actually works.

    ``surface``: the concentration at the layer's fed face, amount/m^3; ``saturation``:
    surface / km; ``regime``: ``"first-order-like"``, ``"mixed"`` or ``"saturated"``
    (see :data:`FIRST_ORDER_LIKE`, :data:`SATURATED`); ``effective_rate_constant``:
    vmax / (km + surface), 1/s, the first-order constant with the same rate at the face;
    ``modulus``: the generalised Thiele modulus at that face (:func:`generalised_modulus`).
    """

    surface: float
    saturation: float
    regime: str
    effective_rate_constant: float
    modulus: float


def generalised_modulus(layer: Layer, surface: float) -> float:
    """Generalised Thiele modulus of a Michaelis-Menten layer fed at ``surface`` (amount/m^3).

    ``Phi = L R(Cs) / sqrt(2 D int_0^Cs R(c) dc)`` (K.B. Bischoff, AIChE J. 11 (1965) 351;
    Aris 1975, ch. 3), with ``int_0^Cs R dc = vmax (Cs - km ln(1 + Cs/km))`` and L the layer's
    thickness as in the record's Thiele modulus. It scales every kind of kinetics so that the
    effectiveness factor tends to 1/Phi when Phi is large; for first order it is L sqrt(k/D),
    for Cs << km it tends to L sqrt(vmax/(km D)), for Cs >> km to L sqrt(vmax/(2 D Cs)).
    """
    reaction = layer.reaction
    vmax, km = reaction.vmax, reaction.km
    if not (surface > 0.0 and vmax > 0.0):
        return 0.0
    ratio = surface / km
    # With x = Cs/km: R(Cs) = vmax x/(1 + x) and int_0^Cs R dc = vmax km (x - log1p(x)), so
    # Phi = L/(1 + x) sqrt(vmax / (2 D km e)) with e = (x - log1p(x))/x^2, whose series
    # 1/2 - x/3 + x^2/4 serves small x (x^2 itself would underflow for the tiniest levels).
    shape = (ratio - math.log1p(ratio)) / ratio**2 if ratio > 1e-4 else \
        0.5 - ratio / 3.0 + ratio**2 / 4.0
    return float(layer.thickness / (1.0 + ratio)
                 * math.sqrt(vmax / (2.0 * layer.diffusivity * km * shape)))


def michaelis_menten_regime(layer: Layer, surface: float) -> MichaelisMentenRegime:
    """The regime of a Michaelis-Menten layer whose fed face is at ``surface``
    (amount/m^3, clipped at 0); see :class:`MichaelisMentenRegime`."""
    reaction = layer.reaction
    surface = max(float(surface), 0.0)
    saturation = surface / reaction.km
    if saturation <= FIRST_ORDER_LIKE:
        regime = "first-order-like"
    elif saturation >= SATURATED:
        regime = "saturated"
    else:
        regime = "mixed"
    return MichaelisMentenRegime(surface, saturation, regime,
                                 reaction.vmax / (reaction.km + surface),
                                 generalised_modulus(layer, surface))
