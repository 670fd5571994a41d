"""The one builder of a steady solution that a solver could not produce."""

from __future__ import annotations

import math

import numpy as np

from worker.engine.model import SteadySolution

__all__ = ["failed_steady_solution"]


def _not_available(r, layer=None):
    """NaN shaped like ``r`` (a float for a scalar position)."""
    return np.full(np.shape(r), np.nan) if np.ndim(r) else math.nan


def failed_steady_solution(method: str, reference: str, message: str,
                           diagnostics: dict | None = None) -> SteadySolution:
    """A ``SteadySolution`` with ``success=False``: ``message`` says why, every field is NaN.

    ``method`` and ``reference`` name the solver that failed; ``diagnostics`` are its facts.
    """
    return SteadySolution(
        method=method,
        reference=reference,
        success=False,
        message=message,
        concentration_at=_not_available,
        flux_at=_not_available,
        flux_inner=math.nan,
        flux_outer=math.nan,
        consumption=math.nan,
        diagnostics=dict(diagnostics) if diagnostics else {},
    )
