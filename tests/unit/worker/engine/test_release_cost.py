"""The cost estimate of the release physics (issue 14; worker/engine/cost.py): a dispersed load
and a compartment go through the estimate, a Monte Carlo trial of such a case is charged a full
primary solve (no scaled or series trial model serves it), and a case over budget is refused
naming the field to change.

Check values: T. Higuchi, J. Pharm. Sci. 50 (1961) 874, the plane matrix into a sink,
Q = sqrt(D Cs (2A - Cs) t) per area, so a sheet of thickness L and loading A is empty at
t = A^2 L^2 / (D Cs (2A - Cs)); the first-order time constant of a finite volume V exchanging
through a membrane of area S, thickness L, diffusivity D and partition K, V L / (S D K)
(common practice: the permeation cell's pseudo-steady time constant; J. Crank, The Mathematics
of Diffusion, 2nd ed., 1975, section 4.3.5 in the thin-membrane limit). The cases are invented
inputs.
"""

from __future__ import annotations

import copy
import dataclasses

import numpy as np
import pytest

from schemas import CaseError, validate_case
from worker.engine.cost import (
    DEFAULT_BUDGETS,
    SCALED_SERIES_TRIAL_WORK,
    Budgets,
    estimate_cost,
    over_budget,
    relaxation_time,
)
from worker.engine.design.paths import parse_field
from worker.engine.design.transient_trials import scaled_series_applies, series_trial_applies
from worker.engine.model import Boundary

#: Invented: a plane coating loaded above its solubility, releasing into a sink.
COATING = {
    "schema_version": 1, "title": "Fixture: dispersed coating", "geometry": "slab",
    "inner": 0, "area": "1 cm^2",
    "layers": [{"name": "coat", "thickness": "50 um", "diffusivity": "1e-14 m^2/s",
                "loading": "100 mg/mL", "solubility": "1 mg/mL"}],
    "inner_boundary": {"kind": "symmetry"},
    "outer_boundary": {"kind": "concentration", "value": "0 mg/mL"},
    "regime": {"kind": "transient", "duration": "30 d", "times": ["1 d", "10 d", "30 d"]},
}


def _case(solubility: str | None = "1 mg/mL", **changes) -> dict:
    doc = copy.deepcopy(COATING)
    if solubility is None:
        doc["layers"][0].pop("solubility")
    else:
        doc["layers"][0]["solubility"] = solubility
    doc.update(changes)
    return doc


def _uncertain(max_trials: int, solubility: str | None = "1 mg/mL") -> dict:
    return _case(solubility, uncertainty={
        "inputs": [{"field": "layers[0].diffusivity", "distribution": "lognormal",
                    "relative_sd": 0.2}],
        "max_trials": max_trials})


def test_a_dispersed_trial_costs_a_full_solve_and_a_plain_one_the_scaled_series():
    dispersed = validate_case(_uncertain(20_000), budgets=None)
    estimate = estimate_cost(dispersed.problem, dispersed.design)
    assert estimate.trial_work == estimate.check_work
    plain = validate_case(_uncertain(20_000, solubility=None), budgets=None)
    assert estimate_cost(plain.problem, plain.design).trial_work == SCALED_SERIES_TRIAL_WORK


def test_many_dispersed_trials_are_refused_naming_max_trials():
    with pytest.raises(CaseError) as info:
        validate_case(_uncertain(10_000_000))
    paths = [e["path"] for e in info.value.errors]
    assert paths == ["uncertainty.max_trials"]
    # fewer full checks fit than the Monte Carlo's two blocks: the advice is another design run
    message = info.value.errors[0]["message"]
    assert "fewer than the 20000" in message and "sweep or design_limit" in message
    # where the trials that fit are enough, their number is the advice
    validated = validate_case(_uncertain(20_000), budgets=None)
    estimate = estimate_cost(validated.problem, validated.design)
    roomy = Budgets(work=estimate.check_work * 30_000)
    overruns = over_budget(dataclasses.replace(estimate, trials=10**6), roomy, "transient")
    assert [o.path for o in overruns] == ["uncertainty.max_trials"]
    assert "ask for at most 29999 trials" in overruns[0].message
    # the same trials of the body without a solubility take the scaled series: within budget
    assert validate_case(_uncertain(10_000_000, solubility=None)).problem.layers[0].initial == 100


def test_the_dispersed_reserve_outlives_the_dissolved_time_scale_and_the_estimate_covers_it():
    problem = validate_case(_case()).problem
    layer = problem.layers[0]
    a, cs, d, thickness = layer.initial, layer.solubility, layer.diffusivity, layer.thickness
    higuchi_empty = a * a * thickness ** 2 / (d * cs * (2.0 * a - cs))
    assert relaxation_time(problem) >= higuchi_empty
    # without the reserve's share the time scale misses the reserve's lifetime by far
    saturated = dataclasses.replace(problem, layers=(dataclasses.replace(layer, initial=cs),))
    assert relaxation_time(saturated) < higuchi_empty / 10
    assert (estimate_cost(problem).time_steps > estimate_cost(saturated).time_steps)


def test_a_check_over_the_work_budget_names_the_loading_that_lengthens_it():
    problem = validate_case(_case(solubility="0.01 mg/mL")).problem
    estimate = estimate_cost(problem)
    assert estimate.horizon_field == "layers[0].loading"
    tight = Budgets(work=estimate.check_work / 2)
    overruns = over_budget(estimate, tight, "transient")
    assert [o.path for o in overruns] == ["regime.times"]
    assert "layers[0].loading" in overruns[0].message
    assert over_budget(estimate, DEFAULT_BUDGETS, "transient") == []
    # a body without a dispersed reserve names no such field
    plain = estimate_cost(validate_case(_case(solubility=None)).problem)
    assert plain.horizon_field is None
    assert "loading" not in over_budget(plain, Budgets(work=plain.check_work / 2),
                                        "transient")[0].message


def test_a_compartment_adds_its_volume_to_the_time_scale():
    plain = validate_case(_case(solubility=None)).problem
    volume = 5e-6  # m^3
    medium = dataclasses.replace(plain, outer_boundary=Boundary("compartment", volume=volume))
    layer = plain.layers[0]
    time_constant = volume * layer.thickness / (plain.area * layer.diffusivity * layer.partition)
    assert relaxation_time(medium) >= time_constant
    assert relaxation_time(plain) < time_constant / 10
    estimate = estimate_cost(medium)
    assert estimate.horizon_field == "outer_boundary.volume"
    assert estimate.time_steps > estimate_cost(plain).time_steps


def test_no_scaled_or_series_trial_model_serves_the_new_physics():
    dispersed = validate_case(_case()).problem
    plain = validate_case(_case(solubility=None)).problem
    fields = [parse_field("layers[0].diffusivity")]
    assert scaled_series_applies(plain, fields) and series_trial_applies(plain)
    assert not scaled_series_applies(dispersed, fields)
    assert not series_trial_applies(dispersed)
    # a solubility the load stays below still refuses the scaled series (a trial may cross it)
    below = validate_case(_case(solubility="1000 mg/mL")).problem
    assert below.is_linear and not scaled_series_applies(below, fields)
    medium = dataclasses.replace(plain, outer_boundary=Boundary("compartment", volume=1e-6))
    assert not scaled_series_applies(medium, fields) and not series_trial_applies(medium)
    validated = validate_case(_uncertain(20_000), budgets=None)
    with_medium = dataclasses.replace(validated.problem.layers[0], solubility=None)
    medium_problem = dataclasses.replace(medium, layers=(with_medium,))
    assert estimate_cost(medium_problem, validated.design).trial_work == \
        estimate_cost(medium_problem, validated.design).check_work


def _steps_taken_and_charged(problem):
    from worker.engine.cost import estimate_cost as estimate
    from worker.engine.transient import run_transient

    outcome = run_transient(problem)
    return max(outcome.diagnostics["fv_steps"]), estimate(problem).time_steps


def test_the_steps_charged_to_kinked_cases_cover_the_steps_taken():
    """The implicit-step integrator's steps on a zero-order cylinder running out and on a sphere
    loaded above solubility stay within the estimate; without the factors measured for them,
    the estimate would fall short (both directions of the allowance)."""
    from worker.engine.cost import FRONT_STEP_FACTOR, IMPLICIT_STEP_FACTOR
    from worker.engine.model import Boundary, Layer, Problem, Reaction, Regime

    day = 86400.0
    exhausting = Problem("cylinder", 0.0, (Layer("gel", 5e-4, 1e-10, 1.0, initial=1.0,
                                                 reaction=Reaction("zero_order", rate=5e-4)),),
                         Boundary("symmetry"), Boundary("concentration", value=0.0),
                         length=1e-2,
                         regime=Regime("transient", 5 * day,
                                       tuple(5 * day * k / 10 for k in range(1, 11))))
    taken, charged = _steps_taken_and_charged(exhausting)
    assert taken <= charged
    assert taken > charged / IMPLICIT_STEP_FACTOR
    dispersed = Problem("sphere", 0.0, (Layer("matrix", 3e-4, 1e-12, 1.0, initial=8.0,
                                              solubility=1.0),),
                        Boundary("symmetry"), Boundary("concentration", value=0.0),
                        regime=Regime("transient", 10 * day,
                                      tuple(10 * day * k / 10 for k in range(1, 11))))
    taken, charged = _steps_taken_and_charged(dispersed)
    assert taken <= charged
    assert taken > charged / (IMPLICIT_STEP_FACTOR * FRONT_STEP_FACTOR)


def test_the_steps_charged_to_a_zero_order_compartment_case_cover_its_second_run():
    """A zero-order slab running out into a 1 mL compartment within 3 h is integrated again
    with a tighter tolerance (``solve.fv_on_meshes``): both runs' steps stay within the
    estimate, which would fall short without ``TIGHTENED_STEP_FACTOR`` (both directions)."""
    from worker.engine.cost import TIGHTENED_STEP_FACTOR
    from worker.engine.cost import estimate_cost as estimate
    from worker.engine.model import Boundary, Layer, Problem, Reaction, Regime
    from worker.engine.transient import solve

    hours = 3 * 3600.0
    problem = Problem("slab", 0.0, (Layer("gel", 5e-4, 1e-10, 1.0, initial=1.0,
                                          reaction=Reaction("zero_order", rate=2e-4)),),
                      Boundary("symmetry"), Boundary("compartment", volume=1e-6),
                      regime=Regime("transient", hours, tuple(hours * k / 10
                                                              for k in range(1, 11))),
                      area=1e-4)
    times, duration = solve.requested_times(problem)
    fvs = solve.fv_on_meshes(problem, np.union1d(times, [duration]), duration)
    tightened = fvs[0].diagnostics["time_tightening"]
    taken = tightened["first_steps"] + fvs[0].diagnostics["steps"]
    charged = estimate(problem).time_steps
    assert taken <= charged
    assert taken > charged / TIGHTENED_STEP_FACTOR
