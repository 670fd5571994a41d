"""Tests of the layers' accurate answer and the study of their radial mesh
(``worker.engine.lumen.layer_accuracy``, ``convergence.space_layers``).

Check values come from outside the code under test: the layers shot by scipy's DOP853 with
Brent's method on the outer value (E. Hairer, S.P. Norsett, G. Wanner, *Solving Ordinary
Differential Equations I*, 1993; ``tests.benchmarks.test_bench_lumen_fipy._layers_minimum``),
the finite-volume scheme's formal order 2 (S.V. Patankar, *Numerical Heat Transfer and Fluid
Flow*, 1980, ch. 4) and the closed form of linear layers (J. Crank, *The Mathematics of
Diffusion*, 1975, ch. 5). The check is shown to fail when an error is put into the layers'
solves, in both directions. Layer values are invented for the tests (a fibre-like tube), not
data.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from tests.benchmarks.test_bench_lumen_fipy import _layers_minimum
from worker.engine.lumen import layer_accuracy
from worker.engine.lumen import run as flow
from worker.engine.lumen.layer_accuracy import (
    FORMAL_ORDER,
    accurate_answer,
    accurate_batch,
    layer_mesh_check,
    richardson,
    study_layer_mesh,
)
from worker.engine.lumen.layer_walls import solve_layers_at
from worker.engine.lumen.wall_table import answer_of, layer_answer
from worker.engine.model import Boundary, Layer, Problem, Reaction
from worker.engine.outcome import Outcome
from worker.engine.run import run_problem

UPTAKE = Reaction("michaelis_menten", vmax=2e-3, km=5e-3)


def _case(reaction: Reaction = UPTAKE) -> Problem:
    layers = (Layer("wall", 50e-6, 1e-10, 1.0), Layer("cells", 300e-6, 1.5e-9, 1.0, reaction))
    return Problem("cylinder", 100e-6, layers,
                   Boundary("flow", flow_rate=1.2e-9, inlet=0.2, diffusivity=2e-9),
                   Boundary("symmetry"), length=0.1)


LAYERS = flow.layers_problem(_case())


@pytest.mark.parametrize("c_wall", [0.2, 0.17, 2e-3])
def test_the_extrapolated_minimum_meets_the_shooting_where_one_mesh_did_not(c_wall):
    """One default mesh missed the layers' minimum by about 2e-3 of it; the two meshes,
    extrapolated, come within 1e-6 of it (measured 1e-8 to 3e-7)."""
    shot = _layers_minimum(LAYERS, c_wall)
    one_mesh = answer_of(LAYERS, solve_layers_at(LAYERS, c_wall))
    assert abs(one_mesh.minimum - shot) > 1e-3 * shot
    assert layer_answer(LAYERS, c_wall).minimum == pytest.approx(shot, rel=1e-6, abs=0.0)


def test_the_study_observes_the_formal_order_and_its_band_holds_the_answer():
    study = study_layer_mesh(LAYERS, 0.17, answer_of)
    assert study is not None and study.extrapolated
    shot = _layers_minimum(LAYERS, 0.17)
    for name in ("wall_flux", "consumption_per_length", "minimum"):
        grid = study.studies[name]
        assert grid.convergence == "monotonic"
        assert grid.apparent_order == pytest.approx(FORMAL_ORDER, abs=0.05)
    assert abs(study.answer.minimum - shot) <= study.band("minimum")
    # the study's answer is the one every direct solve gives
    assert study.answer == accurate_answer(LAYERS, 0.17, answer_of)


def test_richardson_at_the_formal_order_removes_an_h_squared_error():
    exact, h = 3.0, 0.1
    fine, coarse = exact + 7.0 * (h / 2) ** 2, exact + 7.0 * h**2
    assert richardson(fine, coarse) == pytest.approx(exact, rel=1e-14)


def test_closed_form_layers_are_solved_once_and_not_studied():
    linear = flow.layers_problem(_case(Reaction("first_order", rate_constant=0.05)))
    assert study_layer_mesh(linear, 0.1, answer_of) is None
    exact = answer_of(linear, solve_layers_at(linear, 0.1))
    assert layer_answer(linear, 0.1) == exact


def _check(studies) -> bool:
    outcome = Outcome()
    layer_mesh_check(outcome, LAYERS, studies, flux_scale=abs(studies[0].answer.wall_flux),
                     radius=LAYERS.inner, inlet=0.2)
    check = outcome.check("convergence.space_layers")
    assert check is not None
    return check.passed


@pytest.mark.parametrize("sign", [1.0, -1.0])
def test_the_check_fails_when_the_finest_layer_solve_is_wrong_either_way(monkeypatch, sign):
    clean = study_layer_mesh(LAYERS, 0.17, answer_of)
    assert clean is not None and _check([clean])
    real = layer_accuracy.solve_layers_at

    def perturbed(problem, c_wall, cells_per_layer=None):
        solution = real(problem, c_wall, cells_per_layer)
        if cells_per_layer == clean.cells[0]:  # the finest mesh only: a mesh-dependent error
            return dataclasses.replace(solution,
                                       flux_inner=solution.flux_inner * (1.0 + sign * 2e-3))
        return solution

    monkeypatch.setattr(layer_accuracy, "solve_layers_at", perturbed)
    wrong = study_layer_mesh(LAYERS, 0.17, answer_of)
    assert wrong is not None and not _check([wrong])


def test_a_coarse_layer_mesh_fails_the_run_and_the_default_passes(monkeypatch):
    case = _case()
    clean = run_problem(case)
    check = clean.check("convergence.space_layers")
    assert check is not None and check.passed
    monkeypatch.setattr(layer_accuracy, "base_cells",
                        lambda problem, c_wall: (2,) * len(problem.layers))
    coarse = run_problem(case)
    check = coarse.check("convergence.space_layers")
    assert check is not None and not check.passed


def test_the_layers_band_joins_the_minimum_and_the_outlet():
    outcome = run_problem(_case())
    check = outcome.check("convergence.space_layers")
    assert check is not None and "Richardson-extrapolated" in check.detail
    run = flow.solve_flow(_case())
    studies = flow.layer_studies(run, LAYERS)
    assert studies and studies[0].c_wall == pytest.approx(float(min(run.fine.wall)))
    # the minimum's band holds at least the layers' own band at the minimum's wall
    assert (outcome.quantities["concentration_min"]["uncertainty"]
            >= studies[0].band("minimum"))


def test_a_closed_form_run_says_so_and_has_no_layer_study():
    outcome = run_problem(_case(Reaction("first_order", rate_constant=0.05)))
    assert outcome.check("convergence.space_layers") is None
    wall_law = outcome.check("cross_check.wall_law")
    assert wall_law is not None and "closed form" in wall_law.detail
    mm = run_problem(_case()).check("cross_check.wall_law")
    assert mm is not None and "closed form" not in mm.detail


@pytest.mark.parametrize("outer", [Boundary("symmetry"), Boundary("concentration", value=0.02)])
def test_the_batched_route_equals_the_direct_route(outer):
    """``accurate_batch`` (every trial at once, as the flow trials solve their layers) gives
    what ``layer_answer`` gives wall by wall, to 1e-9: the wall flux and the minimum, at a
    sealed face and inside the cell layer (a concentration held outside)."""
    layers = flow.layers_problem(dataclasses.replace(_case(), outer_boundary=outer))
    walls = np.array([0.2, 0.17, 0.05, 2e-3])
    view = dataclasses.replace(
        layers, inner_boundary=dataclasses.replace(layers.inner_boundary, value=walls))
    flux, low = accurate_batch(view, walls.size)
    for k, c_wall in enumerate(walls):
        direct = layer_answer(layers, float(c_wall))
        assert flux[k] == pytest.approx(direct.wall_flux, rel=1e-9, abs=0.0)
        assert low[k] == pytest.approx(direct.minimum, rel=1e-9, abs=0.0)
