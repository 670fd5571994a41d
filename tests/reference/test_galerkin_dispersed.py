"""The Galerkin second discretisation on drug dispersed above its solubility, against the exact
similarity solution of Paul & McSpadden, and the generic front comparisons of ``compare``.

Paul & McSpadden (D.R. Paul, S.K. McSpadden, "Diffusional release of a solute from a polymer
matrix", J. Membr. Sci. 1 (1976) 33-48): a matrix loaded with A (total solute per volume) above
the solubility Cs, releasing through x = 0 into a perfect sink. Behind the dissolution front
X = 2 eta sqrt(D t) the solute is all dissolved, C = Cs erf(x / (2 sqrt(D t))) / erf(eta); beyond
it C = Cs with the excess undissolved; the front condition (A - Cs) dX/dt = D dC/dx at X gives
their transcendental equation

    sqrt(pi) eta exp(eta^2) erf(eta) = Cs / (A - Cs),

and the released amount per area M = 2 Cs sqrt(D t) / (sqrt(pi) erf(eta)). Beyond the front
the state is uniform, so a slab of thickness L sealed at its far face follows the similarity
solution exactly until the front reaches that face, at t = L^2 / (4 eta^2 D): then the last
undissolved solute is gone (the layer's time_depleted). The root is found with mpmath.

Scenario values are invented; check values come from the formulas above only.
"""

from __future__ import annotations

import dataclasses
import math

import mpmath
import numpy as np
import pytest

from worker.engine.model import Boundary, Layer, Problem, Regime
from worker.engine.outcome import Outcome
from worker.engine.transient.compare import compare_fronts
from worker.engine.transient.galerkin import galerkin_study, solve_transient_galerkin
from worker.engine.transient.routes import galerkin_fronts
from worker.engine.transient.solution import FrontAccount, Route

A, CS, D, L = 10.0, 1.0, 1e-10, 1e-3  # mol/m^3, mol/m^3, m^2/s, m


def paul_mcspadden_eta(loading: float, solubility: float) -> float:
    """Root of sqrt(pi) eta exp(eta^2) erf(eta) = Cs / (A - Cs) (Paul & McSpadden 1976)."""
    mpmath.mp.dps = 30
    target = mpmath.mpf(solubility) / (mpmath.mpf(loading) - solubility)
    root = mpmath.findroot(
        lambda e: mpmath.sqrt(mpmath.pi) * e * mpmath.exp(e**2) * mpmath.erf(e) - target, 0.3)
    return float(root)


ETA = paul_mcspadden_eta(A, CS)
#: the front reaches the sealed face (x = 0 of the slab, 1 mm from the sink) here
T_DEPLETED = L**2 / (4.0 * ETA**2 * D)
TIMES = tuple(float(t) for t in np.linspace(0.04, 0.6, 8) * T_DEPLETED)


def _slab(times=TIMES, duration=None, loading=A):
    return Problem("slab", 0.0, (Layer("matrix", L, D, 1.0, initial=loading, solubility=CS),),
                   Boundary("symmetry"), Boundary("concentration", 0.0),
                   Regime("transient", duration or max(times), tuple(times)))


def _released(times):
    return 2.0 * CS * np.sqrt(D * np.asarray(times)) / (math.sqrt(math.pi) * math.erf(ETA))


def _front(times):
    """Position of the front in the slab's coordinate (the sink at x = L)."""
    return L - 2.0 * ETA * np.sqrt(D * np.asarray(times))


@pytest.fixture(scope="module")
def study():  # a slow setup: the front crosses every node of three meshes
    found = galerkin_study(_slab())
    assert found.success
    return found


def test_eta_solves_the_published_equation():
    # the root itself, and the limit A >> Cs of the equation (2 eta^2 ~ Cs / (A - Cs))
    lhs = math.sqrt(math.pi) * ETA * math.exp(ETA**2) * math.erf(ETA)
    assert lhs == pytest.approx(CS / (A - CS), rel=1e-12)
    assert paul_mcspadden_eta(1e4, 1.0) == pytest.approx(math.sqrt(0.5 / (1e4 - 1.0)), rel=1e-3)


def test_released_amount_matches_paul_mcspadden(study):
    expected = _released(TIMES)
    released = study.amounts.extrapolated["released_outer"]
    assert np.max(np.abs(released - expected) / expected) < 2e-4
    # the fine mesh alone is within a few per mille, and its band covers most of its error
    fine = study.fine.released_outer
    assert np.max(np.abs(fine - expected) / expected) < 5e-3


def test_front_matches_paul_mcspadden(study):
    expected = _front(TIMES)
    account = galerkin_fronts(study)
    assert account is not None and account.layers == [0]
    assert np.max(np.abs(account.outer[:, 0] - expected)) < 2e-4 * L
    # the undissolved region keeps its inner edge at the sealed face
    assert np.allclose(account.inner[:, 0], 0.0, atol=1e-12)
    for solution in study.solutions:  # every mesh, to within a fraction of its element
        element = L / solution.mesh.elements_per_layer[0]
        assert np.max(np.abs(solution.front_outer[:, 0] - expected)) < 0.1 * element


def test_mass_balance_counts_the_undissolved_solute(study):
    for solution in study.solutions:
        assert solution.initial_load == pytest.approx(A * L, rel=1e-13)
        assert solution.undissolved is not None
        residual = (solution.initial_load - solution.remaining - solution.released_outer
                    - solution.released_inner - solution.consumed)
        assert np.max(np.abs(residual)) < 1e-10 * solution.initial_load
        # undissolved: what the exact solution still holds beyond the front, (A - Cs) X
        exact_solid = (A - CS) * _front(TIMES)
        assert np.max(np.abs(solution.undissolved - exact_solid)) < 2e-3 * (A - CS) * L


@pytest.mark.slow
def test_time_depleted_is_when_the_front_reaches_the_sealed_face():
    times = tuple(float(t) for t in np.linspace(0.2, 1.4, 7) * T_DEPLETED)
    found = galerkin_study(_slab(times))
    assert found.success
    account = galerkin_fronts(found)
    assert account is not None
    assert account.time_depleted[0] == pytest.approx(T_DEPLETED, rel=1e-3)
    # gone after, present before
    after = np.asarray(times) > T_DEPLETED
    assert np.all(np.isnan(account.outer[after, 0]))
    assert np.all(np.isfinite(account.outer[~after, 0]))


@pytest.mark.parametrize("geometry", ["cylinder", "sphere"])
def test_curved_bodies_conserve_the_load_with_two_layers(geometry):
    problem = Problem(geometry, 0.0, (
        Layer("core", 0.6 * L, D, 1.0, initial=A, solubility=CS),
        Layer("coat", 0.4 * L, 0.3 * D, 0.5, initial=3.0, solubility=0.4),
    ), Boundary("symmetry"), Boundary("concentration", 0.0),
        Regime("transient", 2e4, (2e3, 1e4, 2e4)))
    solution = solve_transient_galerkin(problem, elements_per_layer=(24, 16))
    assert solution.success
    n = problem.exponent
    exact = problem.measure_factor * (A * (0.6 * L) ** (n + 1)
                                      + 3.0 * (L ** (n + 1) - (0.6 * L) ** (n + 1))) / (n + 1)
    assert solution.initial_load == pytest.approx(exact, rel=1e-12)
    residual = (solution.initial_load - solution.remaining - solution.released_outer
                - solution.consumed)
    assert np.max(np.abs(residual)) < 1e-10 * exact
    assert solution.loaded_layers == [0, 1]
    # each layer's region shrinks from its outer edge: fronts inside their layers, moving in
    outer = solution.front_outer
    assert np.all((outer[:, 0] <= 0.6 * L + 1e-15) | np.isnan(outer[:, 0]))
    finite = outer[np.isfinite(outer[:, 1]), 1]
    assert np.all(finite >= 0.6 * L) and np.all(np.diff(finite) <= 0.0)


# --------------------------------------------------------------------------------------------
# cross_check.front_position and cross_check.time_depleted catch an error either way
# --------------------------------------------------------------------------------------------
def _route(name, fronts):
    empty = np.zeros(len(TIMES))
    return Route(name, "", {}, 1.0, empty > -1, empty > -1, lambda r, k, j: r, fronts=fronts)


def _checks(primary, other):
    outcome = Outcome()
    compare_fronts(outcome, _slab(), primary, [other], np.asarray(TIMES))
    return {c.name: c for c in outcome.checks}


def _exact_account(times, depleted):
    front = _front(times)[:, None]
    return FrontAccount([0], front, np.zeros_like(front), [depleted])


def test_front_checks_pass_against_the_exact_fronts(study):
    primary = _route("exact", _exact_account(TIMES, T_DEPLETED))
    account = galerkin_fronts(study)
    assert account is not None
    account = dataclasses.replace(account, time_depleted=[T_DEPLETED * (1 + 2e-4)])
    found = _checks(primary, _route("galerkin", account))
    assert found["cross_check.front_position"].passed
    assert found["cross_check.time_depleted"].passed


@pytest.mark.parametrize("sign", [+1.0, -1.0])
def test_front_check_fails_on_a_shifted_front(study, sign):
    primary = _route("exact", _exact_account(TIMES, T_DEPLETED))
    account = galerkin_fronts(study)
    assert account is not None
    shifted = dataclasses.replace(account, outer=account.outer + sign * 3e-3 * L)
    found = _checks(primary, _route("galerkin", shifted))
    assert not found["cross_check.front_position"].passed
    assert found["cross_check.front_position"].value == pytest.approx(3e-3, rel=0.1)


@pytest.mark.parametrize("factor", [1.005, 0.995, None])
def test_time_depleted_check_fails_on_a_wrong_time(factor):
    primary = _route("exact", _exact_account(TIMES, T_DEPLETED))
    wrong = None if factor is None else T_DEPLETED * factor
    other = _route("other", _exact_account(TIMES, wrong))
    found = _checks(primary, other)
    assert not found["cross_check.time_depleted"].passed
    assert found["cross_check.front_position"].passed
