"""Warnings, errors and the record block of ``design.calibration``.

Each warning is injected and shown to fire, and shown silent without its cause. The data are
Crank, *The Mathematics of Diffusion*, 2nd ed., 1975, eq. 4.18 (release from a sheet of
half-thickness l into a sink), coded here, with seeded Gaussian noise; the other check values
are facts of least squares named beside each check. Diffusivities, sizes, times and noise
levels are invented.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from scipy import stats

from worker.engine.design import calibration
from worker.engine.design.calibration import CalibrationResult, FitParameter, calibrate

D_TRUE = 2.0e-12  # m^2/s, invented
L = 0.5e-3  # m, half-thickness, invented
T_SCALE = L**2 / D_TRUE
NOISE = 0.01
SPREAD = np.linspace(0.02, 1.5, 20) * T_SCALE  # release ~16 % to ~97 %


def crank_sheet(tau):
    """Crank 1975 eq. 4.18, tau = D t / l^2 (terms to 2n+1 = 299; tau >= 5e-4 here)."""
    odd = 2 * np.arange(0, 150)[:, None] + 1
    tau = np.atleast_1d(np.asarray(tau, dtype=float))
    return 1.0 - np.sum(8.0 / (odd**2 * np.pi**2) * np.exp(-(odd**2) * np.pi**2 * tau / 4.0),
                        axis=0)


def data(times, seed, sigma=NOISE, d=D_TRUE):
    return crank_sheet(d * times / L**2) + np.random.default_rng(seed).normal(0, sigma,
                                                                             times.size)


def d_param(start=1e-11, low=1e-15, high=1e-9, log=True):
    return FitParameter("layers[0].diffusivity", start, low, high, log, "m^2/s")


def release(times):
    return lambda th: crank_sheet(th[0] * times / L**2)


def amplitude(times):
    return lambda th: th[1] * crank_sheet(th[0] * times / L**2)


AMP = FitParameter("amplitude", 0.8, 0.1, 10.0, False, "1")


def has(result: CalibrationResult, *words: str) -> bool:
    return any(all(w in text for w in words) for text in result.warnings)


# --------------------------------------------------------------------------------------------
# Warnings, both directions
# --------------------------------------------------------------------------------------------
def test_correlation_warning_fires_when_only_early_data_tie_amplitude_to_d():
    """Early release is 2 A (Dt/pi l^2)^(1/2) (Crank 1975 §4.3): A and D enter as A sqrt(D),
    so early data alone cannot separate them (|correlation| > 0.95); data into the late,
    exponential stage can (|correlation| < 0.95)."""
    early = np.linspace(0.025, 0.5, 20) * T_SCALE
    tied = calibrate(amplitude(early), [d_param(), AMP], data(early, 1), NOISE)
    assert abs(tied.correlation[0, 1]) > 0.95
    assert has(tied, "layers[0].diffusivity and amplitude are correlated", "cannot separate")
    assert not has(tied, "rank-deficient")

    separate = calibrate(amplitude(SPREAD), [d_param(), AMP], data(SPREAD, 1), NOISE)
    assert abs(separate.correlation[0, 1]) < 0.95
    assert not has(separate, "correlated")


def test_rank_deficient_warning_when_the_model_depends_on_d_over_l_squared_only():
    """Crank 1975 eq. 4.18 depends on D t / l^2 only: fitting D and l together leaves one
    direction undetermined (rank 1 of 2), their standard errors undefined, correlation +1 in the
    log scale limit, and both profiles flat; fitting D alone is full rank."""
    both = calibrate(lambda th: crank_sheet(th[0] * SPREAD / th[1] ** 2),
                     [d_param(), FitParameter("layers[0].thickness", 0.4e-3, 1e-4, 1e-2, True,
                                              "m")], data(SPREAD, 2), NOISE)
    assert has(both, "rank-deficient", "rank 1 of 2")
    assert np.all(np.isinf(both.standard_errors))
    assert both.correlation[0, 1] == pytest.approx(1.0, abs=1e-6)
    assert has(both, "layers[0].thickness", "do not bound it from below")
    assert both.as_dict()["parameters"][0]["standard_error"] is None

    alone = calibrate(release(SPREAD), [d_param()], data(SPREAD, 2), NOISE)
    assert not has(alone, "rank-deficient")
    assert np.isfinite(alone.standard_errors[0])


def test_open_interval_when_late_data_do_not_bound_d_from_above():
    """Once release is complete (Crank 1975 eq. 4.18 -> 1) any larger D fits as well: the
    interval is open at the upper bound, with the warning; data through the release bound D
    on both sides."""
    late = np.linspace(3.0, 6.0, 20) * T_SCALE
    flat = calibrate(release(late), [d_param()], data(late, 3), NOISE)
    assert has(flat, "do not bound it from above", "upper bound")
    assert flat.intervals[0, 1] == pytest.approx(1e-9, rel=1e-12, abs=0)
    assert flat.open_sides[0] == (False, True)
    assert flat.intervals[0, 0] < D_TRUE

    bounded = calibrate(release(SPREAD), [d_param()], data(SPREAD, 3), NOISE)
    assert not has(bounded, "do not bound")
    assert 1e-15 < bounded.intervals[0, 0] < D_TRUE < bounded.intervals[0, 1] < 1e-9


def test_open_interval_from_below_when_the_lower_bound_is_inside_the_interval():
    """A lower bound at 0.99 D, inside the 95 % interval (a few per cent wide): that side is
    open and its end is the bound."""
    y = data(SPREAD, 4)
    open_low = calibrate(release(SPREAD), [d_param(start=D_TRUE, low=0.99 * D_TRUE)], y, NOISE)
    assert has(open_low, "do not bound it from below", "lower bound")
    assert open_low.intervals[0, 0] == pytest.approx(0.99 * D_TRUE, rel=1e-12, abs=0)


@pytest.mark.parametrize("stated, direction", [(NOISE / 3.0, "above"), (NOISE * 3.0, "below")])
def test_reduced_chi_square_warning_when_noise_is_misstated_threefold(stated, direction):
    """Reduced chi-square of correctly weighted data follows chi2(nu)/nu; a standard deviation
    stated 3x too small (large) scales it by 9 (1/9), far outside the central 95 % range from
    scipy.stats.chi2 for 19 degrees of freedom; stated correctly it stays inside."""
    y = data(SPREAD, 5)
    lo, hi = stats.chi2.ppf([0.025, 0.975], 19) / 19
    wrong = calibrate(release(SPREAD), [d_param()], y, stated)
    assert not lo <= wrong.reduced_chi_square <= hi
    assert has(wrong, "reduced chi-square", direction)

    right = calibrate(release(SPREAD), [d_param()], y, NOISE)
    assert lo <= right.reduced_chi_square <= hi
    assert not has(right, "reduced chi-square")


def test_estimate_at_bound_warning():
    """Bounds that exclude the true D (upper bound 0.75 D): the estimate sits at the bound and
    says so; bounds around D: no such warning."""
    y = data(SPREAD, 6)
    clipped = calibrate(release(SPREAD), [d_param(start=1e-13, high=0.75 * D_TRUE)], y, NOISE)
    assert clipped.estimates[0] == pytest.approx(0.75 * D_TRUE, rel=1e-6, abs=0)
    assert has(clipped, "upper bound", "the bound, not the data")

    free = calibrate(release(SPREAD), [d_param(start=1e-13)], y, NOISE)
    assert not has(free, "the bound, not the data")


def test_failed_evaluations_are_never_taken_as_a_fit():
    """The model fails (NaN) for D > 1.2 D_true while the data come from 1.5 D_true: the fit
    stays where the model computes, warns that it sits at the edge of that region, and its
    predictions are finite; the same data with a model that never fails give 1.5 D_true."""
    y = data(SPREAD, 7, d=1.5 * D_TRUE)

    def fragile(th):
        if th[0] > 1.2 * D_TRUE:
            return np.full(SPREAD.size, np.nan)
        return crank_sheet(th[0] * SPREAD / L**2)

    edge = calibrate(fragile, [d_param(start=0.5 * D_TRUE)], y, NOISE)
    assert edge.estimates[0] <= 1.2 * D_TRUE
    assert np.all(np.isfinite(edge.predicted)) and math.isfinite(edge.chi_square)
    assert has(edge, "model fails just above the estimate")
    assert has(edge, "model failed while profiling")
    assert math.isnan(edge.intervals[0, 1])
    assert edge.as_dict()["parameters"][0]["interval"][1] is None

    sound = calibrate(release(SPREAD), [d_param(start=0.5 * D_TRUE)], y, NOISE)
    assert abs(sound.estimates[0] / (1.5 * D_TRUE) - 1.0) < 3 * sound.standard_errors[0] / (
        1.5 * D_TRUE)
    assert not has(sound, "model fail")


def test_failure_while_profiling_over_a_nuisance_parameter():
    """D and a burst fraction: a model that fails one standard error above the estimate (inside
    the 95 % interval) leaves that end unestablished (None in the record) with a warning, and
    the lower end closed; the sound model profiles both ends without it."""
    def burst(th):
        return th[1] + (1.0 - th[1]) * crank_sheet(th[0] * SPREAD / L**2)

    params = [d_param(start=1e-12), FitParameter("burst", 0.2, 0.0, 0.9, False, "1")]
    y = burst(np.array([D_TRUE, 0.1])) + np.random.default_rng(14).normal(0, NOISE, SPREAD.size)
    sound = calibrate(burst, params, y, NOISE)
    assert not has(sound, "model fail")
    assert np.all(np.isfinite(sound.intervals))
    edge = sound.estimates[0] + sound.standard_errors[0]

    def fragile(th):
        return np.full(SPREAD.size, np.nan) if th[0] > edge else burst(th)

    cut = calibrate(fragile, params, y, NOISE)
    assert cut.estimates[0] == pytest.approx(sound.estimates[0], rel=1e-6, abs=0)
    assert has(cut, "layers[0].diffusivity: the model failed while profiling it from above")
    assert math.isnan(cut.intervals[0, 1])
    assert cut.intervals[0, 0] == pytest.approx(sound.intervals[0, 0], rel=1e-6, abs=0)


def test_start_outside_bounds_is_clipped_and_noted():
    """A start outside its bounds is moved inside and the fit still finds D; a start inside
    gives no note."""
    y = data(SPREAD, 8)
    moved = calibrate(release(SPREAD), [d_param(start=1e-6)], y, NOISE)
    assert has(moved, "start", "outside its bounds")
    assert abs(moved.estimates[0] - D_TRUE) < 3 * moved.standard_errors[0]
    inside = calibrate(release(SPREAD), [d_param(start=1e-11)], y, NOISE)
    assert not has(inside, "outside its bounds")
    assert inside.estimates[0] == pytest.approx(moved.estimates[0], rel=1e-6, abs=0)


def test_no_degrees_of_freedom_is_warned_not_refused():
    """n = k: the fit passes through the points (chi-square 0), the reduced chi-square is
    undefined and the record says the fit cannot test the model."""
    t = SPREAD[5:6]
    one = calibrate(release(t), [d_param()], data(t, 9), NOISE)
    assert one.degrees_of_freedom == 0 and one.reduced_chi_square is None
    assert one.chi_square < 1e-12
    assert has(one, "no degrees of freedom")
    two = calibrate(release(SPREAD[5:7]), [d_param()], data(SPREAD[5:7], 9), NOISE)
    assert not has(two, "no degrees of freedom")


def _double_well(th):
    """Residuals r1 = theta^2 - 1 (u = 1), r2 = 0.3 theta + 1: chi-square has a local minimum
    near theta = +1 (~1.7) and a deeper one near -1 (~0.5), the barrier between them ~0.3 above
    the local one (well inside the profile's 3.84)."""
    return np.array([th[0] ** 2, 0.3 * th[0]])


def test_profile_finding_a_lower_minimum_is_warned():
    """Started in the shallow well the fit stops there; its profile walks into the deeper well
    and says the fit may be a local minimum. Started in the deep well: no warning."""
    line = [FitParameter("theta", 1.2, -3.0, 3.0, False, "1")]
    shallow = calibrate(_double_well, line, [1.0, -1.0], 1.0)
    assert shallow.estimates[0] > 0
    assert has(shallow, "theta", "lower than the fit", "local minimum")
    deep = calibrate(_double_well, [FitParameter("theta", -1.2, -3.0, 3.0, False, "1")],
                     [1.0, -1.0], 1.0)
    assert deep.estimates[0] < 0
    assert not has(deep, "local minimum")


def test_optimiser_stopping_early_is_reported(monkeypatch):
    """An optimiser held to 2 evaluations (scipy status 0) is not converged and says so; with
    its normal allowance it converges silently."""
    y = data(SPREAD, 13)
    assert calibrate(release(SPREAD), [d_param()], y, NOISE).converged
    original = calibration.optimize.least_squares

    def starved(*args, **kwargs):
        kwargs["max_nfev"] = 2
        return original(*args, **kwargs)

    monkeypatch.setattr(calibration.optimize, "least_squares", starved)
    stopped = calibrate(release(SPREAD), [d_param()], y, NOISE)
    assert not stopped.converged
    assert has(stopped, "optimiser stopped without converging")


# --------------------------------------------------------------------------------------------
# Standard errors: not scaled by the reduced chi-square; delta method for log parameters
# --------------------------------------------------------------------------------------------
def test_standard_errors_follow_the_stated_uncertainties_not_the_scatter():
    """Straight line with stated sigma: var(b) = S/Delta (Press et al. 2007, Numerical Recipes
    3rd ed., §15.2, from memory) does not depend on the residuals; data with 5x the scatter
    give the same standard errors (scaling by reduced chi-square would multiply them by
    ~sqrt(25))."""
    x = np.linspace(0.0, 1.0, 15)
    rng = np.random.default_rng(10)
    line = [FitParameter("a", 0.0, -10, 10, False, "1"), FitParameter("b", 1.0, -10, 10, False,
                                                                         "1")]
    quiet = calibrate(lambda th: th[0] + th[1] * x, line, 1 + 2 * x + rng.normal(0, 0.1, 15), 0.1)
    loud = calibrate(lambda th: th[0] + th[1] * x, line, 1 + 2 * x + rng.normal(0, 0.5, 15), 0.1)
    s, sx, sxx = 15 / 0.01, np.sum(x) / 0.01, np.sum(x**2) / 0.01
    assert quiet.standard_errors[1] == pytest.approx(math.sqrt(s / (s * sxx - sx**2)), rel=1e-6,
                                                     abs=0)
    np.testing.assert_allclose(loud.standard_errors, quiet.standard_errors, rtol=1e-6)
    assert loud.reduced_chi_square > 4 * quiet.reduced_chi_square
    assert "not scaled by the reduced chi-square" in quiet.method


def test_log_fit_standard_error_is_carried_to_si_by_the_delta_method():
    """Same data fitted on log10 and linear scales: the same optimum and, by the delta method
    (JCGM 100:2008 §5.1.2, u(x) = ln(10) x u(log10 x)), the same SI standard error; the
    log10-scale value itself would be ~1e11 times larger."""
    y = data(SPREAD, 11)
    log_fit = calibrate(release(SPREAD), [d_param(log=True)], y, NOISE)
    lin_fit = calibrate(release(SPREAD), [d_param(log=False)], y, NOISE)
    assert log_fit.estimates[0] == pytest.approx(lin_fit.estimates[0], rel=1e-7, abs=0)
    assert log_fit.standard_errors[0] == pytest.approx(lin_fit.standard_errors[0], rel=1e-4, abs=0)
    log_se = log_fit.standard_errors[0] / (math.log(10) * log_fit.estimates[0])
    assert log_se > 1e9 * log_fit.standard_errors[0]
    assert log_fit.as_dict()["parameters"][0]["scale"] == "log"
    assert lin_fit.as_dict()["parameters"][0]["scale"] == "linear"


# --------------------------------------------------------------------------------------------
# Errors name what is wrong
# --------------------------------------------------------------------------------------------
def test_fewer_points_than_parameters_is_an_error_naming_them():
    t = SPREAD[:1]
    with pytest.raises(ValueError, match=r"values: fewer measured points \(1\) than fitted "
                                         r"parameters \(2: layers\[0\]\.diffusivity, amplitude"):
        calibrate(amplitude(t), [d_param(), AMP], data(t, 0), NOISE)


def test_model_failing_at_the_start_is_an_error_naming_the_parameter():
    def broken_above(th):
        return np.full(SPREAD.size, np.nan) if th[0] > 5e-12 else crank_sheet(
            th[0] * SPREAD / L**2)

    with pytest.raises(ValueError, match=r"model: .*failed.*start.*layers\[0\]\.diffusivity "
                                         r"= 1e-11 m\^2/s"):
        calibrate(broken_above, [d_param(start=1e-11)], data(SPREAD, 0), NOISE)
    # started where it computes, the same model fits
    assert calibrate(broken_above, [d_param(start=1e-12)], data(SPREAD, 0), NOISE).converged


@pytest.mark.parametrize("parameters, values, u, match", [
    ([], [0.1, 0.2], 0.01, "parameters: expected at least one"),
    ([d_param(low=1e-9, high=1e-15)], [0.1, 0.2], 0.01, r"diffusivity: bounds: expected"),
    ([d_param(low=0.0)], [0.1, 0.2], 0.01, "log-scale parameter needs a positive lower bound"),
    ([d_param(start=math.nan)], [0.1, 0.2], 0.01, "start: expected a finite value"),
    ([d_param(), d_param()], [0.1, 0.2], 0.01, "fitted once"),
    ([d_param()], [0.1, math.nan], 0.01, "values: expected finite numbers"),
    ([d_param()], [0.1, 0.2], [0.01], "standard_uncertainty: expected 2 values"),
    ([d_param()], [0.1, 0.2], [0.01, 0.0], "standard_uncertainty: expected positive"),
    ([d_param()], [], 0.01, "values: expected a non-empty list"),
])
def test_bad_input_names_the_field(parameters, values, u, match):
    with pytest.raises(ValueError, match=match):
        calibrate(lambda th: np.zeros(len(values)), parameters, values, u)


def test_wrong_number_of_predictions_is_an_error():
    with pytest.raises(ValueError, match="model: expected 3 predictions"):
        calibrate(lambda th: np.zeros(2), [d_param()], [0.1, 0.2, 0.3], 0.01)


def test_level_must_be_a_probability():
    with pytest.raises(ValueError, match="level: expected a probability"):
        calibrate(release(SPREAD), [d_param()], data(SPREAD, 0), NOISE, level=95)


# --------------------------------------------------------------------------------------------
# The record block (CONTRACT15)
# --------------------------------------------------------------------------------------------
def test_record_block_has_the_contract_fields_and_is_json():
    y = data(SPREAD, 12)
    result = calibrate(amplitude(SPREAD), [d_param(), AMP], y, NOISE)
    block = result.as_dict()
    json.dumps(block, allow_nan=False)
    assert set(block) == {"parameters", "correlation", "covariance", "chi_square",
                          "degrees_of_freedom", "reduced_chi_square", "residuals", "warnings",
                          "converged", "evaluations", "method"}
    first = block["parameters"][0]
    assert set(first) == {"field", "estimate", "unit", "standard_error", "interval",
                          "interval_method", "scale", "bounds", "start"}
    assert first["field"] == "layers[0].diffusivity" and first["bounds"] == [1e-15, 1e-9]
    assert first["interval_method"] == "profile likelihood, Δχ² = 3.84 (95 %)"
    assert block["degrees_of_freedom"] == 18
    assert block["reduced_chi_square"] == pytest.approx(block["chi_square"] / 18)
    residual = block["residuals"][3]
    assert residual["normalised"] == pytest.approx(
        (residual["predicted"] - residual["measured"]) / residual["standard_uncertainty"])
    assert block["chi_square"] == pytest.approx(
        sum(r["normalised"] ** 2 for r in block["residuals"]))
    cov = np.array(block["covariance"])
    se = np.array([p["standard_error"] for p in block["parameters"]])
    np.testing.assert_allclose(np.sqrt(np.diag(cov)), se, rtol=1e-12)
    np.testing.assert_allclose(cov / np.outer(se, se), block["correlation"], rtol=1e-9)
    assert block["evaluations"] > 0 and block["converged"] is True
