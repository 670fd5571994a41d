"""The Galerkin route's time tolerance where a front moves (``galerkin.route_rtol``): its
grid bands (``refinement.amount_study``: GCI_fine, Celik et al., J. Fluids Eng. 130 (2008)
078001) must hold its time error, which no space study sees.

The case is the dispersed-drug slab of Paul & McSpadden (D.R. Paul, S.K. McSpadden, J. Membr.
Sci. 1 (1976) 33-48): a matrix loaded at A above its solubility Cs, sealed at one face and in a
perfect sink at the other, released amount M = 2 Cs sqrt(D t) / (sqrt(pi) erf(eta)) with eta the
root of sqrt(pi) eta exp(eta^2) erf(eta) = Cs / (A - Cs), exact until the front reaches the
sealed face. Scenario values are invented; check values come from that formula, and the time
error is read as the change of the route's amounts when its tolerance is tightened a
hundredfold (the integrator's error scales with its tolerance).
"""

from __future__ import annotations

import dataclasses
import math

import mpmath
import numpy as np
import pytest

from worker.engine.limits import FRONT_LIMITS, TRANSIENT_LIMITS
from worker.engine.model import Boundary, Layer, Problem, Regime
from worker.engine.transient import galerkin
from worker.engine.transient.galerkin import galerkin_study, route_rtol

A, CS, D, L = 10.0, 1.0, 1e-12, 1e-3  # mol/m^3, mol/m^3, m^2/s, m
DAY = 86400.0


def _eta() -> float:
    """Root of sqrt(pi) eta exp(eta^2) erf(eta) = Cs / (A - Cs) (Paul & McSpadden 1976)."""
    mpmath.mp.dps = 30
    target = mpmath.mpf(CS) / (mpmath.mpf(A) - CS)
    return float(mpmath.findroot(
        lambda e: mpmath.sqrt(mpmath.pi) * e * mpmath.exp(e**2) * mpmath.erf(e) - target, 0.3))


ETA = _eta()
#: 30 days in 20 equal parts; the front reaches the sealed face at L^2 / (4 eta^2 D) (about
#: 41 days here), so the similarity solution holds at every time
TIMES = tuple(30 * DAY * k / 20 for k in range(1, 21))
AMOUNTS = ("remaining", "released_outer", "flux_outer")


def _slab() -> Problem:
    return Problem("slab", 0.0, (Layer("matrix", L, D, initial=A, solubility=CS),),
                   Boundary("symmetry"), Boundary("concentration", 0.0),
                   Regime("transient", TIMES[-1], TIMES))


@pytest.fixture(scope="module")
def studies():
    problem = _slab()
    rtol = route_rtol(problem)
    found = {factor: galerkin_study(problem, rtol=factor * rtol) for factor in (0.01, 1.0, 100.0)}
    assert all(study.success for study in found.values())
    return found


def test_the_front_tolerance_follows_the_front_limits():
    problem = _slab()
    assert problem.can_saturate
    ratio = FRONT_LIMITS[galerkin.RTOL_LIMIT] / TRANSIENT_LIMITS[galerkin.RTOL_LIMIT]
    assert route_rtol(problem) == pytest.approx(galerkin.RTOL * ratio, rel=1e-15)
    # a case without a front keeps the default
    plain = Problem("slab", 0.0, (Layer("matrix", L, D, initial=A),), Boundary("symmetry"),
                    Boundary("concentration", 0.0), Regime("transient", TIMES[-1], TIMES))
    assert route_rtol(plain) == galerkin.RTOL


@pytest.mark.parametrize("limit, expected", [
    (1e-4, 1e-6),   # a case that tightens its release limit tenfold gets the tighter tolerance
    (2e-4, 2e-6),
    (1e-2, 1e-5),   # a loosened limit never loosens the route beyond its regime's default
])
def test_the_front_tolerance_follows_the_cases_own_limit(limit, expected):
    problem = dataclasses.replace(_slab(), tolerances={galerkin.RTOL_LIMIT: limit})
    assert route_rtol(problem) == pytest.approx(expected, rel=1e-12)


def test_the_front_case_stays_before_the_sealed_face_is_reached():
    assert L**2 / (4.0 * ETA**2 * D) > TIMES[-1]


def test_the_route_tolerance_leaves_the_error_against_the_exact_release(studies):
    # the error against Paul & McSpadden is the space error (the fronts' cells: measured
    # 1.4e-5 of the load at every tolerance from 1e-7 to 1e-5, at one time 1.13 times the GCI
    # band, hence the front limits): the route's tolerance changes it by a small part of its band
    expected = 2.0 * CS * np.sqrt(D * np.asarray(TIMES)) / (math.sqrt(math.pi) * math.erf(ETA))
    errors = {factor: np.abs(study.amounts.extrapolated["released_outer"] - expected)
              for factor, study in studies.items()}
    band = studies[1.0].amounts.band["released_outer"]
    assert np.all(np.isfinite(band))
    assert np.max(errors[1.0]) < 0.1 * FRONT_LIMITS["cross_check.release_fraction"] * A * L
    assert np.max(np.abs(errors[1.0] - errors[0.01]) / band) < 0.1
    # and a hundredfold looser tolerance does not
    assert np.max(np.abs(errors[100.0] - errors[0.01]) / band) > 1.0


@pytest.mark.parametrize("name", AMOUNTS)
def test_the_bands_hold_the_time_error_at_the_route_tolerance(studies, name):
    tight = studies[0.01].amounts.extrapolated[name]
    study = studies[1.0].amounts
    band = study.band[name]
    assert np.all(np.isfinite(band)) and np.all(band > 0.0)
    # measured: at most 2 % of the band (1e-5 against 1e-7)
    assert np.max(np.abs(study.extrapolated[name] - tight) / band) < 0.1


@pytest.mark.parametrize("name", AMOUNTS)
def test_a_hundredfold_looser_tolerance_breaks_out_of_the_bands(studies, name):
    # the comparison above can fail: at 1e-3 the time error is well beyond the bands
    tight = studies[0.01].amounts.extrapolated[name]
    study = studies[100.0].amounts
    assert np.max(np.abs(study.extrapolated[name] - tight) / study.band[name]) > 1.0
