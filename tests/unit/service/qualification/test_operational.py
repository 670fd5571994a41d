"""Operational qualification: how one case is judged (tolerance both ways, unit, verdict,
missing figure) and what the case set covers."""

from __future__ import annotations

import dataclasses

import pytest

from service.qualification import operational
from worker.engine.reactions import REACTIONS

REFERENCE = operational.ReferenceCase(
    id="T-1", title="t", covers={}, source="s", formula="f", quantity="flux_outer",
    expected=2.0e-6, unit="mol/(m^2*s)", tolerance=1e-6, tolerance_reason="r", case={})


def _record(value, unit="mol/(m^2*s)", verdict="pass", status="succeeded"):
    return {"status": status, "verdict": verdict,
            "quantities": {"flux_outer": {"value": value, "unit": unit},
                           "concentration_min_layers": {"value": [0.5, value],
                                                        "unit": "mol/m^3"}},
            "checks": [{"name": "mass_balance", "passed": verdict == "pass"}]}


@pytest.mark.parametrize("relative, passed", [(0.5e-6, True), (-0.5e-6, True),
                                              (2e-6, False), (-2e-6, False)])
def test_tolerance_both_ways(relative, passed):
    result = operational.judge(REFERENCE, _record(2.0e-6 * (1 + relative)), 0.1)
    assert result.passed is passed
    assert result.relative_error == pytest.approx(abs(relative), rel=1e-6)
    if not passed:
        assert "flux_outer = " in result.reason and "tolerance 1e-06" in result.reason


def test_an_unverified_calculation_fails_even_on_the_right_figure():
    result = operational.judge(REFERENCE, _record(2.0e-6, verdict="fail"), 0.1)
    assert not result.passed and "failed checks: mass_balance" in result.reason


def test_a_failed_run_a_missing_figure_and_a_wrong_unit_fail():
    failed = operational.judge(REFERENCE, {"status": "failed", "error": "boom"}, 0.1)
    assert not failed.passed and "boom" in failed.reason and "no figure" in failed.reason
    unit = operational.judge(REFERENCE, _record(2.0e-6, unit="mol/(m^2*h)"), 0.1)
    assert not unit.passed and "unit mol/(m^2*h) differs" in unit.reason


def test_a_per_layer_figure_is_read_by_index():
    layered = dataclasses.replace(REFERENCE, quantity="concentration_min_layers[1]",
                                  unit="mol/m^3", expected=0.25)
    assert operational.judge(layered, _record(0.25), 0.1).passed
    assert not operational.judge(layered, _record(0.26), 0.1).passed
    outside = dataclasses.replace(layered, quantity="concentration_min_layers[5]")
    assert "no figure" in operational.judge(outside, _record(0.25), 0.1).reason


def test_the_cases_cover_both_regimes_three_geometries_and_every_reaction_kind():
    cases = operational.reference_cases()
    covers = [c.covers for c in cases]
    assert {c["regime"] for c in covers} == {"steady", "transient"}
    assert {c["geometry"] for c in covers} == {"slab", "cylinder", "sphere"}
    assert {c["reaction"] for c in covers} == set(REACTIONS)
    for case in cases:
        assert case.case["geometry"] == case.covers["geometry"]
        assert case.case["regime"]["kind"] == case.covers["regime"]
        kinds = {layer.get("reaction", {}).get("kind", "none") for layer in case.case["layers"]}
        assert kinds == {case.covers["reaction"]}
        assert case.source and case.formula and 0 < case.tolerance < 1e-2
    assert len({c.id for c in cases}) == len(cases)
