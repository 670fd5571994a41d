"""Calibration (``design.calibration``) and the short-time estimate (``design.short_time``)
against Crank's exact release series and closed forms of least squares.

Check values and their sources, each named again beside its check:
- Synthetic data: Crank, *The Mathematics of Diffusion*, 2nd ed., 1975, eq. 4.18 (sheet
  -l < x < l, uniform initial load, both faces held at zero), coded here independently of the
  engine, plus seeded Gaussian noise of known standard deviation.
- Coverage: a 95 % interval covers the true value in 95 % of replicates; over N replicates the
  count is binomial, standard deviation sqrt(0.95 * 0.05 / N) (0.69 % at N = 1000, so 93-97 %
  is +-2.9 standard deviations). Standardised errors (estimate - true)/standard error have mean
  0 and standard deviation 1 (asymptotic normality of least squares; Seber & Wild 1989,
  *Nonlinear Regression*, §2.1, from memory).
- Profile threshold: chi-square(1) 95 % quantile from scipy.stats.chi2.ppf (3.8415).
- Straight line with stated uncertainties: Press et al. 2007, *Numerical Recipes*, 3rd ed.,
  §15.2, eqs. 15.2.4-15.2.10 (from memory): S, Sx, Sy, Sxx, Sxy, Delta = S Sxx - Sx^2,
  a = (Sxx Sy - Sx Sxy)/Delta, b = (S Sxy - Sx Sy)/Delta, var(a) = Sxx/Delta,
  var(b) = S/Delta, cov(a, b) = -Sx/Delta. For a model linear in its parameters chi-square is
  quadratic, so the profile interval is exactly estimate +- sqrt(3.8415) standard errors.
- Short-time form: Crank 1975 §4.3, M_t/M_inf = 2 (D t/(pi l^2))^(1/2), against eq. 4.18.

Diffusivities, thicknesses, times and noise levels are invented for these tests.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats
from scipy.optimize import brentq, minimize_scalar

from worker.engine.design import short_time
from worker.engine.design.calibration import FitParameter, calibrate
from worker.engine.design.short_time import short_time_diffusivity
from worker.engine.model import Boundary, Layer, Problem, Reaction, Regime
from worker.engine.transient.exact_series import solve_transient_exact

DIFFUSIVITY = 2.0e-12  # m^2/s, invented
HALF_THICKNESS = 0.5e-3  # m, invented
TIME_SCALE = HALF_THICKNESS**2 / DIFFUSIVITY  # s
NOISE = 0.01  # standard deviation of a measured release fraction, invented
TIMES = np.linspace(0.01, 1.2, 20) * TIME_SCALE  # 20 times, release 11 % to 95 %
DELTA_95 = stats.chi2.ppf(0.95, 1)


def crank_sheet(tau):
    """Crank 1975 eq. 4.18: M_t/M_inf = 1 - sum 8/((2n+1)^2 pi^2) exp(-(2n+1)^2 pi^2 tau/4),
    tau = D t / l^2 with l the half-thickness; terms to 2n+1 = 299, the first neglected term is
    below exp(-100) for tau >= 5e-4 (every time used here)."""
    odd = 2 * np.arange(0, 150)[:, None] + 1
    tau = np.atleast_1d(np.asarray(tau, dtype=float))
    return 1.0 - np.sum(8.0 / (odd**2 * np.pi**2) * np.exp(-(odd**2) * np.pi**2 * tau / 4.0),
                        axis=0)


def _d_parameter(start=1.0e-11):
    return FitParameter("layers[0].diffusivity", start, 1.0e-15, 1.0e-9, True, "m^2/s")


def _release_model(times):
    return lambda theta: crank_sheet(theta[0] * times / HALF_THICKNESS**2)


def _burst_model(times):
    """A burst fraction b released at once, the rest by diffusion."""
    return lambda theta: theta[1] + (1.0 - theta[1]) * crank_sheet(
        theta[0] * times / HALF_THICKNESS**2)


def _noisy(clean, seed, sigma=NOISE):
    return clean + np.random.default_rng(seed).normal(0.0, sigma, clean.shape)


# --------------------------------------------------------------------------------------------
# One diffusivity from release data (Crank 1975 eq. 4.18)
# --------------------------------------------------------------------------------------------
def test_single_fit_recovers_d_within_its_standard_error():
    """Crank 1975 eq. 4.18 data, noise 0.01: the estimate lies within 3 standard errors of the
    true D, its interval holds D, and the standard error is a few per cent of D."""
    y = _noisy(crank_sheet(DIFFUSIVITY * TIMES / HALF_THICKNESS**2), seed=11)
    result = calibrate(_release_model(TIMES), [_d_parameter()], y, NOISE)
    estimate, se = result.estimates[0], result.standard_errors[0]
    assert result.converged
    assert abs(estimate - DIFFUSIVITY) <= 3.0 * se
    assert result.intervals[0, 0] < DIFFUSIVITY < result.intervals[0, 1]
    assert 0.001 < se / DIFFUSIVITY < 0.05
    assert result.degrees_of_freedom == 19


def test_profile_ends_lie_where_chi_square_rises_by_the_chi2_quantile():
    """One parameter: the profile is chi-square itself; at each interval end chi-square
    (computed here) exceeds its minimum by scipy.stats.chi2.ppf(0.95, 1) = 3.8415."""
    y = _noisy(crank_sheet(DIFFUSIVITY * TIMES / HALF_THICKNESS**2), seed=12)
    result = calibrate(_release_model(TIMES), [_d_parameter()], y, NOISE)

    def chi_square(d):
        return float(np.sum(((crank_sheet(d * TIMES / HALF_THICKNESS**2) - y) / NOISE) ** 2))

    assert chi_square(result.estimates[0]) == pytest.approx(result.chi_square, rel=1e-12, abs=0)
    for end in result.intervals[0]:
        assert chi_square(end) - result.chi_square == pytest.approx(DELTA_95, abs=1e-5)
    # the quantile the method names
    assert "3.84" in result.interval_method
    assert DELTA_95 == pytest.approx(3.8415, abs=1e-4)


def test_coverage_of_the_profile_interval_over_1000_replicates():
    """Binomial: 1000 seeded replicates of Crank 1975 eq. 4.18 data with noise 0.01; the 95 %
    profile intervals cover the true D in 93-97 % of them (+-2.9 binomial standard deviations),
    and the standardised errors have mean 0 +- 3/sqrt(N) and standard deviation
    1 +- 3/sqrt(2N)."""
    clean = crank_sheet(DIFFUSIVITY * TIMES / HALF_THICKNESS**2)
    model = _release_model(TIMES)
    replicates = 1000
    covered, standardised = 0, []
    for seed in range(replicates):
        result = calibrate(model, [_d_parameter()], _noisy(clean, 1000 + seed), NOISE)
        lo, hi = result.intervals[0]
        covered += lo <= DIFFUSIVITY <= hi
        standardised.append((result.estimates[0] - DIFFUSIVITY) / result.standard_errors[0])
    assert 0.93 <= covered / replicates <= 0.97
    z = np.asarray(standardised)
    assert abs(z.mean()) < 3.0 / math.sqrt(replicates)
    assert abs(z.std(ddof=1) - 1.0) < 3.0 / math.sqrt(2 * replicates)


def test_fit_through_the_engine_transient_solver():
    """The model is the engine's own transient solution of the sheet (exact series solver),
    the data Crank 1975 eq. 4.18 coded here plus noise: D is recovered within 3 standard
    errors and its interval holds it."""
    times = tuple(float(t) for t in TIMES)
    sink = Boundary("concentration", 0.0)

    def engine_release(theta):
        layer = Layer("body", 2 * HALF_THICKNESS, float(theta[0]), 1.0, Reaction(), 1.0)
        problem = Problem("slab", 0.0, (layer,), sink, sink,
                          Regime("transient", max(times), times))
        solution = solve_transient_exact(problem)
        return (solution.released_inner + solution.released_outer) / solution.initial_load

    y = _noisy(crank_sheet(DIFFUSIVITY * TIMES / HALF_THICKNESS**2), seed=13)
    result = calibrate(engine_release, [_d_parameter()], y, NOISE)
    assert result.converged
    assert abs(result.estimates[0] - DIFFUSIVITY) <= 3.0 * result.standard_errors[0]
    assert result.intervals[0, 0] < DIFFUSIVITY < result.intervals[0, 1]
    series = calibrate(_release_model(TIMES), [_d_parameter()], y, NOISE)
    assert result.estimates[0] == pytest.approx(series.estimates[0], rel=1e-6, abs=0)


# --------------------------------------------------------------------------------------------
# Two parameters: D and a burst fraction (profile over a nuisance parameter)
# --------------------------------------------------------------------------------------------
def test_two_parameter_fit_recovers_both_and_reports_their_correlation():
    """Burst fraction 0.1 then Crank 1975 eq. 4.18: both recovered within 3 standard errors;
    a burst and a faster diffusion both raise early release, so the correlation is negative."""
    truth = np.array([DIFFUSIVITY, 0.1])
    model = _burst_model(TIMES)
    y = _noisy(model(truth), seed=21)
    result = calibrate(model, [_d_parameter(), FitParameter("burst", 0.3, 0.0, 0.9, False, "1")],
                       y, NOISE)
    assert np.all(np.abs(result.estimates - truth) <= 3.0 * result.standard_errors)
    assert -0.95 < result.correlation[0, 1] < -0.3
    assert result.correlation[0, 1] == result.correlation[1, 0]
    for j in range(2):
        assert result.intervals[j, 0] < truth[j] < result.intervals[j, 1]


def test_two_parameter_profile_minimises_over_the_nuisance_parameter():
    """At each end of D's interval, the chi-square minimised over the burst fraction (here by
    scipy's bounded scalar minimiser, independently of the engine) exceeds the minimum by
    3.8415; holding the burst at its estimate instead would give a narrower interval."""
    truth = np.array([DIFFUSIVITY, 0.1])
    model = _burst_model(TIMES)
    y = _noisy(model(truth), seed=22)
    result = calibrate(model, [_d_parameter(), FitParameter("burst", 0.3, 0.0, 0.9, False, "1")],
                       y, NOISE)

    def chi_square(d, b):
        return float(np.sum(((model(np.array([d, b])) - y) / NOISE) ** 2))

    def profile(d):
        return minimize_scalar(lambda b: chi_square(d, b), bounds=(0.0, 0.9), method="bounded",
                               options={"xatol": 1e-10}).fun

    for end in result.intervals[0]:
        assert profile(end) - result.chi_square == pytest.approx(DELTA_95, abs=1e-3)
    b_hat = result.estimates[1]
    fixed_hi = brentq(lambda d: chi_square(d, b_hat) - result.chi_square - DELTA_95,
                      result.estimates[0], result.intervals[0, 1] * 2.0)
    assert fixed_hi < result.intervals[0, 1]


def test_coverage_with_a_nuisance_parameter_over_300_replicates():
    """Binomial: 300 seeded replicates of the burst model; D's profile interval (minimised over
    the burst) covers the true D in 92-98 % of them (+-2.4 binomial standard deviations of
    1.26 %)."""
    truth = np.array([DIFFUSIVITY, 0.1])
    model = _burst_model(TIMES)
    clean = model(truth)
    replicates = 300
    covered = 0
    for seed in range(replicates):
        result = calibrate(model, [_d_parameter(),
                                   FitParameter("burst", 0.3, 0.0, 0.9, False, "1")],
                           _noisy(clean, 5000 + seed), NOISE)
        covered += result.intervals[0, 0] <= DIFFUSIVITY <= result.intervals[0, 1]
    assert 0.92 <= covered / replicates <= 0.98


# --------------------------------------------------------------------------------------------
# A model linear in its parameters: closed forms of Press et al. 2007 §15.2
# --------------------------------------------------------------------------------------------
@pytest.mark.parametrize("level", [0.6827, 0.95, 0.99])
def test_straight_line_matches_the_closed_form_and_its_profile_is_wald(level):
    """Press et al. 2007, Numerical Recipes 3rd ed., §15.2 (from memory): estimates, variances
    and covariance of y = a + b x with stated sigma_i; chi-square is quadratic, so the profile
    interval is estimate +- sqrt(chi2.ppf(level, 1)) standard errors (1.00 at 68.27 %, 1.96 at
    95 %, 2.58 at 99 %)."""
    x = np.linspace(0.0, 10.0, 12)
    sigma = 0.2 + 0.05 * x
    y = 1.5 + 0.7 * x + np.random.default_rng(31).normal(0.0, sigma)
    s, sx, sy = np.sum(1 / sigma**2), np.sum(x / sigma**2), np.sum(y / sigma**2)
    sxx, sxy = np.sum(x**2 / sigma**2), np.sum(x * y / sigma**2)
    delta = s * sxx - sx**2
    a, b = (sxx * sy - sx * sxy) / delta, (s * sxy - sx * sy) / delta
    var_a, var_b, cov_ab = sxx / delta, s / delta, -sx / delta

    result = calibrate(lambda th: th[0] + th[1] * x,
                       [FitParameter("a", 0.0, -100.0, 100.0, False, "1"),
                        FitParameter("b", 1.0, -100.0, 100.0, False, "1")], y, sigma,
                       level=level)
    np.testing.assert_allclose(result.estimates, [a, b], rtol=1e-8)
    np.testing.assert_allclose(result.covariance, [[var_a, cov_ab], [cov_ab, var_b]], rtol=1e-6)
    assert result.correlation[0, 1] == pytest.approx(-sx / math.sqrt(s * sxx), rel=1e-6, abs=0)
    half = math.sqrt(stats.chi2.ppf(level, 1)) * np.sqrt([var_a, var_b])
    np.testing.assert_allclose(result.intervals[:, 0], [a, b] - half, rtol=1e-6)
    np.testing.assert_allclose(result.intervals[:, 1], [a, b] + half, rtol=1e-6)


# --------------------------------------------------------------------------------------------
# Short-time form (Crank 1975 §4.3) against the full series and against least squares
# --------------------------------------------------------------------------------------------
def _tau_at(fraction):
    return brentq(lambda tau: crank_sheet(tau)[0] - fraction, 5e-4, 10.0, xtol=1e-15)


@pytest.mark.parametrize("fraction, bound", [(0.3, 1e-7), (0.4, 4e-5), (0.5, 1e-3)])
def test_short_form_error_below_the_stated_limit(fraction, bound):
    """Crank 1975 §4.3 against eq. 4.18: at release fractions up to 0.5 the leading term
    2 (tau/pi)^(1/2) exceeds the series by less than 0.1 % (the module's stated range)."""
    tau = _tau_at(fraction)
    error = 2.0 * math.sqrt(tau / math.pi) / fraction - 1.0
    assert 0.0 <= error < bound


@pytest.mark.parametrize("fraction", [0.55, 0.6, 0.7])
def test_short_form_error_beyond_the_limit_exceeds_it(fraction):
    """Crank 1975 §4.3 against eq. 4.18: beyond 0.5 the leading term's error exceeds 0.1 %
    (0.28 % at 0.55), so the range is not drawn wider than it need be."""
    tau = _tau_at(fraction)
    assert 2.0 * math.sqrt(tau / math.pi) / fraction - 1.0 > 1e-3


def test_short_time_estimate_of_clean_series_data_within_its_bias():
    """Noise-free Crank 1975 eq. 4.18 data at fractions 0.04-0.89: the short-time estimate
    (which keeps only fractions <= 0.5) lies within 0.2 % of D; fitting all points instead
    (the range check removed) biases it by more than 1 %."""
    tau = np.array([_tau_at(f) for f in np.linspace(0.04, 0.89, 18)])
    times = tau * TIME_SCALE
    clean = crank_sheet(tau)
    estimate = short_time_diffusivity(times, clean, NOISE, HALF_THICKNESS)
    assert estimate.diffusivity == pytest.approx(DIFFUSIVITY, rel=2e-3, abs=0)
    assert estimate.points == 10

    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(short_time, "FRACTION_LIMIT", 1.0)
        widened = short_time_diffusivity(times, clean, NOISE, HALF_THICKNESS)
    assert abs(widened.diffusivity / DIFFUSIVITY - 1.0) > 0.01


def test_short_time_and_least_squares_agree_on_early_data():
    """Early Crank 1975 eq. 4.18 data (release up to ~50 %), noise 0.01, several seeds: the
    short-time estimate (Crank §4.3) and the least-squares estimate agree within two combined
    standard uncertainties, and each lies within 3 of its standard errors of the true D."""
    tau = np.linspace(0.004, 0.19, 20)
    times = tau * TIME_SCALE
    for seed in range(41, 46):
        y = _noisy(crank_sheet(tau), seed)
        fitted = calibrate(_release_model(times), [_d_parameter()], y, NOISE)
        early = short_time_diffusivity(times, y, NOISE, HALF_THICKNESS)
        assert early.diffusivity is not None and early.standard_error is not None
        assert early.agrees_with(fitted.estimates[0], fitted.standard_errors[0])
        assert abs(early.diffusivity - DIFFUSIVITY) <= 3.0 * early.standard_error
        assert abs(fitted.estimates[0] - DIFFUSIVITY) <= 3.0 * fitted.standard_errors[0]
        # a least-squares estimate 10 standard errors away would not agree
        assert not early.agrees_with(fitted.estimates[0] + 10 * fitted.standard_errors[0],
                                     fitted.standard_errors[0])
