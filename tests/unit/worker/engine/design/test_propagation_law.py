"""The law of propagation of uncertainty (JCGM 100:2008) on models whose propagation is known
by hand: each input's standard uncertainty against scipy's distributions, the coverage factor
against the GUM's Table G.1, eq. 13 and the second-order term of eq. 10 on explicit functions,
the GUM's worked example H.2 (correlated inputs, a nonlinear model),
and the sensitivity step and the record's checks with their errors injected both ways."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from worker.engine.design.paths import FieldRef
from worker.engine.design.propagation_law import (
    InputEstimate,
    coverage_factor,
    design_points,
    input_estimate,
    propagate,
    requirement_summary,
    sensitivity_coefficients,
    significance_tolerance,
)
from worker.engine.design.propagation_record import PointCheck, verification_block
from worker.engine.design.request import UncertainInput
from worker.engine.design.sampling import InputDistribution

FIELD = FieldRef("layer", "diffusivity", 0)


def _spec(kind: str, nominal: float, **parameters) -> UncertainInput:
    return UncertainInput(field=FIELD, distribution=kind, nominal=nominal,
                          domain=(0.0, True), **parameters)


@pytest.mark.parametrize(("kind", "nominal", "parameters"), [
    ("normal", 2.0, {"sd": 0.3}),
    ("uniform", 2.0, {"low": 1.5, "high": 2.9}),
    ("triangular", 2.0, {"low": 1.0, "mode": 1.4, "high": 3.0}),
    ("triangular", 2.0, {"low": 1.0, "mode": 2.0, "high": 3.0}),
    ("lognormal", 2.0, {"relative_sd": 0.4}),
])
def test_estimate_and_standard_uncertainty_are_the_distributions_moments(kind, nominal,
                                                                         parameters):
    """x_i is the expectation and u(x_i) the standard deviation of the distribution the Monte
    Carlo draws from (JCGM 100 §4.1.4, §4.3): the moments of scipy.stats' frozen distribution
    of the same input (the reference library, not the module's own formulas). The normal is
    truncated at zero there, 6.7 sd away: a shift of about 1e-11 the module leaves out
    (``TRUNCATION_NEGLIGIBLE``), inside the tolerance."""
    spec = _spec(kind, nominal, **parameters)
    found = input_estimate(spec)
    frozen = InputDistribution(field="x", kind=kind, nominal=nominal,  # type: ignore[arg-type]
                               domain=0.0, domain_open=True, **parameters).frozen()
    assert found.estimate == pytest.approx(float(frozen.mean()), rel=1e-9)
    assert found.standard_uncertainty == pytest.approx(float(frozen.std()), rel=1e-9)


def test_a_normal_cut_noticeably_by_its_domain_takes_the_truncated_moments():
    """A normal of mean 0.3 and sd 0.3 cut at zero (as the Monte Carlo draws it): the moments of
    scipy's truncated normal, the mean above the case's value."""
    found = input_estimate(_spec("normal", 0.3, sd=0.3))
    truncated = stats.truncnorm(-1.0, np.inf, loc=0.3, scale=0.3)
    assert found.estimate == pytest.approx(float(truncated.mean()), rel=1e-12)
    assert found.standard_uncertainty == pytest.approx(float(truncated.std()), rel=1e-12)
    assert found.estimate > 0.3


def test_rectangular_and_symmetric_triangular_follow_the_gum_clauses():
    """JCGM 100 §4.3.7 (eq. 7): u = a/√3 for a rectangular half-width a; §4.3.9: u = a/√6 for
    a symmetric triangular one."""
    a = 0.6
    assert input_estimate(_spec("uniform", 2.0, low=2.0 - a, high=2.0 + a)
                          ).standard_uncertainty == pytest.approx(a / math.sqrt(3.0), rel=1e-14)
    assert input_estimate(_spec("triangular", 2.0, low=2.0 - a, mode=2.0, high=2.0 + a)
                          ).standard_uncertainty == pytest.approx(a / math.sqrt(6.0), rel=1e-14)


def test_points_outside_the_fields_domain_are_refused_naming_it():
    """A lognormal of coefficient of variation 1.2 puts x − u below zero: the model cannot be
    evaluated there."""
    with pytest.raises(ValueError, match=r"layers\[0\]\.diffusivity.*monte_carlo"):
        input_estimate(_spec("lognormal", 2.0, relative_sd=1.2))
    assert input_estimate(_spec("lognormal", 2.0, relative_sd=0.9)).standard_uncertainty > 0


@pytest.mark.parametrize(("p", "k"), [(0.6827, 1.000), (0.90, 1.645), (0.95, 1.960),
                                      (0.9545, 2.000), (0.99, 2.576), (0.9973, 3.000)])
def test_coverage_factor_is_the_gums_table_g1(p, k):
    """JCGM 100:2008 Table G.1: coverage factor of a normal distribution."""
    assert coverage_factor(p) == pytest.approx(k, abs=6e-4)


def _estimates(x, u) -> list[InputEstimate]:
    return [InputEstimate(f"x{i}", float(a), float(b), float(a), "given")
            for i, (a, b) in enumerate(zip(x, u, strict=True))]


def test_linear_model_combined_uncertainty_is_eq_10_and_eq_13_exactly():
    """y = a·x (linear): u_c² = Σ a_i² u_i² (JCGM 100 eq. 10) and, with a correlation r
    between x0 and x1, + 2 a0 a1 u0 u1 r (eq. 13). The central difference of a linear model is
    exact, so the match is to round-off."""
    a = np.array([3.0, -2.0, 0.5])
    x, u = np.array([1.0, 4.0, 10.0]), np.array([0.1, 0.2, 1.5])
    estimates = _estimates(x, u)
    values = (design_points(estimates) @ a)[:, None]
    plain = propagate(estimates, values)
    by_hand = math.sqrt(float(np.sum((a * u) ** 2)))
    assert plain.combined[0] == pytest.approx(by_hand, rel=1e-12)
    assert plain.second_order[0] == pytest.approx(0.0, abs=1e-24)
    assert not plain.curvature_significant[0]
    r = 0.6
    correlated = propagate(estimates, values, [(0, 1, r)])
    eq13 = math.sqrt(by_hand**2 + 2 * a[0] * a[1] * u[0] * u[1] * r)
    assert correlated.combined[0] == pytest.approx(eq13, rel=1e-12)
    # a0 a1 < 0 here: a positive correlation lowers u_c, a negative one raises it
    assert correlated.combined[0] < plain.combined[0]
    assert propagate(estimates, values, [(0, 1, -r)]).combined[0] > plain.combined[0]


def test_gum_worked_example_h2_correlated_resistance_reactance_impedance():
    """JCGM 100:2008 (GUM) Annex H.2, simultaneous measurement of resistance and reactance:
    R = V cos(φ)/I, X = V sin(φ)/I, Z = V/I from V = 4.9990 V, I = 19.6610 mA, φ = 1.04446 rad
    with standard uncertainties 0.0032 V, 0.0095 mA, 0.00075 rad and correlations
    r(V, I) = −0.36, r(V, φ) = 0.86, r(I, φ) = −0.65 (Table H.2). The GUM's results (Table
    H.3, from memory): R = 127.732 Ω, u(R) = 0.071 Ω; X = 219.847 Ω, u(X) = 0.295 Ω;
    Z = 254.260 Ω, u(Z) = 0.236 Ω. The correlations are published to two digits: moving each
    by ±0.005 moves u(R) over 0.068-0.072 Ω (its three terms nearly cancel), u(X) and u(Z) by
    under 0.001 Ω, which sets the tolerances. Without the correlations u(R) would be 0.19 Ω."""
    estimates = _estimates([4.9990, 19.6610e-3, 1.04446], [0.0032, 0.0095e-3, 0.00075])
    points = design_points(estimates)
    volts, amps, phase = points[:, 0], points[:, 1], points[:, 2]
    values = np.column_stack([volts / amps * np.cos(phase), volts / amps * np.sin(phase),
                              volts / amps])
    result = propagate(estimates, values, [(0, 1, -0.36), (0, 2, 0.86), (1, 2, -0.65)])
    assert result.centre == pytest.approx([127.732, 219.847, 254.260], abs=6e-4)
    assert result.combined[0] == pytest.approx(0.071, abs=0.0015)
    assert result.combined[1:] == pytest.approx([0.295, 0.236], abs=0.0015)
    uncorrelated = propagate(estimates, values).combined
    assert uncorrelated[0] != pytest.approx(0.071, abs=0.0015)


def test_second_order_term_of_a_product_and_a_square():
    """JCGM 100 §5.1.2 Note, eq. 10's higher-order terms for uncorrelated normal inputs:
    y = x² gives ½ (∂²f/∂x²)² u⁴ = 2 u⁴; the second difference of a quadratic is exact, so the
    diagonal term is found exactly. (The GUM's own example, y = x1 x2, has only mixed terms,
    which ±u points cannot see: the term found is then zero, as the module says.)"""
    x, u = 3.0, 0.5
    estimates = _estimates([x], [u])
    values = design_points(estimates)[:, :1] ** 2
    result = propagate(estimates, values)
    assert result.second_order[0] == pytest.approx(2 * u**4, rel=1e-12)
    assert result.combined[0] == pytest.approx(2 * x * u, rel=1e-12)  # secant = tangent
    product = _estimates([2.0, 5.0], [0.1, 0.2])
    points = design_points(product)
    assert propagate(product, (points[:, 0] * points[:, 1])[:, None]).second_order[0] == \
        pytest.approx(0.0, abs=1e-15)


def test_curvature_warning_fires_for_a_strongly_nonlinear_model_only():
    """exp(x) with u(x) = 0.8 bends far within ±u: the second-order term moves u_c in its
    second digit. A straight line with the same u_c does not."""
    estimates = _estimates([0.0], [0.8])
    points = design_points(estimates)[:, :1]
    curved = propagate(estimates, np.exp(points))
    assert curved.curvature_significant[0]
    assert curved.second_order_change[0] > curved.tolerance[0]
    straight = propagate(estimates, points * float(curved.coefficients[0, 0]))
    assert straight.combined[0] == pytest.approx(curved.combined[0], rel=1e-12)
    assert not straight.curvature_significant[0]


def test_significance_tolerance_is_half_a_unit_in_the_last_stated_digit():
    """JCGM 101:2008 §7.9.2: u = 0.023 to two digits is 23 × 10⁻³, δ = 0.5 × 10⁻³."""
    assert significance_tolerance(0.023, 2) == pytest.approx(0.0005)
    assert significance_tolerance(0.023, 1) == pytest.approx(0.005)
    assert significance_tolerance(9.9e-7, 2) == pytest.approx(5e-9)
    assert significance_tolerance(0.0, 2) == 0.0


@pytest.mark.parametrize("factor", [0.5, 2.0])
def test_a_wrong_step_in_the_sensitivity_is_caught(factor):
    """The injected error: dividing the ±u difference by a step other than 2u (half or twice
    it) gives coefficients off by the same factor, and the closed form y = 3 x catches it."""
    estimates = _estimates([2.0], [0.1])
    values = design_points(estimates)[:, :1] * 3.0
    right = sensitivity_coefficients(values[1:2], values[2:3], np.array([0.1]))
    wrong = sensitivity_coefficients(values[1:2], values[2:3], np.array([0.1 * factor]))
    assert right[0, 0] == pytest.approx(3.0, rel=1e-12)
    assert wrong[0, 0] != pytest.approx(3.0, rel=1e-3)


def test_requirement_summary_at_a_margin_of_u_is_the_coverage():
    """A lower bound exactly U below the estimate: under the normal assumption the probability
    met is Φ(k) = (1 + p)/2; a margin just above U is decided met, just below it is not."""
    p = 0.95
    k = coverage_factor(p)
    y, u_c = 1.0, 0.1
    at_u = requirement_summary(y, u_c, k * u_c, y - k * u_c, None)
    assert at_u["probability_met"] == pytest.approx((1 + p) / 2, rel=1e-12)
    assert requirement_summary(y, u_c, k * u_c, y - 1.01 * k * u_c, None)["decided"] == "met"
    assert requirement_summary(y, u_c, k * u_c, y - 0.99 * k * u_c, None)["decided"] == \
        "within_expanded_uncertainty"
    assert requirement_summary(y, u_c, k * u_c, None, y - 1.01 * k * u_c)["decided"] == \
        "not_met"
    between = requirement_summary(y, u_c, k * u_c, y - u_c, y + u_c)
    assert between["probability_met"] == pytest.approx(
        stats.norm.cdf(1) - stats.norm.cdf(-1), rel=1e-12)


def _row(verdict="pass", full=1.0, band=1e-6, fast=None):
    return PointCheck("centre", {"x": 1.0}, verdict, (full,), (band,),
                      None if fast is None else (fast,))


def test_verification_checks_fail_when_their_error_is_injected_both_ways():
    """``uncertainty.subset`` fails on a failed full check and passes on a passed one;
    ``uncertainty.trial_model`` fails when the trial model is off by more than the figure's
    numerical uncertainty either way and passes inside it; the numerical flag turns false when
    the numerical uncertainty is above 0.1 u_c."""
    u_c = np.array([1e-3])

    def checks(*rows, compared=True):
        block = verification_block(rows, ["y"], u_c, compared=compared)
        return {c["name"]: c["passed"] for c in block["checks"]}, block

    passed, block = checks(_row(fast=1.0 + 5e-7))
    assert passed == {"uncertainty.subset": True, "uncertainty.trial_model": True}
    assert block["numerical_small_against_spread"] is True
    assert checks(_row(verdict="fail"))[0]["uncertainty.subset"] is False
    assert checks(_row(fast=1.0 + 3e-6))[0]["uncertainty.trial_model"] is False
    assert checks(_row(fast=1.0 - 3e-6))[0]["uncertainty.trial_model"] is False
    assert checks(_row(band=2e-4))[1]["numerical_small_against_spread"] is False
    assert "uncertainty.trial_model" not in checks(_row(), compared=False)[0]
    # a figure the inputs do not move (u_c = 0) has nothing to resolve: no infinite ratio
    still = verification_block([_row()], ["y"], np.array([0.0]), compared=False)
    assert still["largest_ratio_to_spread"] == 0.0
