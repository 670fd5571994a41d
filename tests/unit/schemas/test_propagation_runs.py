"""``uncertainty.method = "law_of_propagation"`` through ``check_case``: the combined standard
uncertainty of a steady plane sheet against the GUM's formulas applied by hand to its closed
form, correlations as eq. 13 says, the curvature warning on a strongly nonlinear figure and not
on a linear one, the field's rules, the cost estimate's charge and advice, and the method on a
transient case with a dispersed load and a compartment and on a lumen with flow.

The scenarios (sizes, values) are invented for the tests; the check values are the closed
forms and the GUM's formulas named beside each test.
"""

from __future__ import annotations

import copy
import math

import pytest

from schemas import CaseError, validate_case
from schemas.checking import check_case
from worker.engine.cost import DEFAULT_BUDGETS, estimate_cost, over_budget

D, L, C1, C2 = 1e-9, 100e-6, 1.0, 0.2  # m^2/s, m, mol/m^3, mol/m^3


def _sheet(**uncertainty) -> dict:
    """A plane sheet without reaction held at C1 and C2 on its faces, steady: its flux is
    F = D (C1 − C2) / l (Crank 1975, *The Mathematics of Diffusion*, 2nd ed., §4.2, the steady
    state of a plane sheet)."""
    block = {"method": "law_of_propagation"}
    block.update(uncertainty)
    return {
        "schema_version": 1, "title": "plane sheet (test)", "geometry": "slab", "inner": "0 m",
        "layers": [{"name": "membrane", "thickness": f"{L} m", "diffusivity": f"{D} m^2/s"}],
        "inner_boundary": {"kind": "concentration", "value": f"{C1} mol/m^3"},
        "outer_boundary": {"kind": "concentration", "value": f"{C2} mol/m^3"},
        "regime": {"kind": "steady"},
        "requirements": [{"id": "FLUX", "quantity": "flux_outer",
                          "at_least": "6e-6 mol/m^2/s"}],
        "uncertainty": block,
    }


def _errors(doc, budgets=DEFAULT_BUDGETS) -> dict[str, str]:
    with pytest.raises(CaseError) as info:
        validate_case(doc, budgets)
    return {e["path"]: e["message"] for e in info.value.errors}


def test_linear_inputs_give_the_gums_combined_uncertainty_exactly():
    """F is linear in C1 and C2: c1 = D/l, c2 = −D/l (JCGM 100 eq. 11a, the partial
    derivatives), u_c² = c1² u1² + c2² u2² (eq. 10), with u2 of the uniform C2 its half-width/√3
    (§4.3.7). Central differences of a linear function are exact: the match is to round-off."""
    u1, half = 0.05, 0.03
    record = check_case(_sheet(inputs=[
        {"field": "inner_boundary.value", "distribution": "normal", "sd": f"{u1} mol/m^3"},
        {"field": "outer_boundary.value", "distribution": "uniform",
         "low": f"{C2 - half} mol/m^3", "high": f"{C2 + half} mol/m^3"}]))
    block = record["uncertainty"]
    assert block["propagation"] == "law_of_propagation"
    assert block["reference"].startswith("JCGM 100:2008")
    assert block["evaluations"] == 5
    u2 = half / math.sqrt(3.0)
    c = D / L
    figure = block["quantities"]["flux_outer"]
    assert figure["estimate"] == pytest.approx(D * (C1 - C2) / L, rel=1e-12)
    assert figure["standard_uncertainty"] == pytest.approx(math.hypot(c * u1, c * u2),
                                                           rel=1e-9)
    coefficients = block["sensitivity"]["flux_outer"]
    assert coefficients["inner_boundary.value"]["coefficient"] == pytest.approx(c, rel=1e-9)
    assert coefficients["outer_boundary.value"]["coefficient"] == pytest.approx(-c, rel=1e-9)
    # U = k u_c with k = 1.960 for 95 % (JCGM 100 Table G.1)
    assert figure["expanded_uncertainty"] == pytest.approx(1.96 * figure["standard_uncertainty"],
                                                           rel=1e-3)
    assert figure["curvature_significant"] is False
    assert block["warnings"] == []
    judged = block["requirements"]["FLUX"]
    assert judged["margin"] == pytest.approx(D * (C1 - C2) / L - 6e-6, rel=1e-9)
    assert set(judged) >= {"probability_met", "standard_error", "quantity", "low", "high"}
    assert record["verdict"] == "pass"
    assert {c["name"] for c in record["checks"]} >= {"uncertainty.subset",
                                                      "uncertainty.trial_model"}


def test_the_cost_estimate_charges_2k_plus_1_evaluations():
    """Two inputs of a closed-form case: five trials of the batched closed form and the three
    points checked in full; no Monte Carlo trials."""
    validated = validate_case(_sheet(inputs=[
        {"field": "inner_boundary.value", "distribution": "normal", "sd": "0.05 mol/m^3"},
        {"field": "layers[0].diffusivity", "distribution": "normal", "relative_sd": 0.1}]))
    estimate = estimate_cost(validated.problem, validated.design)
    assert estimate.propagation_evaluations == 5 and estimate.trials == 0
    assert estimate.propagation_work == pytest.approx(
        5 * estimate.trial_work + 3 * estimate.check_work)
    assert estimate.work == pytest.approx(estimate.check_work + estimate.propagation_work)


@pytest.mark.parametrize("r", [0.7, -0.7])
def test_correlation_changes_u_c_as_eq_13_says(r):
    """JCGM 100 §5.2.2, eq. 13: u_c² = c1² u1² + c2² u2² + 2 c1 c2 u1 u2 r; here c1 c2 < 0, so a
    positive r lowers u_c and a negative one raises it."""
    u1, u2 = 0.05, 0.02  # C2 ten sd above zero: its truncation is negligible
    inputs = [{"field": "inner_boundary.value", "distribution": "normal", "sd": f"{u1} mol/m^3"},
              {"field": "outer_boundary.value", "distribution": "normal", "sd": f"{u2} mol/m^3"}]
    record = check_case(_sheet(inputs=inputs, correlations=[
        {"fields": ["inner_boundary.value", "outer_boundary.value"], "coefficient": r}]))
    c = D / L
    expected = math.sqrt(c**2 * (u1**2 + u2**2) - 2 * c * c * u1 * u2 * r)
    found = record["uncertainty"]["quantities"]["flux_outer"]["standard_uncertainty"]
    assert found == pytest.approx(expected, rel=1e-9)
    assert found != pytest.approx(c * math.hypot(u1, u2), rel=1e-3)


def test_a_thickness_matches_the_hand_propagation_to_the_central_differences_order():
    """F = D ΔC / l: c_D = F/D, c_l = −F/l (JCGM 100 eq. 11a). D lognormal with the case's
    value its median: x_D = D √(1 + v²), u_D = v x_D; l uniform. The central difference of 1/l
    over ±u is −1/(l² − u²) exactly, so u_c agrees with the tangent's to (u_l/l)², and with the
    secant's to round-off."""
    v, half = 0.2, 6e-6
    record = check_case(_sheet(inputs=[
        {"field": "layers[0].diffusivity", "distribution": "lognormal", "relative_sd": v},
        {"field": "layers[0].thickness", "distribution": "uniform",
         "low": f"{L - half} m", "high": f"{L + half} m"}]))
    x_d = D * math.sqrt(1 + v * v)
    u_d, u_l = v * x_d, half / math.sqrt(3.0)
    flux = x_d * (C1 - C2) / L
    tangent = math.hypot(flux / x_d * u_d, flux / L * u_l)
    secant = math.hypot(flux / x_d * u_d, x_d * (C1 - C2) / (L * L - u_l * u_l) * u_l)
    found = record["uncertainty"]["quantities"]["flux_outer"]["standard_uncertainty"]
    assert found == pytest.approx(secant, rel=1e-9)
    assert found == pytest.approx(tangent, rel=2 * (u_l / L) ** 2)
    assert record["uncertainty"]["inputs"][0]["estimate"] == pytest.approx(x_d, rel=1e-12)


def _reacting_sheet(**uncertainty) -> dict:
    """First-order uptake k in a sheet sealed at its back, surface at Cs: the minimum is
    Cs / cosh φ, φ = l √(k/D) (Thiele 1939, Ind. Eng. Chem. 31, 916)."""
    block = {"method": "law_of_propagation"}
    block.update(uncertainty)
    return {
        "schema_version": 1, "title": "reacting sheet (test)", "geometry": "slab",
        "inner": "0 m",
        "layers": [{"name": "tissue", "thickness": "500 um", "diffusivity": "1e-9 m^2/s",
                    "reaction": {"kind": "first_order", "rate_constant": "0.02 1/s"}}],
        "inner_boundary": {"kind": "symmetry"},
        "outer_boundary": {"kind": "concentration", "value": "0.2 mol/m^3"},
        "regime": {"kind": "steady"},
        "requirements": [{"id": "MIN", "quantity": "concentration_min",
                          "at_least": "1e-4 mol/m^3"}],
        "uncertainty": block,
    }


def test_a_strongly_nonlinear_figure_raises_the_curvature_warning():
    """φ ≈ 2.2 and k uncertain by ±60 % (uniform): Cs / cosh φ bends strongly over ±u, the
    second-order term moves u_c beyond its stated digits; the warning reaches the record's
    warnings. The same case with the linear surface value uncertain raises none."""
    bent = check_case(_reacting_sheet(inputs=[
        {"field": "layers[0].reaction.rate_constant", "distribution": "uniform",
         "low": "0.008 1/s", "high": "0.032 1/s"}]))
    figure = bent["uncertainty"]["quantities"]["concentration_min"]
    assert figure["curvature_significant"] is True
    assert figure["second_order_change"] > figure["tolerance"]
    assert any("second-order" in w for w in bent["uncertainty"]["warnings"])
    assert any(w.startswith("uncertainty:") and "second-order" in w for w in bent["warnings"])
    straight = check_case(_reacting_sheet(inputs=[
        {"field": "outer_boundary.value", "distribution": "normal", "sd": "0.02 mol/m^3"}]))
    assert straight["uncertainty"]["quantities"]["concentration_min"][
        "curvature_significant"] is False
    assert straight["uncertainty"]["warnings"] == []
    # the linear case by hand: C_min = Cs / cosh φ, so u_c = u(Cs) / cosh φ
    phi = 500e-6 * math.sqrt(0.02 / 1e-9)
    assert straight["uncertainty"]["quantities"]["concentration_min"][
        "standard_uncertainty"] == pytest.approx(0.02 / math.cosh(phi), rel=1e-6)


def test_the_methods_field_is_checked_and_names_what_is_wrong():
    one = [{"field": "layers[0].diffusivity", "distribution": "normal", "relative_sd": 0.1}]
    errors = _errors(_sheet(inputs=one, method="gum"))
    assert "uncertainty.method" in errors and "law_of_propagation" in errors[
        "uncertainty.method"]
    assert "uncertainty.max_trials" in _errors(_sheet(inputs=one, max_trials=50_000))
    assert "uncertainty.seed" in _errors(_sheet(inputs=one, seed=1))
    wide = [{"field": "layers[0].diffusivity", "distribution": "lognormal", "relative_sd": 1.5}]
    assert "monte_carlo" in _errors(_sheet(inputs=wide))["uncertainty.inputs[0]"]
    validate_case(_sheet(inputs=one))  # the same block with the method right is accepted
    block = validate_case(_sheet(inputs=one)).normalised["uncertainty"]
    assert block["method"] == "law_of_propagation" and "max_trials" not in block


#: An invented drug-eluting coating loaded above solubility releasing into 4 mL of medium.
COATING = {
    "schema_version": 1, "title": "coating above solubility into a finite medium (test)",
    "geometry": "slab", "inner": "0 m", "area": "1 cm^2",
    "layers": [{"name": "coating", "thickness": "8 um", "diffusivity": "2e-15 m^2/s",
                "partition": 5.0, "loading": "100 mg/mL", "solubility": "4 mg/mL"}],
    "inner_boundary": {"kind": "symmetry"},
    "outer_boundary": {"kind": "compartment", "volume": "4 mL", "initial": "0 mg/mL"},
    "regime": {"kind": "transient", "duration": "21 d", "times": ["1 d", "7 d", "21 d"]},
    "requirements": [{"id": "WEEK", "quantity": "release_fraction", "at": "7 d",
                      "at_least": 0.3}],
}
COATING_INPUTS = [{"field": "layers[0].diffusivity", "distribution": "lognormal",
                   "relative_sd": 0.2}]


def test_a_monte_carlo_over_budget_is_told_of_the_law_of_propagation():
    """Each trial of a dispersed load releasing into a compartment is a full check: the Monte
    Carlo's 20,000 trials are refused, and the advice names uncertainty.method while its three
    evaluations fit; with a budget too small even for them it does not."""
    case = copy.deepcopy(COATING)
    case["uncertainty"] = {"inputs": COATING_INPUTS}
    advice = _errors(case)["uncertainty.max_trials"]
    assert 'uncertainty.method to "law_of_propagation"' in advice
    validated = validate_case(dict(case, uncertainty=dict(case["uncertainty"],
                                                          method="law_of_propagation")))
    estimate = estimate_cost(validated.problem, validated.design)
    assert estimate.propagation_evaluations == 3
    assert estimate.propagation_work == pytest.approx(3 * estimate.check_work)
    assert estimate.trials == 0 and estimate.monte_carlo_work == 0.0
    tight = DEFAULT_BUDGETS.scaled(2.5 * estimate.check_work / DEFAULT_BUDGETS.work)
    # the check fits, its three evaluations (3 more checks' work) do not
    assert over_budget(estimate, tight, "transient")[0].path == "uncertainty.inputs"
    assert "uncertainty.method" not in _errors(case, tight)["uncertainty.max_trials"]
    roomy = DEFAULT_BUDGETS.scaled(4.5 * estimate.check_work / DEFAULT_BUDGETS.work)
    assert not over_budget(estimate, roomy, "transient")
    assert "uncertainty.method" in _errors(case, roomy)["uncertainty.max_trials"]


def test_the_law_of_propagation_runs_on_a_dispersed_load_into_a_compartment():
    """Three full checks (the centre, D ± u): every point's checks pass; the figures are the
    full check's own (no trial model to compare)."""
    case = copy.deepcopy(COATING)
    case["uncertainty"] = {"inputs": COATING_INPUTS, "method": "law_of_propagation"}
    record = check_case(case)
    block = record["uncertainty"]
    assert record["verdict"] == "pass"
    assert block["verification"]["trials_checked"] == 3
    assert block["verification"]["all_passed"] is True
    assert "the full check at every point" in block["method"]
    figure = block["quantities"]["release_fraction@604800s"]
    assert 0.0 < figure["standard_uncertainty"] < figure["estimate"]
    # the centre is the full check at the lognormal's mean, not the case's median
    assert block["inputs"][0]["estimate"] > 2e-15
    assert block["requirements"]["WEEK"]["decided"] in ("met", "not_met",
                                                        "within_expanded_uncertainty")


FIBRE = {
    "schema_version": 1, "title": "invented hollow fibre (test data)", "geometry": "cylinder",
    "inner": "100 um", "length": "5 cm",
    "layers": [{"name": "cells", "thickness": "150 um", "diffusivity": "1.5e-9 m^2/s",
                "reaction": {"kind": "michaelis_menten", "vmax": "2e-3 mol/m^3/s",
                             "km": "5e-3 mol/m^3"}}],
    "inner_boundary": {"kind": "flow", "flow_rate": "0.1 mL/min", "inlet": "0.2 mol/m^3",
                       "diffusivity": "2e-9 m^2/s"},
    "outer_boundary": {"kind": "symmetry"},
    "regime": {"kind": "steady"},
    "uncertainty": {"inputs": [{"field": "layers[0].reaction.vmax", "distribution": "normal",
                                "relative_sd": 0.1}],
                    "method": "law_of_propagation"},
}


def test_the_law_of_propagation_runs_on_a_lumen_with_flow():
    """A lumen with flow: each point a full check, all passing; the minimum falls as vmax
    rises (a negative coefficient), and u_c is resolved far above the numerical uncertainty."""
    record = check_case(copy.deepcopy(FIBRE))
    block = record["uncertainty"]
    assert record["verdict"] == "pass"
    assert block["verification"]["all_passed"] is True
    assert block["verification"]["numerical_small_against_spread"] is True
    coefficient = block["sensitivity"]["concentration_min"]["layers[0].reaction.vmax"]
    assert coefficient["coefficient"] < 0.0
