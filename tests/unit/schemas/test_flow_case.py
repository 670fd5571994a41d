"""A case whose inner boundary is a lumen with flow (``flow``): its rules, its two unit routes,
and an invented hollow fibre through ``check_case`` to a record that validates.

The fibre is invented for the test (plausible sizes for a hollow-fibre module, not data); the
figures asserted are the record's structure, its checks' verdicts and relations that hold for
any such case (the mass balance of the fluid, the fall of the mixing cup), not invented check
values.
"""

from __future__ import annotations

import copy

import pytest

from schemas import CaseError, validate_case
from schemas.checking import check_case
from schemas.result import validate_result
from worker.engine.cost import DEFAULT_BUDGETS

#: An invented hollow fibre: a 100 um lumen, a porous wall and a layer of cells with
#: Michaelis-Menten uptake, perfused at 0.072 mL/min over 10 cm.
FIBRE = {
    "schema_version": 1,
    "title": "invented hollow fibre (test data)",
    "geometry": "cylinder",
    "inner": "100 um",
    "length": "10 cm",
    "layers": [
        {"name": "fibre wall", "thickness": "50 um", "diffusivity": "1e-10 m^2/s"},
        {"name": "cells", "thickness": "300 um", "diffusivity": "1.5e-9 m^2/s",
         "reaction": {"kind": "michaelis_menten", "vmax": "2e-3 mol/m^3/s",
                      "km": "5e-3 mol/m^3"}},
    ],
    "inner_boundary": {"kind": "flow", "flow_rate": "0.072 mL/min", "inlet": "0.2 mol/m^3",
                       "diffusivity": "2e-9 m^2/s"},
    "outer_boundary": {"kind": "symmetry"},
    "regime": {"kind": "steady"},
}


def _doc(**changes):
    doc = copy.deepcopy(FIBRE)
    doc.update(copy.deepcopy(changes))
    return doc


def _errors(doc) -> dict[str, str]:
    with pytest.raises(CaseError) as info:
        validate_case(doc)
    return {e["path"]: e["message"] for e in info.value.errors}


def test_the_fibre_validates_and_both_routes_read_the_flow_fields():
    validated = validate_case(_doc())
    face = validated.problem.inner_boundary
    assert face.kind == "flow"
    # 0.072 mL/min = 0.072e-6 m^3 / 60 s (SI Brochure Table 8: 1 L = 1e-3 m^3)
    assert face.flow_rate == pytest.approx(0.072e-6 / 60.0, rel=1e-15)
    assert face.inlet == 0.2 and face.diffusivity == 2e-9


@pytest.mark.parametrize("changes, path, words", [
    ({"geometry": "slab", "length": None}, "geometry", "expected geometry 'cylinder'"),
    ({"inner": "0 m"}, "inner", "lumen radius"),
    ({"length": None}, "length", "length of the lumen"),
    ({"regime": {"kind": "transient", "duration": "1 d"}}, "regime.kind", "not offered yet"),
    ({"probes": ["200 um"]}, "probes", "not read in a flow case"),
])
def test_rules_name_the_field(changes, path, words):
    doc = _doc(**{k: v for k, v in changes.items() if v is not None})
    for key in [k for k, v in changes.items() if v is None]:
        del doc[key]
    errors = _errors(doc)
    assert path in errors, errors
    assert words in errors[path]


def test_flow_at_the_outer_face_is_refused():
    errors = _errors(_doc(outer_boundary=FIBRE["inner_boundary"]))
    assert "outer_boundary.kind" in errors


@pytest.mark.parametrize("field, bad", [("flow_rate", "1 mol/m^3"), ("flow_rate", "0 mL/min"),
                                        ("diffusivity", "1 m/s")])
def test_bad_flow_fields_name_the_field(field, bad):
    doc = _doc()
    doc["inner_boundary"][field] = bad
    assert f"inner_boundary.{field}" in _errors(doc)


def test_the_fibre_through_check_case():
    record = check_case(_doc())
    validate_result(copy.deepcopy(record))
    assert record["status"] == "succeeded"
    assert record["verdict"] == "pass", [c for c in record["checks"] if not c["passed"]]
    names = [c["name"] for c in record["checks"]]
    for name in ("inputs.units", "inputs.interpretation", "convergence.space_r",
                 "convergence.space_z", "mass_balance", "cross_check.wall_law"):
        assert name in names
    q = record["quantities"]
    for name in ("outlet_concentration", "concentration_min", "concentration_min_position",
                 "peclet", "graetz", "sherwood_outlet"):
        assert name in q
    assert 0.0 < q["outlet_concentration"]["value"] < 0.2
    axial = record["series"]["axial"]
    assert len(axial["position"]) == len(axial["mixing_cup"]) == len(axial["wall_flux"])


def test_a_misread_flow_rate_fails_the_interpretation_check(monkeypatch):
    """The second reading is compared field by field: a flow rate read a factor off by the
    primary route (injected in either direction) fails ``inputs.interpretation``."""
    import dataclasses

    import schemas.checking as checking

    original = checking.validate_case
    for factor in (1.001, 0.999):
        def misread(doc, budgets=None, factor=factor):
            validated = original(doc, budgets) if budgets is not None else original(doc)
            problem = validated.problem
            face = dataclasses.replace(problem.inner_boundary,
                                       flow_rate=problem.inner_boundary.flow_rate * factor)
            return dataclasses.replace(validated,
                                       problem=dataclasses.replace(problem, inner_boundary=face))
        monkeypatch.setattr(checking, "validate_case", misread)
        record = check_case(_doc())
        check = next(c for c in record["checks"] if c["name"] == "inputs.interpretation")
        assert not check["passed"]
        assert record["verdict"] != "pass"


def test_requirements_and_the_smallest_flow_rate_that_keeps_the_minimum():
    """A requirement on the lowest concentration and a design limit on the flow rate: the
    limit is where the full check finds the margin zero, and more flow meets it (the minimum
    rises as the fluid loses less solute along the fibre)."""
    case = _doc()
    threshold = 2.4e-4  # invented, between the minima at the ends of the range
    case["requirements"] = [
        {"id": "MIN", "quantity": "concentration_min", "at_least": f"{threshold} mol/m^3"},
        {"id": "OUT", "quantity": "outlet_concentration", "at_least": "0.1 mol/m^3"}]
    case["design_limit"] = {"vary": "inner_boundary.flow_rate", "requirement": "MIN",
                            "range": ["0.02 mL/min", "2 mL/min"]}
    record = check_case(case)
    validate_result(copy.deepcopy(record))
    judged = {r["id"]: r for r in record["design"]["requirements"]}
    assert judged["OUT"]["status"] == "met"
    assert judged["MIN"]["status"] == "not_met"
    limit = record["design_limit"]
    assert limit["value"] is not None, limit
    assert limit["met_side"] == "above"
    assert limit["verdict"] == "pass"
    assert abs(limit["check"]["margin"]) <= 1e-5 * threshold
    trial_model = next(c for c in record["checks"] if c["name"] == "design_limit.trial_model")
    assert trial_model["passed"]


def test_a_flow_case_offers_only_its_own_quantities():
    case = _doc()
    case["requirements"] = [{"id": "F", "quantity": "flux_inner", "at_most": "1 mol/m^2/s"}]
    errors = _errors(case)
    assert any("outlet_concentration" in m for m in errors.values()), errors


def uncertain_fibre(field: str, max_trials: int = 20000) -> dict:
    """The fibre with two requirements and ``field`` uncertain (normal, 10 % relative sd);
    shared with the flow trials' benchmark."""
    case = _doc()
    case["requirements"] = [
        {"id": "OUT", "quantity": "outlet_concentration", "at_least": "0.1 mol/m^3"},
        {"id": "MIN", "quantity": "concentration_min", "at_least": "1e-4 mol/m^3"}]
    case["uncertainty"] = {"inputs": [{"field": field, "distribution": "normal",
                                       "relative_sd": 0.1}],
                           "seed": 20261205, "max_trials": max_trials}
    return case


@pytest.fixture
def small_blocks(monkeypatch):
    """Blocks of 250 trials, at most 1000 (the case's schema asks two blocks of 10^4 at
    least, JCGM 101:2008 §7.9.4; the engine allows smaller blocks for tests)."""
    import dataclasses

    from worker.engine.design import runner as design_runner

    original = design_runner.uncertainty_spec

    def small(request, seed):
        return dataclasses.replace(original(request, seed), block_size=250, max_trials=1000)

    monkeypatch.setattr(design_runner, "uncertainty_spec", small)


def _check_named(record: dict, name: str) -> dict:
    return next(c for c in record["checks"] if c["name"] == name)


@pytest.mark.parametrize("field", ["inner_boundary.flow_rate", "layers[1].reaction.vmax"])
def test_monte_carlo_on_the_fibre_completes_and_its_trials_agree_with_full_checks(
        small_blocks, field):
    """An uncertain flow rate (the lumen alone) and an uncertain vmax of the cells (each
    trial's own wall table): the trials run batched, every trial solves, and the full checks
    of the verification subset agree with them (``uncertainty.trial_model``). The vmax run's
    two default blocks are charged over the default budget (``worker.engine.cost``,
    ``FLOW_BATCHED_SOLVE_CELL_WORK``), so it runs as a service with its budgets doubled would."""
    budgets = DEFAULT_BUDGETS.scaled(2.0) if "vmax" in field else DEFAULT_BUDGETS
    record = check_case(uncertain_fibre(field), budgets=budgets)
    validate_result(copy.deepcopy(record))
    block = record["uncertainty"]
    assert "batched lumen march" in block["method"]
    assert block["trials"] >= 500 and block["failed_trials"] == 0
    for name in ("uncertainty.subset", "uncertainty.trial_model"):
        assert _check_named(record, name)["passed"], _check_named(record, name)
    assert record["verdict"] == "pass"
    outlet = block["quantities"]["outlet_concentration"]
    nominal = record["quantities"]["outlet_concentration"]["value"]
    assert outlet["interval"][0] < nominal < outlet["interval"][1]
    assert outlet["standard_uncertainty"] > 0.0


@pytest.mark.parametrize("factor", [1 + 1e-5, 1 - 1e-5])
def test_an_error_in_the_flow_trials_fails_the_trial_model_check(monkeypatch, small_blocks,
                                                                   factor):
    """The outlet concentration of the batched trials off by 1e-5 (above or below; the
    record's band is about 1.4e-6 of it) fails ``uncertainty.trial_model``; the clean run
    passes it (the test above)."""
    from worker.engine.lumen import trials as lumen_trials

    original = lumen_trials._figures

    def skewed(*args, **kwargs):
        figures, lowest = original(*args, **kwargs)
        figures["outlet_concentration"] = figures["outlet_concentration"] * factor
        return figures, lowest

    monkeypatch.setattr(lumen_trials, "_figures", skewed)
    record = check_case(uncertain_fibre("inner_boundary.flow_rate"))
    assert not _check_named(record, "uncertainty.trial_model")["passed"]
    assert record["verdict"] == "fail"


def test_monte_carlo_on_a_flow_case_beyond_its_budget_is_refused_with_the_trials_that_fit():
    """A million trials (the default) of the batched lumen march exceed the work budget: the
    error names ``uncertainty.max_trials`` and how many trials fit; with the cells' vmax
    varied even the two blocks the adaptive run needs do not fit, and the advice names the law
    of propagation."""
    errors = _errors(uncertain_fibre("inner_boundary.flow_rate", max_trials=1_000_000))
    assert "uncertainty.max_trials" in errors
    assert "ask for at most" in errors["uncertainty.max_trials"]
    errors = _errors(uncertain_fibre("layers[1].reaction.vmax", max_trials=1_000_000))
    assert "fewer than the 20000" in errors["uncertainty.max_trials"]
    assert "law_of_propagation" in errors["uncertainty.max_trials"]


def test_a_flow_monte_carlo_without_requirements_follows_the_flow_figures(small_blocks):
    """With no requirement to name them, the run follows the body's minimum and the outlet
    concentration (a flow case has no face flux to follow)."""
    case = uncertain_fibre("inner_boundary.flow_rate")
    del case["requirements"]
    record = check_case(case)
    assert set(record["uncertainty"]["quantities"]) == {"concentration_min",
                                                        "outlet_concentration"}
    assert _check_named(record, "uncertainty.trial_model")["passed"]
