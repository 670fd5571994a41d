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


def _flow_case(field: str, reaction: dict | None = None, max_trials: int = 20000) -> dict:
    import copy

    from tests.unit.schemas.test_flow_case import FIBRE

    case = copy.deepcopy(FIBRE)
    if reaction is not None:
        case["layers"][1]["reaction"] = reaction
    case["requirements"] = [{"id": "OUT", "quantity": "outlet_concentration",
                             "at_least": "0.1 mol/m^3"}]
    case["uncertainty"] = {"inputs": [{"field": field, "distribution": "normal",
                                       "relative_sd": 0.1}], "max_trials": max_trials}
    return case


def test_a_flow_trial_is_charged_its_march_and_the_layers_it_solves():
    """A flow case's trial is a batched march of the finest mesh (far below a full check);
    varying a field of the layers adds their solves per trial; linear kinetics (closed form)
    cost the least. The fibre's Monte Carlo of two blocks fits the budget with the lumen's
    field or a linear layer varied; with the cells' vmax varied (two-mesh Richardson solves of
    the layers per trial, measured 98.7 s for the two blocks) it is over the default budget and
    the advice names the law of propagation."""
    from worker.engine.cost import FLOW_TRIAL_CELL_STEP_WORK

    lumen, regime = _estimate(_flow_case("inner_boundary.flow_rate"))
    layers, _ = _estimate(_flow_case("layers[1].reaction.vmax"))
    linear, _ = _estimate(_flow_case("layers[1].reaction.rate_constant",
                                     {"kind": "first_order", "rate_constant": "0.05 1/s"}))
    march = FLOW_TRIAL_CELL_STEP_WORK * 40 * 80  # the fibre's finest mesh: 40 cells, 80 steps
    assert march < linear.trial_work < lumen.trial_work < layers.trial_work
    assert layers.trial_work < 0.01 * layers.check_work
    for estimate in (lumen, linear):
        assert over_budget(estimate, DEFAULT_BUDGETS, regime) == []
    overruns = over_budget(layers, DEFAULT_BUDGETS, regime)
    assert [o.path for o in overruns] == ["uncertainty.max_trials"]
    assert "law_of_propagation" in overruns[0].message
    assert over_budget(layers, DEFAULT_BUDGETS.scaled(2.0), regime) == []


def test_a_flow_monte_carlo_too_large_is_refused_with_the_trials_that_fit():
    estimate, regime = _estimate(_flow_case("inner_boundary.flow_rate", max_trials=10**6))
    overruns = over_budget(estimate, DEFAULT_BUDGETS, regime)
    assert [o.path for o in overruns] == ["uncertainty.max_trials"]
    assert "ask for at most" in overruns[0].message


def test_a_zero_order_fibre_with_its_layer_varied_is_refused_with_its_advice():
    """Zero-order layers have a closed form but no batched one: each trial tabulates them one
    solve at a time (about 0.1 s a trial), so two blocks exceed the budget and the advice
    points to a sweep or a design limit."""
    estimate, regime = _estimate(_flow_case(
        "layers[1].reaction.rate", {"kind": "zero_order", "rate": "1e-3 mol/m^3/s"}))
    overruns = over_budget(estimate, DEFAULT_BUDGETS, regime)
    assert [o.path for o in overruns] == ["uncertainty.max_trials"]
    assert "design_limit" in overruns[0].message
    shared, _ = _estimate(_flow_case(
        "inner_boundary.flow_rate", {"kind": "zero_order", "rate": "1e-3 mol/m^3/s"}))
    assert over_budget(shared, DEFAULT_BUDGETS, regime) == []
