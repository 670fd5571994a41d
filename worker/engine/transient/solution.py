"""``TransientSolution``: what every transient solver returns at the requested times."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: The amounts and face fluxes every transient solution reports, per measure.
AMOUNTS = ("remaining", "released_inner", "released_outer", "consumed", "flux_inner",
           "flux_outer")

__all__ = ["AMOUNTS", "TransientSolution"]


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
