"""Transient trials: the primary figures of ``worker.engine.transient.run`` for many trials."""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from worker.engine.design.paths import FieldRef
from worker.engine.design.targets import Target
from worker.engine.model import Problem

__all__ = ["transient_targets"]


def transient_targets(problem: Problem, fields: Sequence[FieldRef], x: np.ndarray,
                      targets: Sequence[Target]) -> np.ndarray:
    """Targets (n, m) of the transient trials ``x`` (n, k); NaN where a trial fails."""
    raise NotImplementedError("transient trials: not yet")
