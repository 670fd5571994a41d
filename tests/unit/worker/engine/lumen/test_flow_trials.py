"""The design trials of a flow case (``worker.engine.lumen.trials`` through ``TrialModel``).

The trial model is checked against what is outside it: the full primary solve of the case
(``lumen.run.flow_figures`` / ``run_flow``, five marches and a verified wall table) at the same
inputs, and the Graetz series with the layers as a Robin wall (L. Graetz 1883; Shah & London,
*Laminar Flow Forced Convection in Ducts*, 1978, ch. 5) for the batched march itself. Layer and
flow values are invented for the tests (a fibre-like tube), not data.
"""

from __future__ import annotations

import numpy as np
import pytest

from worker.engine.design.agreement import model_disagreement
from worker.engine.design.paths import resolve, with_values
from worker.engine.design.targets import Target
from worker.engine.design.trials import TrialModel
from worker.engine.lumen import run as flow
from worker.engine.lumen.graetz import graetz_series
from worker.engine.lumen.trials import ConductanceWalls, TubeTrials, march_trials
from worker.engine.model import Boundary, Layer, Problem, Reaction

FIGURES = ("outlet_concentration", "concentration_min", "peclet", "graetz", "sherwood_outlet")
#: Figures the record gives a numerical uncertainty (the others: exact inputs, or none given).
BANDED = ("outlet_concentration", "concentration_min")


def _fibre(reaction: Reaction) -> Problem:
    return Problem("cylinder", 100e-6,
                   (Layer("wall", 50e-6, 1e-10, 1.0), Layer("cells", 300e-6, 1.5e-9, 1.0,
                                                            reaction)),
                   Boundary("flow", flow_rate=1.2e-9, inlet=0.2, diffusivity=2e-9),
                   Boundary("symmetry"), length=0.1)


MM = _fibre(Reaction("michaelis_menten", vmax=2e-3, km=5e-3))
FIRST = _fibre(Reaction("first_order", rate_constant=0.05))

CASES = [
    (MM, ["inner_boundary.flow_rate"]),
    (MM, ["inner_boundary.inlet"]),
    (MM, ["layers[1].reaction.vmax"]),
    (MM, ["inner_boundary.inlet", "layers[0].diffusivity"]),
    (FIRST, ["inner_boundary.flow_rate", "layers[1].reaction.rate_constant"]),
]


def _model(problem: Problem, fields: list[str]) -> TrialModel:
    return TrialModel(problem, fields, [Target(name) for name in FIGURES])


@pytest.mark.parametrize("problem, fields", CASES)
def test_at_the_nominal_inputs_the_trial_equals_the_full_solve(problem, fields):
    """The same finest mesh and the same wall law: every figure to 1e-9 of its value (the
    ``uncertainty.trial_model`` floor), whatever the record's band."""
    model = _model(problem, fields)
    assert model.method == "batched lumen march"
    fast = model.nominal()
    full = flow.flow_figures(problem)
    for j, name in enumerate(FIGURES):
        assert fast[j] == pytest.approx(full[name], rel=1e-9, abs=0.0), name


@pytest.mark.parametrize("problem, fields", CASES)
def test_at_drawn_inputs_the_trial_agrees_within_the_full_checks_band(problem, fields):
    """At inputs drawn 10 % about the case the full check tabulates the layers afresh (its
    nodes may differ); the trial agrees with it within the record's numerical uncertainty (at
    least 1e-9 of the value), as ``uncertainty.trial_model`` asks."""
    model = _model(problem, fields)
    refs = [resolve(problem, f) for f in fields]
    rng = np.random.default_rng(7)
    x = model.nominal_inputs()[None, :] * (1.0 + 0.1 * rng.standard_normal((2, len(fields))))
    fast = model(x)
    for i in range(x.shape[0]):
        outcome = flow.run_flow(with_values(problem, dict(zip(refs, x[i], strict=True))))
        for j, name in enumerate(FIGURES):
            quantity = outcome.quantities[name]
            if name in BANDED:
                ratio = model_disagreement(float(fast[i, j]), quantity["value"],
                                           quantity.get("uncertainty"))
                assert ratio <= 1.0, (name, i, ratio)
            elif name != "sherwood_outlet":
                assert fast[i, j] == pytest.approx(quantity["value"], rel=1e-12)
        # the local Sherwood number has no band in the record: the trial's wall table may
        # differ from the full check's by the table's tolerance
        assert fast[i, 4] == pytest.approx(outcome.quantities["sherwood_outlet"]["value"],
                                           rel=1e-5)


def test_the_layers_tabulated_per_trial_follow_each_trial():
    """A larger vmax draws more solute: the outlet falls and the minimum falls (each trial
    has its own table, not the nominal one)."""
    model = _model(MM, ["layers[1].reaction.vmax"])
    y = model(np.array([[1.5e-3], [2e-3], [3e-3]]))
    assert np.all(np.diff(y[:, 0]) < 0.0) and np.all(np.diff(y[:, 1]) < 0.0)


def test_a_trial_outside_its_domain_gets_nan_and_the_others_their_figures():
    model = _model(MM, ["inner_boundary.flow_rate"])
    y = model(np.array([[-1e-9], [1.2e-9], [np.nan]]))
    assert np.all(np.isnan(y[[0, 2]])) and np.all(np.isfinite(y[1]))


@pytest.mark.parametrize("biot", [0.5, 5.0])
def test_the_batched_march_meets_the_graetz_series_of_a_robin_wall(biot):
    """Three tubes of one batch, each against its own Graetz series (Shah & London 1978,
    ch. 5: theta_m = sum G_n exp(-2 lambda_n^2 z*), wall conductance k = Bi D / R) past the
    entrance (z* = 0.05, 0.1, 0.2): within 1e-4 on 80 x 400 cells, and second order (the
    error falls about 4 times when both directions are refined by 2)."""
    radius, diffusivity = 100e-6, 2e-9
    z_star = np.array([0.05, 0.1, 0.2])
    flow_rate = np.full(3, 1e-9)
    length = 4.0 * flow_rate * z_star / (np.pi * diffusivity)
    tube = TubeTrials(np.full(3, radius), length, flow_rate, np.full(3, diffusivity),
                      np.full(3, 1.0))
    walls = ConductanceWalls(np.full(3, biot * diffusivity / radius), np.zeros(3))
    expected = graetz_series(60, biot).mixing_cup(z_star)
    errors = [np.abs(march_trials(tube, walls, *mesh).outlet_mixing_cup / expected - 1.0)
              for mesh in ((40, 200), (80, 400))]
    assert np.all(errors[1] < 1e-4), errors
    worst = int(np.argmax(errors[0]))
    assert 3.0 < errors[0][worst] / errors[1][worst] < 5.0, errors


def test_a_trial_whose_layers_did_not_solve_gets_nan_and_the_others_their_law():
    """A table column with a node missing (a layers' solve that failed) gives NaN for that
    trial only (it is then solved alone); the others interpolate as ``WallTable`` does (pchip
    reproduces a straight line: j = 2 c_w exactly)."""
    from worker.engine.lumen.trials import TableWalls

    nodes = np.linspace(0.0, 1.0, 5)
    flux = np.column_stack([2.0 * nodes, 2.0 * nodes])
    flux[2, 1] = np.nan
    table = TableWalls(nodes, np.ones(2), flux, flux.copy())
    j, slope = table.law(np.array([0.3, 0.3]), np.arange(2))
    assert j[0] == pytest.approx(0.6, rel=1e-14) and slope[0] == pytest.approx(2.0, rel=1e-14)
    assert np.isnan(j[1]) and np.isnan(slope[1])


def test_a_trial_the_batch_leaves_unsolved_is_solved_alone(monkeypatch):
    """One trial's layers fail at one node in the batched finite volumes: that trial alone is
    solved by the full primary solve (``flow_figures``), the others stay batched."""
    from worker.engine.design import trials as design_trials

    original_solve, original_one = design_trials.accurate_batch, design_trials._flow_one
    alone = []

    def failing(view, n):
        flux, low = original_solve(view, n)
        flux = flux.copy()
        if not alone:  # the first pair of the first call: trial 0 at its first node
            flux[0] = np.nan
        return flux, low

    def one(problem, targets):
        alone.append(problem)
        return original_one(problem, targets)

    monkeypatch.setattr(design_trials, "accurate_batch", failing)
    monkeypatch.setattr(design_trials, "_flow_one", one)
    model = _model(MM, ["layers[1].reaction.vmax"])
    y = model(np.array([[1.8e-3], [2.2e-3]]))
    assert len(alone) == 1 and alone[0].layers[1].reaction.vmax == 1.8e-3
    full = flow.flow_figures(alone[0])
    assert y[0, 0] == full["outlet_concentration"] and np.all(np.isfinite(y))
