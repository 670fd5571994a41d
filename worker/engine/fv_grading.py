"""Cells graded towards a layer's face: the stretching of the finite-volume meshes.

A layer of thickness L with N cells graded towards a face has its faces at
``edge + L s(i / N)``, i = 0..N, where s maps the uniform computational coordinate xi in [0, 1]
onto [0, 1] and clusters the faces where its slope is small. The maps are M. Vinokur's
hyperbolic-tangent stretching functions (M. Vinokur, "On one-dimensional stretching functions
for finite-difference calculations", J. Comput. Phys. 50 (1983) 215-234, the one-sided and the
two-sided tanh functions), with the spread parameter ``stretch`` (Vinokur's Delta y):

* towards the inner face:  s(xi) = 1 + tanh(stretch (xi - 1) / 2) / tanh(stretch / 2),
* towards the outer face:  s(xi) = tanh(stretch xi / 2) / tanh(stretch / 2)  (the mirror image),
* towards both faces:      s(xi) = (1 + tanh(stretch (xi - 1/2)) / tanh(stretch / 2)) / 2.

Each has the slope ``ds/dxi = stretch / sinh(stretch)`` at the face(s) it clusters at, so the
cell next to such a face is ``L stretch / (N sinh(stretch))`` wide to first order in 1/N
(:func:`stretch_for_slope` inverts that relation). The maps are analytic, so neighbouring
cells differ in width by a factor ``1 + O(1/N)``.

Refinement keeps the map and divides the computational cells (``GradedCells.refined``): every
coarse face is a face of the refined mesh (the same xi, so the same number) and each coarse
cell is cut in two (four); the refinement ratio of the grid study is 2 in xi everywhere, the
form of systematic refinement of a stretched grid that a grid convergence study needs (P.J.
Roache, *Verification and Validation in Computational Science and Engineering*, Hermosa, 1998,
ch. 5, refining in the transformed coordinate so that the stretching does not change between
the grids). On such a smoothly stretched grid the face-flux truncation error of the
cell-centred scheme has a term proportional to the difference of neighbouring cell widths,
which is O(1/N^2) for a smooth map, so the scheme stays second order (J.H. Ferziger, M. Peric,
*Computational Methods for Fluid Dynamics*, 3rd ed., Springer, 2002, section 3.3.4 on
non-uniform grids, whose expansion factor must approach 1 under refinement, and ch. 4 for the
finite-volume flux approximations).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq

#: The faces a layer's cells may be graded towards.
SIDES = ("inner", "outer", "both")
#: Largest spread accepted: the face cell is then stretch / sinh(stretch) ~ 1e-12 of the
#: average cell, far past any case's need.
MAX_STRETCH = 32.0

__all__ = ["MAX_STRETCH", "SIDES", "GradedCells", "stretch_for_slope", "unit_faces"]


def stretch_for_slope(slope: float) -> float:
    """The spread ``stretch`` (Vinokur 1983's Delta y) whose map has ``ds/dxi = slope`` at its
    clustered face(s): the root of ``stretch / sinh(stretch) = slope``; 0 (uniform) for a slope
    of 1 or more. ValueError naming ``slope`` when it is not positive and finite or needs a
    spread past ``MAX_STRETCH``."""
    if not (slope > 0.0 and math.isfinite(slope)):
        raise ValueError(f"slope: expected a positive finite number, got {slope!r}")
    if slope >= 1.0:
        return 0.0
    floor = MAX_STRETCH / math.sinh(MAX_STRETCH)
    if slope < floor:
        raise ValueError(f"slope: expected at least {floor:.3g} (stretch at most {MAX_STRETCH}),"
                         f" got {slope!r}")
    return float(brentq(lambda x: x / math.sinh(x) - slope, 1e-12, MAX_STRETCH,
                        xtol=1e-14, rtol=1e-14))


def unit_faces(cells: int, side: str, stretch: float) -> np.ndarray:
    """The N + 1 faces s(i / N) on [0, 1] of ``cells`` cells graded towards ``side`` (see the
    module docstring); uniform for a zero ``stretch``. The first face is exactly 0, the last
    exactly 1."""
    xi = np.arange(cells + 1) / cells
    if stretch == 0.0:
        return xi
    half = 0.5 * stretch
    scale = math.tanh(half)
    if side == "inner":
        s = 1.0 + np.tanh(half * (xi - 1.0)) / scale
    elif side == "outer":
        s = np.tanh(half * xi) / scale
    elif side == "both":
        s = 0.5 * (1.0 + np.tanh(stretch * (xi - 0.5)) / scale)
    else:
        raise ValueError(f"side: expected one of {SIDES}, got {side!r}")
    s[0], s[-1] = 0.0, 1.0
    return s


@dataclass(frozen=True)
class GradedCells:
    """Cells per layer and each layer's grading: ``sides[j]`` the face(s) layer j's cells are
    graded towards (``"inner"``, ``"outer"``, ``"both"``, or ``""`` for uniform cells) and
    ``stretches[j]`` the spread of its map (0 for uniform cells)."""

    cells: tuple[int, ...]
    sides: tuple[str, ...]
    stretches: tuple[float, ...]

    def __post_init__(self) -> None:
        if not len(self.cells) == len(self.sides) == len(self.stretches):
            raise ValueError("cells, sides, stretches: expected one entry per layer each")
        for j, (side, stretch) in enumerate(zip(self.sides, self.stretches, strict=True)):
            if side not in SIDES + ("",):
                raise ValueError(f"sides[{j}]: expected one of {SIDES} or '', got {side!r}")
            if not (0.0 <= stretch <= MAX_STRETCH) or (side == "") != (stretch == 0.0):
                raise ValueError(f"stretches[{j}]: expected 0 for uniform cells, else a spread "
                                 f"in (0, {MAX_STRETCH}], got {stretch!r} ({side or 'uniform'})")

    @property
    def graded(self) -> bool:
        """True when some layer's cells are graded."""
        return any(self.stretches)

    def refined(self, factor: int) -> GradedCells:
        """The same maps with ``factor`` times as many cells per layer (every face kept)."""
        return GradedCells(tuple(factor * n for n in self.cells), self.sides, self.stretches)

    def layer_faces(self, j: int) -> np.ndarray:
        """Faces of layer j on [0, 1] (multiply by its thickness and add its inner edge)."""
        return unit_faces(self.cells[j], self.sides[j], self.stretches[j])

    def describe(self) -> list[dict]:
        """Per layer, its cells and grading, for a record's diagnostics."""
        return [{"cells": n, "towards": side or None, "stretch": stretch}
                for n, side, stretch in zip(self.cells, self.sides, self.stretches, strict=True)]

    @classmethod
    def uniform(cls, cells: Sequence[int]) -> GradedCells:
        """Uniform cells in every layer."""
        return cls(tuple(int(n) for n in cells), ("",) * len(cells), (0.0,) * len(cells))
