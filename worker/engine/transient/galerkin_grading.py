"""Elements in geometric progression from an exchanging face: the Galerkin route's own meshes for
a very early first requested time.

This module shares nothing with the finite volumes' grading (``fv_grading``,
``transient.early_mesh``): another map, derived here, so that an error in one reaches only one
of the two discretisations that are compared.

Map
---
A layer of thickness L with N elements graded towards its inner face has its nodes at
``edge + L s(i / N)`` with the exponential map

    s(xi) = (exp(kappa xi) - 1) / (exp(kappa) - 1),

so consecutive elements grow by the constant factor ``q = exp(kappa / N)``: the geometric
progression ``h_i = h_0 q^i``, whose N terms add up to L when
``h_0 = L (q - 1) / (q^N - 1) = L (exp(kappa / N) - 1) / (exp(kappa) - 1)`` (the sum of a
geometric series). Towards the outer face the nodes are mirrored (``1 - s(1 - xi)``); towards
both faces of one layer each half carries N/2 elements in geometric progression from its face
(N even), the two halves meeting at the mid-plane with elements of equal width.

``kappa`` is set by the width of the element at the face (:func:`spread_for_first_element`,
the root of the sum formula). Refinement keeps ``kappa`` and doubles N: every coarse node stays
a node (the same xi) and each element is cut into two in geometric ratio ``sqrt(q)``, a
systematic refinement with ratio 2. For a fixed map the family of meshes is quasi-uniform (the
widest element is at most ``exp(kappa)`` times the narrowest whatever N), which is what the P1
error bounds with lumped mass ask of a mesh family (V. Thomee, *Galerkin Finite Element Methods
for Parabolic Problems*, 2nd ed., Springer, 2006, ch. 1 and 15: O(h^2) in L2 with h the
largest element), so the amounts keep their second order under this refinement.

When
----
The uniform coarse mesh (``galerkin.coarse_elements``) resolves the first time's boundary layer
with elements of at most ``galerkin.EARLY_RESOLUTION`` diffusion lengths sqrt(D t1), up to
``galerkin.MAX_EARLY_ELEMENTS`` elements per layer. A layer touching a face that exchanges with
a fluid (concentration, mass transfer, compartment; not a sealed, symmetry or flux face, nor a
solid centre) whose capped elements would be wider than ``GRADING_TRIGGER`` diffusion lengths
keeps its element count (made even for two faces) with the element at the face
``resolution`` diffusion lengths wide; every other case keeps its uniform elements.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq

from worker.engine.model import Problem

#: Capped uniform elements wider than this many diffusion lengths at an exchanging face make
#: that layer's elements graded. Measured on a slab with zero-order consumption releasing into
#: a sink (its second route the finite volumes): with uniform elements the release
#: cross-check passes at elements of 0.60 diffusion lengths (D t1 / L^2 = 7e-5) and fails at
#: 0.65 (6e-5).
GRADING_TRIGGER = 0.62
#: Largest spread kappa: the widest element is then exp(kappa) ~ 1e26 times the narrowest.
MAX_SPREAD = 60.0

__all__ = ["GRADING_TRIGGER", "GradedElements", "graded_elements", "spread_for_first_element"]


def _first_fraction(kappa: float, elements: int, halves: bool) -> float:
    """Width of the face element over the layer's thickness for spread ``kappa``."""
    if halves:  # N/2 elements over half the layer
        return 0.5 * math.expm1(2.0 * kappa / elements) / math.expm1(kappa)
    return math.expm1(kappa / elements) / math.expm1(kappa)


def spread_for_first_element(fraction: float, elements: int, halves: bool = False) -> float:
    """The spread kappa whose face element is ``fraction`` of the layer's thickness (``halves``:
    graded towards both faces, N/2 elements a half); 0 where uniform elements are already that
    narrow. ValueError naming the field for a fraction that is not positive or that needs a
    spread past ``MAX_SPREAD``."""
    if not (fraction > 0.0 and math.isfinite(fraction)):
        raise ValueError(f"fraction: expected a positive finite number, got {fraction!r}")
    if elements < (4 if halves else 2) or (halves and elements % 2):
        raise ValueError(f"elements: expected at least 2 (an even number, at least 4, for two "
                         f"faces), got {elements}")
    if fraction >= 1.0 / elements:
        return 0.0
    if fraction < _first_fraction(MAX_SPREAD, elements, halves):
        raise ValueError(f"fraction: expected at least "
                         f"{_first_fraction(MAX_SPREAD, elements, halves):.3g}, got {fraction!r}")
    return float(brentq(lambda k: _first_fraction(k, elements, halves) - fraction, 1e-9,
                        MAX_SPREAD, xtol=1e-14, rtol=1e-14))


@dataclass(frozen=True)
class GradedElements:
    """Elements per layer, each layer's face(s) of grading (``"inner"``, ``"outer"``,
    ``"both"``, ``""`` for uniform) and spread kappa (0 for uniform)."""

    elements: tuple[int, ...]
    towards: tuple[str, ...]
    spreads: tuple[float, ...]

    def refined(self, factor: int) -> GradedElements:
        """The same maps with ``factor`` times as many elements (every node kept)."""
        return GradedElements(tuple(factor * n for n in self.elements), self.towards,
                              self.spreads)

    def layer_nodes(self, j: int) -> np.ndarray:
        """The N + 1 nodes of layer j on [0, 1] (first exactly 0, last exactly 1)."""
        n, side, kappa = self.elements[j], self.towards[j], self.spreads[j]
        xi = np.arange(n + 1) / n
        if not kappa:
            return xi

        def s(x: np.ndarray) -> np.ndarray:
            return np.expm1(kappa * x) / math.expm1(kappa)

        if side == "inner":
            out = s(xi)
        elif side == "outer":
            out = 1.0 - s(1.0 - xi)
        elif side == "both":
            half = n // 2
            out = np.empty(n + 1)
            out[: half + 1] = 0.5 * s(2.0 * xi[: half + 1])
            out[half:] = 1.0 - 0.5 * s(2.0 * (1.0 - xi[half:]))
        else:
            raise ValueError(f"towards[{j}]: expected 'inner', 'outer' or 'both', got {side!r}")
        out[0], out[-1] = 0.0, 1.0
        return out

    def describe(self) -> list[dict]:
        """Per layer, its elements and grading, for a record's diagnostics."""
        return [{"elements": n, "towards": side or None, "spread": kappa}
                for n, side, kappa in zip(self.elements, self.towards, self.spreads,
                                          strict=True)]


def _exchanges(problem: Problem, side: str) -> bool:
    """True for a face with an area that works against a fluid."""
    if side == "inner" and problem.exponent > 0 and problem.inner == 0.0:
        return False
    boundary = problem.inner_boundary if side == "inner" else problem.outer_boundary
    return boundary.condition.fluid_concentration(boundary) is not None


def graded_elements(problem: Problem, first_time: float | None, elements: tuple[int, ...],
                    resolution: float) -> GradedElements | None:
    """The coarse mesh ``elements`` graded where the first requested time needs it (module
    docstring), or None where no layer does."""
    if first_time is None or not first_time > 0.0:
        return None
    last = len(problem.layers) - 1
    counts, towards, spreads = [], [], []
    for j, (layer, n) in enumerate(zip(problem.layers, elements, strict=True)):
        faces = [side for side, at in (("inner", 0), ("outer", last))
                 if j == at and _exchanges(problem, side)]
        length = math.sqrt(layer.diffusivity * first_time)
        if not faces or layer.thickness / n <= GRADING_TRIGGER * length:
            counts.append(n)
            towards.append("")
            spreads.append(0.0)
            continue
        halves = len(faces) == 2
        n = max(n + (n % 2 if halves else 0), 4 if halves else 2)
        fraction = resolution * length / layer.thickness
        floor = _first_fraction(MAX_SPREAD, n, halves)
        kappa = spread_for_first_element(max(fraction, floor), n, halves)
        counts.append(n)
        towards.append(("both" if halves else faces[0]) if kappa else "")
        spreads.append(kappa)
    if not any(spreads):
        return None
    return GradedElements(tuple(counts), tuple(towards), tuple(spreads))
