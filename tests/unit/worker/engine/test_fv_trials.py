"""The batched finite volumes' pieces against the one-problem code they stand in for
(consistency tests: ``fv_mesh.default_cells_per_layer``, ``convergence.grid_study``, the
reaction kinds' ``inverse_length``), and injected errors."""

from __future__ import annotations

import numpy as np
import pytest

from worker.engine import convergence, fv_trials
from worker.engine.convergence import extrapolated_or_fine, grid_study
from worker.engine.design.paths import replaced, resolve, with_values
from worker.engine.fv_mesh import default_cells_per_layer
from worker.engine.fv_steady import solve_fv
from worker.engine.fv_trials import cells_per_layer_trials, solve_trials
from worker.engine.model import Boundary, Layer, Problem, Reaction
from worker.engine.reactions import REACTIONS

CASE = Problem(
    "cylinder", 2e-4, (Layer("wall", 4e-5, 1.5e-9, 0.8),
                       Layer("cells", 1.5e-4, 2e-9, 1.0,
                             Reaction("michaelis_menten", vmax=4e-3, km=5e-3)),
                       Layer("core", 1e-4, 1e-9, 1.0, Reaction("zero_order", rate=2e-3))),
    Boundary("mass_transfer", coefficient=1e-5, bulk=0.2), Boundary("flux", value=0.0),
    length=0.1)
FIELDS = ["layers[1].reaction.vmax", "layers[0].thickness", "layers[2].reaction.rate",
          "inner_boundary.coefficient"]


def _trials(n: int, seed: int = 5, spread: float = 0.6):
    fields = [resolve(CASE, f) for f in FIELDS]
    nominal = np.array([4e-3, 4e-5, 2e-3, 1e-5])
    x = nominal * np.random.default_rng(seed).lognormal(0.0, spread, (n, len(fields)))
    view = replaced(CASE, {f: x[:, j] for j, f in enumerate(fields)})
    singles = [with_values(CASE, dict(zip(fields, row, strict=True))) for row in x]
    return view, singles


def test_the_mesh_rule_over_trials_is_each_trials_own():
    view, singles = _trials(40)
    counts = cells_per_layer_trials(view, len(singles))
    assert [tuple(row) for row in counts] == [default_cells_per_layer(p) for p in singles]
    assert len({tuple(row) for row in counts}) > 5  # the rule does vary over these trials


@pytest.mark.parametrize("kind", sorted(REACTIONS))
def test_inverse_lengths_are_inverse_length_for_each_trial(kind):
    law = REACTIONS[kind]
    params = {"first_order": {"rate_constant": np.array([0.0, 0.05, 3.0])},
              "michaelis_menten": {"vmax": np.array([0.0, 4e-3, 1.0]),
                                   "km": np.array([5e-3, 5e-3, 2e-2])},
              "zero_order": {"rate": np.array([0.0, 1e-3, 0.2])}}.get(kind, {})
    d = np.array([1e-9, 2e-9, 5e-10])
    scale = np.array([0.2, 0.0, 1.0])
    batched = law.inverse_lengths(Reaction(kind, **params), d, scale)
    for i in range(3):
        one = Reaction(kind, **{k: float(v[i]) for k, v in params.items()})
        assert batched[i] == pytest.approx(law.inverse_length(one, d[i], scale[i]), rel=1e-15)


def test_extrapolated_or_fine_follows_grid_study_branch_by_branch():
    rng = np.random.default_rng(11)
    rows = [rng.normal(1.0, 1e-3, 3) for _ in range(200)]
    rows += [np.array([1.0, 1.0 + 1e-3, 1.0 + 5e-3]),   # monotonic
             np.array([1.0, 1.0 + 1e-3, 1.0 - 1e-3]),   # oscillatory
             np.array([1.0, 1.0 + 1e-3, 1.0 + 1e-3]),   # eps32 = 0: degenerate
             np.array([1.0, 1.0 + 1e-3, 1.0 + 1.5e-3]),  # divergent
             np.array([1.0, 1.0 + 1e-10, 1.0 + 3e-10]),  # round-off
             np.array([np.nan, 1.0, 1.0]), np.array([0.0, 0.0, 1.0])]
    values = np.array(rows)
    found = extrapolated_or_fine(values, 2.0)
    for row, value in zip(values, found, strict=True):
        study = grid_study(row, ratios=(2.0, 2.0))
        expected = study.extrapolated if study.convergence == "monotonic" else study.fine
        if not np.isfinite(expected):
            expected = study.fine
        assert value == pytest.approx(expected, rel=1e-14, nan_ok=True), (row, study)


def test_each_trials_grids_are_the_single_problem_solutions():
    """The three grids of every trial against ``fv_steady.solve_fv`` of that trial alone on
    the same mesh: fluxes and front to the solver's tolerance."""
    view, singles = _trials(6, seed=9, spread=0.3)
    counts = cells_per_layer_trials(view, len(singles))
    figures = solve_trials(view, len(singles))
    assert figures.solved.all()
    for i, problem in enumerate(singles):
        grids = [solve_fv(problem, tuple(int(c) * 2**k for c in counts[i])) for k in (2, 1, 0)]
        study = convergence.run_grid_study(problem, solutions=grids,
                                           quantities=["flux_inner", "consumption"])
        for name, value in (("flux_inner", figures.flux_inner[i]),
                            ("consumption", figures.consumption[i])):
            s = study[name]
            expected = s.extrapolated if s.convergence == "monotonic" else s.fine
            assert value == pytest.approx(expected, rel=1e-9), name
        front = grids[0].depletion_front
        assert (np.isnan(figures.depletion_front[i]) if front is None
                else figures.depletion_front[i] == pytest.approx(front, rel=1e-9))


def test_the_grid_comparison_fails_when_a_trials_operator_is_off(monkeypatch):
    """Injected both ways: one trial's rows of the stacked operator scaled, as if another
    trial's conductances had been used."""
    view, singles = _trials(3, seed=9, spread=0.3)
    original = fv_trials.assemble_blocks
    for factor in (1.01, 0.99):
        def skewed(*args, factor=factor, **kwargs):
            operator = original(*args, **kwargs)
            operator.ab[:, : operator.ab.shape[1] // 2] *= factor
            return operator
        monkeypatch.setattr(fv_trials, "assemble_blocks", skewed)
        with pytest.raises(AssertionError):
            test_each_trials_grids_are_the_single_problem_solutions()
        monkeypatch.undo()
