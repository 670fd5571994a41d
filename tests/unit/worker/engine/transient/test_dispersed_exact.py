"""Closed forms of release from a matrix loaded above its solubility
(``transient/dispersed_exact.py``) and their record checks (``transient/dispersed_checks.py``).

Scenario values (thicknesses, diffusivities, loadings, times) are invented. Check values come
from outside the module: the published equations, written out again here and solved with
mpmath at 50 digits (Paul & McSpadden, J. Membr. Sci. 1 (1976) 33; Higuchi, J. Pharm. Sci. 50
(1961) 874; Baker & Lonsdale 1974 in Tanquary & Lacey (eds.), Controlled Release of Biologically
Active Agents), the similarity profile differentiated and integrated by mpmath, the
pseudo-steady shell balance integrated by scipy's solve_ivp, and limits of the published forms.
"""

from __future__ import annotations

import dataclasses
import math

import mpmath
import numpy as np
import pytest
from scipy.integrate import solve_ivp

from worker.engine.limits import FRONT_LIMITS, TRANSIENT_LIMITS
from worker.engine.model import Boundary, Layer, Problem, Reaction, Regime
from worker.engine.outcome import Outcome
from worker.engine.transient import dispersed_exact as de
from worker.engine.transient.dispersed_checks import add_dispersed_checks

mpmath.mp.dps = 50

D = 4.0e-14  # m^2/s, invented
CS = 2.0  # mol/m^3, invented
SINK = Boundary("concentration", 0.0)
SEALED = Boundary("symmetry")
FILM = Boundary("mass_transfer", coefficient=1e-7, bulk=0.0)


def _mp_lambda(loading, solubility):
    """The published Paul-McSpadden equation solved independently by mpmath."""
    target = mpmath.mpf(solubility) / (mpmath.mpf(loading) - solubility)
    guess = mpmath.sqrt(target / 2) if target < 1 else mpmath.sqrt(mpmath.log(1 + target))
    return mpmath.findroot(
        lambda lam: mpmath.sqrt(mpmath.pi) * lam * mpmath.exp(lam ** 2) * mpmath.erf(lam)
        - target, guess)


def _mp_release(loading, solubility, t):
    lam = _mp_lambda(loading, solubility)
    return float(2 * solubility * mpmath.sqrt(D * t) / (mpmath.sqrt(mpmath.pi) * mpmath.erf(lam)))


def _mp_depth(loading, solubility, t):
    return float(2 * _mp_lambda(loading, solubility) * mpmath.sqrt(D * t))


def _problem(geometry="slab", thickness=50e-6, loading=40.0, solubility=CS, inner=None,
             outer=SINK, reaction=None, layers=None, regime="transient", inner_r=0.0,
             times=(1e3, 1e4, 1e5)):
    if inner is None:
        inner = SEALED
    if reaction is None:
        reaction = Reaction()
    if layers is None:
        layers = (Layer("matrix", thickness, D, 1.0, reaction, loading, solubility),)
    return Problem(geometry, inner_r, tuple(layers), inner, outer,
                   Regime(regime, max(times), tuple(times)))


# ---------------------------------------------------------------------------------------------
# Paul & McSpadden 1976


@pytest.mark.parametrize("ratio", [1.001, 1.5, 2.0, 5.0, 20.0, 100.0, 1e4, 1e8])
def test_front_constant_is_the_root_of_the_published_equation(ratio):
    lam = de.paul_mcspadden_root(ratio * CS, CS)
    assert lam == pytest.approx(float(_mp_lambda(ratio * CS, CS)), rel=1e-13)


def test_similarity_profile_satisfies_the_front_balance_and_conserves_the_load():
    """Paul & McSpadden's profile C = Cs erf(x/(2 sqrt(Dt)))/erf(lambda): mpmath differentiates
    it at the front (flux in = (A - Cs) ds/dt), integrates it (load swept less dissolved left =
    released) and integrates the face flux over time (= released)."""
    a, t = 12.0, 3.0e4
    lam = _mp_lambda(a, CS)
    s = lambda tt: 2 * lam * mpmath.sqrt(D * tt)  # noqa: E731
    c = lambda x, tt: CS * mpmath.erf(x / (2 * mpmath.sqrt(D * tt))) / mpmath.erf(lam)  # noqa: E731
    flux_at_front = D * mpmath.diff(lambda x: c(x, t), s(t))
    sweep = (a - CS) * mpmath.diff(s, t)
    assert float(flux_at_front / sweep) == pytest.approx(1.0, rel=1e-12)
    left_behind = mpmath.quad(lambda x: c(x, t), [0, s(t)])
    released = float(a * s(t) - left_behind)
    through_face = float(mpmath.quad(lambda tt: D * mpmath.diff(lambda x: c(x, tt), 0),
                                     [0, t]))
    module = float(de.paul_mcspadden_release(D, a, CS, t))
    assert module == pytest.approx(released, rel=1e-12)
    assert module == pytest.approx(through_face, rel=1e-9)
    assert float(de.paul_mcspadden_depth(D, a, CS, t)) == pytest.approx(float(s(t)), rel=1e-13)


def test_paul_mcspadden_converges_to_the_higuchi_line_when_loading_far_exceeds_solubility():
    """Q_Higuchi / M_exact - 1 -> 0 as Cs/A -> 0, at the first-order rate -Cs/(12 A) of the
    expansion in the module notes (both from the published equations, solved by mpmath)."""
    t = 5.0e4
    gaps = []
    for ratio in (10.0, 100.0, 1e3, 1e4, 1e5):
        a = ratio * CS
        higuchi = math.sqrt(D * CS * (2 * a - CS) * t)  # Higuchi 1961, written out again
        gap = higuchi / _mp_release(a, CS, t) - 1.0
        depth_gap = float(de.higuchi_depth(D, a, CS, t)) / _mp_depth(a, CS, t) - 1.0
        gaps.append(abs(gap))
        assert float(de.higuchi_release(D, a, CS, t)) == pytest.approx(higuchi, rel=1e-14)
        if ratio >= 1e3:
            assert gap * ratio == pytest.approx(-1.0 / 12.0, rel=2e-3)
            assert depth_gap * ratio == pytest.approx(-1.0 / 12.0, rel=2e-3)
    assert all(later < earlier / 9 for earlier, later in zip(gaps, gaps[1:], strict=False))
    assert gaps[-1] < 1e-6


def test_bad_loading_is_refused_naming_both_values():
    with pytest.raises(ValueError, match="loading must exceed solubility"):
        de.paul_mcspadden_root(1.0, 2.0)
    with pytest.raises(ValueError, match="loading"):
        de.higuchi_release(D, 2.0, 0.0, 1.0)


# ---------------------------------------------------------------------------------------------
# Baker & Lonsdale 1974 (sphere) and the cylinder


def test_sphere_fraction_satisfies_baker_lonsdale_and_depletes_at_r2a_over_6dcs():
    a, r0 = 300.0, 0.5e-3
    depletion = r0 ** 2 * a / (6 * D * CS)
    times = depletion * np.array([1e-6, 0.01, 0.3, 0.7, 0.999999])
    fraction = de.baker_lonsdale_sphere_fraction(D, a, CS, r0, times)
    left = 1.5 * (1 - (1 - fraction) ** (2 / 3)) - fraction  # the published left side
    assert np.allclose(left, 3 * D * CS * times / (r0 ** 2 * a), rtol=1e-7, atol=0)
    assert de.baker_lonsdale_sphere_fraction(D, a, CS, r0, depletion) == 1.0
    assert np.isnan(de.baker_lonsdale_sphere_fraction(D, a, CS, r0, 1.01 * depletion))


def test_cylinder_fraction_satisfies_its_form_and_depletes_at_r2a_over_4dcs():
    a, r0 = 300.0, 0.5e-3
    depletion = r0 ** 2 * a / (4 * D * CS)
    times = depletion * np.array([1e-6, 0.01, 0.3, 0.7, 0.999])
    fraction = de.cylinder_pseudo_steady_fraction(D, a, CS, r0, times)
    left = fraction + (1 - fraction) * np.log(1 - fraction)
    assert np.allclose(left, 4 * D * CS * times / (r0 ** 2 * a), rtol=1e-7, atol=0)
    assert de.cylinder_pseudo_steady_fraction(D, a, CS, r0, depletion) == 1.0


@pytest.mark.parametrize("geometry", ["cylinder", "sphere"])
def test_curved_forms_follow_the_pseudo_steady_shell_balance(geometry):
    """Front radius against scipy's integration of -A d(volume)/dt = steady rate through the
    depleted shell (the derivation in the module notes), from r' = r0 (started just inside)."""
    a, r0 = 300.0, 0.5e-3
    if geometry == "sphere":
        def speed(_t, r):
            return [-D * CS * r0 / (a * r[0] * (r0 - r[0]))]
        depletion, depth = r0 ** 2 * a / (6 * D * CS), de.baker_lonsdale_sphere_depth
    else:
        def speed(_t, r):
            return [-D * CS / (a * r[0] * math.log(r0 / r[0]))]
        depletion, depth = r0 ** 2 * a / (4 * D * CS), de.cylinder_pseudo_steady_depth
    start_depth = 1e-6  # fraction of r0; the start time from the planar limit A s^2/2 = D Cs t
    t0 = a * (start_depth * r0) ** 2 / (2 * D * CS)
    times = depletion * np.array([0.05, 0.3, 0.6, 0.9])
    integrated = solve_ivp(speed, (t0, times[-1]), [r0 * (1 - start_depth)], t_eval=times,
                           rtol=1e-11, atol=1e-18, method="LSODA")
    closed = r0 * (1 - depth(D, a, CS, r0, times))
    assert np.allclose(closed, integrated.y[0], rtol=2e-5, atol=0)


@pytest.mark.parametrize("geometry", ["cylinder", "sphere"])
def test_curved_forms_reduce_to_the_plane_for_shallow_fronts(geometry):
    """At small penetration the release per area of surface and the depth tend to the plane
    pseudo-steady values that neglect the dissolved solute, sqrt(2 A D Cs t) and
    sqrt(2 D Cs t / A) (Higuchi's forms with Cs << A)."""
    a, r0 = 300.0, 0.5e-3
    for depth_fraction in (1e-2, 1e-3, 1e-4):
        t = a * (depth_fraction * r0) ** 2 / (2 * D * CS)
        if geometry == "sphere":
            fraction = de.baker_lonsdale_sphere_fraction(D, a, CS, r0, t)
            per_area = fraction * a * r0 / 3
            delta = de.baker_lonsdale_sphere_depth(D, a, CS, r0, t)
        else:
            fraction = de.cylinder_pseudo_steady_fraction(D, a, CS, r0, t)
            per_area = fraction * a * r0 / 2
            delta = de.cylinder_pseudo_steady_depth(D, a, CS, r0, t)
        plane = math.sqrt(2 * a * D * CS * t)
        assert float(per_area) / plane == pytest.approx(1.0, abs=2 * depth_fraction)
        assert float(delta) * r0 / math.sqrt(2 * D * CS * t / a) == pytest.approx(
            1.0, abs=2 * depth_fraction)


# ---------------------------------------------------------------------------------------------
# Ranges of validity


def test_similarity_scope_is_strict():
    assert de.similarity_applies(_problem())
    assert de.similarity_applies(_problem(inner=SINK, outer=SEALED))
    assert de.similarity_applies(_problem(inner=SINK, outer=Boundary("flux", 0.0)))
    refused = {
        "consumes": _problem(reaction=Reaction("first_order", rate_constant=1e-6)),
        "not loaded": _problem(loading=1.0),
        "layers": _problem(layers=(Layer("a", 1e-5, D, 1.0, Reaction(), 40.0, CS),
                                   Layer("b", 1e-5, D, 1.0, Reaction(), 40.0, CS))),
        "planar": _problem(geometry="cylinder"),
        "neither": _problem(outer=FILM),
        "perfect sink": _problem(outer=SEALED),
        "transient": _problem(regime="steady"),
        "sink (zero": _problem(outer=Boundary("concentration", 0.5)),
    }
    for words, problem in refused.items():
        scope = de.similarity_scope(problem)
        assert not scope.applies and words in scope.reason, (words, scope.reason)


def test_similarity_horizon_is_the_front_at_the_far_face_or_the_mid_plane():
    one = de.similarity_scope(_problem())
    both = de.similarity_scope(_problem(inner=SINK))
    lam = float(_mp_lambda(40.0, CS))
    assert one.horizon == pytest.approx((50e-6 / (2 * lam)) ** 2 / D, rel=1e-12)
    assert both.horizon == pytest.approx(one.horizon / 4, rel=1e-12)
    assert both.faces == ("inner", "outer") and one.faces == ("outer",)


def test_pseudo_steady_scope_is_strict():
    assert de.pseudo_steady_applies(_problem(loading=200.0))
    assert de.pseudo_steady_applies(_problem("sphere", 1e-3, 200.0, inner=SEALED))
    assert de.pseudo_steady_applies(_problem("cylinder", 1e-3, 200.0, inner=SEALED))
    refused = {
        "exceeds": _problem(loading=15.0),  # Cs/A = 0.133
        "hollow": _problem("cylinder", 1e-3, 200.0, inner_r=1e-3),
        "neither": _problem("sphere", 1e-3, 200.0, outer=FILM),
        "consumes": _problem(loading=200.0, reaction=Reaction("zero_order", rate=1e-9)),
    }
    for words, problem in refused.items():
        scope = de.pseudo_steady_scope(problem)
        assert not scope.applies and words in scope.reason, (words, scope.reason)
    sphere = de.pseudo_steady_scope(_problem("sphere", 1e-3, 200.0))
    assert sphere.horizon == pytest.approx(de.PSEUDO_STEADY_WINDOW * 1e-6 * 200 / (6 * D * CS))


def test_the_two_limits_are_registered():
    assert TRANSIENT_LIMITS["cross_check.dispersed_similarity"] == 1e-4
    # a case that can saturate takes the pointwise limit (limits.FRONT_LIMITS)
    assert FRONT_LIMITS["cross_check.dispersed_similarity"] == 1e-3
    assert TRANSIENT_LIMITS["cross_check.pseudo_steady"] == 1e-3


# ---------------------------------------------------------------------------------------------
# The record checks


def _slab_case(inner=SEALED, loading=40.0):
    problem = _problem(inner=inner, loading=loading)
    horizon = de.similarity_scope(problem).horizon
    times = horizon * np.array([0.0, 0.01, 0.2, 0.6, 0.95])
    return dataclasses.replace(problem, regime=Regime("transient", times[-1], tuple(times))), \
        times


def _exact_slab(problem, times, faces=1):
    """The exact release and fronts, from the mpmath solution of the published equation."""
    layer = problem.layers[0]
    released = np.array([faces * _mp_release(layer.initial, CS, t) for t in times])
    depth = np.array([_mp_depth(layer.initial, CS, t) for t in times])
    return released, problem.outer - depth, problem.inner + depth


def _run(problem, times, released, front, inner=None, band=None):
    outcome = Outcome()
    add_dispersed_checks(outcome, problem, times, released, front, inner, band)
    return outcome


def test_similarity_check_passes_on_the_exact_values_and_fails_on_each_injected_error():
    problem, times = _slab_case()
    released, front, _ = _exact_slab(problem, times)
    check = _run(problem, times, released, front).check("cross_check.dispersed_similarity")
    assert check.passed and check.value < 1e-12 and "Paul" in check.detail
    thickness = problem.total_thickness
    for factor in (1 + 3e-3, 1 - 3e-3):
        bad = _run(problem, times, released * factor, front)
        assert not bad.check("cross_check.dispersed_similarity").passed
    for shift in (+3e-3, -3e-3):
        bad = _run(problem, times, released, front + shift * thickness)
        check = bad.check("cross_check.dispersed_similarity")
        assert not check.passed and check.value == pytest.approx(3e-3, rel=1e-6)
    missing = front.copy()
    missing[2] = np.nan
    check = _run(problem, times, released, list(missing)).check(
        "cross_check.dispersed_similarity")
    assert not check.passed and check.value is None
    small = _run(problem, times, released * (1 + 2e-5), front)
    assert small.check("cross_check.dispersed_similarity").passed


def test_similarity_check_compares_both_fronts_of_a_slab_releasing_from_both_faces():
    problem, times = _slab_case(inner=SINK)
    released, front, inner = _exact_slab(problem, times, faces=2)
    assert _run(problem, times, released, front, inner).check(
        "cross_check.dispersed_similarity").passed
    single = _run(problem, times, released / 2, front, inner)
    assert not single.check("cross_check.dispersed_similarity").passed
    for shift in (+3e-3, -3e-3):
        check = _run(problem, times, released, front, inner + shift * 50e-6).check(
            "cross_check.dispersed_similarity")
        assert not check.passed
    unsupplied = _run(problem, times, released, front).check("cross_check.dispersed_similarity")
    assert unsupplied.passed and "inner front was not supplied" in unsupplied.detail


def test_a_front_band_forgives_at_most_half_the_allowance():
    problem, times = _slab_case()
    released, front, _ = _exact_slab(problem, times)
    thickness = problem.total_thickness
    shifted = front + 0.8e-3 * thickness  # limit 1e-3 (FRONT_LIMITS): half is 5e-4
    band = np.full(times.size, 1.0)  # a huge band is capped at half the limit
    assert _run(problem, times, released, shifted, band=band).check(
        "cross_check.dispersed_similarity").passed
    too_far = front + 1.6e-3 * thickness
    assert not _run(problem, times, released, too_far, band=band).check(
        "cross_check.dispersed_similarity").passed


def test_times_past_the_range_are_not_compared():
    problem, times = _slab_case()
    released, front, _ = _exact_slab(problem, times)
    later = np.append(times, 2 * times[-1])
    outcome = _run(problem, later, np.append(released, 0.0), np.append(front, np.nan))
    check = outcome.check("cross_check.dispersed_similarity")
    assert check.passed and "at 4 requested times" in check.detail


def test_pseudo_steady_check_allows_the_plane_forms_own_error_and_no_more():
    """At A/Cs = 20 Higuchi is about Cs/(12 A) below the exact release: the exact solution
    passes the pseudo-steady check; errors beyond that bound fail in both directions."""
    problem, times = _slab_case(loading=20 * CS)
    pseudo = de.pseudo_steady_scope(problem)
    times = times[times <= pseudo.horizon]
    problem = dataclasses.replace(problem, regime=Regime("transient", times[-1], tuple(times)))
    released, front, _ = _exact_slab(problem, times)
    outcome = _run(problem, times, released, front)
    check = outcome.check("cross_check.pseudo_steady")
    assert check.passed and check.value < 1e-12 and "Higuchi" in check.detail
    higuchi = float(de.higuchi_release(D, 20 * CS, CS, 1.0))
    own_error = 1 - higuchi / _mp_release(20 * CS, CS, 1.0)
    assert 0.9 / 12 / 20 < own_error < 1.1 / 12 / 20
    # the exact release is own_error above Higuchi's: the allowed band is Higuchi +- own_error
    for factor in (1 + 3e-3, 1 - 2 * own_error - 3e-3):
        bad = _run(problem, times, released * factor, front)
        assert not bad.check("cross_check.pseudo_steady").passed
    for shift in (+3e-3, -3e-3):
        bad = _run(problem, times, released, front + shift * problem.total_thickness)
        assert not bad.check("cross_check.pseudo_steady").passed


@pytest.mark.parametrize("geometry", ["cylinder", "sphere"])
def test_pseudo_steady_check_on_curved_bodies(geometry):
    a, r0 = 100 * CS, 0.4e-3
    problem = _problem(geometry, r0, a)
    horizon = de.pseudo_steady_scope(problem).horizon
    times = horizon * np.array([0.0, 0.1, 0.5, 1.0])
    problem = dataclasses.replace(problem, regime=Regime("transient", times[-1], tuple(times)))
    if geometry == "sphere":
        fraction = de.baker_lonsdale_sphere_fraction(D, a, CS, r0, times)
        load, front = a * 4 / 3 * math.pi * r0 ** 3, r0 * (1 - fraction) ** (1 / 3)
    else:
        fraction = de.cylinder_pseudo_steady_fraction(D, a, CS, r0, times)
        load, front = a * math.pi * r0 ** 2, r0 * np.sqrt(1 - fraction)
    released = fraction * load
    outcome = _run(problem, times, released, front)
    check = outcome.check("cross_check.pseudo_steady")
    assert check.passed and check.value < 1e-12
    assert ("Baker" if geometry == "sphere" else "Roseman") in check.detail
    assert "at 3 requested times" in check.detail
    assert outcome.check("cross_check.dispersed_similarity") is None
    assert any("similarity solution is planar" in w for w in outcome.warnings)
    bound = de.CURVED_RELEASE_BOUND * CS / a
    inside = _run(problem, times, released * (1 - 0.9 * bound), front)
    assert inside.check("cross_check.pseudo_steady").passed
    for factor in (1 + bound + 2e-3, 1 - bound - 2e-3):
        bad = _run(problem, times, released * factor, front)
        assert not bad.check("cross_check.pseudo_steady").passed
    front_bound = de.CURVED_FRONT_BOUND * CS / a
    for shift in (front_bound + 2e-3, -front_bound - 2e-3):
        bad = _run(problem, times, released, front + shift * r0)
        assert not bad.check("cross_check.pseudo_steady").passed


def test_cases_outside_the_ranges_get_a_note_not_a_check():
    problem = _problem(outer=FILM)
    outcome = _run(problem, [1e3, 1e4], [1.0, 2.0], [40e-6, 30e-6])
    assert outcome.checks == []
    assert len(outcome.warnings) == 2 and all("not checked" in w for w in outcome.warnings)
    dissolved = _problem(loading=1.0)
    outcome = _run(dissolved, [1e3, 1e4], [1.0, 2.0], None)
    assert outcome.checks == [] and outcome.warnings == []


def test_a_case_override_moves_the_limit():
    problem, times = _slab_case()
    released, front, _ = _exact_slab(problem, times)
    loose = dataclasses.replace(problem, tolerances={"cross_check.dispersed_similarity": 1e-2})
    check = _run(loose, times, released * (1 + 1e-3), front).check(
        "cross_check.dispersed_similarity")
    assert check.passed and check.limit == 1e-2


def test_series_of_the_wrong_length_name_the_field():
    problem, times = _slab_case()
    with pytest.raises(ValueError, match="released_per_measure"):
        _run(problem, times, [1.0], None)
    with pytest.raises(ValueError, match="front_positions"):
        _run(problem, times, np.ones(times.size), [1.0, 2.0])
