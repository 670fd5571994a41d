"""Tests of the steady flow run (``worker.engine.lumen.run``) and its wall table.

Check values come from outside the code under test: the Graetz series with the layers as a
Robin wall (L. Graetz 1883; Shah & London, *Laminar Flow Forced Convection in Ducts*, 1978,
ch. 5), the fully developed Sherwood number 48/11 of a uniform wall flux (Shah & London 1978,
ch. 5), the Krogh cylinder's linear fall of the mixing cup and the Krogh-Erlang profile (A.
Krogh, J. Physiol. 52 (1919) 409), the global mass balance, and scipy's Bessel functions for a
first-order layer's wall conductance (``_fibre_conductance``). Every check of the run is shown to
fail when an error is put into the figure it judges, in both directions. Layer and flow values
are invented for the tests (a fibre-like tube), not data.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from scipy.special import iv, kv

from tests.lumen_checks import T1, T2, R, assert_check_and_injection, hill_front, hill_level, within
from worker.engine.convergence import grid_study
from worker.engine.lumen import run as flow
from worker.engine.lumen.graetz import FULLY_DEVELOPED_SH_UNIFORM_FLUX, graetz_series
from worker.engine.lumen.krogh import krogh_mixing_cup
from worker.engine.lumen.wall_table import layer_answer, tabulate
from worker.engine.model import Boundary, Layer, Problem, Reaction
from worker.engine.outcome import Outcome
from worker.engine.run import run_problem

REACTIONS = {
    "first_order": Reaction("first_order", rate_constant=0.05),
    "michaelis_menten": Reaction("michaelis_menten", vmax=2e-3, km=5e-3),
    "zero_order": Reaction("zero_order", rate=1e-3),
}


def _case(kind: str, flow_rate: float = 1.2e-9, length: float = 0.1,
          outer: Boundary | None = None) -> Problem:
    reaction = REACTIONS[kind]
    if kind == "zero_order":
        layers: tuple[Layer, ...] = (Layer("cells", 100e-6, 1.5e-9, 1.0, reaction),)
    else:
        layers = (Layer("wall", 50e-6, 1e-10, 1.0), Layer("cells", 300e-6, 1.5e-9, 1.0,
                                                            reaction))
    return Problem("cylinder", 100e-6, layers,
                   Boundary("flow", flow_rate=flow_rate, inlet=0.2, diffusivity=2e-9),
                   outer or Boundary("symmetry"), length=length)


@pytest.fixture(scope="module")
def outcomes():
    return {kind: run_problem(_case(kind)) for kind in REACTIONS}


@pytest.mark.parametrize("kind", list(REACTIONS))
def test_every_check_passes_on_the_invented_fibre(outcomes, kind):
    outcome = outcomes[kind]
    assert outcome.checks, "no checks made"
    assert all(c.passed for c in outcome.checks), [c.as_dict() for c in outcome.checks
                                                   if not c.passed]
    names = {c.name for c in outcome.checks}
    assert {"convergence.space_r", "convergence.space_z", "mass_balance",
            "cross_check.wall_law"} <= names
    expected = {"first_order": {"cross_check.graetz", "cross_check.sherwood"},
                "zero_order": {"cross_check.krogh", "cross_check.sherwood"},
                "michaelis_menten": set()}[kind]
    assert expected <= names


def test_record_parts(outcomes):
    outcome = outcomes["michaelis_menten"]
    q = outcome.quantities
    axial = outcome.series["axial"]
    assert set(axial) == {"position", "mixing_cup", "wall", "wall_flux", "concentration_min",
                          "units"}
    assert axial["position"][0] == 0.0 and axial["position"][-1] == pytest.approx(0.1)
    assert q["outlet_concentration"]["value"] == axial["mixing_cup"][-1]
    # the mixing cup falls along a fibre that only takes up solute
    assert np.all(np.diff(axial["mixing_cup"]) < 0.0)
    r, z = q["concentration_min_position"]["value"]
    assert 100e-6 <= r <= 450e-6 and 0.0 <= z <= 0.1
    assert q["concentration_min"]["value"] == pytest.approx(min(axial["concentration_min"]))
    # Pe = 2F/(pi R D), Gz = 4F/(pi D L) (Shah & London 1978, ch. 1)
    assert q["peclet"]["value"] == pytest.approx(2 * 1.2e-9 / (math.pi * 100e-6 * 2e-9))
    assert q["graetz"]["value"] == pytest.approx(4 * 1.2e-9 / (math.pi * 2e-9 * 0.1))


def _fibre_conductance() -> float:
    """k_w (m/s) of ``_case("first_order")``'s layers, apart from the code under test: the
    cells' annulus (a = 150 um to b = 450 um, sealed at b) takes up k2 c_a per unit area at a,
    from the modified Bessel solution of c'' + c'/r = m^2 c, m^2 = k/D (M. Abramowitz, I.A.
    Stegun, *Handbook of Mathematical Functions*, 1964, 9.6; worked out from memory), in
    series with the wall layer's ln(a/R)/(2 pi D) (Crank 1975, eq. 5.5)."""
    radius, a, b, d_wall, d_cells = 100e-6, 150e-6, 450e-6, 1e-10, 1.5e-9
    m = math.sqrt(0.05 / d_cells)
    k2 = d_cells * m * ((iv(1, m * b) * kv(1, m * a) - iv(1, m * a) * kv(1, m * b))
                        / (iv(0, m * a) * kv(1, m * b) + iv(1, m * b) * kv(0, m * a)))
    per_length = math.log(a / radius) / (2 * math.pi * d_wall) + 1 / (2 * math.pi * a * k2)
    return 1.0 / (2 * math.pi * radius * per_length)


def test_first_order_outlet_against_the_graetz_series(outcomes):
    """The layers as a Robin wall: k_w and c_out from the closed forms, the series from
    Graetz 1883 / Shah & London 1978 (T3 condition)."""
    series = graetz_series(60, _fibre_conductance() * 100e-6 / 2e-9)
    z_star = math.pi * 2e-9 * 0.1 / (4 * 1.2e-9)
    expected = 0.2 * float(series.mixing_cup(z_star)[0])  # sealed outer face: c_out = 0
    got = outcomes["first_order"].quantities["outlet_concentration"]["value"]
    assert got == pytest.approx(expected, rel=1e-5)


def test_zero_order_krogh_cylinder(outcomes):
    """Krogh 1919: the mixing cup falls linearly by Q pi (R_t^2 - R_c^2) L / F; far from the
    inlet a uniform wall flux gives Sh = 48/11 (Shah & London 1978)."""
    outcome = outcomes["zero_order"]
    exact = krogh_mixing_cup(0.1, 0.2, 1.2e-9, 100e-6, 200e-6, 1e-3)
    assert outcome.quantities["outlet_concentration"]["value"] == pytest.approx(exact, rel=1e-9)
    assert outcome.quantities["sherwood_outlet"]["value"] == pytest.approx(
        FULLY_DEVELOPED_SH_UNIFORM_FLUX, rel=2e-3)


def test_peclet_warning_below_the_common_threshold():
    slow = run_problem(_case("first_order", flow_rate=1e-11, length=0.002))
    assert any("Peclet number" in w for w in slow.warnings)


def test_peclet_warning_absent_at_high_peclet(outcomes):
    assert not any("Peclet" in w for w in outcomes["first_order"].warnings)


def test_transient_and_outer_flow_are_refused_naming_the_field():
    problem = _case("first_order")
    transient = dataclasses.replace(problem, regime=dataclasses.replace(
        problem.regime, kind="transient", duration=10.0))
    with pytest.raises(ValueError, match="regime.kind: .*not offered yet"):
        flow.run_flow(transient)
    with pytest.raises(ValueError, match="length"):
        flow.run_flow(dataclasses.replace(problem, length=None))


# --- each check fails when its error is injected, both directions ------------------------------

def _passes(check_function, **figures) -> bool:
    outcome = Outcome()
    check_function(outcome, _case("first_order"), **figures)
    return outcome.checks[-1].passed


def test_mass_balance_check_catches_either_end_and_the_layers():
    good = dict(inlet_rate=2.4e-10, outlet_rate=2.1e-10, through_scheme=3e-11,
                through_wall_law=3e-11, consumed=2.5e-11, outer=5e-12)
    assert _passes(flow.mass_balance_check, **good)
    for key in ("outlet_rate", "through_scheme", "consumed", "outer"):
        for sign in (1.0, -1.0):
            bad = dict(good, **{key: good[key] * (1.0 + sign * 1e-4)})
            assert not _passes(flow.mass_balance_check, **bad), (key, sign)


def test_graetz_check_catches_an_error_in_either_route():
    cup = np.array([0.199, 0.19, 0.1794])
    good = dict(mixing_cup=cup, outlet_wall=0.1709, band=1e-6, series_mixing_cup=cup.copy(),
                series_wall=0.1709, series_band=1e-10, scale=0.2)
    assert _passes(flow.graetz_check, **good)
    for sign in (1.0, -1.0):
        assert not _passes(flow.graetz_check, **dict(good, series_wall=0.1709 + sign * 1e-4))
        for i in range(cup.size):  # an error at any one position along the lumen
            wrong = cup.copy()
            wrong[i] += sign * 1e-4
            assert not _passes(flow.graetz_check, **dict(good, mixing_cup=wrong))


@pytest.mark.parametrize(("kind", "check", "field"), [
    ("first_order", "cross_check.graetz", "flow_rate"),
    ("first_order", "cross_check.graetz", "inlet"),
    ("first_order", "cross_check.graetz", "diffusivity"),
    ("zero_order", "cross_check.krogh", "flow_rate"),
    ("zero_order", "cross_check.krogh", "inlet")])
def test_independent_routes_read_the_flow_from_the_second_reading(kind, check, field):
    """A primary reading of the flow face off by 1 % either way (the second reading right)
    turns the independent route's check: the Graetz series and the Krogh closed forms take
    the flow, the inlet (and the fluid's diffusivity) from the second reading."""
    problem = _case(kind)
    for sign in (1.0, -1.0):
        face = problem.inner_boundary
        misread = dataclasses.replace(
            problem, inner_boundary=dataclasses.replace(
                face, **{field: getattr(face, field) * (1.0 + sign * 0.01)}))
        checks = {c.name: c for c in flow.run_flow(misread, problem).checks}
        assert not checks[check].passed, (field, sign)


def _reaction_free_case() -> Problem:
    """Two layers without reaction out to a held concentration (invented)."""
    return Problem("cylinder", 100e-6, (Layer("wall", 50e-6, 1e-10, 1.0),
                                        Layer("gel", 300e-6, 1.5e-9, 0.5)),
                   Boundary("flow", flow_rate=1.2e-9, inlet=0.2, diffusivity=2e-9),
                   Boundary("concentration", value=0.02), length=0.1)


def test_graetz_route_of_reaction_free_layers_uses_its_own_wall(monkeypatch):
    """Reaction-free layers out to a held concentration: the series' wall is the layers' series
    resistance (Crank 1975, eq. 5.5; ``graetz.layered_wall_conductance``), code the march's
    wall does not share. It agrees with the march; an error of 1 % either way in that code, or
    in the second reading's layers, turns ``cross_check.graetz``."""
    problem = _reaction_free_case()
    checks = {c.name: c for c in flow.run_flow(problem).checks}
    assert checks["cross_check.graetz"].passed
    real = flow.layered_wall_conductance
    for sign in (1.0, -1.0):
        monkeypatch.setattr(flow, "layered_wall_conductance",
                            lambda *a, s=sign: real(*a) * (1.0 + s * 0.01))
        checks = {c.name: c for c in flow.run_flow(problem).checks}
        assert not checks["cross_check.graetz"].passed, sign
        monkeypatch.setattr(flow, "layered_wall_conductance", real)
        first = problem.layers[0]
        misread = dataclasses.replace(problem, layers=(dataclasses.replace(
            first, diffusivity=first.diffusivity * (1.0 + sign * 0.01)),) + problem.layers[1:])
        checks = {c.name: c for c in flow.run_flow(misread, problem).checks}
        assert not checks["cross_check.graetz"].passed, sign


def test_sherwood_check_catches_an_error_either_way():
    assert _passes(flow.sherwood_check, sherwood=4.3311, expected=4.3282, band=0.0, source="t")
    for sign in (1.0, -1.0):
        assert not _passes(flow.sherwood_check, sherwood=4.3282 * (1 + sign * 0.01),
                           expected=4.3282, band=0.0, source="t")


def test_krogh_check_catches_the_fall_and_the_minimum():
    cup = np.array([0.2, 0.196, 0.1921])
    good = dict(mixing_cup=cup, exact_mixing_cup=cup.copy(), layer_minimum=0.1845,
                exact_minimum=0.1845, band=0.0, inlet=0.2)
    assert _passes(flow.krogh_check, **good)
    for sign in (1.0, -1.0):
        assert not _passes(flow.krogh_check, **dict(good, layer_minimum=0.1845 + sign * 1e-4))
        for i in (1, 2):  # an error at any position along the lumen
            wrong = cup.copy()
            wrong[i] += sign * 1e-5
            assert not _passes(flow.krogh_check, **dict(good, mixing_cup=wrong))


def test_convergence_checks_catch_a_mesh_dependent_answer():
    """Values that settle at second order pass; ones that change by 1 % between meshes, in
    either direction, fail (GCI far above 1e-3)."""
    def outcome_of(values):
        study = grid_study(values, ratios=(2, 2))
        studies = {d: {"outlet_mixing_cup": study, "through_wall": study} for d in "rz"}
        outcome = Outcome()
        flow.convergence_checks(outcome, _case("first_order"), studies, ([], []), 0.2)
        return [c.passed for c in outcome.checks]

    assert outcome_of([0.18, 0.18 + 1e-8, 0.18 + 5e-8]) == [True, True]
    for sign in (1.0, -1.0):
        assert outcome_of([0.18, 0.18 * (1 + sign * 0.01), 0.18 * (1 + sign * 0.03)]) == [
            False, False]


def test_each_convergence_check_judges_its_own_direction():
    """A mesh-dependent answer in r alone turns ``convergence.space_r`` only, in z alone
    ``convergence.space_z`` only, in either direction of the error."""
    settled = grid_study([0.18, 0.18 + 1e-8, 0.18 + 5e-8], ratios=(2, 2))

    def verdicts(bad_direction, sign):
        moving = grid_study([0.18, 0.18 * (1 + sign * 0.01), 0.18 * (1 + sign * 0.03)],
                            ratios=(2, 2))
        studies = {d: {"outlet_mixing_cup": moving if d == bad_direction else settled,
                       "through_wall": settled} for d in "rz"}
        outcome = Outcome()
        flow.convergence_checks(outcome, _case("first_order"), studies, ([], []), 0.2)
        return {c.name: c.passed for c in outcome.checks}

    for sign in (1.0, -1.0):
        assert verdicts("r", sign) == {"convergence.space_r": False, "convergence.space_z": True}
        assert verdicts("z", sign) == {"convergence.space_r": True, "convergence.space_z": False}


@pytest.mark.parametrize("sign", [1.0, -1.0])
def test_wall_table_verification_catches_a_wrong_node(sign):
    """A node's flux off by 1e-3 (either way) shows against the direct solves midway."""
    layers = flow.layers_problem(_case("michaelis_menten"))
    table = tabulate(layers, 0.2, 1e-6)
    assert table.worst_error <= 1e-6
    i = len(table.nodes) // 2
    answers = list(table.answers)
    answers[i] = dataclasses.replace(answers[i], wall_flux=answers[i].wall_flux * (1 + sign * 1e-3))
    spoiled = dataclasses.replace(table, answers=answers)
    checked = tabulate(layers, 0.2, 1e-6, start=spoiled, max_nodes=len(table.nodes))
    outcome = Outcome()
    flow.wall_law_check(outcome, _case("michaelis_menten"), checked)
    assert not outcome.checks[-1].passed
    assert checked.worst_error > 1e-5


def test_wall_table_against_direct_solves_off_its_nodes():
    layers = flow.layers_problem(_case("michaelis_menten"))
    table = tabulate(layers, 0.2, 1e-6)
    for c in (0.0123, 0.0771, 0.1666):
        direct = layer_answer(layers, c)
        assert table.flux(c)[0] == pytest.approx(direct.wall_flux, rel=1e-5)
        assert float(table.minimum(c)) == pytest.approx(direct.minimum, rel=1e-3, abs=1e-9)


@pytest.mark.parametrize("outer", [Boundary("mass_transfer", coefficient=1e-6, bulk=0.05),
                                   Boundary("concentration", value=0.02),
                                   Boundary("flux", value=1e-9)])
@pytest.mark.parametrize("kind", ["first_order", "michaelis_menten"])
def test_other_outer_faces(kind, outer):
    """Any steady outer face: the checks hold, and for linear kinetics the Graetz series is
    compared with an outside concentration c_out that is not zero."""
    outcome = run_problem(_case(kind, outer=outer))
    assert all(c.passed for c in outcome.checks), [c.as_dict() for c in outcome.checks
                                                   if not c.passed]
    assert ("cross_check.graetz" in {c.name for c in outcome.checks}) == (kind == "first_order")
    assert outcome.quantities["concentration_min"]["uncertainty"] >= 0.0


def test_a_wall_resistance_tending_to_zero_reaches_the_fixed_wall_limit():
    """A thin, very permeable layer with ever faster first-order uptake is a wall of ever
    larger conductance; the outlet mixing cup tends to the Graetz series for a wall held at
    zero (Graetz 1883; Shah & London 1978, ch. 5), from above."""
    z_star = math.pi * 2e-9 * 0.05 / (4 * 1.2e-9)
    dirichlet = 0.2 * float(graetz_series(60).mixing_cup(z_star)[0])
    gaps = []
    for k in (1e2, 1e4):
        problem = Problem("cylinder", 100e-6, (Layer("sink", 20e-6, 1e-7, 1.0, Reaction(
            "first_order", rate_constant=k)),), Boundary("flow", flow_rate=1.2e-9, inlet=0.2,
                                                          diffusivity=2e-9),
                          Boundary("symmetry"), length=0.05)
        outlet = run_problem(problem).quantities["outlet_concentration"]["value"]
        gaps.append((outlet - dirichlet) / dirichlet)
    assert 0.0 < gaps[1] < gaps[0]
    assert gaps[1] < 2e-3


def test_a_long_tube_gets_more_axial_steps_and_its_profile_agrees_with_graetz():
    """A long tube (z* about 5 at the outlet) with a strongly conducting wall: the mixing cup
    falls by e^-35 along it, so the coarse mesh's axial steps grow with z*_L, and the
    mixing cup along the whole lumen agrees with the Graetz series (Graetz 1883; Shah &
    London 1978) within the grid band of its worst axial node. (Drawn by a property search,
    where 20 coarse steps met the outlet's grid study yet missed the series mid-lumen.)"""
    problem = Problem(
        "cylinder", 7.864426414487924e-05,
        (Layer("wall", 4.1924889273891816e-05, 4.628020243433809e-10, 1.5),
         Layer("cells", 5.76538282452223e-05, 2.0367027019004403e-09, 1.0,
               Reaction("first_order", rate_constant=0.6531308122043575))),
        Boundary("flow", flow_rate=1.3148310049142323e-09, inlet=0.2,
                 diffusivity=2.9849853486833814e-09),
        Boundary("symmetry"),
        # z* = pi D L / (4 F) = 4.77
        length=4.0 * 1.3148310049142323e-09 * 4.77 / (math.pi * 2.9849853486833814e-09))
    assert flow.coarse_mesh(problem)[1] > flow.coarse_mesh(_case("first_order"))[1] == 20
    outcome = run_problem(problem)
    assert all(c.passed for c in outcome.checks), [c.as_dict() for c in outcome.checks
                                                   if not c.passed]
    assert "positions along the lumen" in outcome.check("cross_check.graetz").detail


def _short_tube() -> Problem:
    """A short tube (z* about 1e-3 at the outlet, drawn by a property search): its wall layer
    of concentration is thin, and 10-40 radial cells do not resolve it to the GCI limit."""
    return Problem(
        "cylinder", 0.0003473288332124362,
        (Layer("wall", 4.3431914557738546e-05, 9.191821467073935e-10, 1.6119708996685032),
         Layer("cells", 0.0001474990034692783, 2.256286872342065e-09, 1.0,
               Reaction("first_order", rate_constant=0.34864245662935306))),
        Boundary("flow", flow_rate=1.0782083138424298e-09, inlet=0.2,
                 diffusivity=1.2064028469223291e-09),
        Boundary("mass_transfer", coefficient=1e-6, bulk=0.01), length=0.0011379428241143643)


def test_a_mesh_the_study_finds_too_coarse_is_refined(monkeypatch):
    problem = _short_tube()
    run = flow.solve_flow(problem)
    assert run.coarse[0] > flow.COARSE_MESH[0]
    outcome = run_problem(problem)
    assert all(c.passed for c in outcome.checks), [c.as_dict() for c in outcome.checks
                                                   if not c.passed]
    # without the refinement the radial study says the mesh is too coarse
    monkeypatch.setattr(flow, "MESH_ADAPTATIONS", 0)
    coarse = run_problem(problem)
    assert not coarse.check("convergence.space_r").passed


# --- two zero-order layers: the depletion front and its onset ---------------------------------
# Check values from Hill's front equation for the layered cylinder (A.V. Hill, Proc. R. Soc. B
# 104 (1928) 39; J. Crank, The Mathematics of Diffusion, 2nd ed., 1975, ch. 14), solved with
# mpmath in ``tests.lumen_checks.hill_front``; the layers are those of ``_case`` with the wall
# consuming too (invented values).

def _two_zero_layers(rate: float, flow_rate: float = 1.2e-9,
                     outer: Boundary | None = None) -> Problem:
    uptake = Reaction("zero_order", rate=rate)
    return Problem("cylinder", R, (Layer("wall", T1, 1e-10, 1.0, uptake),
                                   Layer("cells", T2, 1.5e-9, 1.0, uptake)),
                   Boundary("flow", flow_rate=flow_rate, inlet=0.2, diffusivity=2e-9),
                   outer or Boundary("symmetry"), length=0.1)


@pytest.mark.parametrize("rate, flow_rate, outer", [
    (3.0, 1.2e-9, None), (100.0, 1.2e-9, None), (10.0, 0.3e-9, None),
    (3.0, 1.2e-9, Boundary("mass_transfer", coefficient=1e-6, bulk=0.01)),
])
def test_two_zero_order_layers_at_high_uptake_pass_the_wall_law_with_margin(rate, flow_rate,
                                                                            outer):
    """The sweep's failing cases (the wall law's table 1.3e-4 to 2.9e-3 from its direct solves
    before; 2.0e-4 with the outer face fed by a film): every check passes, the table is ten
    times inside the limit over every wall concentration the lumen reaches, and its flux there
    is Hill's (the outer face's own front lies beyond a dead zone, so the inner one is that of
    the inner face alone)."""
    problem = _two_zero_layers(rate, flow_rate, outer)
    outcome = run_problem(problem)
    assert all(c.passed for c in outcome.checks), [c.as_dict() for c in outcome.checks
                                                   if not c.passed]
    run = flow.solve_flow(problem)
    assert run.table.worst_error <= 1e-5
    reached = [float(np.min(s.wall)) for s in run.by_mesh.values()]
    assert run.table.low <= min(reached)
    scale = max(abs(a.wall_flux) for a in run.table.answers)
    for c in (min(reached), float(run.fine.wall[len(run.fine.wall) // 2]), 0.15):
        _, flux, _ = hill_front(rate, c)
        assert_check_and_injection(within(flux, 0.0, 1e-5 * scale), run.table.flux(c)[0],
                                   0.5)


ONSET_RATE = 4e-4


ONSET_TOLERANCE = 1e-6


@pytest.fixture(scope="module")
def onset_table():
    return tabulate(flow.layers_problem(_two_zero_layers(ONSET_RATE)), 0.2, ONSET_TOLERANCE)


def test_the_onset_of_depletion_is_a_node_with_an_interpolant_either_side(onset_table):
    """Where the body first runs dry (Hill's front equation with the front at the outer face)
    the wall flux has a kink: above it the whole body consumes, Q ((R + T1 + T2)^2 - R^2) /
    (2 R) at every level; below it the front enters. The table keeps it as a node and is
    Hill's law on both sides of it."""
    onset = float(hill_level(ONSET_RATE, R + T1 + T2, 1e-10, 1.5e-9, 1.0, 1.0))
    table = onset_table
    assert len(table.breaks) == 1
    assert table.breaks[0] == pytest.approx(onset, rel=1e-10)
    assert table.breaks[0] in table.nodes
    whole = ONSET_RATE * ((R + T1 + T2) ** 2 - R**2) / (2 * R)
    for c in (onset * (1 + 1e-3), 0.5 * (onset + 0.2)):
        assert table.flux(c)[0] == pytest.approx(whole, rel=1e-9)
    for c in (onset * (1 - 1e-3), onset * (1 - 1e-2), 0.5 * onset):
        _, flux, _ = hill_front(ONSET_RATE, c)
        assert_check_and_injection(within(flux, 1e-6), table.flux(c)[0], 1e-5)


def test_one_interpolant_across_the_onset_shows_in_the_wall_law_check(onset_table):
    """The same nodes with the break removed (one pchip across the kink, as before) miss the
    direct solves next to it, and the check fails."""
    table = onset_table
    layers = flow.layers_problem(_two_zero_layers(ONSET_RATE))
    rounded = tabulate(layers, 0.2, ONSET_TOLERANCE, start=dataclasses.replace(table, breaks=()),
                       max_nodes=len(table.nodes))
    outcome = Outcome()
    flow.wall_law_check(outcome, _two_zero_layers(ONSET_RATE), table)
    flow.wall_law_check(outcome, _two_zero_layers(ONSET_RATE), rounded)
    assert [c.passed for c in outcome.checks] == [True, False]


@pytest.mark.parametrize("sign", [1.0, -1.0])
def test_a_wrong_node_at_the_onset_fails_the_wall_law_check(onset_table, sign):
    table = onset_table
    i = list(table.nodes).index(table.breaks[0])
    answers = list(table.answers)
    answers[i] = dataclasses.replace(answers[i],
                                     wall_flux=answers[i].wall_flux * (1 + sign * 1e-3))
    layers = flow.layers_problem(_two_zero_layers(ONSET_RATE))
    spoiled = dataclasses.replace(table, answers=answers)
    checked = tabulate(layers, 0.2, ONSET_TOLERANCE, start=spoiled, max_nodes=len(table.nodes))
    outcome = Outcome()
    flow.wall_law_check(outcome, _two_zero_layers(ONSET_RATE), checked)
    assert not outcome.checks[-1].passed


def test_the_outlet_sherwood_number_carries_a_band_that_covers_the_graetz_series(outcomes):
    """The record's local Sherwood number at the outlet has a numerical uncertainty (its grid
    bands in r and z), and the exact value of the Robin-wall Graetz series (Graetz 1883; Shah &
    London 1978, ch. 5, the local Sherwood number of the series) lies within it; a design run
    judges its trial model against that band (``uncertainty.trial_model``)."""
    series = graetz_series(60, _fibre_conductance() * 100e-6 / 2e-9)
    z_star = math.pi * 2e-9 * 0.1 / (4 * 1.2e-9)
    exact = float(series.local_sherwood(z_star)[0])
    entry = outcomes["first_order"].quantities["sherwood_outlet"]
    band = entry["uncertainty"]
    assert 0.0 < band < 1e-2 * abs(entry["value"])
    assert abs(entry["value"] - exact) <= band
