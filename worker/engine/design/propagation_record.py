"""The record's ``uncertainty`` block when the law of propagation (JCGM 100:2008) answers it:
the method and its reference, each input's estimate and standard uncertainty, per figure the
sensitivity coefficients, u_c, k, U and the second-order term, the requirements judged on the
estimate and U (in the shape the Monte Carlo's summaries have: ``probability_met``,
``standard_error``, ``quantity``, ``low``, ``high``), the warnings, and the verification of
the points checked in full. The numbers come from
:func:`~worker.engine.design.propagation_law.propagate`."""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from worker.engine.design.agreement import (
    AGREEMENT_FLOOR,
    SMALL_AGAINST_SPREAD,
    model_disagreement,
    subset_record,
)
from worker.engine.design.monte_carlo import Bound
from worker.engine.design.propagation_law import REFERENCE, Propagation, requirement_summary
from worker.engine.design.request import LAW_OF_PROPAGATION, UncertaintyRequest
from worker.engine.design.requirements import Requirement

__all__ = ["PointCheck", "propagation_block", "verification_block"]

ASSUMPTIONS = (
    "first order: the figure is taken as linear in each input over x ± u (the second-order "
    "term below measures how far it is not)",
    "the output is taken as normally distributed: U = k u_c with k from the normal "
    "distribution at the coverage, and each probability met is that of a normal of mean y "
    "and standard deviation u_c; both hold only as far as the output is normal",
)
#: Said only when the case correlates some inputs.
CORRELATION_ASSUMPTION = (
    "correlations enter eq. 13 as the correlation coefficients of the inputs (the case states "
    "them as those of the inputs' normal scores; the same for normal inputs)")


@dataclass(frozen=True)
class PointCheck:
    """One point of the propagation checked in full: its inputs (SI), the verdict, each
    figure by the full check with its numerical uncertainty, and by the trial model (None when
    the full check gave the propagated figures itself)."""

    label: str
    inputs: Mapping[str, float]
    verdict: str
    full: tuple[float | None, ...]
    bands: tuple[float | None, ...]
    fast: tuple[float, ...] | None = None


def _finite(value) -> float | None:
    if value is None:
        return None
    number = float(value)
    return number if math.isfinite(number) else None


def verification_block(rows: Sequence[PointCheck], names: Sequence[str],
                       combined: np.ndarray, *, compared: bool) -> dict:
    """The points checked in full: their verdicts, the largest numerical uncertainty of each
    figure against its u_c, and (``compared``) the trial model against the full check. Its
    ``checks`` join the record's: ``uncertainty.subset`` fails when a point's check fails,
    ``uncertainty.trial_model`` when the trial model and the full check disagree beyond the
    figure's numerical uncertainty."""
    largest: dict[str, float] = {}
    worst_ratio, worst_model, worst_where = 0.0, 0.0, ""
    for row in rows:
        for j, name in enumerate(names):
            band = row.bands[j]
            if band is not None and math.isfinite(band):
                largest[name] = max(largest.get(name, 0.0), band)
                spread = float(combined[j])
                if spread > 0.0 and math.isfinite(spread):  # a figure the inputs do not move
                    worst_ratio = max(worst_ratio, band / spread)  # has nothing to resolve
            if row.fast is not None:
                off = model_disagreement(row.fast[j], row.full[j], band)
                if off > worst_model:
                    worst_model, worst_where = off, f"{name} at {row.label}"
    return subset_record(
        failed=[row.label for row in rows if row.verdict != "pass"], checked=len(rows),
        subset_detail=f"{len(rows)} point(s) of the law of propagation checked in full",
        largest=largest, worst_ratio=worst_ratio, spread_name="combined standard uncertainty",
        worst_model=worst_model if compared else None,
        model_detail="the primary solve that gave the propagated figures against the full "
                     "check at the same inputs, relative to the figure's numerical uncertainty "
                     f"(at least {AGREEMENT_FLOOR:g} of the value); worst "
                     f"{worst_where or 'none'}",
        trials=[{"trial": row.label, "inputs": dict(row.inputs), "verdict": row.verdict}
                for row in rows])


def _warnings(result: Propagation, names: Sequence[str], verification: Mapping,
              digits: int) -> list[str]:
    found = []
    significant = result.curvature_significant
    for j, name in enumerate(names):
        if not (math.isfinite(result.combined[j]) and math.isfinite(result.centre[j])):
            found.append(f"{name}: the figure is missing at some of the 2k + 1 points (an event "
                         "not reached, or a failed solve), so it is not propagated")
            continue
        if significant[j]:
            found.append(
                f"{name}: the second-order (curvature) term is not negligible: it changes u_c "
                f"by {result.second_order_change[j]:.3g}, more than {result.tolerance[j]:.3g} "
                f"(half a unit in the last of the {digits} stated digits of u_c); the "
                "first-order law and the normal assumption are in doubt: use method "
                "monte_carlo (JCGM 101:2008)")
    if result.correlated and np.any(result.second_order > 0.0):
        found.append("the second-order term is the uncorrelated inputs' form (eq. 10); the "
                     "case correlates some inputs")
    if verification.get("numerical_small_against_spread") is False:
        found.append("the numerical uncertainty of some figure is above "
                     f"{SMALL_AGAINST_SPREAD:g} of its combined standard uncertainty: the "
                     "sensitivity coefficients are not resolved above the solver's error")
    return found


def propagation_block(result: Propagation, request: UncertaintyRequest, names: Sequence[str],
                      units: Mapping[str, str], requirements: Sequence[Requirement],
                      bounds: Sequence[Bound], how: str, verification: dict) -> dict:
    """The record's ``uncertainty`` block (see the module docstring)."""
    k = len(result.estimates)
    specs = {spec.field.path: spec for spec in request.inputs}
    u = [e.standard_uncertainty for e in result.estimates]
    quantities: dict[str, dict] = {}
    sensitivity: dict[str, dict] = {}
    for j, name in enumerate(names):
        y, u_c, big_u = (_finite(result.centre[j]), _finite(result.combined[j]),
                         _finite(result.expanded[j]))
        interval = [y - big_u, y + big_u] if y is not None and big_u is not None \
            else [None, None]
        quantities[name] = {
            "mean": y, "estimate": y, "standard_uncertainty": u_c,
            "expanded_uncertainty": big_u, "coverage_factor": result.coverage_factor,
            "interval": interval, "coverage": result.coverage, "unit": units[name],
            "second_order_term": _finite(result.second_order[j]),
            "second_order_change": _finite(result.second_order_change[j]),
            "second_order_shift": _finite(result.mean_shift[j]),
            "tolerance": _finite(result.tolerance[j]),
            "curvature_significant": bool(result.curvature_significant[j]),
        }
        entries = {}
        for i, estimate in enumerate(result.estimates):
            c = _finite(result.coefficients[i, j])
            elasticity = (c * estimate.estimate / y if c is not None and y else None)
            entries[estimate.field] = {
                "coefficient": c, "contribution": _finite(result.coefficients[i, j] * u[i]),
                "elasticity": _finite(elasticity),
                "second_difference": _finite(result.second_differences[i, j])}
        sensitivity[name] = entries
    judged: dict[str, dict] = {}
    by_id = {r.id: r for r in requirements}
    for bound in bounds:
        name = names[bound.output_index]
        entry = quantities[name]
        y, u_c, big_u = entry["estimate"], entry["standard_uncertainty"], \
            entry["expanded_uncertainty"]
        summary = (requirement_summary(y, u_c, big_u, bound.low, bound.high)
                   if None not in (y, u_c, big_u)
                   else {"margin": None, "probability_met": None, "decided": None})
        judged[bound.id] = {
            "probability_met": summary["probability_met"], "standard_error": None,
            "zero_event_bound": None, "quantity": name, "low": bound.low, "high": bound.high,
            "value": y, "margin": summary["margin"], "expanded_uncertainty": big_u,
            "decided": summary["decided"], "unit": by_id[bound.id].unit,
            "basis": "the estimate y against the bound: met when the margin exceeds U, not met "
                     "when it is below −U; probability from a normal of mean y and standard "
                     "deviation u_c"}
    block = {
        "propagation": LAW_OF_PROPAGATION,
        "reference": REFERENCE,
        "method": (f"law of propagation of uncertainty (JCGM 100:2008 §5.1-5.2): sensitivity "
                   f"coefficients by central differences at x_i ± u(x_i), {2 * k + 1} "
                   f"evaluations by {how}; first order, the output taken as normal"),
        "assumptions": list(ASSUMPTIONS) + ([CORRELATION_ASSUMPTION] if result.correlated
                                            else []),
        "evaluations": 2 * k + 1,
        "coverage": result.coverage,
        "coverage_factor": result.coverage_factor,
        "significant_digits": request.significant_digits,
        "curvature_rule": ("the second-order term is not negligible when √(u_c² + term) − u_c "
                           "exceeds half a unit in the last of the "
                           f"{request.significant_digits} stated digits of u_c (JCGM 101:2008 "
                           "§7.9.2's tolerance); second_order_shift is for information"),
        "inputs": [{"field": e.field, "distribution": specs[e.field].distribution,
                    "case_value": e.case_value, "estimate": e.estimate,
                    "standard_uncertainty": e.standard_uncertainty,
                    "unit": specs[e.field].unit, "basis": e.basis}
                   for e in result.estimates],
        "quantities": quantities,
        "requirements": judged,
        "sensitivity": sensitivity,
        "verification": verification,
    }
    block["warnings"] = _warnings(result, names, verification,
                                  request.significant_digits)
    return block
