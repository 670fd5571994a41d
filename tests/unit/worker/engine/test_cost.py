"""The cost estimate and its budgets (worker/engine/cost.py): each budget refuses what exceeds
it, names the field to change, and admits what stays within it (invented inputs)."""

from __future__ import annotations

import dataclasses

from schemas import validate_case
from tests.api.support import make_case
from tests.security.hostile_cases import long_transient, steep_many_layer_steady
from worker.engine import bvp_steady
from worker.engine.cost import DEFAULT_BUDGETS, Budgets, estimate_cost, over_budget
from worker.engine.design.request import DesignRequest


def _estimate(document):
    validated = validate_case(document, budgets=None)
    return estimate_cost(validated.problem, validated.design), validated.problem.regime.kind


def test_an_ordinary_case_is_within_every_budget():
    estimate, regime = _estimate(make_case())
    assert over_budget(estimate, DEFAULT_BUDGETS, regime) == []


def test_the_steep_many_layer_case_is_over_the_memory_budget():
    estimate, regime = _estimate(steep_many_layer_steady())
    paths = [o.path for o in over_budget(estimate, DEFAULT_BUDGETS, regime)]
    assert "layers" in paths
    assert estimate.collocation_entries > DEFAULT_BUDGETS.collocation_entries
    roomy = Budgets(work=1e30, collocation_entries=1e30, solve_cells=1e30)
    assert over_budget(estimate, roomy, regime) == []


def test_the_long_transient_is_over_the_work_budget_by_its_times():
    estimate, regime = _estimate(long_transient())
    overruns = over_budget(estimate, DEFAULT_BUDGETS, regime)
    assert [o.path for o in overruns] == ["regime.times"]
    assert over_budget(estimate, DEFAULT_BUDGETS.scaled(10.0), regime) == []


def test_a_later_first_time_costs_less():
    early, _ = _estimate(long_transient())
    document = long_transient()
    document["regime"]["times"] = document["regime"]["times"][3:]
    late, _ = _estimate(document)
    assert late.check_work < early.check_work


def test_monte_carlo_trials_are_charged_and_named():
    estimate, regime = _estimate(long_transient())
    validated = validate_case(make_case(), budgets=None)
    base = estimate_cost(validated.problem, DesignRequest())
    many = dataclasses.replace(base, trials=10**7, trial_work=estimate.check_work)
    overruns = over_budget(many, DEFAULT_BUDGETS, "steady")
    assert [o.path for o in overruns] == ["uncertainty.max_trials"]
    few = dataclasses.replace(many, trials=0)
    assert over_budget(few, DEFAULT_BUDGETS, "steady") == []


def test_sweep_values_are_charged_and_named():
    validated = validate_case(make_case(), budgets=None)
    base = estimate_cost(validated.problem, DesignRequest())
    heavy = dataclasses.replace(base, check_work=DEFAULT_BUDGETS.work / 2,
                                sweep_work=DEFAULT_BUDGETS.work)
    assert [o.path for o in over_budget(heavy, DEFAULT_BUDGETS, "steady")] == ["sweep.values"]


def test_the_collocation_node_limit_keeps_the_jacobian_within_its_entries():
    assert bvp_steady.node_limit(1) == bvp_steady.BVP_MAX_NODES
    for layers in (3, 10, 20):
        nodes = bvp_steady.node_limit(layers)
        assert 2 * (2 * layers) ** 2 * nodes <= bvp_steady.BVP_MAX_JACOBIAN_ENTRIES
        assert nodes < bvp_steady.BVP_MAX_NODES


def test_a_conductance_that_underflows_gives_cells_not_a_warning():
    """D·K·r^n below the smallest double (found by the fuzz test: 5e-324 m^2/s with a partition
    of 1e-300) has an unbounded resistance: that layer takes the resistance share, the others
    none, and the estimate stays finite instead of warning about a division by zero."""
    import warnings

    from worker.engine.cost import RESISTANCE_CELLS, resolution_cells
    from worker.engine.model import Boundary, Layer, Problem, Regime

    problem = Problem("sphere", 0.0, (Layer("a", 1e-4, 5e-324, 1e-300),
                                      Layer("b", 1e-4, 1e-9, 1.0)),
                      Boundary("symmetry"), Boundary("concentration", value=1.0),
                      regime=Regime("steady"))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        cells = resolution_cells(problem)
    assert cells[0] == RESISTANCE_CELLS and cells[1] < RESISTANCE_CELLS
