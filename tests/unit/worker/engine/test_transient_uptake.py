"""The transient record of a body that takes solute up: the true minimum over time, the time to
steady, and no release fraction where the body is fed through a face.

Scenario values are invented. Check values come from closed forms named beside them:

* a slab of half-thickness L sealed at its mid-plane, initially empty, its face held at C_s
  from t = 0: ``C/C_s = 1 - sum_n a_n exp(-lambda_n t) cos((2n+1) pi x / (2L))`` with
  ``a_n = 4 (-1)^n / ((2n+1) pi)`` and ``lambda_n = D (2n+1)^2 pi^2 / (4 L^2)`` (J. Crank,
  *The Mathematics of Diffusion*, 2nd ed., 1975, eq. 4.17, x measured from the mid-plane);
* with a first-order loss k, Danckwerts' transformation ``C = k int_0^t C1 e^(-k t') dt' +
  C1 e^(-k t)`` (P.V. Danckwerts, Trans. Faraday Soc. 47 (1951) 1014; Crank 1975, eq. 14.8),
  which at the mid-plane gives ``C/C_s = 1 - sum_n a_n (k + lambda_n e^(-(lambda_n + k) t)) /
  (lambda_n + k)``;
* a slab of width W between faces held at C_1 and C_2 with a first-order loss has the steady
  state ``C = (C_1 sinh(m (W - x)) + C_2 sinh(m x)) / sinh(m W)``, m = sqrt(k/D) (Crank 1975,
  ch. 14; Bird, Stewart & Lightfoot 2002, §18.4); its minimum is found here by
  ``scipy.optimize.minimize_scalar`` on that closed form.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import brentq, minimize_scalar

from worker.engine.extremes import Extreme
from worker.engine.model import Boundary, Layer, Problem, Reaction, Regime
from worker.engine.outcome import Outcome
from worker.engine.transient import compare, run_transient, uptake
from worker.engine.transient.solution import Route

D = 1.0e-9  # m^2/s
HALF = 1.0e-3  # m
SURFACE = 0.2  # mol/m^3
SEALED = Boundary("symmetry")
FED = Boundary("concentration", SURFACE)
TERMS = 4000


def _a(n: np.ndarray) -> np.ndarray:
    return 4.0 * (-1.0) ** n / ((2 * n + 1) * math.pi)


def _lam(n: np.ndarray) -> np.ndarray:
    return D * (2 * n + 1) ** 2 * math.pi**2 / (4 * HALF**2)


def _centre_ratio(t: float, k: float = 0.0) -> float:
    """C(mid-plane, t)/C_s: Crank 1975 eq. 4.17 with Danckwerts' transformation for k > 0."""
    n = np.arange(TERMS)
    lam = _lam(n)
    return float(1.0 - np.sum(_a(n) * (k + lam * np.exp(-(lam + k) * t)) / (lam + k)))


def _fed_slab(duration: float, times: tuple[float, ...], k: float = 0.0,
              initial: float = 0.0) -> Problem:
    reaction = Reaction("first_order", rate_constant=k) if k else Reaction("none")
    return Problem("slab", 0.0, (Layer("gel", HALF, D, 1.0, reaction, initial=initial),),
                   SEALED, FED, Regime("transient", duration, times))


@pytest.fixture(scope="module")
def fed_first_order():
    times = (0.0, 30.0, 120.0, 600.0, 1800.0)
    return times, run_transient(_fed_slab(1800.0, times, k=2.0e-3))


def test_minimum_over_time_is_the_danckwerts_centre_value(fed_first_order):
    times, outcome = fed_first_order
    series = outcome.series["concentration_min"]
    expected = [0.0] + [SURFACE * _centre_ratio(t, 2.0e-3) for t in times[1:]]
    assert series["values"] == pytest.approx(expected, rel=1e-7, abs=1e-12 * SURFACE)
    assert series["position"][1:] == pytest.approx([0.0] * 4, abs=1e-12)
    rows = outcome.series["concentration_min_layers"]
    assert rows["layers"] == ["gel"]
    assert [row[0] for row in rows["values"]] == series["values"]
    assert series["verified_by"] == "cross_check.concentration_min"
    assert len(series["routes"]) >= 2
    # the uncertainty (the method of lines' disagreement at the minimum) bounds the error of
    # the exact primary and stays small against the scale
    for value, u, exact in zip(series["values"][1:], series["uncertainty"][1:], expected[1:],
                               strict=True):
        assert abs(value - exact) <= u <= 1e-5 * SURFACE
    assert outcome.check("cross_check.concentration_min").passed


def test_time_to_steady_from_the_series_of_the_fed_slab():
    # no reaction: the steady state is C_s everywhere, its scale C_s, and the largest gap is
    # at the mid-plane, C_s (1 - C(0, t)/C_s); time to steady: the root of that gap = 1 %
    expected = brentq(lambda t: (1.0 - _centre_ratio(t)) - 0.01, 1.0, 1.0e5, xtol=1e-9)
    outcome = run_transient(_fed_slab(4000.0, (0.0, 1000.0, 4000.0)))
    found = outcome.quantities["time_to_steady"]
    assert found["value"] == pytest.approx(expected, rel=1e-6)
    assert found["unit"] == "s"
    assert found["verified_by"] == "cross_check.time_to_steady"
    assert found["uncertainty"] <= 1e-4 * expected
    assert outcome.check("cross_check.time_to_steady").passed
    # the release fraction belongs to a loaded body only (DESIGN, release physics)
    assert "release_fraction" not in outcome.series
    assert "release_fraction_final" not in outcome.quantities
    assert any(w.startswith("uptake:") and "no initial load" in w for w in outcome.warnings)


def test_time_to_steady_not_reached_says_why():
    expected = brentq(lambda t: (1.0 - _centre_ratio(t)) - 0.01, 1.0, 1.0e5, xtol=1e-9)
    outcome = run_transient(_fed_slab(0.5 * expected, (0.0, 0.5 * expected)))
    found = outcome.quantities["time_to_steady"]
    assert found["value"] is None
    assert "not within 1 % of the steady state" in found["reason"]
    assert any(w.startswith("time_to_steady:") for w in outcome.warnings)
    assert outcome.check("cross_check.time_to_steady") is None  # no route reached it


def test_release_to_a_sink_has_a_fraction_and_no_time_to_steady():
    problem = Problem("slab", 0.0, (Layer("gel", HALF, D, 1.0, initial=1.0),), SEALED,
                      Boundary("concentration", 0.0), Regime("transient", 2000.0, (0.0, 2000.0)))
    outcome = run_transient(problem)
    assert "release_fraction" in outcome.series
    assert "uptake" not in outcome.series
    assert "time_to_steady" not in outcome.quantities  # its steady state holds nothing
    # Crank 1975 eq. 4.18 is the release; here only that the fraction is a fraction
    assert 0.0 < outcome.quantities["release_fraction_final"]["value"] <= 1.0


def test_a_trace_of_initial_load_fed_through_a_face_is_an_uptake():
    # an oxygen-consuming gel starting with a trace: released / load would be about -4000
    problem = Problem("slab", 0.0, (Layer(
        "gel", HALF, D, 1.0, Reaction("michaelis_menten", vmax=1e-3, km=5e-3), initial=1e-3),),
        SEALED, FED, Regime("transient", 3600.0, (60.0, 3600.0)))
    outcome = run_transient(problem)
    assert "release_fraction" not in outcome.series
    assert not {"t50", "t90", "release_fraction_final"} & set(outcome.quantities)
    assert outcome.check("cross_check.released") is not None
    assert outcome.check("cross_check.release_fraction") is None
    assert all(v > 0.0 for v in outcome.series["uptake"]["values"])
    (note,) = [w for w in outcome.warnings if w.startswith("uptake:")]
    assert "outer face feeds solute" in note
    assert all(c.passed for c in outcome.checks), [c for c in outcome.checks if not c.passed]


@pytest.mark.parametrize("fluid, supplying", [(0.5, []), (2.0, ["outer"]), (1.0, ["outer"])])
def test_supplying_faces_compare_levels_as_c_over_k(fluid, supplying):
    # layer K = 2 holding C = 2 (C/K = 1); the face's fluid level K_face * C_fluid / K_layer
    # with the face partition = the layer's: C_fluid itself; at or above 1 it feeds the body
    problem = Problem("slab", 0.0, (Layer("gel", HALF, D, 2.0, initial=2.0),), SEALED,
                      Boundary("concentration", fluid), Regime("transient", 10.0, (10.0,)))
    assert uptake.supplying_faces(problem) == supplying
    assert uptake.releases(problem) is (not supplying)


def test_an_inward_flux_feeds_the_body():
    problem = Problem("slab", 0.0, (Layer("gel", HALF, D, 1.0, initial=1.0),), SEALED,
                      Boundary("flux", 1e-6), Regime("transient", 10.0, (10.0,)))
    assert uptake.supplying_faces(problem) == ["outer"]
    outward = Problem("slab", 0.0, (Layer("gel", HALF, D, 1.0, initial=1.0),), SEALED,
                      Boundary("flux", -1e-6), Regime("transient", 10.0, (10.0,)))
    assert uptake.releases(outward)


def test_the_true_minimum_lies_between_the_samples():
    # faces at 0.2 and 0.1 with a first-order loss: the late state is the steady one, whose
    # minimum is interior and off the 41 sample points of the reported profile
    k, width = 2.0e-3, 2.0e-3
    problem = Problem("slab", 0.0, (Layer("gel", width, D, 1.0,
                                          Reaction("first_order", rate_constant=k)),),
                      Boundary("concentration", 0.2), Boundary("concentration", 0.1),
                      Regime("transient", 2.0e4, (2.0e4,)))
    m = math.sqrt(k / D)

    def steady(x: float) -> float:
        return (0.2 * math.sinh(m * (width - x)) + 0.1 * math.sinh(m * x)) / math.sinh(m * width)

    lowest = minimize_scalar(steady, bounds=(0.0, width), method="bounded",
                             options={"xatol": 1e-13})
    outcome = run_transient(problem)
    found = outcome.series["concentration_min"]
    assert found["values"][-1] == pytest.approx(lowest.fun, rel=1e-9)
    assert found["position"][-1] == pytest.approx(lowest.x, abs=2e-6 * width)
    assert found["values"][-1] < min(outcome.series["profile"]["concentration"])


def _route(name: str, shift: float = 0.0) -> Route:
    """A stand-in route whose profile is (r - 1)^2 + shift on r in [0, 2] at every time."""
    everywhere = np.ones(3, dtype=bool)

    def profile(r, k, layer):
        return (np.asarray(r, dtype=float) - 1.0) ** 2 + shift

    return Route(name, "stand-in", {}, 0.0, everywhere, everywhere, profile)


def _stand_in_problem() -> Problem:
    return Problem("slab", 0.0, (Layer("gel", 2.0, D, 1.0),), FED, FED,
                   Regime("transient", 2.0, (1.0, 2.0)))


@pytest.mark.parametrize("shift, passes", [(0.0, True), (2e-3, False), (-2e-3, False),
                                           (5e-4, True)])
def test_concentration_min_check_fails_either_way(shift, passes):
    # the true minimum of (r - 1)^2 is 0 at r = 1; the other route is shifted by `shift` of
    # the concentration scale 1 (limit 1e-3, cross_check family)
    problem = _stand_in_problem()
    routes = [_route("a"), _route("b", shift)]
    positions = [(0, np.linspace(0.0, 2.0, 41))]
    internal = np.array([0.0, 1.0, 2.0])
    index = np.array([1, 2])
    minima = [uptake.route_minima(r.profile, problem, positions, internal, index)
              for r in routes]
    assert minima[0][0][0].value == pytest.approx(0.0, abs=1e-20)
    outcome = Outcome()
    spread = compare.compare_minima(outcome, problem, routes, minima, internal, index, 1.0)
    check = outcome.check("cross_check.concentration_min")
    assert check.passed is passes
    assert check.value == pytest.approx(abs(shift), abs=1e-15)
    assert spread == pytest.approx(np.full((2, 1), abs(shift)), abs=1e-15)


def test_concentration_min_check_uses_the_initial_state_at_time_zero():
    problem = Problem("slab", 0.0, (Layer("gel", 2.0, D, 1.0, initial=0.3),), FED, FED,
                      Regime("transient", 2.0, (0.0, 2.0)))
    positions = [(0, np.linspace(0.0, 2.0, 41))]
    found = uptake.route_minima(_route("a").profile, problem, positions,
                                np.array([0.0, 2.0]), np.array([0, 1]))
    assert found[0] == [Extreme(0.3, 0.0, 0)]


@pytest.mark.parametrize("other, passes", [(100.0, True), (100.2, False), (99.8, False),
                                           (None, False)])
def test_time_to_steady_check_fails_either_way(other, passes):
    outcome = Outcome()
    compare.compare_steady_times(outcome, _stand_in_problem(), ["a", "b"], [100.0, other])
    check = outcome.check("cross_check.time_to_steady")
    assert check.passed is passes
    if other is not None:
        assert check.value == pytest.approx(abs(other - 100.0) / 100.0)


def test_time_to_steady_of_a_known_decay():
    # a stand-in route C(r, t) = C_ss + 0.5 exp(-t/10) on a steady state of 1: the gap falls
    # to 1 % of the scale 1 at t = 10 ln 50
    problem = _stand_in_problem()

    class Steady:
        success = True

        @staticmethod
        def concentration_at(r, layer=None):
            return np.ones(np.size(r))

    positions = [(0, np.linspace(0.0, 2.0, 41))]

    def concentration(r, t, layer):
        return np.ones(np.size(r)) + 0.5 * math.exp(-t / 10.0)

    def initial(r, layer):
        return np.full(np.size(r), 1.5)

    found = uptake.time_to_steady(concentration, initial, Steady(), positions, 200.0, 1.0)
    assert found.value == pytest.approx(10.0 * math.log(50.0), rel=1e-9)
    short = uptake.time_to_steady(concentration, initial, Steady(), positions, 30.0, 1.0)
    assert short.value is None and "still" in short.reason
    assert problem.layers[0].name == "gel"
