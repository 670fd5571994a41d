"""``TransientSolution``: what every transient solver returns at the requested times."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np

#: The amounts and face fluxes every transient solution reports, per measure.
AMOUNTS = ("remaining", "released_inner", "released_outer", "consumed", "flux_inner",
           "flux_outer")

__all__ = ["AMOUNTS", "FrontAccount", "Route", "TransientSolution"]


@dataclass
class TransientSolution:
    """A transient solution at the requested ``times`` (s).

    Amounts (``remaining``, ``released_inner``, ``released_outer``, ``consumed``,
    ``initial_load``) are per measure in amount units (per m^2 slab, per m cylinder, total
    sphere); ``released_*`` is the cumulative amount out through that face (negative: uptake).
    ``flux_inner``/``flux_outer`` are outward flux densities, amount/(m^2*s) (0 at a solid
    centre). Each solver adds what only it knows (the series its terms and bounds, the method of
    lines its mesh and state).
    """

    method: str
    reference: str
    times: np.ndarray
    remaining: np.ndarray
    released_inner: np.ndarray
    released_outer: np.ndarray
    consumed: np.ndarray
    flux_inner: np.ndarray
    flux_outer: np.ndarray
    initial_load: float

    def amounts(self, at: np.ndarray | slice = slice(None)) -> dict[str, np.ndarray]:
        """Each of :data:`AMOUNTS` at the time indices ``at`` (all times by default)."""
        return {name: getattr(self, name)[at] for name in AMOUNTS}


@dataclass
class FrontAccount:
    """A route's account of the undissolved solute of the layers loaded above their solubility.

    ``layers``: the indices of those layers; ``outer``/``inner``: per internal time and layer
    (columns as ``layers``) the outer and inner edge of the layer's undissolved region, m (NaN
    once its undissolved solute is gone); ``time_depleted``: per layer, when its undissolved
    solute ran out, s (None: not within the duration). A numerical route's values are its
    three-mesh best estimates (Richardson where the meshes converge monotonically, else the fine
    mesh's); ``band_outer``/``band_inner`` (m, shaped as ``outer``) and ``band_depleted`` (s, per
    layer) their grid bands, |best - fine| + |fine - medium| (NaN where a mesh has no value);
    None for an exact account.
    """

    layers: list[int]
    outer: np.ndarray
    inner: np.ndarray
    time_depleted: list[float | None]
    band_outer: np.ndarray | None = None
    band_inner: np.ndarray | None = None
    band_depleted: list[float] | None = None


@dataclass
class Route:
    """One method's account of a transient case at the internal times (its ``name`` and
    published ``reference`` go to the record's methods).

    ``amounts``: each of ``transient.solution.AMOUNTS`` (per measure) at the internal times;
    ``usable``/``flux_usable``: where its amounts / fluxes are trustworthy (a series before its
    terms converge is not); ``profile(r, k, layer)``: concentrations at positions r (m) of layer
    ``layer`` at internal time index k; ``events``: t50/t90 in s (None: not reached), absent
    when the route gives none.
    """

    name: str
    reference: str
    amounts: dict[str, np.ndarray]
    initial_load: float
    usable: np.ndarray
    flux_usable: np.ndarray
    profile: Callable[[np.ndarray, int, int], np.ndarray]
    events: dict[str, float | None] = field(default_factory=dict)
    #: ``(r, k, layer) -> band``: the absolute grid band of ``profile`` (a numerical route's
    #: GCI with the formal order 2, ratio 2 and Roache's safety factor 3: |fine - medium|);
    #: None for an exact route.
    profile_band: Callable[[np.ndarray, int, int], np.ndarray] | None = None
    #: ``(r, t, layer) -> C``: concentrations at positions r (m) of layer ``layer`` at any time
    #: t in (0, duration] s (the time to steady needs more times than the internal ones).
    concentration: Callable[[np.ndarray, float, int], np.ndarray] | None = None
    #: Fluid concentration of each compartment face (``"inner"``/``"outer"``) at the internal
    #: times, amount/m^3 (empty without compartments).
    compartments: dict[str, np.ndarray] = field(default_factory=dict)
    #: The undissolved solute's fronts and depletion times (None: the route gives none).
    fronts: FrontAccount | None = None
    #: Per face (``"inner"``/``"outer"``), the grid band |fine - medium| of a numerical route's
    #: face flux density at the internal times (empty for an exact route).
    flux_band: dict[str, np.ndarray] = field(default_factory=dict)
    #: Per face, the fine mesh's own face flux density at the internal times, the value that
    #: ``flux_band`` bands (empty for an exact route, whose ``amounts`` carry its fluxes).
    flux_fine: dict[str, np.ndarray] = field(default_factory=dict)
    #: What ``flux_band`` holds, for the check's detail.
    flux_band_terms: str = "grid band |fine - medium|"
