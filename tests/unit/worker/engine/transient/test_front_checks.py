"""``cross_check.front_position`` and ``cross_check.time_depleted``
(:func:`worker.engine.transient.compare.compare_fronts`), each shown to turn its verdict when an
error is injected in either direction.

Definitions: the front check is the worst |front_a - front_b| over the layer's thickness, the
depletion check |t_a - t_b| / |t_a| (the primary's); limits come from ``worker.engine.limits``.
Scenario values are invented; the expected values are arithmetic on the injected errors.
"""

from __future__ import annotations

import numpy as np
import pytest

from worker.engine.limits import check_limit
from worker.engine.model import Boundary, Layer, Problem, Regime
from worker.engine.outcome import Outcome
from worker.engine.transient import compare
from worker.engine.transient.solution import FrontAccount, Route

TIMES = np.array([0.0, 100.0, 200.0])
THICKNESS = 1e-3  # m
DEPLETED = 150.0  # s


def _problem() -> Problem:
    layer = Layer("matrix", THICKNESS, 1e-12, initial=10.0, solubility=1.0)
    return Problem("slab", 0.0, (layer,), Boundary("symmetry"), Boundary("concentration", 0.0),
                   Regime("transient", 200.0, (100.0, 200.0)))


def _route(name: str, shift: float = 0.0, depleted: float | None = DEPLETED) -> Route:
    ones = np.ones(TIMES.size, dtype=bool)
    route = Route(name, "ref", {}, 1e-2, ones, ones, lambda r, k, j: np.zeros_like(r))
    outer = np.array([[THICKNESS], [0.6e-3], [np.nan]]) + shift
    inner = np.zeros((TIMES.size, 1))
    inner[-1, 0] = np.nan
    route.fronts = FrontAccount([0], outer, inner, [depleted])
    return route


def _checks(other: Route) -> Outcome:
    outcome = Outcome()
    compare.compare_fronts(outcome, _problem(), _route("a"), [other], TIMES)
    return outcome


@pytest.mark.parametrize("sign", [+1.0, -1.0])
def test_front_position_turns_on_an_injected_shift_either_way(sign):
    limit = check_limit(_problem(), "cross_check.front_position")
    inside = _checks(_route("b", sign * 0.5 * limit * THICKNESS)).check(
        "cross_check.front_position")
    beyond = _checks(_route("b", sign * 2.0 * limit * THICKNESS)).check(
        "cross_check.front_position")
    assert inside is not None and inside.passed
    assert inside.value == pytest.approx(0.5 * limit, rel=1e-9)
    assert beyond is not None and not beyond.passed
    assert beyond.value == pytest.approx(2.0 * limit, rel=1e-9)


@pytest.mark.parametrize("sign", [+1.0, -1.0])
def test_time_depleted_turns_on_an_injected_shift_either_way(sign):
    limit = check_limit(_problem(), "cross_check.time_depleted")
    inside = _checks(_route("b", depleted=DEPLETED * (1 + sign * 0.5 * limit))).check(
        "cross_check.time_depleted")
    beyond = _checks(_route("b", depleted=DEPLETED * (1 + sign * 2.0 * limit))).check(
        "cross_check.time_depleted")
    assert inside is not None and inside.passed
    assert inside.value == pytest.approx(0.5 * limit, rel=1e-6)
    assert beyond is not None and not beyond.passed
    assert beyond.value == pytest.approx(2.0 * limit, rel=1e-6)


def test_depletion_in_one_route_only_fails():
    check = _checks(_route("b", depleted=None)).check("cross_check.time_depleted")
    assert check is not None and check.value is None and not check.passed
