"""Design runs through ``check_case``: design limits against published closed forms, Monte Carlo
against a closed-form distribution, sweeps against the closed form at each value."""

from __future__ import annotations

import copy
import math

import pytest
from scipy import stats

from worker.engine import check_case

FACE = 0.2  # mol/m^3, the surface concentration of the limit cases


def _uptake_case(geometry: str, kind: str, size: str, reaction: dict) -> dict:
    return {
        "schema_version": 1, "title": f"{kind} {geometry}", "geometry": geometry,
        "inner": "0 m",
        "layers": [{"name": "tissue", "thickness": size, "diffusivity": "2e-9 m^2/s",
                    "reaction": reaction}],
        "inner_boundary": {"kind": "symmetry"},
        "outer_boundary": {"kind": "concentration", "value": f"{FACE} mol/m^3"},
        "regime": {"kind": "steady"},
    }


@pytest.mark.parametrize(("geometry", "n"), [("slab", 0), ("cylinder", 1), ("sphere", 2)])
def test_zero_order_limit_is_the_critical_size_to_a_threshold(geometry, n):
    """Zero-order uptake Q in a body of half-thickness (radius) R held at Cs on its surface:
    C(r) = Cs − Q (R² − r²) / (2 (n + 1) D) while the centre stays positive, so the centre
    reaches a threshold Ct at R = √(2 (n + 1) D (Cs − Ct) / Q) (Hill 1928, Proc. R. Soc. B
    104, 39; Crank 1975, *The Mathematics of Diffusion*, 2nd ed., §6.3 and eq. 6.46 with a
    constant sink). With Ct → 0 it is Hill's critical size."""
    rate, threshold, diffusivity = 0.02, 0.05, 2e-9
    case = _uptake_case(geometry, "zero", "100 um", {"kind": "zero_order",
                                                      "rate": f"{rate} mol/m^3/s"})
    case["requirements"] = [{"id": "MIN", "quantity": "concentration_min",
                             "at_least": f"{threshold} mol/m^3"}]
    case["design_limit"] = {"vary": "layers[0].thickness", "requirement": "MIN",
                            "range": ["10 um", "2 mm"]}
    record = check_case(case)
    expected = math.sqrt(2 * (n + 1) * diffusivity * (FACE - threshold) / rate)
    limit = record["design_limit"]
    assert limit["value"] == pytest.approx(expected, rel=1e-5)
    assert limit["met_side"] == "below"
    assert limit["verdict"] == "pass"
    # The full check at the limit finds the margin zero to the search's tolerance.
    assert abs(limit["check"]["margin"]) <= 1e-5 * threshold


def test_first_order_slab_limit_follows_the_thiele_closed_form():
    """First-order uptake k in a slab of thickness L sealed at its back, surface at Cs:
    C(0)/Cs = 1/cosh φ, φ = L √(k/D) (Thiele 1939, Ind. Eng. Chem. 31, 916; Aris 1975, *The
    Mathematical Theory of Diffusion and Reaction in Permeable Catalysts*, vol. 1, §3.2), so
    C(0) = Ct at L = √(D/k) arccosh(Cs/Ct)."""
    k, threshold, diffusivity = 0.05, 0.02, 2e-9
    case = _uptake_case("slab", "first", "100 um", {"kind": "first_order",
                                                     "rate_constant": f"{k} 1/s"})
    case["requirements"] = [{"id": "MIN", "quantity": "concentration_min",
                             "at_least": f"{threshold} mol/m^3"}]
    case["design_limit"] = {"vary": "layers[0].thickness", "requirement": "MIN",
                            "range": ["10 um", "5 mm"]}
    record = check_case(case)
    expected = math.sqrt(diffusivity / k) * math.acosh(FACE / threshold)
    assert record["design_limit"]["value"] == pytest.approx(expected, rel=1e-6)
    assert record["design_limit"]["met_side"] == "below"


def test_no_limit_in_range_is_a_result():
    case = _uptake_case("sphere", "zero", "100 um", {"kind": "zero_order",
                                                      "rate": "0.02 mol/m^3/s"})
    case["requirements"] = [{"id": "MIN", "quantity": "concentration_min",
                             "at_least": "0.05 mol/m^3"}]
    case["design_limit"] = {"vary": "layers[0].thickness", "requirement": "MIN",
                            "range": ["10 um", "50 um"]}
    limit = check_case(case)["design_limit"]
    assert limit["value"] is None
    assert "met" in limit["reason"]
    assert limit["verdict"] is None


MEMBRANE = {
    "schema_version": 1, "title": "membrane", "geometry": "slab", "inner": "0 m",
    "layers": [{"name": "membrane", "thickness": "100 um", "diffusivity": "1e-10 m^2/s",
                "partition": 0.5}],
    "inner_boundary": {"kind": "concentration", "value": "1 mol/m^3"},
    "outer_boundary": {"kind": "concentration", "value": "0 mol/m^3"},
    "regime": {"kind": "steady"},
}


def test_membrane_flux_with_a_lognormal_diffusivity_has_the_lognormal_distribution():
    """Steady flux through a membrane, J = D K C1 / L (Fick's first law; Crank 1975 §4.2), is
    linear in D: a lognormal D of median D0 and coefficient of variation v gives a lognormal J
    of median J0 = D0 K C1 / L and σ = √(ln(1 + v²)) (Johnson, Kotz & Balakrishnan 1994, ch.
    14): mean J0 exp(σ²/2), probabilistically symmetric 95 % interval J0 exp(∓1.96 σ),
    P(J ≥ b) = 1 − Φ(ln(b/J0)/σ). Compared within a few Monte Carlo standard errors."""
    case = copy.deepcopy(MEMBRANE)
    cv, d0 = 0.3, 1e-10
    j0 = d0 * 0.5 * 1.0 / 100e-6
    bound = 0.9 * j0
    case["requirements"] = [{"id": "FLUX", "quantity": "flux_outer",
                             "at_least": f"{bound} mol/m^2/s"}]
    case["uncertainty"] = {"inputs": [{"field": "layers[0].diffusivity",
                                       "distribution": "lognormal", "relative_sd": cv}],
                           "seed": 20261205, "max_trials": 200000}
    record = check_case(case)
    block = record["uncertainty"]
    sigma = math.sqrt(math.log(1 + cv**2))
    figure = block["quantities"]["flux_outer"]
    n = block["trials"]
    mean = j0 * math.exp(sigma**2 / 2)
    sd = mean * cv
    assert figure["mean"] == pytest.approx(mean, abs=4 * sd / math.sqrt(n))
    assert figure["standard_uncertainty"] == pytest.approx(sd, rel=0.02)
    low, high = figure["interval"]
    assert low == pytest.approx(j0 * math.exp(-1.959964 * sigma), rel=0.01)
    assert high == pytest.approx(j0 * math.exp(1.959964 * sigma), rel=0.01)
    p = 1 - stats.norm.cdf(math.log(bound / j0) / sigma)
    met = block["requirements"]["FLUX"]
    assert met["probability_met"] == pytest.approx(p, abs=4 * met["standard_error"])
    assert met["standard_error"] == pytest.approx(math.sqrt(p * (1 - p) / n), rel=0.05)
    assert block["converged"] and block["seed"] == 20261205
    # Flux is proportional to D: elasticity 1, the whole variance from D.
    indices = block["sensitivity"]["flux_outer"]["layers[0].diffusivity"]
    assert indices["elasticity"] == pytest.approx(1.0, rel=1e-6)
    assert indices["first_index"] == pytest.approx(1.0, abs=0.02)
    assert indices["total_index"] == pytest.approx(1.0, abs=0.02)
    verification = block["verification"]
    assert verification["trials_checked"] >= 3 and verification["all_passed"]
    assert verification["numerical_small_against_spread"]


def test_same_seed_gives_the_same_uncertainty_block():
    case = copy.deepcopy(MEMBRANE)
    case["uncertainty"] = {"inputs": [{"field": "layers[0].thickness", "distribution": "uniform",
                                       "low": "90 um", "high": "110 um"}],
                           "seed": 7, "max_trials": 40000}
    first, second = check_case(case)["uncertainty"], check_case(case)["uncertainty"]
    assert first == second
    case["uncertainty"]["seed"] = 8
    assert check_case(case)["uncertainty"]["quantities"] != first["quantities"]


def test_a_sweep_checks_each_value_in_full():
    """J = D K C1 / L at each thickness (Crank 1975 §4.2)."""
    case = copy.deepcopy(MEMBRANE)
    case["requirements"] = [{"id": "FLUX", "quantity": "flux_outer",
                             "at_least": "4e-7 mol/m^2/s"}]
    case["sweep"] = {"vary": "layers[0].thickness", "values": ["50 um", "100 um", "150 um"]}
    sweep = check_case(case)["sweep"]
    fluxes = sweep["quantities"]["flux_outer"]
    for thickness, flux in zip((50e-6, 100e-6, 150e-6), fluxes, strict=True):
        assert flux == pytest.approx(1e-10 * 0.5 / thickness, rel=1e-9)
    assert sweep["requirements"]["FLUX"] == ["met", "met", "not_met"]
    assert sweep["verdicts"] == ["pass", "pass", "pass"]
    assert sweep["values"] == pytest.approx([50e-6, 100e-6, 150e-6])
