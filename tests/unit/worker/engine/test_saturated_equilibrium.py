"""The long-time partition of a load above solubility between a body and a compartment.

Check values are conservation of solute (common practice): at equilibrium the fluid-equivalent
level u = C/K is uniform; a layer's dissolved concentration is min(K u, S), so u cannot pass
S/K, and what the body and the compartment cannot hold at that level stays undissolved.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from worker.engine.model import Boundary, Layer, Problem, Regime
from worker.engine.outcome import Outcome
from worker.engine.transient import compartment_checks
from worker.engine.transient.limited_volume import equilibrium_level
from worker.engine.transient.solve import fv_on_meshes

AREA = 1e-4  # m^2
THICKNESS = 1e-4  # m
DAY = 86400.0


def _coating(loading: float, solubility: float, volume: float) -> Problem:
    layer = Layer("coat", THICKNESS, 1e-12, partition=2.0, initial=loading,
                  solubility=solubility)
    return Problem("slab", 0.0, (layer,), Boundary("symmetry"),
                   Boundary("compartment", volume=volume), Regime("transient", 20 * DAY,
                                                                   (5 * DAY, 20 * DAY)),
                   area=AREA)


def test_a_load_the_medium_can_take_dissolves_completely():
    problem = _coating(loading=50.0, solubility=5.0, volume=1e-5)
    load = 50.0 * THICKNESS  # per m^2 of the slab
    held = 2.0 * THICKNESS + 1e-5 / AREA  # body K V + compartment W, per m^2
    assert equilibrium_level(problem) == pytest.approx(load / held, rel=1e-12)
    assert load / held < 5.0 / 2.0  # below the cap S/K


def test_a_load_beyond_what_both_can_hold_caps_the_level_at_s_over_k():
    problem = _coating(loading=5000.0, solubility=5.0, volume=1e-8)
    assert 5000.0 * THICKNESS / (2.0 * THICKNESS + 1e-8 / AREA) > 2.5
    assert equilibrium_level(problem) == pytest.approx(2.5, rel=1e-12)


@pytest.mark.parametrize("shift", [0.0, 1.01, 0.99])
def test_equilibrium_check_of_a_dispersed_coating(shift, monkeypatch):
    problem = _coating(loading=50.0, solubility=5.0, volume=1e-6)
    duration = problem.regime.duration
    assert duration is not None
    internal = (5 * DAY, 20 * DAY)
    fine = fv_on_meshes(problem, np.array(internal), duration)[2]
    if shift:  # an injected error in the exact level, both ways
        exact = equilibrium_level(problem)
        assert exact is not None
        monkeypatch.setattr(compartment_checks, "equilibrium_level",
                            lambda _problem: shift * exact)
    outcome = Outcome()
    compartment_checks.equilibrium_check(outcome, problem, fine, duration, 50.0)
    check = outcome.check("compartment.equilibrium")
    assert check is not None
    assert check.passed is (shift == 0.0)


def test_undissolved_solute_left_at_the_end_is_waited_for():
    problem = _coating(loading=5000.0, solubility=5.0, volume=1e-6)
    layer = problem.layers[0]
    assert compartment_checks.dissolution_time(problem) == pytest.approx(
        THICKNESS ** 2 * 5000.0 / (2.0 * 1e-12 * 5.0))
    unloaded = dataclasses.replace(problem, layers=(dataclasses.replace(layer, initial=4.0),))
    assert compartment_checks.dissolution_time(unloaded) == 0.0
