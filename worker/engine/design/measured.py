"""Measured data in a check: the calibration of the case's inputs on the sets marked
``calibration``, and the comparison with the sets marked ``validation`` (ASME V&V 20-2009).

* Calibration (:func:`calibrate_case`): weighted least squares of the named inputs
  (:func:`worker.engine.design.calibration.calibrate`) on the fast primary solve of the design
  runs (:class:`~worker.engine.design.trials.TrialModel`, the same model the Monte Carlo trials
  use); the case with the estimates is then checked in full, and :func:`fit_check` compares the
  fast solve at the estimates with that full check at every calibration point (a fit on wrong
  figures fails the record's verdict). Where the body is a single plane sheet into a sink and
  one diffusivity is fitted to release fractions, :func:`short_time_cross_estimate` adds a second
  estimate from the early points alone (Crank 1975, §4.3).
* Validation (:func:`validation_block`): per set and point, the simulation S from the full check
  of the (fitted) case, its numerical uncertainty u_num from the record's own discretisation
  evidence (the band of the series: the largest difference between the routes), the input
  uncertainty u_input (the Monte Carlo standard uncertainty of the figure where the case states
  an ``uncertainty`` block, and the fit's covariance carried to the point by the law of
  propagation of uncertainty, JCGM 100:2008 §5.2, where inputs were calibrated), and u_D from
  the data. Calibration data never count as validation.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from worker.engine.design.agreement import model_disagreement
from worker.engine.design.calibration import CalibrationResult, FitParameter, calibrate
from worker.engine.design.paths import FieldRef, value_of
from worker.engine.design.propagation_law import sensitivity_coefficients
from worker.engine.design.request import LAW_OF_PROPAGATION, MONTE_CARLO, DesignRequest
from worker.engine.design.requirements import read_figure
from worker.engine.design.short_time import FRACTION_LIMIT, short_time_diffusivity
from worker.engine.design.targets import Target
from worker.engine.design.trials import TrialModel
from worker.engine.design.validation import compare
from worker.engine.design.validation import validation_block as validation_block_of
from worker.engine.model import Problem
from worker.engine.outcome import Outcome

__all__ = ["CalibrationRun", "calibrate_case", "calibration_propagation", "fit_check",
           "validation_block"]

#: The coverage factor of the model-error interval E ± k u_val (about 95 % for a normal
#: distribution of the model error; ASME V&V 20-2009 §2-5).
COVERAGE_FACTOR = 2.0
#: Relative step of the central differences that carry the fit's covariance to the validation
#: points.
PROPAGATION_STEP = 1e-4


@dataclass(frozen=True)
class CalibrationRun:
    """A calibration's result, the estimates by field, and the record block."""

    result: CalibrationResult
    values: dict[FieldRef, float]
    block: dict
    model: TrialModel


def calibrate_case(problem: Problem, request: DesignRequest) -> CalibrationRun:
    """Fit the inputs of ``request.calibration`` to the calibration sets on ``problem``.

    Raises
    ------
    ValueError
        When the fit cannot be made (the model fails at the case's values, too few points):
        the message names what failed.
    """
    if request.calibration is None:
        raise ValueError("the case states no calibration")
    sets = request.calibration_sets
    targets = [t for m in sets for t in m.targets()]
    inputs = request.calibration.parameters
    model = TrialModel(problem, [p.field for p in inputs], targets)
    parameters = [FitParameter(path=p.field.path, start=value_of(problem, p.field), low=p.low,
                               high=p.high, log=p.log, unit=p.unit) for p in inputs]
    measured = np.array([v for m in sets for v in m.values], dtype=float)
    u = np.array([x for m in sets for x in m.standard_uncertainty], dtype=float)

    def predict(theta: np.ndarray) -> np.ndarray:
        return model(np.asarray(theta, dtype=float)[None, :])[0]

    result = calibrate(predict, parameters, measured, u)
    block = result.as_dict()
    where = [(m.id, t) for m in sets for t in m.times]
    for entry, (set_id, time) in zip(block.get("residuals", []), where, strict=False):
        entry["set"] = set_id
        entry["time"] = time
    block["sets"] = [m.id for m in sets]
    block["points"] = int(measured.size)
    block["fitted_inputs"] = [p.field.path for p in inputs]
    block["model"] = f"the fast primary solve of the design runs ({model.method})"
    block.setdefault("warnings", []).extend(range_warnings(problem, request))
    cross = short_time_cross_estimate(problem, request, result)
    if cross is not None:
        block["short_time"] = cross
        if not cross.get("agrees", True):
            block.setdefault("warnings", []).append(
                "the short-time estimate of the diffusivity (Crank 1975, §4.3) differs from "
                "the fit by more than twice their combined standard error: the early data do "
                "not follow the model the fit assumes (a burst, a lag, or a wrong thickness)")
    values = {p.field: float(v) for p, v in zip(inputs, result.estimates, strict=True)}
    return CalibrationRun(result=result, values=values, block=block, model=model)


def range_warnings(problem: Problem, request: DesignRequest) -> list[str]:
    """Where the calibration data do not cover what the record then reports: figures after the
    last calibration time are extrapolated; release fractions all in the short-time regime
    (≤ :data:`~worker.engine.design.short_time.FRACTION_LIMIT`, where release from a sheet
    follows the short-time form) fix only D t / l² as a square root, not the long-time release;
    release fractions outside [0, 1] are beyond any model of release."""
    found: list[str] = []
    sets = request.calibration_sets
    last = max(t for m in sets for t in m.times)
    duration = problem.regime.duration or last
    if last < duration:
        found.append(f"the calibration data end at {last:.6g} s; the record's figures after "
                     f"that, up to the duration {duration:.6g} s, are extrapolated beyond them")
    fractions = [v for m in sets if m.quantity == "release_fraction" for v in m.values]
    if fractions and max(fractions) <= FRACTION_LIMIT:
        found.append(f"every calibrated release fraction is at most {FRACTION_LIMIT:g}, "
                     "where release from a sheet follows the short-time form 2(Dt/πl²)^½ "
                     "(Crank 1975, §4.3): the data fix D/l² but do not test the long-time "
                     "release, which is extrapolated")
    outside = [v for v in fractions if not 0.0 <= v <= 1.0]
    if outside:
        found.append(f"{len(outside)} calibrated release fraction(s) lie outside [0, 1] (e.g. "
                     f"{outside[0]:g}): beyond what any release model gives; check the data's "
                     "normalisation (the total load)")
    return found


def _plane_sheet_half_path(problem: Problem) -> float | None:
    """The diffusion path l of Crank's short-time form for a single unreacting slab with a
    uniform load: its thickness with one face a sink and the other sealed, half of it with both
    faces sinks; None for any other body."""
    if problem.geometry != "slab" or len(problem.layers) != 1:
        return None
    layer = problem.layers[0]
    if layer.reaction.reacts or layer.solubility is not None:
        return None
    faces = (problem.inner_boundary, problem.outer_boundary)
    sinks = [b.condition.is_perfect_sink(b) for b in faces]
    sealed = [b.condition.is_sealed(b) for b in faces]
    if not all(a or b for a, b in zip(sinks, sealed, strict=True)) or not any(sinks):
        return None
    return layer.thickness / (2.0 if all(sinks) else 1.0)


def short_time_cross_estimate(problem: Problem, request: DesignRequest,
                              result: CalibrationResult) -> dict | None:
    """A second estimate of a fitted diffusivity from the early release fractions alone
    (Crank 1975, §4.3: Mt/M∞ = 2 (D t / (π l²))^½), where it applies: one fitted input, the
    diffusivity of a single plane sheet into a sink (see :func:`_plane_sheet_half_path`),
    calibrated on ``release_fraction``. Both estimates agree when they differ by at most twice
    their combined standard error."""
    if request.calibration is None or len(request.calibration.parameters) != 1:
        return None
    field = request.calibration.parameters[0].field
    if (field.part, field.name) != ("layer", "diffusivity"):
        return None
    half_path = _plane_sheet_half_path(problem)
    if half_path is None:
        return None
    sets = [m for m in request.calibration_sets if m.quantity == "release_fraction"]
    if not sets:
        return None
    times = np.array([t for m in sets for t in m.times], dtype=float)
    values = np.array([v for m in sets for v in m.values], dtype=float)
    u = np.array([x for m in sets for x in m.standard_uncertainty], dtype=float)
    found = short_time_diffusivity(times, values, u, half_path)
    if not found.available:
        return None
    fitted = float(result.estimates[0])
    fitted_se = float(result.standard_errors[0])
    block = found.as_dict()
    block["difference"] = abs(float(found.diffusivity or 0.0) - fitted)
    block["agrees"] = bool(found.agrees_with(fitted, fitted_se, coverage_factor=2.0))
    return block


def fit_check(run: CalibrationRun, outcome: Outcome, request: DesignRequest,
              duration: float | None) -> dict:
    """``calibration.trial_model``: the fast solve the fit used, at the estimates, against the
    full check of the fitted case at every calibration point, relative to the figure's
    numerical uncertainty (at least ``AGREEMENT_FLOOR`` of the value): ≤ 1 passes."""
    theta = np.array([run.values[f] for f in run.model.fields], dtype=float)
    fast = run.model(theta[None, :])[0]
    worst, where = 0.0, "none"
    for value, target in zip(fast, run.model.targets, strict=True):
        reading = read_figure(target, outcome.quantities, outcome.series, duration)
        ratio = model_disagreement(float(value), reading.value, reading.uncertainty)
        if ratio > worst:
            worst, where = ratio, target.key
    return {"name": "calibration.trial_model", "value": worst, "limit": 1.0,
            "passed": bool(worst <= 1.0),
            "detail": "the fast primary solve the fit used, at the estimates, against the full "
                      "check of the fitted case at each calibration point, relative to the "
                      f"figure's numerical uncertainty; worst {where}"}


def calibration_propagation(run: CalibrationRun, problem: Problem,
                            targets: Sequence[Target]) -> np.ndarray:
    """Standard uncertainty of each target caused by the fit's covariance: u² = J Σ Jᵀ with J
    by central differences of the fast solve at the estimates (JCGM 100:2008, §5.2, law of
    propagation of uncertainty for correlated inputs)."""
    model = TrialModel(problem, list(run.model.fields), targets)
    theta = np.array([run.values[f] for f in run.model.fields], dtype=float)
    step = PROPAGATION_STEP * np.where(theta != 0.0, np.abs(theta), 1.0)
    rows = model(np.vstack([theta + np.diag(step), theta - np.diag(step)]))
    jacobian = sensitivity_coefficients(rows[:theta.size], rows[theta.size:], step).T
    covariance = np.asarray(run.result.covariance, dtype=float)
    variance = np.einsum("ij,jk,ik->i", jacobian, covariance, jacobian)
    return np.sqrt(np.clip(variance, 0.0, None))


#: How the case's uncertainty block's standard uncertainties were propagated, by its
#: ``uncertainty.method`` (the record's ``uncertainty.propagation``).
INPUT_SOURCES = {
    MONTE_CARLO: "the Monte Carlo standard uncertainty of each figure from the case's "
                 "uncertainty block (JCGM 101:2008)",
    LAW_OF_PROPAGATION: "the combined standard uncertainty of each figure from the case's "
                        "uncertainty block by the law of propagation (JCGM 100:2008, first "
                        "order)",
}


def validation_block(request: DesignRequest, outcome: Outcome, duration: float | None,
                     propagated: Mapping[str, float] | None,
                     fit: Mapping[str, float] | None, *, method: str = MONTE_CARLO) -> dict:
    """The record's ``validation`` block (ASME V&V 20-2009) for the validation sets.

    ``propagated``: the standard uncertainty of each target by key that the case's uncertainty
    block gave by its ``method`` (a key of :data:`INPUT_SOURCES`; None: the case states no
    uncertainty block); ``fit``: the fit's contribution by key (None: nothing calibrated).
    Each point's u_input combines the two in quadrature (the case's uncertain inputs and the
    fitted ones are distinct fields, taken as independent)."""
    sets = []
    missing_num: list[str] = []
    for measurement in request.validation_sets:
        targets = measurement.targets()
        simulated, u_num, u_input = [], [], []
        for target in targets:
            reading = read_figure(target, outcome.quantities, outcome.series, duration)
            if reading.value is None:
                raise ValueError(f"validation set {measurement.id}: the record has no "
                                 f"{target.key} ({reading.missing or 'not reached'})")
            simulated.append(reading.value)
            if reading.uncertainty is None:
                missing_num.append(f"{measurement.id}@{target.at:g}s")
            u_num.append(reading.uncertainty or 0.0)
            parts = [source[target.key] for source in (propagated, fit)
                     if source is not None and target.key in source]
            u_input.append(math.sqrt(sum(p * p for p in parts)) if parts else math.nan)
        assessed = propagated is not None or fit is not None
        found = compare(np.array(simulated), np.array(measurement.values), np.array(u_num),
                        np.array(u_input) if assessed else None,
                        np.array(measurement.standard_uncertainty),
                        coverage_factor=COVERAGE_FACTOR)
        sets.append(found.as_dict(measurement.id, measurement.quantity, measurement.unit,
                                  list(measurement.times)))
    u_input_parts = []
    if propagated is not None:
        u_input_parts.append(INPUT_SOURCES[method])
    if fit is not None:
        u_input_parts.append("the calibration's covariance carried to each point by the law "
                             "of propagation of uncertainty (JCGM 100:2008 §5.2)")
    block = validation_block_of(
        sets, coverage_factor=COVERAGE_FACTOR,
        u_input_method=("; combined in quadrature with ".join(u_input_parts) if u_input_parts
                        else "not assessed: the case states no uncertainty block and "
                             "calibrates nothing, so u_val excludes input uncertainty"),
        u_num_method="the record's own discretisation evidence: the largest difference "
                     "between the primary route and the other routes at that time")
    if missing_num:
        block["u_num_missing"] = missing_num
    return block
