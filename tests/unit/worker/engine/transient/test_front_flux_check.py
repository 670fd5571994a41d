"""``cross_check.flux_outer`` where a dissolution front moves
(:func:`worker.engine.transient.compare.compare_routes`): each numerical route's fine-mesh face
rate is compared, the difference counted beyond both routes' bands (the bands of those fine
values), so a Richardson value thrown off by the cell crossings does not decide the verdict,
and a fine rate shifted beyond the bands, either way, fails.

Definitions: the error is max(|a - b| - bands, 0) / max(|b|, CROSS_CHECK_FLOOR * largest rate);
limits from ``worker.engine.limits``. Scenario values are invented; the expected values are
arithmetic on the injected shifts.
"""

from __future__ import annotations

import numpy as np
import pytest

from worker.engine.limits import check_limit
from worker.engine.model import Boundary, Layer, Problem, Regime
from worker.engine.outcome import Outcome
from worker.engine.transient import compare
from worker.engine.transient.solution import AMOUNTS, Route

TIMES = np.array([0.0, 100.0, 200.0])
RATE = np.array([0.0, 2e-6, 1e-6])  # fine-mesh face rates, amount/(m^2 s)
BAND = np.array([0.0, 1e-8, 1e-8])  # each route's |fine - medium|


def _problem() -> Problem:
    layer = Layer("matrix", 1e-3, 1e-12, initial=10.0, solubility=1.0)
    return Problem("slab", 0.0, (layer,), Boundary("symmetry"),
                   Boundary("compartment", volume=1e-6), Regime("transient", 200.0,
                                                                (100.0, 200.0)), area=1e-4)


def _route(name: str, fine: np.ndarray, extrapolated: np.ndarray) -> Route:
    ones = np.ones(TIMES.size, dtype=bool)
    amounts = {key: np.zeros(TIMES.size) for key in AMOUNTS}
    amounts["flux_outer"] = extrapolated
    route = Route(name, "ref", amounts, 1e-2, ones, ones, lambda r, k, j: np.zeros_like(r))
    route.flux_fine = {"outer": fine, "inner": np.zeros(TIMES.size)}
    route.flux_band = {"outer": BAND.copy(), "inner": np.zeros(TIMES.size)}
    return route


def _flux_check(other: Route):
    outcome = Outcome()
    problem = _problem()
    compare.compare_routes(outcome, problem, _route("a", RATE, RATE), [other], TIMES, [], 2,
                           1.0, 1e-2)
    check = outcome.check("cross_check.flux_outer")
    assert check is not None
    return check, check_limit(problem, "cross_check.flux_outer")


def test_a_richardson_value_off_by_more_than_the_bands_does_not_decide():
    """The other route's extrapolated rate 5 % off at the first time, its fine rate inside
    the bands: the fine rates agree, the check passes and says what it compared."""
    check, _ = _flux_check(_route("b", RATE + BAND, RATE * np.array([1.0, 1.05, 1.0])))
    assert check.passed and check.value == 0.0
    assert "fine mesh" in check.detail


@pytest.mark.parametrize("sign", [+1.0, -1.0])
def test_a_fine_rate_beyond_the_bands_fails_either_way(sign):
    """The other route's fine rate 3e-3 of the rate beyond both bands at t = 200 s, either
    way: the check fails by 3e-3 of the other rate, as the bands leave it (its extrapolated
    rate agrees exactly)."""
    shift = sign * (2.0 * BAND + 3e-3 * RATE * np.array([0.0, 0.0, 1.0]))
    check, limit = _flux_check(_route("b", RATE + shift, RATE))
    assert not check.passed
    assert check.value == pytest.approx(3e-3 / (1.0 + sign * 3e-3), rel=1e-9)
    assert check.value > limit
    assert "t = 200.0 s" in check.detail
