"""The law of propagation of uncertainty (JCGM 100:2008, the GUM) for a case's figures.

A second way to answer a case's ``uncertainty`` block, chosen explicitly
(``uncertainty.method = "law_of_propagation"``), for cases whose trials cost a full check each:
it needs 2k + 1 evaluations of the model for k inputs instead of the tens of thousands of the
Monte Carlo (:mod:`~worker.engine.design.monte_carlo`). It is first order and assumes a normal
output; the record says so.

Steps (every value SI):

1. **Standard uncertainty of each input** from the distribution the case states
   (:func:`input_estimate`): the estimate x_i is the distribution's expectation and u(x_i) its
   standard deviation (JCGM 100 §4.1.4, §4.3.1).
2. **Sensitivity coefficients** by central differences at x_i ± u(x_i) (:func:`design_points`,
   :func:`sensitivity_coefficients`): c_i = [f(x + u_i e_i) − f(x − u_i e_i)] / (2 u_i). The
   step is the input's own standard uncertainty, not a small numerical step: the secant then
   spans the range the input actually varies over (so a model that bends within ±u is not
   judged by its tangent alone), the step sits far above the figures' numerical noise, and the
   same three values give the second difference f(x + u) − 2 f(x) + f(x − u) = u² ∂²f/∂x_i²
   (to the fourth-order term), the curvature the second-order term below needs, at no further
   cost.
3. **Combined standard uncertainty** (JCGM 100 §5.2.2, eq. 13):
   u_c² = Σ c_i² u_i² + 2 Σ_{i<j} c_i c_j u_i u_j r_ij, with the case's correlation coefficients
   r_ij (the case states them for the Gaussian copula of the Monte Carlo, as the correlation of
   the inputs' normal scores; for normal inputs that is r(x_i, x_j) itself, otherwise close to
   it). Without correlations this is eq. 10's first-order part (§5.1.2).
4. **Second-order term** for uncorrelated inputs (JCGM 100 §5.1.2, Note to eq. 10): its
   diagonal part Σ_i ½ (∂²f/∂x_i²)² u⁴(x_i) = Σ_i ½ [f(x + u_i) − 2 f(x) + f(x − u_i)]², the part
   the ±u and centre values measure. The mixed terms (∂²f/∂x_i∂x_j) and those with third
   derivatives need further evaluations and are not included: the term is an indication of
   nonlinearity, not a correction.
5. **Expanded uncertainty** U = k u_c, k the normal distribution's quantile for the case's
   coverage p, k = Φ⁻¹((1 + p)/2) (JCGM 100 §G.1.3, Table G.1, §G.2: the output taken as normal;
   no effective degrees of freedom, every u(x_i) being of type B from a stated distribution).

**Curvature warning.** The second-order term is *not negligible* when adding it to u_c²
changes u_c, √(u_c² + term) − u_c, by more than δ = ½ 10^l, u_c written as c × 10^l with c of
``significant_digits`` digits — the numerical tolerance JCGM 101:2008 §7.9.2 gives the same
digits. The case states u_c to those digits; a term that moves them means the first-order
result, and with it the normal assumption, is in doubt, and the Monte Carlo (JCGM 101) is the
method to use. The second-order shift of the output's expectation, ½ Σ_i [f(x + u_i) − 2 f(x)
+ f(x − u_i)] (the second-order Taylor expectation of Y for uncorrelated inputs), is recorded
beside it for information, not judged.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from scipy import stats

from worker.engine.design.paths import FieldRef
from worker.engine.design.request import UncertainInput
from worker.engine.design.trials import TrialModel
from worker.engine.model import Problem

__all__ = ["REFERENCE", "InputEstimate", "Propagation", "coverage_factor", "design_points",
           "full_check_at_every_point", "input_estimate", "propagate", "requirement_summary",
           "sensitivity_coefficients", "significance_tolerance"]

REFERENCE = ("JCGM 100:2008 (GUM), law of propagation of uncertainty §5.1-5.2, eq. 10 and 13; "
             "coverage factor §G.1-G.2")
#: Parent-normal probability below the field's domain above which a truncated normal's own
#: moments are used (below it the truncation moves the mean and sd by at most about 2e-8 sd).
TRUNCATION_NEGLIGIBLE = 1e-9


@dataclass(frozen=True)
class InputEstimate:
    """One input's estimate x_i (the distribution's expectation, SI), its standard uncertainty
    u(x_i) and how u was obtained (the clause of JCGM 100 or the formula)."""

    field: str
    estimate: float
    standard_uncertainty: float
    case_value: float
    basis: str


def input_estimate(spec: UncertainInput) -> InputEstimate:
    """x_i and u(x_i) of one input from its distribution (JCGM 100 §4.3), SI.

    - normal (mean = the case's value, ``sd``): x = value, u = sd (§4.3.1). Truncated at the
      field's domain (as the Monte Carlo draws it) when that removes more than
      ``TRUNCATION_NEGLIGIBLE`` of the probability: the truncated normal's mean and sd.
    - uniform on [a, b]: x = (a + b)/2, u = (b − a)/(2√3), the half-width over √3 (§4.3.7,
      eq. 7).
    - triangular (a ≤ c ≤ b): x = (a + b + c)/3, u² = (a² + b² + c² − ab − ac − bc)/18 (the
      triangular distribution's moments; for c = (a + b)/2 this is the half-width² / 6 of
      §4.3.9).
    - lognormal with median m (the case's value) and coefficient of variation v (sd over mean):
      x = m √(1 + v²), u = v x (σ_ln² = ln(1 + v²); Johnson, Kotz & Balakrishnan 1994,
      *Continuous Univariate Distributions* vol. 1, 2nd ed., ch. 14).

    Raises ``ValueError`` naming the field when x − u or x + u leaves the field's physical
    domain: the model is evaluated there.
    """
    kind = spec.distribution
    value = float(spec.nominal)
    floor, open_ = spec.domain
    if kind == "normal":
        assert spec.sd is not None
        estimate, u, basis = value, float(spec.sd), "normal: u = sd (§4.3.1)"
        if math.isfinite(floor) and stats.norm.cdf((floor - value) / u) > TRUNCATION_NEGLIGIBLE:
            truncated = stats.truncnorm((floor - value) / u, np.inf, loc=value, scale=u)
            estimate, u = float(truncated.mean()), float(truncated.std())
            basis = ("normal truncated at the field's domain: the truncated normal's mean and "
                     "standard deviation")
    elif kind == "uniform":
        assert spec.low is not None and spec.high is not None
        estimate = 0.5 * (spec.low + spec.high)
        u = (spec.high - spec.low) / (2.0 * math.sqrt(3.0))
        basis = "rectangular: u = half-width / √3 (§4.3.7, eq. 7)"
    elif kind == "triangular":
        assert spec.low is not None and spec.mode is not None and spec.high is not None
        a, c, b = spec.low, spec.mode, spec.high
        estimate = (a + b + c) / 3.0
        u = math.sqrt(max(a * a + b * b + c * c - a * b - a * c - b * c, 0.0) / 18.0)
        basis = ("triangular: x = (a + b + c)/3, u² = (a² + b² + c² − ab − ac − bc)/18 "
                 "(half-width² / 6 when symmetric, §4.3.9)")
    elif kind == "lognormal":
        assert spec.relative_sd is not None
        cv = float(spec.relative_sd)
        estimate = value * math.sqrt(1.0 + cv * cv)
        u = cv * estimate
        basis = ("lognormal (the case's value its median): x = median √(1 + cv²), u = cv x")
    else:
        raise ValueError(f"uncertainty input {spec.field.path!r}: unknown distribution {kind!r}")
    for end in (estimate - u, estimate + u):
        inside = end > floor if open_ else end >= floor
        if not (inside and math.isfinite(end)):
            relation = ">" if open_ else "≥"
            raise ValueError(
                f"uncertainty input {spec.field.path!r}: the law of propagation evaluates the "
                f"model at x ± u = {estimate:.6g} ± {u:.6g}, outside the field's domain "
                f"({spec.field.path} {relation} {floor:g}); use method monte_carlo, or a "
                "narrower distribution")
    return InputEstimate(spec.field.path, float(estimate), float(u), value, basis)


def full_check_at_every_point(problem: Problem, fields: Sequence[FieldRef]) -> bool:
    """True where the trial model solves the case trial by trial (a transient case without the
    scaled series, a non-slab steady case whose inner radius varies): each
    point is then a full check, whose figures the propagation takes. Otherwise the batched or
    scaled trial model gives the figures and a few points are checked in full. The design
    runner and the cost estimate both follow this rule."""
    return TrialModel(problem, fields, ()).method == "trial by trial"


def design_points(estimates: Sequence[InputEstimate]) -> np.ndarray:
    """The 2k + 1 input points (rows, SI): the centre x, then x + u_i e_i for each i, then
    x − u_i e_i for each i."""
    x = np.array([e.estimate for e in estimates], dtype=float)
    u = np.array([e.standard_uncertainty for e in estimates], dtype=float)
    steps = np.diag(u)
    return np.vstack([x[None, :], x + steps, x - steps])


def sensitivity_coefficients(plus: np.ndarray, minus: np.ndarray, step: np.ndarray
                             ) -> np.ndarray:
    """c_i = (f(x + h_i e_i) − f(x − h_i e_i)) / (2 h_i): ``plus``/``minus`` (k, m) the values
    at the shifted points, ``step`` (k,) the h_i (u(x_i)); returns (k, m)."""
    return (plus - minus) / (2.0 * np.asarray(step, dtype=float)[:, None])


def coverage_factor(coverage: float) -> float:
    """k of a normal output for coverage probability p: Φ⁻¹((1 + p)/2) (JCGM 100 §G.1.3,
    Table G.1: 1.960 for 95 %, 2.576 for 99 %)."""
    if not 0.0 < coverage < 1.0:
        raise ValueError(f"uncertainty.coverage: expected a probability in (0, 1), got "
                         f"{coverage!r}")
    return float(stats.norm.ppf(0.5 * (1.0 + coverage)))


def significance_tolerance(u_c: float, significant_digits: int) -> float:
    """δ = ½ 10^l with u_c = c × 10^l, c an integer of ``significant_digits`` digits (the
    tolerance of JCGM 101:2008 §7.9.2 for stating u_c to those digits); 0 when u_c is 0."""
    if not (u_c > 0.0 and math.isfinite(u_c)):
        return 0.0
    exponent = math.floor(math.log10(u_c)) - significant_digits + 1
    return 0.5 * 10.0**exponent


@dataclass(frozen=True)
class Propagation:
    """The law of propagation for m figures: per figure (arrays of shape (m,)) the estimate
    y = f(x), u_c, U, the second-order term and shift; per input and figure (k, m) the
    coefficients and second differences. NaN where a figure is missing at some point."""

    estimates: tuple[InputEstimate, ...]
    centre: np.ndarray
    plus: np.ndarray
    minus: np.ndarray
    coefficients: np.ndarray
    second_differences: np.ndarray
    combined: np.ndarray
    second_order: np.ndarray
    mean_shift: np.ndarray
    coverage: float
    coverage_factor: float
    expanded: np.ndarray
    tolerance: np.ndarray
    correlated: bool

    @property
    def contributions(self) -> np.ndarray:
        """c_i u(x_i), (k, m): each input's first-order share (sign kept)."""
        u = np.array([e.standard_uncertainty for e in self.estimates])
        return self.coefficients * u[:, None]

    @property
    def second_order_change(self) -> np.ndarray:
        """√(u_c² + second-order term) − u_c, (m,)."""
        return np.sqrt(self.combined**2 + self.second_order) - self.combined

    @property
    def curvature_significant(self) -> np.ndarray:
        """True per figure where the second-order term changes u_c by more than δ (module
        docstring); a figure missing at some point counts as significant."""
        change = self.second_order_change
        with np.errstate(invalid="ignore"):
            return np.where(np.isfinite(change), change > self.tolerance, True)


def correlation_matrix(k: int, correlations: Sequence[tuple[int, int, float]]) -> np.ndarray:
    """The (k, k) matrix r_ij of the inputs (identity plus the stated pairs)."""
    r = np.eye(k)
    for i, j, rho in correlations:
        r[i, j] = r[j, i] = float(rho)
    return r


def propagate(estimates: Sequence[InputEstimate], values: np.ndarray,
              correlations: Sequence[tuple[int, int, float]] = (), coverage: float = 0.95,
              significant_digits: int = 2) -> Propagation:
    """The law of propagation from the model's ``values`` (2k + 1, m) at
    :func:`design_points` (the centre, then + u_i, then − u_i)."""
    k = len(estimates)
    values = np.asarray(values, dtype=float)
    if values.ndim != 2 or values.shape[0] != 2 * k + 1:
        raise ValueError(f"values: expected shape ({2 * k + 1}, m), got {values.shape}")
    centre, plus, minus = values[0], values[1:k + 1], values[k + 1:]
    u = np.array([e.standard_uncertainty for e in estimates], dtype=float)
    c = sensitivity_coefficients(plus, minus, u)
    second = plus - 2.0 * centre[None, :] + minus
    contributions = c * u[:, None]
    r = correlation_matrix(k, correlations)
    # eq. 13: u_c² = Σ_i Σ_j c_i u_i r_ij c_j u_j (the diagonal is eq. 10's first-order part)
    variance = np.einsum("im,ij,jm->m", contributions, r, contributions)
    combined = np.sqrt(np.maximum(variance, 0.0))
    second_order = 0.5 * np.sum(second**2, axis=0)
    shift = 0.5 * np.sum(second, axis=0)
    factor = coverage_factor(coverage)
    tolerance = np.array([significance_tolerance(float(v), significant_digits)
                          for v in combined])
    return Propagation(
        estimates=tuple(estimates), centre=centre, plus=plus, minus=minus, coefficients=c,
        second_differences=second, combined=combined, second_order=second_order,
        mean_shift=shift, coverage=coverage, coverage_factor=factor,
        expanded=factor * combined, tolerance=tolerance, correlated=bool(correlations))


def requirement_summary(value: float, u_c: float, expanded: float, low: float | None,
                        high: float | None) -> dict:
    """A requirement judged on the estimate y and U: the margin (positive: met, as the design
    block's), ``probability_met`` under the normal assumption (Φ of the margins over u_c), and
    ``decided``: ``met`` when the margin exceeds U, ``not_met`` when it is below −U, else
    ``within_expanded_uncertainty``."""
    if not (math.isfinite(value) and math.isfinite(u_c)):
        return {"margin": None, "probability_met": None, "decided": None}
    margins = ([value - low] if low is not None else []) + \
        ([high - value] if high is not None else [])
    margin = min(margins)
    if u_c > 0.0:
        below = stats.norm.cdf((low - value) / u_c) if low is not None else 0.0
        above = stats.norm.sf((high - value) / u_c) if high is not None else 0.0
        probability = float(max(0.0, 1.0 - below - above))
    else:
        probability = 1.0 if margin > 0.0 else 0.0
    decided = ("met" if margin > expanded else "not_met" if margin < -expanded
               else "within_expanded_uncertainty")
    return {"margin": float(margin), "probability_met": probability, "decided": decided}
