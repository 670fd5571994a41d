"""Every steady figure by two routes: the checks that compare them fail when an error is
injected into either route, in either direction, and pass on the plain case.

Check values from outside the project:
* first-order slab between two fixed concentrations: C = A e^(phi x/L) + B e^(-phi x/L) with
  A, B from the faces (Thiele 1939; Crank, *The Mathematics of Diffusion*, 2nd ed., 1975,
  §14.2), whose minimum is 2 sqrt(A B) at x/L = ln(B/A) / (2 phi) (elementary calculus);
* the totals' shell measures 2 pi r per length and 4 pi r^2 (Crank 1975, §5.2, §6.2).
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

from worker.engine import bvp_steady, convergence, exact_steady, steady_check, steady_totals
from worker.engine.model import Boundary, Layer, Problem, Reaction


def _checks(outcome) -> dict:
    return {c.name: c for c in outcome.checks}


def _first_order_slab(phi: float = 8.0, c_inner: float = 1.0, c_outer: float = 0.3) -> Problem:
    thickness, diffusivity = 1e-4, 1e-9
    k = phi**2 * diffusivity / thickness**2
    return Problem(
        geometry="slab", inner=0.0, area=1e-4,
        layers=(Layer("gel", thickness, diffusivity, 1.0, Reaction("first_order",
                                                                   rate_constant=k)),),
        inner_boundary=Boundary("concentration", value=c_inner),
        outer_boundary=Boundary("concentration", value=c_outer),
    )


def _cylinder_shell() -> Problem:
    return Problem(
        geometry="cylinder", inner=2e-4, length=1e-2,
        layers=(Layer("wall", 1e-4, 1e-9, 0.8, Reaction("first_order", rate_constant=0.2)),),
        inner_boundary=Boundary("concentration", value=1.0),
        outer_boundary=Boundary("mass_transfer", coefficient=1e-5, bulk=0.1),
    )


def _two_layer_slab_with_probe_on_the_interface() -> Problem:
    return Problem(
        geometry="slab", inner=0.0, area=1e-4, probes=(5e-5, 1e-4),
        layers=(Layer("coating", 1e-4, 1e-11, 4.0), Layer("gel", 2e-4, 1e-9, 0.5)),
        inner_boundary=Boundary("concentration", value=1.0),
        outer_boundary=Boundary("concentration", value=0.0),
    )


def _layered_depleting_slab() -> Problem:
    return Problem(
        geometry="slab", inner=0.0, area=1e-4,
        layers=(Layer("tissue", 2e-4, 1e-9, 1.0, Reaction("zero_order", rate=0.05)),
                Layer("gel", 1e-4, 2e-9, 0.5, Reaction("zero_order", rate=0.01))),
        inner_boundary=Boundary("symmetry"),
        outer_boundary=Boundary("concentration", value=0.1),
    )


# --- the true minimum ------------------------------------------------------------------------

def test_concentration_min_is_the_true_minimum_of_the_closed_form():
    phi, c1, c2 = 8.0, 1.0, 0.3
    a = (c2 - c1 * math.exp(-phi)) / (2 * math.sinh(phi))
    b = (c1 * math.exp(phi) - c2) / (2 * math.sinh(phi))
    true_minimum = 2.0 * math.sqrt(a * b)
    outcome = steady_check.run_steady(_first_order_slab(phi, c1, c2))
    reported = outcome.quantities["concentration_min"]
    sampled = min(outcome.series["profile"]["concentration"])
    assert abs(sampled - true_minimum) / true_minimum > 1e-6  # the samples miss it
    assert reported["value"] == pytest.approx(true_minimum, rel=1e-10)
    assert 0.0 < reported["uncertainty"] < 1e-4 * c1
    assert reported["verified_by"] == "cross_check.extremes"
    assert _checks(outcome)["cross_check.extremes"].passed


@pytest.mark.parametrize("shift", [+1e-3, -1e-3])
def test_extremes_check_fails_when_one_route_is_off(monkeypatch, shift):
    solve = exact_steady.solve_exact

    def shifted(problem, **kwargs):
        solution = solve(problem, **kwargs)
        inner = solution.concentration_at

        def concentration_at(r, layer=None):
            return np.asarray(inner(r, layer=layer)) + shift

        return dataclasses.replace(solution, concentration_at=concentration_at,
                                   profile_at=None)

    monkeypatch.setattr(exact_steady, "solve_exact", shifted)
    outcome = steady_check.run_steady(_first_order_slab())
    assert not _checks(outcome)["cross_check.extremes"].passed


# --- totals ----------------------------------------------------------------------------------

@pytest.mark.parametrize("make", [_cylinder_shell, _first_order_slab])
def test_totals_agree_by_both_routes(make):
    outcome = steady_check.run_steady(make())
    assert _checks(outcome)["cross_check.totals"].passed
    assert outcome.quantities["rate_outer"]["verified_by"] == "cross_check.totals"


def test_cylinder_totals_per_length_match_the_shell_measure():
    problem = _cylinder_shell()
    outcome = steady_check.run_steady(problem)
    flux = outcome.quantities["flux_outer"]["value"]
    per_length = outcome.quantities["rate_per_length_outer"]["value"]
    assert per_length == pytest.approx(2 * math.pi * problem.outer * flux, rel=1e-12)


@pytest.mark.parametrize("factor", [1.0 / (2 * math.pi), 2 * math.pi])
def test_totals_check_fails_when_the_record_drops_or_doubles_2pi(monkeypatch, factor):
    totals = steady_check._totals

    def slipped(problem, best):
        out = totals(problem, best)
        value, unit = out["rate_per_length_outer"]
        out["rate_per_length_outer"] = (value * factor, unit)
        return out

    monkeypatch.setattr(steady_check, "_totals", slipped)
    outcome = steady_check.run_steady(_cylinder_shell())
    assert not _checks(outcome)["cross_check.totals"].passed


@pytest.mark.parametrize("factor", [0.5, 2.0])
def test_totals_check_fails_when_the_second_route_slips(monkeypatch, factor):
    shell = steady_totals.shell_factor
    monkeypatch.setattr(steady_totals, "shell_factor", lambda g: factor * shell(g))
    outcome = steady_check.run_steady(_cylinder_shell())
    assert not _checks(outcome)["cross_check.totals"].passed


# --- Thiele and Biot numbers ------------------------------------------------------------------

def test_thiele_and_biot_agree_with_their_definitions():
    outcome = steady_check.run_steady(_cylinder_shell())
    check = _checks(outcome)["cross_check.dimensionless"]
    assert check.passed and check.value == 0.0
    thiele = outcome.quantities["thiele_modulus"]["value"][0]
    assert thiele == pytest.approx(1e-4 * math.sqrt(0.2 / 1e-9), rel=1e-14)  # L sqrt(k/D)


@pytest.mark.parametrize("factor", [0.7, 1.5])
def test_dimensionless_check_fails_on_a_wrong_thiele_modulus(monkeypatch, factor):
    thiele = exact_steady.thiele_modulus
    monkeypatch.setattr(exact_steady, "thiele_modulus",
                        lambda layer, problem: factor * thiele(layer, problem))
    outcome = steady_check.run_steady(_cylinder_shell())
    assert not _checks(outcome)["cross_check.dimensionless"].passed


@pytest.mark.parametrize("factor", [0.7, 1.5])
def test_dimensionless_check_fails_when_the_definition_route_slips(monkeypatch, factor):
    biot = steady_check.biot_by_definition
    monkeypatch.setattr(steady_check, "biot_by_definition",
                        lambda problem, side: None if biot(problem, side) is None
                        else factor * biot(problem, side))
    outcome = steady_check.run_steady(_cylinder_shell())
    assert not _checks(outcome)["cross_check.dimensionless"].passed


# --- probes ----------------------------------------------------------------------------------

def test_probes_agree_by_both_routes_on_an_interface():
    outcome = steady_check.run_steady(_two_layer_slab_with_probe_on_the_interface())
    assert _checks(outcome)["cross_check.probes"].passed


def test_probe_on_an_interface_read_on_the_wrong_side_fails(monkeypatch):
    solve = exact_steady.solve_exact
    interface = 1e-4

    def wrong_side(problem, **kwargs):
        solution = solve(problem, **kwargs)
        inner = solution.concentration_at

        def concentration_at(r, layer=None):
            if layer is not None:
                return inner(r, layer=layer)
            r = np.atleast_1d(np.asarray(r, dtype=float))
            out = np.asarray(inner(r), dtype=float).copy()
            on = r == interface
            if np.any(on):
                out[on] = inner(r[on], layer=1)
            return out

        return dataclasses.replace(solution, concentration_at=concentration_at)

    monkeypatch.setattr(exact_steady, "solve_exact", wrong_side)
    outcome = steady_check.run_steady(_two_layer_slab_with_probe_on_the_interface())
    assert not _checks(outcome)["cross_check.probes"].passed


@pytest.mark.parametrize("factor", [0.99, 1.01])
def test_probes_check_fails_when_the_independent_route_is_off(monkeypatch, factor):
    refined = convergence.refined_solutions

    def off(problem, *args, **kwargs):
        grids = list(refined(problem, *args, **kwargs))
        inner = grids[0].concentration_at
        grids[0] = dataclasses.replace(
            grids[0], concentration_at=lambda r, layer=None: factor * np.asarray(
                inner(r, layer=layer)))
        return grids

    monkeypatch.setattr(convergence, "refined_solutions", off)
    outcome = steady_check.run_steady(_two_layer_slab_with_probe_on_the_interface())
    assert not _checks(outcome)["cross_check.probes"].passed


# --- the depletion front of a layered body --------------------------------------------------

def test_layered_depletion_front_is_compared():
    outcome = steady_check.run_steady(_layered_depleting_slab())
    check = _checks(outcome)["cross_check.depletion_front"]
    assert check.passed
    assert outcome.quantities["depletion_front"]["verified_by"] == "cross_check.depletion_front"


@pytest.mark.parametrize("change", [+0.01, -0.01, None])
def test_layered_depletion_front_check_fails_when_a_route_is_off(monkeypatch, change):
    solve = bvp_steady.solve_bvp_reference

    def moved(problem):
        solution = solve(problem)
        front = (None if change is None
                 else solution.depletion_front + change * problem.total_thickness)
        return dataclasses.replace(solution, depletion_front=front)

    monkeypatch.setattr(bvp_steady, "solve_bvp_reference", moved)
    outcome = steady_check.run_steady(_layered_depleting_slab())
    assert not _checks(outcome)["cross_check.depletion_front"].passed


# --- best estimates ---------------------------------------------------------------------------

def test_nonlinear_flux_is_the_extrapolated_value_with_its_band():
    problem = Problem(
        geometry="slab", inner=0.0, area=1e-4,
        layers=(Layer("cells", 2e-4, 1e-9, 1.0,
                      Reaction("michaelis_menten", vmax=0.02, km=0.01)),),
        inner_boundary=Boundary("symmetry"),
        outer_boundary=Boundary("concentration", value=0.2),
    )
    outcome = steady_check.run_steady(problem)
    study = convergence.run_grid_study(problem, quantities=["flux_outer"])["flux_outer"]
    assert study.convergence == "monotonic"
    reported = outcome.quantities["flux_outer"]
    assert reported["value"] == pytest.approx(study.extrapolated, rel=1e-12)
    assert reported["value"] != study.fine
    assert reported["uncertainty"] >= abs(study.gci_fine * study.fine) * (1 - 1e-9)
    assert len(reported["routes"]) == 2
