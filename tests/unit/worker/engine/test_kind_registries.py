"""Tests of the reaction and boundary kind registries (worker/engine/reactions, boundaries).

Each kind must state one rate law or one face condition in every form the solvers take it. The
check values are the definitions themselves (the rate laws R(C) of Michaelis & Menten 1913 and of
first and zero order, and the face conditions of Crank 1975 ch. 1-4 / Bird, Stewart & Lightfoot
2002 §22.1, as ``worker.engine.model`` documents them) and calculus (dR/dC as the limit of a
difference quotient); no figure comes from running the code under test.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from worker.engine.boundaries import BOUNDARIES, boundary_kind
from worker.engine.model import Boundary, Reaction
from worker.engine.reactions import REACTIONS, reaction_kind

#: Parameters of each reaction kind in SI (invented values for the identities below, not data).
REACTION_CASES = {
    "none": Reaction("none"),
    "zero_order": Reaction("zero_order", rate=0.02),
    "first_order": Reaction("first_order", rate_constant=3e-3),
    "michaelis_menten": Reaction("michaelis_menten", vmax=0.04, km=0.005),
}
#: R(C) by its definition, independent of the kind objects.
DEFINITIONS = {
    "none": lambda c: 0.0 * c,
    "zero_order": lambda c: np.where(c > 0.0, 0.02, 0.0),
    "first_order": lambda c: 3e-3 * c,
    "michaelis_menten": lambda c: 0.04 * c / (0.005 + c),
}
POSITIVE_C = np.array([1e-4, 3e-3, 0.05, 0.8])


def test_the_registries_hold_the_kinds_of_the_case_document_in_order():
    assert tuple(REACTIONS) == ("none", "zero_order", "first_order", "michaelis_menten")
    assert tuple(BOUNDARIES) == ("concentration", "flux", "mass_transfer", "symmetry",
                                 "compartment", "flow")
    assert set(REACTION_CASES) == set(REACTIONS)
    # a transient-only kind has no steady forms; the compartment's own forms are tested in
    # test_compartment.py (its Jacobian, its balance) and against Crank in the reference tests
    # a lumen face (flow) has no radial forms: the lumen route solves it (tests/unit/worker/
    # engine/lumen/test_flow_run.py)
    assert set(FACES) == {name for name, kind in BOUNDARIES.items()
                          if not kind.transient_only and not kind.lumen}


def test_unknown_kinds_are_refused_by_name():
    with pytest.raises(ValueError, match="unknown reaction kind 'second_order'"):
        reaction_kind("second_order")
    with pytest.raises(ValueError, match="unknown boundary kind 'robin'"):
        boundary_kind("robin")
    with pytest.raises(ValueError, match="unknown reaction kind"):
        Reaction("second_order").rate_at(np.ones(2))


@pytest.mark.parametrize("registry, model", [(REACTIONS, Reaction), (BOUNDARIES, Boundary)])
def test_every_declared_parameter_is_a_field_of_the_model(registry, model):
    names = {f.name for f in dataclasses.fields(model)}
    for kind in registry.values():
        missing = {p.name for p in kind.parameters} - names
        assert not missing, f"{kind.name}: {missing} not on {model.__name__}"


@pytest.mark.parametrize("name", list(REACTION_CASES))
def test_rate_law_is_its_definition(name):
    reaction = REACTION_CASES[name]
    c = np.concatenate([[0.0], POSITIVE_C])
    np.testing.assert_allclose(reaction.rate_at(c), DEFINITIONS[name](c), rtol=1e-15, atol=0.0)
    if name == "zero_order":  # no consumption without solute
        assert reaction.rate_at(np.array([-0.01]))[0] == 0.0


@pytest.mark.parametrize("name", list(REACTION_CASES))
def test_slope_is_the_limit_of_the_difference_quotient(name):
    reaction = REACTION_CASES[name]
    step = 1e-7 * POSITIVE_C
    quotient = (DEFINITIONS[name](POSITIVE_C + step) - DEFINITIONS[name](POSITIVE_C - step)) / (
        2.0 * step)
    np.testing.assert_allclose(reaction.derivative_at(POSITIVE_C), quotient, rtol=1e-6,
                               atol=1e-12)


@pytest.mark.parametrize("name", list(REACTION_CASES))
def test_linear_and_closed_form_coefficients_reproduce_the_rate(name):
    reaction = REACTION_CASES[name]
    law = reaction.law
    expected = DEFINITIONS[name](POSITIVE_C)
    coefficients = law.exact_coefficients(reaction)
    if coefficients is None:  # saturating: no R = kC + Q form
        assert not np.allclose(np.diff(expected / POSITIVE_C), 0.0)
    else:
        k, q = coefficients
        np.testing.assert_allclose(k * POSITIVE_C + q, expected, rtol=1e-15)
    if law.is_linear:
        np.testing.assert_allclose(law.linear_rate_constant(reaction) * POSITIVE_C, expected,
                                   rtol=1e-15)
    else:
        assert law.linear_rate_constant(reaction) is None


@pytest.mark.parametrize("name", list(REACTION_CASES))
def test_regularised_rate_at_full_strength_is_the_rate_where_solute_is_present(name):
    reaction = REACTION_CASES[name]
    rate, slope = reaction.law.regularised_rate(reaction, POSITIVE_C, 1.0, "exact", 1e-9)
    np.testing.assert_allclose(rate, DEFINITIONS[name](POSITIVE_C), rtol=1e-15)
    np.testing.assert_allclose(slope, reaction.derivative_at(POSITIVE_C), rtol=1e-15)
    half, _ = reaction.law.regularised_rate(reaction, POSITIVE_C, 0.5, "exact", 1e-9)
    np.testing.assert_allclose(half, 0.5 * rate, rtol=1e-15)
    assert not np.any(reaction.law.regularised_rate(reaction, -POSITIVE_C, 1.0, "exact",
                                                    1e-9)[0] > 0.0)


def test_only_consuming_kinds_report_a_consumption_parameter():
    for name, reaction in REACTION_CASES.items():
        law = reaction.law
        consumes = bool(np.any(DEFINITIONS[name](POSITIVE_C) > 0.0))
        assert law.reacts is consumes
        if law.consumption_parameter is not None:
            zeroed = dataclasses.replace(reaction, **{law.consumption_parameter: 0.0})
            assert not np.any(zeroed.rate_at(POSITIVE_C))


# --- boundaries --------------------------------------------------------------------------------

K_FACE = 0.7
FACES = {
    "concentration": Boundary("concentration", value=2.0),
    "flux": Boundary("flux", value=3e-6),
    "mass_transfer": Boundary("mass_transfer", coefficient=4e-6, bulk=1.5),
    "symmetry": Boundary("symmetry"),
}


def _satisfying_state(boundary: Boundary, c_surface: float) -> tuple[float, float]:
    """(surface C, inflow) meeting the face condition as ``model.Boundary`` defines it."""
    if boundary.kind == "concentration":
        return K_FACE * boundary.value, 1e-6
    if boundary.kind == "flux":
        return c_surface, boundary.value
    if boundary.kind == "mass_transfer":
        return c_surface, boundary.coefficient * (boundary.bulk - c_surface / K_FACE)
    return c_surface, 0.0


@pytest.mark.parametrize("name", list(FACES))
@pytest.mark.parametrize("side", ["inner", "outer"])
def test_boundary_value_residual_vanishes_exactly_on_the_condition(name, side):
    boundary = FACES[name]
    c_ref, j_ref = 2.0, 1e-6
    c, inflow = _satisfying_state(boundary, 0.9)
    flux = inflow if side == "inner" else -inflow  # outward J; inflow = +J inner, -J outer
    law = boundary.condition
    on = law.bvp_residual(boundary, c / c_ref, flux / j_ref, inflow / j_ref, K_FACE, c_ref,
                          j_ref)
    assert on == pytest.approx(0.0, abs=1e-12)
    outward = 1 if side == "inner" else -1
    for sign in (1, -1):  # the residual sees the condition broken either way, in what it holds
        if law.holds_concentration:
            broken = law.bvp_residual(boundary, c / c_ref + sign * 0.2, flux / j_ref,
                                      inflow / j_ref, K_FACE, c_ref, j_ref)
        else:
            broken = law.bvp_residual(boundary, c / c_ref, flux / j_ref + sign * 0.3 * outward,
                                      inflow / j_ref + sign * 0.3, K_FACE, c_ref, j_ref)
        assert abs(broken) > 1e-3


@pytest.mark.parametrize("name", list(FACES))
def test_finite_volume_face_gives_the_inflow_of_the_condition(name):
    """A cell centre a distance ``gap`` inside, holding the value that carries the condition's
    inflow across the half cell, gets exactly that inflow from the finite-volume face form
    (area 1, slab)."""
    boundary = FACES[name]
    c_surface, inflow = _satisfying_state(boundary, 0.9)
    diffusivity, gap = 1e-9, 1e-5
    g, c_far, fixed = boundary.condition.fv_face(boundary, "outer", K_FACE, 1.0, gap, diffusivity)
    # cell value that carries this inflow across the half cell: C_P = C_s - inflow * gap / D
    c_cell = c_surface - inflow * gap / diffusivity
    assert g * (c_far - c_cell) + fixed == pytest.approx(inflow, rel=1e-9, abs=1e-18)


@pytest.mark.parametrize("name", list(FACES))
def test_eigen_row_holds_on_the_condition(name):
    """alpha f + beta f' = gamma with f = surface C, J = -D f' and inflow = -J at the outer
    face (outward = +1)."""
    boundary = FACES[name]
    diffusivity = 1e-9
    c_surface, inflow = _satisfying_state(boundary, 0.9)
    derivative = inflow / diffusivity  # inflow at the outer face = -J = D f'
    alpha, beta, gamma = boundary.condition.eigen_row(boundary, 1.0, diffusivity, K_FACE)
    assert alpha * c_surface + beta * derivative == pytest.approx(gamma, rel=1e-12, abs=1e-15)
    assert (alpha, beta) != (0.0, 0.0)  # a row of zeros would hold for any state
    for sign in (1, -1):  # and a state off the condition, either way, breaks it
        if boundary.condition.holds_concentration:
            broken = alpha * (c_surface + sign * 0.1) + beta * derivative
        else:
            step = sign * 0.1 * max(abs(derivative), 1.0)
            broken = alpha * c_surface + beta * (derivative + step)
        assert broken != pytest.approx(gamma, rel=1e-6, abs=1e-12)


def test_level_fixing_and_sealing_follow_the_definitions():
    assert [BOUNDARIES[n].fixes_level(FACES[n]) for n in FACES] == [True, False, True, False]
    assert not BOUNDARIES["mass_transfer"].fixes_level(
        Boundary("mass_transfer", coefficient=0.0, bulk=1.0))
    assert [BOUNDARIES[n].sets_level for n in FACES] == [True, False, True, False]
    assert BOUNDARIES["symmetry"].is_sealed(FACES["symmetry"])
    assert BOUNDARIES["flux"].is_sealed(Boundary("flux", value=0.0))
    assert not BOUNDARIES["flux"].is_sealed(FACES["flux"])
    assert BOUNDARIES["concentration"].is_perfect_sink(Boundary("concentration", value=0.0))
    assert not BOUNDARIES["concentration"].is_perfect_sink(FACES["concentration"])


@pytest.mark.parametrize("name", list(FACES))
def test_face_residual_vanishes_on_the_condition_and_sees_it_broken_both_ways(name):
    """The residual the steady check reports: zero on the condition, of either sign off it, in
    concentration for the kind that holds the surface concentration, else in flux."""
    boundary = FACES[name]
    law = boundary.condition
    c_surface, inflow = _satisfying_state(boundary, 0.9)
    assert law.face_residual(boundary, c_surface, inflow, K_FACE) == pytest.approx(
        0.0, abs=1e-18)
    if law.holds_concentration:
        broken = [(c_surface + 0.1, inflow), (c_surface - 0.1, inflow)]
    else:
        broken = [(c_surface, inflow + 1e-7), (c_surface, inflow - 1e-7)]
    above, below = (law.face_residual(boundary, c, j, K_FACE) for c, j in broken)
    assert above > 0.0 > below
    assert [BOUNDARIES[n].holds_concentration for n in FACES] == [True, False, False, False]
    assert law.residual_label


def test_film_coefficient_is_the_mass_transfer_coefficient_and_only_there():
    assert [BOUNDARIES[n].film_coefficient(FACES[n]) for n in FACES] == [None, None, 4e-6, None]


def test_reaction_labels_and_brackets():
    assert {n: REACTIONS[n].label for n in REACTIONS} == {
        "none": "", "zero_order": "zero-order uptake", "first_order": "first-order uptake",
        "michaelis_menten": "saturable uptake"}
    assert [n for n in REACTIONS if REACTIONS[n].has_bracket] == ["michaelis_menten"]
