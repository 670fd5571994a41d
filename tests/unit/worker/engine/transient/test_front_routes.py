"""``cross_check.front_position`` and ``cross_check.time_depleted`` between the method of lines'
front account (``routes.fv_fronts``) and the Galerkin one (``routes.galerkin_fronts``) on drug
dispersed above its solubility: they run in a record, pass on a slab, a sphere and a cylinder
at several loadings (and on a slab behind a stirred finite medium), and fail when either
route's fronts are shifted by 1 % of the thickness or its depletion time by 1 %, either way.

Closed form: a slab sealed at x = 0 releasing through x = L into a perfect sink follows the
similarity solution of Paul & McSpadden (D.R. Paul, S.K. McSpadden, "Diffusional release of a
solute from a polymer matrix", J. Membr. Sci. 1 (1976) 33-48) until its front reaches the sealed
face: the front is 2 eta sqrt(D t) from the sink face, eta the root of
sqrt(pi) eta exp(eta^2) erf(eta) = Cs / (A - Cs) (found here with mpmath).

Scenario values are invented; the check values are the closed form above and arithmetic on the
injected errors.
"""

from __future__ import annotations

import dataclasses

import mpmath
import numpy as np
import pytest

from worker.engine.model import Boundary, Layer, Problem, Regime
from worker.engine.outcome import Outcome
from worker.engine.transient import solve
from worker.engine.transient.compare import compare_fronts
from worker.engine.transient.galerkin import galerkin_study
from worker.engine.transient.routes import fv_fronts, galerkin_fronts
from worker.engine.transient.run import run_transient
from worker.engine.transient.solution import FrontAccount, Route

L, D, CS = 1e-3, 1e-12, 1.0  # m, m^2/s, mol/m^3
DURATION = 30 * 86400.0  # s
TIMES = tuple(DURATION * k / 10 for k in range(1, 11))
#: (geometry, loading / solubility, whether the undissolved drug runs out within the duration,
#: the outer face: a perfect sink or a stirred 10 mL per 1 cm^2, which ends near 3 % of the
#: solubility)
CASES = [("slab", 10.0, False, "sink"), ("slab", 3.0, True, "sink"),
         ("sphere", 8.0, True, "sink"), ("cylinder", 3.0, True, "sink"),
         ("slab", 3.0, True, "compartment")]
NAMES = ("cross_check.front_position", "cross_check.time_depleted")


def _problem(geometry: str, ratio: float, face: str = "sink") -> Problem:
    if face == "compartment":
        return Problem(geometry, 0.0, (Layer("matrix", L, D, initial=ratio * CS,
                                             solubility=CS),),
                       Boundary("symmetry"), Boundary("compartment", volume=1e-5),
                       Regime("transient", DURATION, TIMES), area=1e-4)
    return Problem(geometry, 0.0, (Layer("matrix", L, D, initial=ratio * CS, solubility=CS),),
                   Boundary("symmetry"), Boundary("concentration", 0.0),
                   Regime("transient", DURATION, TIMES))


@pytest.fixture(scope="module", params=CASES,
                ids=[f"{g}-{r:g}x-{face}" for g, r, _, face in CASES])
def accounts(request):
    geometry, ratio, depletes, face = request.param
    problem = _problem(geometry, ratio, face)
    requested, duration = solve.requested_times(problem)
    internal = np.union1d(requested, [duration])
    fvs = solve.fv_on_meshes(problem, internal, duration)
    study = galerkin_study(problem, internal, end=duration)
    assert all(f.success for f in fvs) and study.success
    lines, galerkin = fv_fronts(problem, fvs), galerkin_fronts(study)
    assert lines is not None and galerkin is not None
    return problem, internal, lines, galerkin, depletes


def _route(name: str, fronts: FrontAccount, size: int) -> Route:
    ones = np.ones(size, dtype=bool)
    return Route(name, "", {}, 1.0, ones, ones, lambda r, k, j: r, fronts=fronts)


def _checks(problem: Problem, internal: np.ndarray, primary: FrontAccount,
            other: FrontAccount) -> dict:
    outcome = Outcome()
    compare_fronts(outcome, problem, _route("lines", primary, internal.size),
                   [_route("galerkin", other, internal.size)], internal)
    return {c.name: c for c in outcome.checks}


def _shifted(account: FrontAccount, sign: float) -> FrontAccount:
    return dataclasses.replace(
        account, outer=account.outer + sign * 0.01 * L,
        time_depleted=[None if t is None else t * (1.0 + sign * 0.01)
                       for t in account.time_depleted])


def test_both_checks_pass_between_the_routes(accounts):
    problem, internal, lines, galerkin, depletes = accounts
    found = _checks(problem, internal, lines, galerkin)
    expected = NAMES if depletes else NAMES[:1]
    assert sorted(found) == sorted(expected)
    for name in expected:
        assert found[name].passed, found[name].detail
    # the raw difference, before any band, is inside the limit too (measured: at most 2.9e-4
    # of the thickness and 1.3e-4 of the depletion time on these cases)
    both = np.isfinite(lines.outer) & np.isfinite(galerkin.outer)
    assert np.any(both)
    assert np.max(np.abs(lines.outer - galerkin.outer)[both]) < 1e-3 * L
    if depletes:
        t_a, t_b = lines.time_depleted[0], galerkin.time_depleted[0]
        assert t_a is not None and t_b is not None and abs(t_a - t_b) < 1e-3 * t_a


@pytest.mark.parametrize("sign", [+1.0, -1.0])
@pytest.mark.parametrize("wrong", ["lines", "galerkin"])
def test_both_checks_fail_on_an_error_in_either_route(accounts, wrong, sign):
    problem, internal, lines, galerkin, depletes = accounts
    if wrong == "lines":
        found = _checks(problem, internal, _shifted(lines, sign), galerkin)
    else:
        found = _checks(problem, internal, lines, _shifted(galerkin, sign))
    for name in NAMES if depletes else NAMES[:1]:
        assert not found[name].passed
        # the 1e-2 shift less the bands (each at most half the 1e-3 limit) and the routes'
        # own difference
        assert 8e-3 < found[name].value < 1.1e-2


def test_the_method_of_lines_front_follows_paul_mcspadden():
    mpmath.mp.dps = 30
    ratio = CS / (10.0 * CS - CS)
    eta = float(mpmath.findroot(lambda e: mpmath.sqrt(mpmath.pi) * e * mpmath.exp(e**2)
                                * mpmath.erf(e) - ratio, 0.3))
    problem = _problem("slab", 10.0)
    requested, duration = solve.requested_times(problem)
    internal = np.union1d(requested, [duration])
    account = fv_fronts(problem, solve.fv_on_meshes(problem, internal, duration))
    assert account is not None
    exact = L - 2.0 * eta * np.sqrt(D * internal)
    moved = np.isfinite(account.outer[:, 0])
    assert np.sum(moved) == np.sum(internal > 0.0)
    # measured: 1.0e-4 of the thickness
    assert np.max(np.abs(account.outer[moved, 0] - exact[moved])) < 5e-4 * L


def test_a_record_of_a_dispersed_sphere_holds_both_checks():
    outcome = run_transient(_problem("sphere", 8.0))
    for name in NAMES:
        check = outcome.check(name)
        assert check is not None and check.passed, name
    assert outcome.series["front_position"]["verified_by"] == "cross_check.front_position"
