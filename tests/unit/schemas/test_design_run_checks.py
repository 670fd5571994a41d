"""The checks the design runs add to the record fail when their error is injected, either way:
a trial model off by a little (above or below), a full check of a subset trial that fails."""

from __future__ import annotations

import copy

import numpy as np
import pytest

from schemas.build import validate_case
from service.report.text import render_text
from worker.engine import check_case
from worker.engine.design import runner as design_runner
from worker.engine.design.agreement import model_disagreement
from worker.engine.design.runner import DesignRunner
from worker.engine.design.trials import TrialModel
from worker.engine.run import run_problem

MEMBRANE = {
    "schema_version": 1, "title": "membrane", "geometry": "slab", "inner": "0 m",
    "layers": [{"name": "membrane", "thickness": "100 um", "diffusivity": "1e-10 m^2/s"}],
    "inner_boundary": {"kind": "concentration", "value": "1 mol/m^3"},
    "outer_boundary": {"kind": "concentration", "value": "0 mol/m^3"},
    "regime": {"kind": "steady"},
    "requirements": [{"id": "FLUX", "quantity": "flux_outer", "at_least": "5e-7 mol/m^2/s"}],
    "uncertainty": {"inputs": [{"field": "layers[0].diffusivity", "distribution": "lognormal",
                                "relative_sd": 0.2}], "seed": 3, "max_trials": 20000},
    "design_limit": {"vary": "layers[0].thickness", "requirement": "FLUX",
                     "range": ["10 um", "1 mm"]},
}


def _check(record: dict, name: str) -> dict:
    return next(c for c in record["checks"] if c["name"] == name)


def test_the_design_checks_pass_on_a_right_trial_model():
    record = check_case(copy.deepcopy(MEMBRANE))
    for name in ("uncertainty.subset", "uncertainty.trial_model", "design_limit.trial_model"):
        assert _check(record, name)["passed"], name
    assert record["verdict"] == "pass"
    # The limit of J = D C1 / L ≥ b is L = D C1 / b (Fick's first law, Crank 1975 §4.2).
    assert record["design_limit"]["value"] == pytest.approx(1e-10 / 5e-7, rel=1e-6)


@pytest.mark.parametrize("factor", [1 + 1e-6, 1 - 1e-6])
def test_a_trial_model_off_by_a_little_fails_the_verdict(monkeypatch, factor):
    original = TrialModel.__call__

    def skewed(self, x):
        return original(self, x) * factor

    monkeypatch.setattr(TrialModel, "__call__", skewed)
    record = check_case(copy.deepcopy(MEMBRANE))
    assert not _check(record, "uncertainty.trial_model")["passed"]
    assert not _check(record, "design_limit.trial_model")["passed"]
    assert record["verdict"] == "fail"


def test_a_subset_trial_that_fails_its_full_check_fails_the_verdict():
    validated = validate_case(copy.deepcopy(MEMBRANE))

    def failing(problem, independent):
        outcome = run_problem(problem, independent)
        outcome.add_check("cross_check.flux_outer", 1.0, 1e-4, False, "injected")
        return outcome

    runner = DesignRunner(validated.problem, None, validated.design, failing)
    block = runner.uncertainty()
    checks = {c["name"]: c for c in block["verification"]["checks"]}
    assert not checks["uncertainty.subset"]["passed"]
    assert checks["uncertainty.subset"]["value"] == block["verification"]["trials_checked"]
    assert not block["verification"]["all_passed"]


@pytest.mark.parametrize(("fast", "value", "band", "expected"), [
    (1.0, 1.0, 0.0, 0.0),
    (1.0 + 2e-9, 1.0, 0.0, 2.0),        # beyond the floor of 1e-9 of the value
    (1.0 - 2e-9, 1.0, 0.0, 2.0),        # as far below it
    (1.0 + 2e-9, 1.0, 4e-9, 0.5),       # inside the figure's numerical uncertainty
    (np.nan, None, None, 0.0),          # neither gives the figure
    (1.0, None, None, float("inf")),    # one route only
    (np.nan, 1.0, 0.0, float("inf")),
])
def test_model_disagreement_is_relative_to_the_numerical_uncertainty(fast, value, band,
                                                                      expected):
    assert model_disagreement(fast, value, band) == pytest.approx(expected, rel=1e-6)


def test_the_runner_records_a_failed_part_instead_of_raising(monkeypatch):
    def broken(self, **kwargs):
        raise ValueError("injected")

    monkeypatch.setattr(design_runner.DesignRunner, "limit", broken)
    monkeypatch.setattr(design_runner.DesignRunner, "uncertainty", broken)
    record = check_case(copy.deepcopy(MEMBRANE))
    assert record["design_limit"] == {"error": "ValueError: injected",
                                      "reason": "not computed: ValueError: injected"}
    assert record["uncertainty"]["error"] == "ValueError: injected"
    text = render_text(record, copy.deepcopy(MEMBRANE))
    assert "not computed: ValueError: injected" in text
