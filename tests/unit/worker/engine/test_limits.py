"""The one rule resolving a check's limit from the case's ``tolerances`` (worker.engine.limits)."""

from __future__ import annotations

import dataclasses

import pytest

from worker.engine.limits import (
    INPUT_LIMITS,
    STEADY_LIMITS,
    TRANSIENT_LIMITS,
    check_limit,
    family,
    resolve_limit,
)
from worker.engine.model import Boundary, Layer, Problem, Regime


def test_family_is_the_first_part_except_the_convergence_checks():
    assert family("cross_check.flux_outer") == "cross_check"
    assert family("mass_balance") == "mass_balance"
    assert family("convergence.space") == "gci"
    assert family("convergence.time") == "convergence"


def test_full_name_then_family_then_default_by_name_then_by_family():
    defaults = {"cross_check": 1e-3, "cross_check.t50": 1e-4}
    assert resolve_limit({}, "cross_check.t50", defaults) == 1e-4
    assert resolve_limit({}, "cross_check.probes", defaults) == 1e-3
    assert resolve_limit({"cross_check": 0.5}, "cross_check.t50", defaults) == 0.5
    both = {"cross_check": 0.5, "cross_check.t50": 0.25}
    assert resolve_limit(both, "cross_check.t50", defaults) == 0.25
    assert resolve_limit(both, "cross_check.probes", defaults) == 0.5
    with pytest.raises(KeyError):
        resolve_limit({}, "bracket", defaults)


def test_the_regime_chooses_the_defaults():
    steady = Problem("slab", 0.0, (Layer("wall", 1e-3, 1e-9, 1.0),),
                     Boundary("concentration", 1.0), Boundary("concentration", 0.0))
    transient = dataclasses.replace(steady, regime=Regime("transient", 10.0, (1.0,)))
    assert check_limit(steady, "mass_balance") == STEADY_LIMITS["mass_balance"]
    assert check_limit(transient, "mass_balance") == TRANSIENT_LIMITS["mass_balance"]
    assert check_limit(transient, "convergence.space") == TRANSIENT_LIMITS["gci"]
    overridden = dataclasses.replace(transient, tolerances={"gci": 0.5, "convergence": 0.25})
    assert check_limit(overridden, "convergence.space") == 0.5
    assert check_limit(overridden, "convergence.time") == 0.25


def test_the_inputs_checks_have_one_limit_in_every_regime():
    steady = Problem("slab", 0.0, (Layer("wall", 1e-3, 1e-9, 1.0),),
                     Boundary("concentration", 1.0), Boundary("concentration", 0.0))
    transient = dataclasses.replace(steady, regime=Regime("transient", 10.0, (1.0,)))
    for problem in (steady, transient):
        assert check_limit(problem, "inputs.units") == INPUT_LIMITS["inputs"]
        assert check_limit(problem, "inputs.interpretation") == INPUT_LIMITS[
            "inputs.interpretation"]
    overridden = dataclasses.replace(steady, tolerances={"inputs": 1e-9})
    assert check_limit(overridden, "inputs.units") == 1e-9
    assert check_limit(overridden, "inputs.interpretation") == 1e-9
