"""How closely a design run's fast trial model must agree with the full check.

A figure of the fast model agrees with the full check's when their difference is within the
full check's numerical uncertainty of that figure (its grid or series band), at least
``AGREEMENT_FLOOR`` of the figure's size; used by the Monte Carlo's and the law of
propagation's verification subsets, the design limit and the calibration.
"""

from __future__ import annotations

import math

__all__ = ["AGREEMENT_FLOOR", "model_disagreement"]

#: The least difference, relative to the figure, counted as agreement.
AGREEMENT_FLOOR = 1e-9


def model_disagreement(fast: float, value: float | None, band: float | None) -> float:
    """|fast − value| over what agreement allows: the full check's numerical uncertainty of the
    figure, at least ``AGREEMENT_FLOOR`` of its size (≤ 1: they agree). A figure one gives and
    the other does not disagrees (infinity); neither giving it agrees (0)."""
    if value is None or not math.isfinite(value):
        return 0.0 if not math.isfinite(fast) else math.inf
    if not math.isfinite(fast):
        return math.inf
    allowed = max(band or 0.0, AGREEMENT_FLOOR * abs(value), 1e-300)
    return abs(fast - value) / allowed
