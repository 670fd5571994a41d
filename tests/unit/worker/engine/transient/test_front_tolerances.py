"""The allowances a moving dissolution front gets, each shown to turn the verdict both ways.

Check values: a three-grid study of phi = 1 + c h^p built here from its definition (Celik et
al., J. Fluids Eng. 130 (2008) 078001: Richardson extrapolation recovers 1 exactly for monotonic
convergence); the other values are arithmetic on the injected numbers.
"""

from __future__ import annotations

import numpy as np
import pytest

from worker.engine import convergence
from worker.engine.model import Boundary, Layer, Problem, Regime
from worker.engine.outcome import Outcome
from worker.engine.transient import compare
from worker.engine.transient.solution import Route

TIMES = np.array([0.0, 100.0, 200.0])


def _study(order: float) -> convergence.GridStudy:
    values = [1.0 + 0.1 * h ** order for h in (1.0, 2.0, 4.0)]  # fine, medium, coarse
    return convergence.grid_study(values, ratios=(2.0, 2.0))


def test_extrapolation_only_at_a_sound_apparent_order():
    sound = _study(2.0)
    assert sound.best_estimate == pytest.approx(1.0, abs=1e-12)
    low = _study(0.06)  # a front crossing cells makes orders like this
    assert low.convergence == "monotonic" and low.apparent_order < 0.5
    assert low.best_estimate == low.fine


def _problem(solubility: float | None) -> Problem:
    layer = Layer("matrix", 1e-3, 1e-12, initial=10.0, solubility=solubility)
    return Problem("slab", 0.0, (layer,), Boundary("symmetry"), Boundary("concentration", 0.0),
                   Regime("transient", 200.0, (100.0, 200.0)))


def _route(flux: float, band: float) -> Route:
    ones = np.ones(TIMES.size, dtype=bool)
    amounts = {name: np.zeros(TIMES.size) for name in
               ("remaining", "released_inner", "released_outer", "consumed", "flux_inner")}
    amounts["flux_outer"] = np.array([0.0, flux, flux])
    route = Route("r", "ref", amounts, 1e-2, ones, ones, lambda r, k, j: np.zeros_like(r))
    route.flux_band = {"inner": np.zeros(TIMES.size), "outer": np.full(TIMES.size, band)}
    return route


def _flux_error(problem: Problem, a: Route, b: Route) -> float:
    found: dict[str, float] = {}
    compare._flux_offers(lambda name, value, detail: found.__setitem__(name, value),
                         problem, a, b, TIMES, "a vs b")
    return found["cross_check.flux_outer"]


@pytest.mark.parametrize("sign", [+1.0, -1.0])
def test_front_flux_counts_only_beyond_both_grid_bands(sign):
    primary = _route(1.0, 0.01)
    inside = _route(1.0 + sign * 0.019, 0.01)  # within the two bands (0.02)
    beyond = _route(1.0 + sign * 0.03, 0.01)  # 0.01 beyond them
    saturating = _problem(solubility=1.0)
    assert _flux_error(saturating, primary, inside) == pytest.approx(0.0, abs=1e-12)
    assert _flux_error(saturating, primary, beyond) == pytest.approx(0.01, rel=0.03)
    # without a front the bands do not count
    assert _flux_error(_problem(None), primary, inside) == pytest.approx(0.019, rel=0.03)


def _amount_held(values: list[float], time_error: float) -> bool:
    outcome = Outcome()
    outcome.series["remaining"] = {"values": values, "unit": "mol"}
    compare.reported_series_sign_check(outcome, _problem(1.0), 0.0, 1.0, 1.0, 1.0, time_error)
    check = outcome.check("non_negativity")
    assert check is not None
    return check.passed


def test_amount_held_below_zero_counts_beyond_its_time_error():
    assert _amount_held([0.5, -1e-7], time_error=6e-7)
    assert not _amount_held([0.5, -1e-6], time_error=6e-7)
    assert not _amount_held([0.5, -1e-7], time_error=0.0)
