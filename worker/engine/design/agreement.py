"""How closely a design run's fast trial model must agree with the full check.

A figure of the fast model agrees with the full check's when their difference is within the
full check's numerical uncertainty of that figure (its grid or series band), at least
``AGREEMENT_FLOOR`` of the figure's size; used by the Monte Carlo's and the law of
propagation's verification subsets, the design limit and the calibration.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

__all__ = ["AGREEMENT_FLOOR", "SMALL_AGAINST_SPREAD", "model_disagreement", "subset_record"]

#: The least difference, relative to the figure, counted as agreement.
AGREEMENT_FLOOR = 1e-9
#: The numerical uncertainty of a figure counts as small against the spread the inputs cause
#: when it is at most this fraction of the figure's standard uncertainty (the project's rule:
#: it then moves the standard uncertainty by under 0.5 %, below two significant digits).
SMALL_AGAINST_SPREAD = 0.1


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


def subset_record(*, failed: Sequence[str], checked: int, subset_detail: str,
                  largest: dict[str, float], worst_ratio: float, spread_name: str,
                  worst_model: float | None, model_detail: str, trials: list) -> dict:
    """The record of a verification subset (the Monte Carlo's trials, the law of
    propagation's points) checked in full: ``failed`` the labels whose check failed of
    ``checked``; ``largest`` each figure's largest numerical uncertainty and ``worst_ratio``
    the largest against the ``spread_name`` of its figure; ``worst_model`` the worst
    :func:`model_disagreement` (None: the trial model was not compared, and no
    ``uncertainty.trial_model`` check). Its ``checks``: ``uncertainty.subset`` fails when a
    check failed, ``uncertainty.trial_model`` when the model disagrees (above 1)."""
    passed = checked > 0 and not failed
    checks = [{"name": "uncertainty.subset", "value": float(len(failed)), "limit": 0.0,
               "passed": passed,
               "detail": subset_detail + (f"; failed: {', '.join(failed)}" if failed
                                          else "; every check passed")}]
    if worst_model is not None:
        checks.append({"name": "uncertainty.trial_model", "value": worst_model, "limit": 1.0,
                       "passed": worst_model <= 1.0, "detail": model_detail})
    return {
        "trials_checked": checked,
        "all_passed": passed,
        "largest_numerical_uncertainty": largest,
        "largest_ratio_to_spread": worst_ratio,
        "numerical_small_against_spread": worst_ratio <= SMALL_AGAINST_SPREAD,
        "small_against_spread_rule": f"numerical uncertainty ≤ {SMALL_AGAINST_SPREAD:g} × the "
                                     f"{spread_name} of the figure",
        "trial_model_difference": worst_model,
        "trials": trials,
        "checks": checks,
    }
