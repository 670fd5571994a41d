"""The route comparison's own arithmetic (``worker.engine.transient.compare``): the sign check
of every reported series and the grid bands of numerical routes, held to their definitions.

Definitions: ``non_negativity`` is the most negative reported value over its scale (the
concentration scale for profile and probes, the amount scale in the reported unit for the amount
held); a numerical route's band counts at most half the check's limit times the scale (so a
band never forgives more than the limit itself). Scenario values are invented.
"""

from __future__ import annotations

import numpy as np
import pytest

from worker.engine.model import Boundary, Layer, Problem, Regime
from worker.engine.outcome import Outcome
from worker.engine.transient import compare
from worker.engine.transient.solution import Route

TIMES = np.array([0.0, 10.0, 20.0])


def _problem(probes=()):
    return Problem("slab", 0.0, (Layer("film", 1e-4, 1e-11, 1.0, initial=1.0),),
                   Boundary("symmetry"), Boundary("concentration", 0.0),
                   Regime("transient", 20.0, tuple(TIMES)), probes=probes)


def _outcome(profile=(1.0, 0.5), probes=((1.0,), (0.5,)), remaining=(1.0, 0.5)):
    outcome = Outcome()
    outcome.series["profile"] = {"concentration": list(profile)}
    outcome.series["probes"] = {"concentration": [list(row) for row in probes]}
    outcome.series["remaining"] = {"values": list(remaining)}
    return outcome


def _sign(outcome, lowest_cell=0.0, c_scale=2.0, amount_scale=0.5, size=2.0):
    compare.reported_series_sign_check(outcome, _problem(), lowest_cell, c_scale, amount_scale,
                                       size)
    return outcome.check("non_negativity")


def test_nothing_negative_passes_with_zero():
    check = _sign(_outcome())
    assert check.value == 0.0 and check.passed


@pytest.mark.parametrize(("outcome", "value", "source"), [
    (_outcome(profile=(1.0, -0.03)), 0.015, "reported profile"),
    (_outcome(probes=((1.0,), (-0.05,))), 0.025, "reported probes"),
    (_outcome(remaining=(1.0, -1e-3)), 1e-3, "reported amount held"),  # / (size 2 * 0.5)
])
def test_the_most_negative_reported_series_is_named_over_its_scale(outcome, value, source):
    check = _sign(outcome)
    assert check.value == pytest.approx(value, rel=1e-12)
    assert not check.passed
    assert source in check.detail


def test_the_numerical_cells_count_too():
    check = _sign(_outcome(), lowest_cell=-0.2)
    assert check.value == pytest.approx(0.1, rel=1e-12)
    assert "numerical cells" in check.detail


def _route(name, offset, band=None):
    amounts = {"remaining": np.ones(3), "released_inner": np.zeros(3),
               "released_outer": np.zeros(3), "consumed": np.zeros(3),
               "flux_inner": np.zeros(3), "flux_outer": np.ones(3)}
    every = np.ones(3, dtype=bool)
    return Route(name, "", amounts, 1.0, every, every,
                 lambda r, k, layer: np.full(np.size(r), 1.0 + offset),
                 {}, None if band is None else (lambda r, k, layer: np.full(np.size(r), band)))


@pytest.mark.parametrize(("band", "expected"), [
    (None, 0.01),  # an exact route: the whole difference
    (3e-4, 0.01 - 3e-4),  # a band below the cap counts in full
    (1.0, 0.01 - 5e-4),  # a huge band counts only half the limit (1e-3 * scale 1)
])
def test_profile_difference_beyond_a_capped_band(band, expected):
    outcome = Outcome()
    compare.compare_routes(outcome, _problem(), _route("exact", 0.0), [_route("lines", 0.01,
                                                                              band)],
                           TIMES, [(0, np.linspace(0.0, 1e-4, 5))], 2, 1.0, 1.0)
    check = outcome.check("cross_check.profile")
    assert check.value == pytest.approx(expected, rel=1e-9)
    assert not check.passed


@pytest.mark.parametrize(("band", "expected"), [(None, 0.01), (1.0, 0.01 - 5e-4)])
def test_probe_difference_beyond_a_capped_band(band, expected):
    outcome = Outcome()
    compare.compare_routes(outcome, _problem(probes=(5e-5,)), _route("exact", 0.0),
                           [_route("lines", 0.01, band)], TIMES,
                           [(0, np.linspace(0.0, 1e-4, 5))], 2, 1.0, 1.0)
    check = outcome.check("cross_check.probes")
    assert check.value == pytest.approx(expected, rel=1e-9)  # relative to the primary's 1.0
    assert not check.passed
