"""Three-mesh study of a transient solver's amounts at each requested time.

For every amount and face flux of :data:`~worker.engine.transient.solution.AMOUNTS` and every
requested time, the coarse, medium and fine values go through ``convergence.grid_study``
(I.B. Celik et al., J. Fluids Eng. 130 (2008) 078001, eqs. 1-5): the observed order, the
Richardson-extrapolated value and GCI_fine. The absolute band of a value is GCI_fine times the
fine value (P.J. Roache, J. Fluids Eng. 116 (1994) 405: the GCI is an error band on the fine
solution). Where the three meshes do not converge monotonically the fine value is kept and its
band is ``FALLBACK_FACTOR`` times the larger mesh difference (Roache 1994's safety factor 3 for
a study without an observed order), so the band is never silently zero.

Two solvers agree at a time when their extrapolated values differ by no more than the sum of
their bands (``outside_bands`` gives the opposite).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from worker.engine.convergence import GridStudy, grid_study
from worker.engine.transient.solution import AMOUNTS, TransientSolution

#: Band factor on the larger mesh difference where no order is observed (Roache 1994).
FALLBACK_FACTOR = 3.0

__all__ = ["FALLBACK_FACTOR", "AmountStudy", "amount_study", "fallback_band", "outside_bands"]


def fallback_band(values: np.ndarray) -> np.ndarray:
    """The band of a study without an observed order: ``FALLBACK_FACTOR`` times the larger
    difference between successive meshes (Roache 1994). ``values``: the meshes along the first
    axis (any order of refinement), e.g. one per row and one column per requested time; the
    result has the remaining shape, in the unit of the values."""
    return FALLBACK_FACTOR * np.max(np.abs(np.diff(values, axis=0)), axis=0)


@dataclass
class AmountStudy:
    """Per amount name (:data:`AMOUNTS`), arrays over the requested times.

    ``extrapolated``: Richardson value (the fine value where not monotonic); ``band``: absolute
    half-width of the error band of that value; ``gci``: GCI_fine as a fraction (NaN where no
    order); ``order``: observed order (NaN where none); ``convergence``: Celik's kind per time;
    ``studies``: the ``GridStudy`` objects.
    """

    extrapolated: dict[str, np.ndarray]
    band: dict[str, np.ndarray]
    gci: dict[str, np.ndarray]
    order: dict[str, np.ndarray]
    convergence: dict[str, list[str]]
    studies: dict[str, list[GridStudy]]


def amount_study(solutions: Sequence[TransientSolution], sizes: Sequence[float]
                 ) -> AmountStudy:
    """Study three solutions given coarse to fine, ``sizes`` their element or cell counts
    (coarse to fine), at their shared times."""
    if len(solutions) != 3 or len(sizes) != 3:
        raise ValueError("solutions, sizes: expected three meshes (coarse, medium, fine)")
    cells = [float(s) for s in reversed(sizes)]  # fine first
    fields: dict[str, dict] = {key: {} for key in
                               ("extrapolated", "band", "gci", "order", "convergence",
                                "studies")}
    for name in AMOUNTS:
        series = [np.asarray(getattr(s, name), dtype=float) for s in reversed(solutions)]
        count = series[0].size
        extrapolated = series[0].copy()
        band = np.full(count, np.nan)
        gci = np.full(count, np.nan)
        order = np.full(count, np.nan)
        kinds: list[str] = []
        studies: list[GridStudy] = []
        for k in range(count):
            triple = [float(s[k]) for s in series]
            study = grid_study(triple, cells)
            studies.append(study)
            kinds.append(study.convergence)
            fine = triple[0]
            if study.convergence == "monotonic" and math.isfinite(study.extrapolated):
                extrapolated[k] = study.best_estimate
                band[k] = study.gci_fine * abs(fine)
                gci[k] = study.gci_fine
                order[k] = study.apparent_order
            elif study.convergence == "converged_to_roundoff":
                band[k] = study.gci_fine * abs(fine)
                gci[k] = study.gci_fine
            elif all(math.isfinite(v) for v in triple):
                band[k] = float(fallback_band(np.asarray(triple)))
        for key, value in (("extrapolated", extrapolated), ("band", band), ("gci", gci),
                           ("order", order), ("convergence", kinds), ("studies", studies)):
            fields[key][name] = value
    return AmountStudy(**fields)


def outside_bands(a: AmountStudy, b: AmountStudy, name: str, floor: float = 0.0
                  ) -> np.ndarray:
    """Per time, True where the two extrapolated values of ``name`` differ by more than the
    sum of the two bands plus ``floor``, an absolute allowance in the amount's unit for what
    no space study sees: the integrators' time error (their rtol times the amount scale) and
    values near zero whose bands vanish. NaN bands count as no agreement."""
    gap = np.abs(a.extrapolated[name] - b.extrapolated[name])
    allowed = a.band[name] + b.band[name] + floor
    return ~(gap <= allowed)
