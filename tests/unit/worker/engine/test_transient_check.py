"""Unit tests of run_transient: record shape, units, events, and that every check can fail.

Scenario values are invented. Check values come from published closed forms named beside them
(Crank 1975; Daynes 1920 / Barrer 1939), never from the code under test.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from worker.engine.model import Boundary, Layer, Problem, Reaction, Regime
from worker.engine.outcome import Outcome
from worker.engine.transient import checks, compare, exact_series, run_transient, solve

D = 1.0e-11  # m^2/s
THICKNESS = 0.3e-3  # m
SINK = Boundary("concentration", 0.0)
SEALED = Boundary("symmetry")
TIMES = (0.0, 60.0, 600.0, 3000.0, 9000.0)


def _sheet(**changes) -> Problem:
    problem = Problem("slab", 0.0, (Layer("matrix", THICKNESS, D, 1.0, initial=2.0),), SEALED,
                      SINK, Regime("transient", 12000.0, TIMES), probes=(0.1e-3, 0.25e-3),
                      area=2.0e-4)
    return dataclasses.replace(problem, **changes)


@pytest.fixture(scope="module")
def sheet_outcome():
    return run_transient(_sheet())


def _check(outcome, name):
    found = outcome.check(name)
    assert found is not None, f"no check {name}: {[c.name for c in outcome.checks]}"
    return found


def test_record_shape_and_units(sheet_outcome):
    series = sheet_outcome.series
    assert series["time"] == {"values": list(TIMES), "unit": "s"}
    for name in ("released_inner", "released_outer", "remaining"):
        assert series[name]["unit"] == "mol"  # slab with an area: amounts
        assert len(series[name]["values"]) == len(TIMES)
    assert series["release_fraction"]["unit"] == "1"
    assert series["released_inner"]["values"] == [0.0] * len(TIMES)  # sealed face
    load = 2.0 * THICKNESS * 2.0e-4
    assert series["remaining"]["values"][0] == pytest.approx(load, rel=1e-12)
    probes = series["probes"]
    assert np.shape(probes["concentration"]) == (len(TIMES), 2)
    assert probes["concentration"][0] == pytest.approx([2.0, 2.0])
    profile = series["profile"]
    assert len(profile["position"]) == len(profile["concentration"]) == len(profile["layer"])
    assert profile["time"] == 12000.0
    roles = [m["role"] for m in sheet_outcome.methods]
    assert roles == ["primary", "independent", "independent"]  # series; Laplace, lines


def test_every_check_passes_on_a_sound_case(sheet_outcome):
    names = {c.name for c in sheet_outcome.checks}
    assert {"cross_check.release_fraction", "cross_check.flux_outer", "cross_check.probes",
            "mass_balance", "convergence.space", "convergence.time", "steady_limit",
            "non_negativity"} <= names
    assert [c.name for c in sheet_outcome.checks if not c.passed] == []


def test_half_time_matches_crank(sheet_outcome):
    # Crank 1975 section 4.3: a sheet of full thickness 2l releasing from both faces has
    # D t_half/(2l)^2 = 0.049; a layer of thickness l sealed on one side is half of it.
    t50 = sheet_outcome.quantities["t50"]["value"]
    assert D * t50 / (2 * THICKNESS) ** 2 == pytest.approx(0.049, abs=5e-4)


def test_unreached_t90_is_none_with_a_warning():
    short = _sheet(regime=Regime("transient", 900.0, (0.0, 300.0, 900.0)), probes=())
    outcome = run_transient(short)
    assert outcome.quantities["t90"]["value"] is None
    assert any("t90" in w for w in outcome.warnings)


def test_perturbed_series_fails_the_cross_check(monkeypatch):
    # A deliberately wrong reference (the series of a 3 % larger diffusivity) must fail.
    real = exact_series.solve_transient_exact

    def wrong(problem, times=None):
        layer = dataclasses.replace(problem.layers[0], diffusivity=problem.layers[0].diffusivity
                                    * 1.03)
        return real(dataclasses.replace(problem, layers=(layer,)), times)

    monkeypatch.setattr(exact_series, "solve_transient_exact", wrong)
    outcome = run_transient(_sheet(probes=()))
    assert not _check(outcome, "cross_check.release_fraction").passed
    assert not _check(outcome, "cross_check.flux_outer").passed
    assert not _check(outcome, "cross_check.t50").passed


def test_tolerance_overrides_make_checks_fail():
    strict = _sheet(probes=(), tolerances={"cross_check": 1e-12, "gci": 1e-14,
                                           "convergence.time": 1e-16, "steady_limit": 1e-16})
    outcome = run_transient(strict)
    for name in ("cross_check.release_fraction", "cross_check.flux_outer", "convergence.space",
                 "convergence.time", "steady_limit"):
        check = _check(outcome, name)
        assert not check.passed, name
    assert _check(outcome, "mass_balance").passed


def test_mass_balance_and_non_negativity_checks_can_fail():
    class Broken:
        initial_load = 1.0
        remaining = np.array([1.0, 0.5])
        released_inner = np.array([0.0, 0.0])
        released_outer = np.array([0.0, 0.4])  # 0.1 unaccounted for
        consumed = np.array([0.0, 0.0])
        cells = np.array([[1.0, 1.0], [0.2, -0.05]])

    outcome = Outcome()
    checks.mass_balance_check(outcome, _sheet(), Broken(), np.array([0.0, 1.0]))
    compare.reported_series_sign_check(outcome, _sheet(), float(np.min(Broken.cells)), 1.0,
                                       1.0, 1.0)
    assert not _check(outcome, "mass_balance").passed
    assert _check(outcome, "mass_balance").value == pytest.approx(0.1)
    assert not _check(outcome, "non_negativity").passed


def test_steady_limit_fails_against_a_wrong_steady_reference(monkeypatch):
    real = solve.steady_reference

    def wrong(problem):
        return real(dataclasses.replace(problem, outer_boundary=Boundary("concentration", 0.1)))

    monkeypatch.setattr(solve, "steady_reference", wrong)
    outcome = run_transient(_sheet(probes=()))
    assert not _check(outcome, "steady_limit").passed


def test_membrane_time_lag_daynes_barrer():
    # Daynes, Proc. R. Soc. A 97 (1920) 286; Barrer, Trans. Faraday Soc. 35 (1939) 628:
    # time lag L^2/(6D) for an initially empty membrane between a fixed source and a sink.
    membrane = Problem("slab", 0.0, (Layer("film", THICKNESS, D, 0.4),),
                       Boundary("concentration", 5.0), SINK,
                       Regime("transient", 20000.0, (0.0, 500.0, 5000.0, 20000.0)))
    outcome = run_transient(membrane)
    assert outcome.quantities["time_lag"]["value"] == pytest.approx(THICKNESS**2 / (6 * D),
                                                                     rel=1e-9)
    assert _check(outcome, "cross_check.time_lag").passed
    assert _check(outcome, "cross_check.released").passed
    assert "uptake" in outcome.series
    # no initial load: no fraction of it (DESIGN, release physics: release_fraction only
    # where the body holds an initial load); the uptake is what went in through the faces
    assert "release_fraction" not in outcome.series
    assert "t50" not in outcome.quantities and "t90" not in outcome.quantities
    series = outcome.series
    assert series["uptake"]["values"] == pytest.approx(
        [-(a + b) for a, b in zip(series["released_inner"]["values"],
                                  series["released_outer"]["values"], strict=True)])
    assert outcome.series["released_outer"]["unit"] == "mol/m^2"


def test_cylinder_amounts_are_per_metre_without_length():
    rod = Problem("cylinder", 0.0, (Layer("rod", 0.5e-3, D, 1.0, initial=1.0),), SEALED, SINK,
                  Regime("transient", 5000.0, (1000.0, 5000.0)))
    outcome = run_transient(rod)
    assert outcome.series["released_outer"]["unit"] == "mol/m"
    # Crank 1975 eq. 5.23, leading terms: checked against scipy's J0 roots in the reference tests;
    # here only that the record's fraction equals released / load.
    load = np.pi * 0.5e-3**2
    fraction = np.array(outcome.series["released_outer"]["values"]) / load
    assert fraction == pytest.approx(outcome.series["release_fraction"]["values"], rel=1e-12)


def test_multilayer_reaction_case_is_checked_by_a_second_discretisation():
    coating = Problem("slab", 0.0, (
        Layer("reservoir", 0.2e-3, 2e-11, 1.0, initial=3.0),
        Layer("topcoat", 0.05e-3, 4e-12, 0.5, Reaction("michaelis_menten", vmax=1e-4, km=0.5)),
    ), SEALED, SINK, Regime("transient", 8000.0, (0.0, 1000.0, 8000.0)))
    outcome = run_transient(coating)
    names = {c.name for c in outcome.checks}
    assert {"cross_check.release_fraction", "cross_check.remaining", "cross_check.consumed",
            "cross_check.profile", "cross_check.t50"} <= names
    assert {"mass_balance", "convergence.space", "convergence.time", "steady_limit",
            "non_negativity"} <= names
    assert all(c.passed for c in outcome.checks), [c.as_dict() for c in outcome.checks]
    assert [m["role"] for m in outcome.methods] == ["primary", "independent"]
    assert "Galerkin" in outcome.methods[1]["name"]


def test_bad_regimes_are_refused_with_the_field():
    with pytest.raises(ValueError, match="regime.times"):
        run_transient(_sheet(regime=Regime("transient", 100.0, (50.0, 200.0))))
    with pytest.raises(ValueError, match="regime.times"):
        run_transient(_sheet(regime=Regime("transient", 100.0, ())))
    with pytest.raises(ValueError, match="regime.kind"):
        run_transient(_sheet(regime=Regime("steady")))

