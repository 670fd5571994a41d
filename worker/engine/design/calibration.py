"""Calibration: fitted inputs from measured data, with standard errors and profile intervals.

- Weighted nonlinear least squares: minimise ``chi^2 = sum(((model(theta) - y) / u)^2)`` over the
  fitted parameters (``scipy.optimize.least_squares``, trust-region reflective, bounds), each
  parameter fitted on a linear or a log10 scale. A model evaluation that fails (any non-finite
  prediction) gets a large constant residual, so the optimiser rejects it and never takes it as
  a fit; a model that fails at the start raises.
- Standard errors and correlation from the Jacobian J of the normalised residuals at the optimum
  (central differences): ``cov = (J^T J)^-1`` in the fitted scale, the covariance of an
  estimate from data with *stated* standard uncertainties (Press et al. 2007, *Numerical
  Recipes*, 3rd ed., §15.4-15.5, from memory; JCGM 100:2008 §5). It is not scaled by the
  reduced chi-square; a reduced chi-square outside its central 95 % range is reported as a
  warning instead. A log10 parameter's covariance is carried to SI by the delta method
  (first-order propagation, JCGM 100:2008 §5.1.2): ``x = 10^z``, ``dx/dz = ln(10) x``.
- Intervals by profile likelihood (Press et al. 2007 §15.6; Venzon & Moolgavkar 1988, *Appl.
  Statist.* 37, 87; both from memory): the values of one parameter where the chi-square
  minimised over the others rises by ``chi2.ppf(level, 1)`` (3.84 at 95 %) above its minimum;
  with one parameter the profile is the chi-square itself. Each side is bracketed by steps
  outward from the estimate (the first to where a quadratic chi-square would cross, sqrt(3.84)
  standard errors, then doubling) and the crossing found by ``scipy.optimize.brentq``. A side
  whose profile stays below the threshold up to the bound is reported open there: that end is
  the bound.

The fitted values and intervals support, and do not replace, design verification testing and
qualified review of the device; they are only as good as the model and the stated uncertainties.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy import optimize, stats

Model = Callable[[np.ndarray], np.ndarray]

#: Residual given to every point of a failed model evaluation: the optimiser rejects such a step.
FAILED_RESIDUAL = 1.0e8
#: Relative step of the central differences for the Jacobian at the optimum (fitted scale).
JACOBIAN_STEP = 1.0e-5
#: Singular values of the column-normalised Jacobian below this fraction of the largest count as
#: zero (the finite-difference Jacobian carries relative errors near 1e-10 for a smooth model).
RANK_TOLERANCE = 1.0e-8
#: |correlation| above which two parameters are reported as not separable by the data.
CORRELATION_LIMIT = 0.95
#: Central probability of the chi-square range the reduced chi-square is checked against.
CHI_SQUARE_RANGE = 0.95
#: An estimate within this fraction of its bound's span (fitted scale) is "at the bound".
AT_BOUND = 1.0e-6
#: Optimiser tolerances (scipy's ftol, xtol, gtol) on the normalised parameters.
TOLERANCE = 1.0e-10
#: A profile point this far (chi-square units) below the fit's minimum means the fit was not the
#: minimum (0.01 is small beside the interval's 3.84).
LOWER_MINIMUM = 0.01

METHOD = (
    "weighted nonlinear least squares (scipy.optimize.least_squares, trust-region reflective, "
    "bounds in the fitted scale) of the normalised residuals (predicted - measured)/u; standard "
    "errors and correlation from (J^T J)^-1 at the optimum, J by central differences, not scaled "
    "by the reduced chi-square because the data carry stated standard uncertainties; log10 "
    "parameters carried to SI by the delta method"
)


@dataclass(frozen=True)
class FitParameter:
    """One fitted input: its case path, start value and bounds (SI), and the fitted scale."""

    path: str
    start: float
    low: float
    high: float
    log: bool
    unit: str


@dataclass(frozen=True)
class CalibrationResult:
    """The fit: SI estimates, covariance and intervals, the data's residuals, and warnings.

    ``standard_errors`` and ``covariance`` are infinite/NaN for parameters the data do not
    determine (rank-deficient Jacobian); an interval end is NaN where the model failed while
    profiling; ``open_sides[j]`` says which ends of parameter j's interval are its bounds."""

    parameters: tuple[FitParameter, ...]
    estimates: np.ndarray
    standard_errors: np.ndarray
    covariance: np.ndarray
    correlation: np.ndarray
    intervals: np.ndarray
    level: float
    interval_method: str
    chi_square: float
    degrees_of_freedom: int
    predicted: np.ndarray
    measured: np.ndarray
    standard_uncertainty: np.ndarray
    warnings: tuple[str, ...]
    converged: bool
    evaluations: int
    method: str = METHOD
    open_sides: tuple[tuple[bool, bool], ...] = field(default=())

    @property
    def reduced_chi_square(self) -> float | None:
        if self.degrees_of_freedom <= 0:
            return None
        return self.chi_square / self.degrees_of_freedom

    @property
    def normalised_residuals(self) -> np.ndarray:
        return (self.predicted - self.measured) / self.standard_uncertainty

    def as_dict(self) -> dict[str, Any]:
        params = []
        for j, p in enumerate(self.parameters):
            params.append({
                "field": p.path,
                "estimate": _number(self.estimates[j]),
                "unit": p.unit,
                "standard_error": _number(self.standard_errors[j]),
                "interval": [_number(self.intervals[j, 0]), _number(self.intervals[j, 1])],
                "interval_method": self.interval_method,
                "scale": "log" if p.log else "linear",
                "bounds": [float(p.low), float(p.high)],
                "start": float(p.start),
            })
        residuals = [
            {"index": i, "predicted": _number(self.predicted[i]),
             "measured": float(self.measured[i]),
             "standard_uncertainty": float(self.standard_uncertainty[i]),
             "normalised": _number(self.normalised_residuals[i])}
            for i in range(self.measured.size)
        ]
        return {
            "parameters": params,
            "correlation": _matrix(self.correlation),
            "covariance": _matrix(self.covariance),
            "chi_square": _number(self.chi_square),
            "degrees_of_freedom": int(self.degrees_of_freedom),
            "reduced_chi_square": _number(self.reduced_chi_square),
            "residuals": residuals,
            "warnings": list(self.warnings),
            "converged": bool(self.converged),
            "evaluations": int(self.evaluations),
            "method": self.method,
        }


def _number(value: float | None) -> float | None:
    """JSON-safe number: None for a missing or non-finite value."""
    if value is None or not math.isfinite(float(value)):
        return None
    return float(value)


def _matrix(matrix: np.ndarray) -> list[list[float | None]]:
    return [[_number(v) for v in row] for row in matrix]


# --------------------------------------------------------------------------------------------
# Input checks
# --------------------------------------------------------------------------------------------
def _check_inputs(parameters: Sequence[FitParameter], values: Any, standard_uncertainty: Any,
                  level: float) -> tuple[np.ndarray, np.ndarray]:
    if not parameters:
        raise ValueError("parameters: expected at least one parameter to fit, got none")
    paths = [p.path for p in parameters]
    if len(set(paths)) != len(paths):
        raise ValueError(f"parameters: each field may be fitted once, got {paths}")
    for p in parameters:
        if not (math.isfinite(p.low) and math.isfinite(p.high)) or not p.low < p.high:
            raise ValueError(f"{p.path}: bounds: expected finite low < high, "
                             f"got [{p.low!r}, {p.high!r}]")
        if p.log and p.low <= 0.0:
            raise ValueError(f"{p.path}: bounds: a log-scale parameter needs a positive lower "
                             f"bound, got {p.low!r}")
        if not math.isfinite(p.start):
            raise ValueError(f"{p.path}: start: expected a finite value, got {p.start!r}")
    if not 0.0 < level < 1.0:
        raise ValueError(f"level: expected a probability in (0, 1), got {level!r}")
    y = np.asarray(values, dtype=float)
    if y.ndim != 1 or y.size == 0:
        raise ValueError(f"values: expected a non-empty list of numbers, got shape {y.shape}")
    if not np.all(np.isfinite(y)):
        raise ValueError("values: expected finite numbers, got "
                         f"{int(np.sum(~np.isfinite(y)))} non-finite")
    u = np.broadcast_to(np.asarray(standard_uncertainty, dtype=float), y.shape).copy() \
        if np.ndim(standard_uncertainty) == 0 else np.asarray(standard_uncertainty, dtype=float)
    if u.shape != y.shape:
        raise ValueError(f"standard_uncertainty: expected {y.size} values (one per measured "
                         f"value), got {u.size}")
    if not np.all(np.isfinite(u) & (u > 0.0)):
        raise ValueError("standard_uncertainty: expected positive finite values")
    if y.size < len(parameters):
        raise ValueError(
            f"values: fewer measured points ({y.size}) than fitted parameters "
            f"({len(parameters)}: {', '.join(paths)}); the fit needs at least as many points "
            "as parameters")
    return y, u


# --------------------------------------------------------------------------------------------
# The fit
# --------------------------------------------------------------------------------------------
class _Problem:
    """Residuals of the normalised parameters ``w = z / ref`` (z the fitted-scale value)."""

    def __init__(self, model: Model, parameters: Sequence[FitParameter], y: np.ndarray,
                 u: np.ndarray) -> None:
        self.model = model
        self.parameters = tuple(parameters)
        self.y = y
        self.u = u
        self.log = np.array([p.log for p in parameters])
        self.z_low = np.array([self._to_z(p, p.low) for p in parameters])
        self.z_high = np.array([self._to_z(p, p.high) for p in parameters])
        self.evaluations = 0

    @staticmethod
    def _to_z(p: FitParameter, value: float) -> float:
        return math.log10(value) if p.log else value

    def to_si(self, z: np.ndarray) -> np.ndarray:
        return np.where(self.log, 10.0 ** np.where(self.log, z, 0.0), z)

    def predict(self, z: np.ndarray) -> np.ndarray | None:
        """Predictions at fitted-scale ``z``; None when the model fails there (a non-finite
        prediction, or an ArithmeticError or ValueError raised by the model)."""
        self.evaluations += 1
        try:
            predicted = np.asarray(self.model(self.to_si(z)), dtype=float)
        except (ArithmeticError, ValueError):
            predicted = np.full(self.y.shape, np.nan)
        if predicted.shape != self.y.shape:
            raise ValueError(f"model: expected {self.y.size} predictions (one per measured "
                             f"value), got shape {predicted.shape}")
        if not np.all(np.isfinite(predicted)):
            return None
        return predicted

    def residuals(self, z: np.ndarray) -> np.ndarray:
        predicted = self.predict(z)
        if predicted is None:
            return np.full(self.y.shape, FAILED_RESIDUAL)
        return (predicted - self.y) / self.u

    def chi_square(self, z: np.ndarray) -> float:
        predicted = self.predict(z)
        if predicted is None:
            return math.inf
        return float(np.sum(((predicted - self.y) / self.u) ** 2))


def _start(problem: _Problem, notes: list[str]) -> np.ndarray:
    """Fitted-scale start, moved strictly inside the bounds."""
    z = np.empty(len(problem.parameters))
    for j, p in enumerate(problem.parameters):
        lo, hi = problem.z_low[j], problem.z_high[j]
        margin = 1e-3 * (hi - lo)
        if p.log and p.start <= 0.0:
            value = lo + margin
        else:
            value = min(max(problem._to_z(p, p.start), lo + margin), hi - margin)
        if p.start < p.low or p.start > p.high:
            shown = 10.0 ** value if p.log else value
            notes.append(f"{p.path}: the start {p.start:.6g} {p.unit} lies outside its bounds "
                         f"[{p.low:.6g}, {p.high:.6g}]; the fit started at {shown:.6g} {p.unit}")
        z[j] = value
    return z


def _scales(z0: np.ndarray, problem: _Problem) -> np.ndarray:
    """Normalising scale of each fitted-scale parameter (so that ``w = z/ref`` is near 1)."""
    span = problem.z_high - problem.z_low
    return np.maximum(np.abs(z0), 1e-3 * span)


def _least_squares(fun: Callable[[np.ndarray], np.ndarray], w0: np.ndarray, low: np.ndarray,
                   high: np.ndarray) -> optimize.OptimizeResult:
    w0 = np.clip(w0, low, high)
    return optimize.least_squares(fun, w0, bounds=(low, high), method="trf", x_scale="jac",
                                  ftol=TOLERANCE, xtol=TOLERANCE, gtol=TOLERANCE,
                                  max_nfev=200 * (w0.size + 1))


def _jacobian(problem: _Problem, z: np.ndarray) -> tuple[np.ndarray, list[str]]:
    """d(residual)/dz (n, k) by central differences, one-sided at a bound or where the model
    fails on one side; the sides ("below"/"above") where it failed, per parameter."""
    centre = problem.predict(z)
    if centre is None:
        raise ValueError("model: the model failed at the fitted values; no fit was found")
    jac = np.empty((centre.size, z.size))
    failed_sides: list[str] = []
    span = problem.z_high - problem.z_low
    for j in range(z.size):
        if problem.log[j]:
            h = JACOBIAN_STEP  # decades: a relative step of ~2.3e-5 in the SI value
        else:
            h = JACOBIAN_STEP * max(abs(z[j]), 1e-3 * span[j])
        up, down = z.copy(), z.copy()
        up[j] = min(z[j] + h, problem.z_high[j])
        down[j] = max(z[j] - h, problem.z_low[j])
        r_up, r_down = problem.predict(up), problem.predict(down)
        failed = [side for side, r in (("below", r_down), ("above", r_up)) if r is None]
        failed_sides.append(" and ".join(failed))
        if r_up is None:
            r_up, up = centre, z.copy()
        if r_down is None:
            r_down, down = centre, z.copy()
        if up[j] == down[j]:
            jac[:, j] = np.nan
        else:
            jac[:, j] = (r_up - r_down) / problem.u / (up[j] - down[j])
    return jac, failed_sides


def _covariance(jac: np.ndarray) -> tuple[np.ndarray, np.ndarray, int, np.ndarray]:
    """Covariance (J^T J)^-1 and correlation in the fitted scale, the rank, and which
    parameters are undetermined (component in the Jacobian's null space).

    Undetermined parameters get infinite variance; their mutual correlation is the limit of a
    vanishing singular value (the null space's direction cosines), their correlation with
    determined parameters 0."""
    k = jac.shape[1]
    norms = np.linalg.norm(jac, axis=0)
    safe = np.where(norms > 0.0, norms, 1.0)
    _, s, vt = np.linalg.svd(jac / safe, full_matrices=False)
    if s.size == 0 or s[0] == 0.0:
        keep = np.zeros(k, dtype=bool)
    else:
        keep = s > RANK_TOLERANCE * s[0]
    rank = int(np.sum(keep))
    null = vt[~keep]  # (k - rank, k) in normalised columns
    undetermined = (np.sum(null**2, axis=0) > 1e-6) | (norms == 0.0)
    v = vt[keep]
    scaled_inv = (v.T / s[keep] ** 2) @ v  # pseudo-inverse of (J/n)^T (J/n)
    cov = scaled_inv / np.outer(safe, safe)
    cov = (cov + cov.T) / 2.0
    corr = np.zeros((k, k))
    det = ~undetermined
    diag = np.sqrt(np.diag(cov))
    with np.errstate(divide="ignore", invalid="ignore"):
        corr_det = cov / np.outer(diag, diag)
    corr[np.ix_(det, det)] = corr_det[np.ix_(det, det)]
    if np.any(undetermined):
        projector = null.T @ null
        pd = np.sqrt(np.diag(projector))
        with np.errstate(divide="ignore", invalid="ignore"):
            limit = projector / np.outer(pd, pd)
        corr[np.ix_(undetermined, undetermined)] = limit[np.ix_(undetermined, undetermined)]
        cov[undetermined, :] = np.nan
        cov[:, undetermined] = np.nan
        cov[undetermined, undetermined] = np.inf
    np.fill_diagonal(corr, 1.0)
    return cov, np.clip(corr, -1.0, 1.0), rank, undetermined


# --------------------------------------------------------------------------------------------
# Profile likelihood
# --------------------------------------------------------------------------------------------
class _Profile:
    """Minimum chi-square over the other parameters with parameter j held at a value."""

    def __init__(self, problem: _Problem, j: int, z_hat: np.ndarray, ref: np.ndarray,
                 chi_min: float) -> None:
        self.problem = problem
        self.j = j
        self.others = np.array([i for i in range(z_hat.size) if i != j], dtype=int)
        self.ref = ref
        self.solved: dict[float, np.ndarray] = {float(z_hat[j]): z_hat.copy()}
        self.values: dict[float, float] = {float(z_hat[j]): chi_min}
        self.lowest = chi_min

    def __call__(self, t: float) -> float:
        t = float(t)
        if t not in self.values:
            self.values[t] = self._minimise(t)
        return self.values[t]

    def _minimise(self, t: float) -> float:
        problem = self.problem
        nearest = min(self.solved, key=lambda s: abs(s - t))
        z = self.solved[nearest].copy()
        z[self.j] = t
        if self.others.size:
            others, ref = self.others, self.ref[self.others]

            def fun(w: np.ndarray) -> np.ndarray:
                trial = z.copy()
                trial[others] = w * ref
                return problem.residuals(trial)

            fit = _least_squares(fun, z[others] / ref, problem.z_low[others] / ref,
                                 problem.z_high[others] / ref)
            z[others] = fit.x * ref
            failed = bool(np.all(fit.fun == FAILED_RESIDUAL))
            value = math.inf if failed else float(np.sum(fit.fun**2))
        else:
            value = problem.chi_square(z)
        if not math.isfinite(value):
            return math.inf
        self.solved[t] = z
        self.lowest = min(self.lowest, value)
        return value


def _profile_side(profile: _Profile, z_hat: float, chi_min: float, target: float,
                  first_step: float, bound: float) -> tuple[float, str]:
    """The interval end on one side (fitted scale) and its status: "closed", "open" (the
    profile stays below the threshold up to the bound) or "failed" (the model failed)."""
    direction = 1.0 if bound > z_hat else -1.0
    distance = abs(bound - z_hat)
    if distance <= 0.0:
        return bound, "open"
    inner, step = z_hat, min(first_step, distance)
    while True:
        outer = z_hat + direction * min(step, distance)
        value = profile(outer) - chi_min
        if not math.isfinite(value):
            return math.nan, "failed"
        if value >= target:
            break
        inner = outer
        if step >= distance:
            return bound, "open"
        step *= 2.0

    def excess(t: float) -> float:
        v = profile(t) - chi_min - target
        return v if math.isfinite(v) else math.inf

    span = abs(outer - inner)
    end = optimize.brentq(excess, inner, outer,
                          xtol=max(1e-12 * max(abs(outer), 1.0), 1e-7 * span))
    return float(end), "closed"


def _intervals(problem: _Problem, z_hat: np.ndarray, ref: np.ndarray, cov_z: np.ndarray,
               chi_min: float, target: float, level: float, warnings: list[str]
               ) -> tuple[np.ndarray, list[tuple[bool, bool]]]:
    """Profile-likelihood interval (SI) of each parameter and which sides are open at a bound;
    appends the warnings of open, failed and lower-minimum profiles."""
    k = z_hat.size
    intervals = np.empty((k, 2))
    open_sides = []
    for j, p in enumerate(problem.parameters):
        profile = _Profile(problem, j, z_hat, ref, chi_min)
        span = problem.z_high[j] - problem.z_low[j]
        se_z = math.sqrt(cov_z[j, j]) if math.isfinite(cov_z[j, j]) else math.inf
        # first try where a quadratic chi-square would reach the threshold
        first = min(math.sqrt(target) * se_z, 0.25 * span) if se_z > 0.0 else 0.01 * span
        ends, opened = [], []
        for index, bound, word in ((0, problem.z_low[j], "below"),
                                   (1, problem.z_high[j], "above")):
            end, status = _profile_side(profile, float(z_hat[j]), chi_min, target, first,
                                        float(bound))
            ends.append(end)
            opened.append(status == "open")
            if status == "open":
                warnings.append(f"{p.path}: the data do not bound it from {word} at "
                                f"{100 * level:g} %: its interval is open at the "
                                f"{'lower' if index == 0 else 'upper'} bound "
                                f"{(p.low if index == 0 else p.high):.6g} {p.unit}")
            elif status == "failed":
                warnings.append(f"{p.path}: the model failed while profiling it from {word}: "
                                "that end of its interval is not established")
        intervals[j] = [10.0 ** e for e in ends] if p.log else ends
        open_sides.append((opened[0], opened[1]))
        best = profile.lowest
        if best < chi_min - LOWER_MINIMUM:
            warnings.append(f"{p.path}: its profile found a chi-square {chi_min - best:.3g} "
                            f"lower than the fit's ({chi_min:.6g}): the fit may be a local "
                            "minimum")
    return intervals, open_sides


def _chi_square_warnings(chi_min: float, n: int, k: int) -> list[str]:
    """A warning when the reduced chi-square lies outside the central ``CHI_SQUARE_RANGE`` of
    chi2(nu)/nu, nu = n - k, or when there are no degrees of freedom."""
    dof = n - k
    if dof <= 0:
        return [f"no degrees of freedom ({n} points, {k} parameters): the fit cannot test the "
                "model or the stated uncertainties"]
    tail = (1.0 - CHI_SQUARE_RANGE) / 2.0
    lo_r = float(stats.chi2.ppf(tail, dof)) / dof
    hi_r = float(stats.chi2.ppf(1.0 - tail, dof)) / dof
    reduced = chi_min / dof
    where = (f"its central {100 * CHI_SQUARE_RANGE:g} % range [{lo_r:.3g}, {hi_r:.3g}] for "
             f"{dof} degrees of freedom")
    if reduced > hi_r:
        return [f"reduced chi-square {reduced:.3g} lies above {where}: the stated uncertainties "
                "are too small or the model does not describe the data"]
    if reduced < lo_r:
        return [f"reduced chi-square {reduced:.3g} lies below {where}: the stated uncertainties "
                "are too large or the points are not independent"]
    return []


# --------------------------------------------------------------------------------------------
# Public entry
# --------------------------------------------------------------------------------------------
def calibrate(model: Model, parameters: Sequence[FitParameter], values: Any,
              standard_uncertainty: Any, *, level: float = 0.95) -> CalibrationResult:
    """Fit ``parameters`` so that ``model(theta)`` (SI values in, one prediction per measured
    value out; NaN where the model fails, or an ArithmeticError or ValueError raised) matches
    ``values`` with their standard uncertainties (one per value, or one for all).

    Raises ValueError naming the field for bad input, for fewer points than parameters, and for
    a model that fails at the start.
    """
    y, u = _check_inputs(parameters, values, standard_uncertainty, level)
    problem = _Problem(model, parameters, y, u)
    warnings: list[str] = []
    z0 = _start(problem, warnings)
    if problem.predict(z0) is None:
        names = ", ".join(f"{p.path} = {v:.6g} {p.unit}"
                          for p, v in zip(parameters, problem.to_si(z0), strict=True))
        raise ValueError(f"model: the model failed (non-finite predictions) at the start "
                         f"values {names}; choose a start where the case can be computed")
    ref = _scales(z0, problem)
    low, high = problem.z_low / ref, problem.z_high / ref

    fit = _least_squares(lambda w: problem.residuals(w * ref), z0 / ref, low, high)
    z_hat = fit.x * ref
    predicted = problem.predict(z_hat)
    if predicted is None:  # only reachable if the optimiser ends on a failed point
        raise ValueError("model: the model failed at the fitted values; no fit was found")
    chi_min = float(np.sum(((predicted - y) / u) ** 2))
    converged = bool(fit.status > 0)
    if not converged:
        warnings.append(f"the optimiser stopped without converging ({fit.message})")

    k, n = len(parameters), y.size
    paths = [p.path for p in parameters]

    jac, failed_sides = _jacobian(problem, z_hat)
    for j, sides in enumerate(failed_sides):
        if sides:
            warnings.append(f"{paths[j]}: the model fails just {sides} the estimate: it sits at "
                            "the edge of the region where the model can be computed, not at a "
                            "minimum set by the data")
    cov_z, corr, rank, undetermined = _covariance(np.nan_to_num(jac, nan=0.0))
    if rank < k:
        names = ", ".join(paths[j] for j in range(k) if undetermined[j])
        warnings.append(f"the Jacobian is rank-deficient (rank {rank} of {k}): the data "
                        f"determine only combinations of {names}; their standard errors are "
                        "not defined")
    gradient = np.where(problem.log, math.log(10.0) * problem.to_si(z_hat), 1.0)
    with np.errstate(invalid="ignore"):
        cov_si = cov_z * np.outer(gradient, gradient)
    standard_errors = np.sqrt(np.where(np.isfinite(np.diag(cov_si)), np.diag(cov_si), np.inf))

    for i in range(k):
        for j in range(i + 1, k):
            if abs(corr[i, j]) > CORRELATION_LIMIT:
                warnings.append(f"{paths[i]} and {paths[j]} are correlated "
                                f"(correlation {corr[i, j]:+.3f}): the data cannot separate "
                                "them")

    for j, p in enumerate(parameters):
        span = problem.z_high[j] - problem.z_low[j]
        for side, edge, si in (("lower", problem.z_low[j], p.low),
                               ("upper", problem.z_high[j], p.high)):
            if abs(z_hat[j] - edge) <= AT_BOUND * span:
                warnings.append(f"{p.path}: the estimate lies at its {side} bound "
                                f"{si:.6g} {p.unit}: the bound, not the data, sets it")

    target = float(stats.chi2.ppf(level, 1))
    intervals, open_sides = _intervals(problem, z_hat, ref, cov_z, chi_min, target, level,
                                       warnings)
    warnings.extend(_chi_square_warnings(chi_min, n, k))

    return CalibrationResult(
        parameters=tuple(parameters),
        estimates=problem.to_si(z_hat),
        standard_errors=standard_errors,
        covariance=cov_si,
        correlation=corr,
        intervals=intervals,
        level=level,
        interval_method=f"profile likelihood, Δχ² = {target:.2f} ({100 * level:g} %)",
        chi_square=chi_min,
        degrees_of_freedom=n - k,
        predicted=predicted,
        measured=y,
        standard_uncertainty=u,
        warnings=tuple(warnings),
        converged=converged,
        evaluations=problem.evaluations,
        open_sides=tuple(open_sides),
    )
