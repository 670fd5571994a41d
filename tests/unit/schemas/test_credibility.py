"""The credibility summary (``schemas.credibility``) of real check records.

The records come from ``check_case`` on small cases built here (invented scenarios); every
figure the summary states is read back from the record's own checks and blocks, never invented.
Each factor is shown evidenced when the record holds its evidence, "not assessed" when that
evidence is removed, and "not supported" when a part of it is made to fail (both directions).
The calibration block is a stand-in in the shape of CONTRACT15 (the engine's fit is wired in by
the lead); the validation block is built by ``worker.engine.design.validation.compare`` on the
record's own release series.
"""

from __future__ import annotations

import copy
import re

import pytest

from schemas.checking import check_case
from schemas.credibility import (
    EVIDENCED,
    FACTORS,
    NOT_ASSESSED,
    NOT_SUPPORTED,
    STANDARD,
    CredibilitySchema,
    credibility_block,
)
from worker.engine.design.validation import compare

RELEASE_CASE = {  # invented: a loaded film releasing into a sink
    "schema_version": 1, "title": "Credibility test (invented): film release",
    "geometry": "slab", "inner": "0 m", "area": "1 cm^2",
    "layers": [{"name": "film", "thickness": "20 um", "diffusivity": "1e-14 m^2/s",
                "partition": 1.0, "initial": "10 mg/mL"}],
    "inner_boundary": {"kind": "symmetry"},
    "outer_boundary": {"kind": "concentration", "value": "0 mg/mL"},
    "regime": {"kind": "transient", "duration": "12 h",
               "times": ["1 h", "3 h", "6 h", "12 h"]},
}

STEADY_CASE = {  # invented: a reacting bead fed through a film
    "schema_version": 1, "title": "Credibility test (invented): bead with uptake",
    "geometry": "sphere", "inner": "0 m",
    "layers": [{"name": "bead", "thickness": "250 um", "diffusivity": "9e-10 m^2/s",
                "partition": 1.0,
                "reaction": {"kind": "first_order", "rate_constant": "2e-3 1/s"}}],
    "inner_boundary": {"kind": "symmetry"},
    "outer_boundary": {"kind": "mass_transfer", "coefficient": "1e-5 m/s", "bulk": "5 mol/m^3"},
    "regime": {"kind": "steady"},
}


@pytest.fixture(scope="module")
def release_record():
    record = check_case(copy.deepcopy(RELEASE_CASE))
    assert record["verdict"] == "pass"
    return record


@pytest.fixture(scope="module")
def steady_record():
    case = copy.deepcopy(STEADY_CASE)
    case["uncertainty"] = {"inputs": [{"field": "layers[0].diffusivity",
                                       "distribution": "lognormal", "relative_sd": 0.2}],
                           "seed": 7}
    record = check_case(case)
    assert record["verdict"] == "pass"
    return record


def factor(record, name):
    block = credibility_block(record)
    CredibilitySchema().load(block)  # the shape, and the statuses, are the declared ones
    return next(f for f in block["factors"] if f["factor"] == name)


def without_checks(record, match):
    out = copy.deepcopy(record)
    out["checks"] = [c for c in out["checks"] if not match(c["name"])]
    return out


def failing(record, name):
    out = copy.deepcopy(record)
    hit = [c for c in out["checks"] if c["name"] == name]
    assert hit, name
    hit[0]["passed"] = False
    return out


def check(record, name):
    return next(c for c in record["checks"] if c["name"] == name)


def test_block_shape_and_order(release_record):
    block = credibility_block(release_record)
    assert block["standard"] == STANDARD == "ASME V&V 40-2018"
    assert [f["factor"] for f in block["factors"]] == list(FACTORS)
    assert "context of use" in block["scope"]


def test_software_quality_assurance(release_record):
    shown = factor(release_record, "software quality assurance")
    provenance = release_record["provenance"]
    assert shown["status"] == EVIDENCED
    for key in ("engine_version", "numpy", "scipy", "pint"):
        assert str(provenance[key]) in shown["evidence"]
    assert release_record["case_sha256"] in shown["evidence"]
    assert "fluxproof qualify" in shown["evidence"]
    bare = copy.deepcopy(release_record)
    bare["provenance"].pop("engine_version")
    gone = factor(bare, "software quality assurance")
    assert gone["status"] == NOT_ASSESSED and "fluxproof qualify" in gone["evidence"]


def test_code_verification(release_record):
    shown = factor(release_record, "numerical code verification")
    cross = [c for c in release_record["checks"] if c["name"].startswith("cross_check.")
             or c["name"] == "steady_limit"]
    assert shown["status"] == EVIDENCED
    assert shown["evidence"].startswith(f"{len(cross)} comparisons")
    assert "service/qualification/cases" in shown["evidence"]
    assert "tests/reference/test_fv_manufactured.py" in shown["evidence"]
    worst = max(cross, key=lambda c: c["value"] / c["limit"])
    assert f"{worst['value'] / worst['limit']:.2g} of its limit ({worst['name']})" \
        in shown["evidence"]
    removed = without_checks(release_record, lambda n: n.startswith("cross_check.")
                             or n == "steady_limit")
    assert factor(removed, "numerical code verification")["status"] == NOT_ASSESSED
    broken = factor(failing(release_record, worst["name"]), "numerical code verification")
    assert broken["status"] == NOT_SUPPORTED and worst["name"] in broken["evidence"]


def test_qualification_and_manufactured_suites_named_exist():
    """The suites the evidence names are where it says."""
    from pathlib import Path
    root = Path(__file__).resolve().parents[3]
    assert list((root / "service" / "qualification" / "cases").glob("oq-*.json"))
    assert (root / "tests" / "reference" / "test_fv_manufactured.py").is_file()


def test_discretization_error_transient(release_record):
    shown = factor(release_record, "discretization error")
    space = check(release_record, "convergence.space")
    order = re.search(r"observed order (\S+?),", space["detail"]).group(1)
    assert shown["status"] == EVIDENCED
    assert f"at most {space['value']:.2g} of the scale" in shown["evidence"]
    assert f"observed order {order}" in shown["evidence"]
    removed = without_checks(release_record, lambda n: n == "convergence.space")
    assert factor(removed, "discretization error")["status"] == NOT_ASSESSED
    assert factor(failing(release_record, "convergence.space"),
                  "discretization error")["status"] == NOT_SUPPORTED


def test_discretization_error_steady(steady_record):
    shown = factor(steady_record, "discretization error")
    gci = [c for c in steady_record["checks"] if c["name"].startswith("gci.")]
    assert gci and shown["status"] == EVIDENCED
    assert f"at most {max(c['value'] for c in gci):.2g}" in shown["evidence"]
    assert "observed order 2" in shown["evidence"]  # the apparent order each gci check records
    assert all("observed order 2" in c["detail"] for c in gci)
    removed = without_checks(steady_record, lambda n: n.startswith("gci."))
    assert factor(removed, "discretization error")["status"] == NOT_ASSESSED


def test_solver_error(release_record, steady_record):
    shown = factor(release_record, "numerical solver error")
    study = check(release_record, "convergence.time")
    assert shown["status"] == EVIDENCED
    assert f"at most {study['value']:.2g} of their scale" in shown["evidence"]
    assert "tightened from" in shown["evidence"]
    removed = without_checks(release_record, lambda n: n == "convergence.time")
    assert factor(removed, "numerical solver error")["status"] == NOT_ASSESSED
    assert factor(failing(release_record, "convergence.time"),
                  "numerical solver error")["status"] == NOT_SUPPORTED
    steady = factor(steady_record, "numerical solver error")  # no tolerance study in a steady run
    assert steady["status"] == NOT_ASSESSED
    assert "No solver-tolerance study" in steady["evidence"]


def test_use_error(release_record):
    shown = factor(release_record, "use error")
    fields = re.match(r"(\d+) fields", check(release_record, "inputs.interpretation")["detail"])
    assert shown["status"] == EVIDENCED
    assert f"{fields.group(1)} fields" in shown["evidence"]
    assert "sign-off" in shown["evidence"]
    removed = without_checks(release_record, lambda n: n.startswith("inputs."))
    gone = factor(removed, "use error")
    assert gone["status"] == NOT_ASSESSED and "sign-off" in gone["evidence"]
    assert factor(failing(release_record, "inputs.interpretation"),
                  "use error")["status"] == NOT_SUPPORTED


def test_model_inputs_uncertainty(steady_record, release_record):
    shown = factor(steady_record, "model inputs")
    assert shown["status"] == EVIDENCED
    assert f"over {steady_record['uncertainty']['trials']} trials" in shown["evidence"]
    assert "layers[0].diffusivity" in shown["evidence"]
    has_indices = bool(steady_record["uncertainty"].get("sensitivity"))
    assert ("with sensitivity indices" in shown["evidence"]) is has_indices
    flipped = copy.deepcopy(steady_record)
    flipped["uncertainty"]["sensitivity"] = None if has_indices else {"x": {}}
    assert ("with sensitivity indices" in factor(flipped, "model inputs")["evidence"]) \
        is not has_indices
    assert factor(release_record, "model inputs")["status"] == NOT_ASSESSED
    removed = copy.deepcopy(steady_record)
    removed.pop("uncertainty")
    assert factor(removed, "model inputs")["status"] == NOT_ASSESSED
    assert factor(failing(steady_record, "uncertainty.subset"),
                  "model inputs")["status"] == NOT_SUPPORTED
    unconverged = copy.deepcopy(steady_record)
    unconverged["uncertainty"]["converged"] = False
    assert factor(unconverged, "model inputs")["status"] == NOT_SUPPORTED


def _calibration_stand_in(record):
    """A calibration block in CONTRACT15's shape whose estimate is the case's own diffusivity
    (what a fit to the record's own series would return)."""
    diffusivity = record["inputs"]["layers"][0]["diffusivity"]["value"]
    return {"parameters": [{"field": "layers[0].diffusivity", "estimate": diffusivity,
                            "unit": "m^2/s", "standard_error": 0.05 * diffusivity,
                            "interval": [0.9 * diffusivity, 1.1 * diffusivity],
                            "interval_method": "profile likelihood", "scale": "log",
                            "bounds": [1e-16, 1e-12], "start": diffusivity}],
            "chi_square": 3.0, "degrees_of_freedom": 3, "reduced_chi_square": 1.0,
            "residuals": [], "warnings": [], "converged": True, "evaluations": 12,
            "method": "weighted least squares", "sets": ["REL-1"], "points": 4,
            "fitted_inputs": ["layers[0].diffusivity"]}


def test_model_inputs_calibration(release_record):
    record = copy.deepcopy(release_record)
    record["calibration"] = _calibration_stand_in(record)
    shown = factor(record, "model inputs")
    diffusivity = record["calibration"]["parameters"][0]["estimate"]
    assert shown["status"] == EVIDENCED
    assert f"layers[0].diffusivity = {diffusivity:.3g}" in shown["evidence"]
    assert "4 measured points (REL-1)" in shown["evidence"]
    record["calibration"]["converged"] = False
    assert factor(record, "model inputs")["status"] == NOT_SUPPORTED
    record["calibration"]["converged"] = True
    record["checks"].append({"name": "calibration.trial_model", "value": None, "limit": 1.0,
                             "passed": False, "detail": "injected failure"})
    assert factor(record, "model inputs")["status"] == NOT_SUPPORTED


def _validation(record, shift):
    """The record's release fraction compared with itself shifted by ``shift`` (u_D 0.01)."""
    series = record["series"]
    simulated = series["release_fraction"]["values"]
    result = compare(simulated, [s + shift for s in simulated], 1e-4, 0.005, 0.01)
    return {"coverage_factor": 2.0, "u_input_method": "test", "u_num_method": "test",
            "sets": [result.as_dict("REL-V", "release_fraction", "1",
                                    series["time"]["values"])],
            "agrees": result.agrees}


def test_output_comparison(release_record):
    assert factor(release_record, "output comparison")["status"] == NOT_ASSESSED
    within, beyond = copy.deepcopy(release_record), copy.deepcopy(release_record)
    within["validation"] = _validation(within, 0.01)      # |E| = 0.01 < 2·u_val ≈ 0.0224
    beyond["validation"] = _validation(beyond, -0.03)     # |E| = 0.03 > 2·u_val
    points = len(release_record["series"]["time"]["values"])
    shown = factor(within, "output comparison")
    assert shown["status"] == EVIDENCED
    assert f"{points} measured points in 1 validation set(s) (REL-V)" in shown["evidence"]
    assert "0 outside E ± 2·u_val" in shown["evidence"]
    flagged = factor(beyond, "output comparison")
    assert flagged["status"] == NOT_SUPPORTED
    assert f"{points} outside E ± 2·u_val" in flagged["evidence"]
    no_input = copy.deepcopy(within)
    no_input["validation"]["sets"][0]["u_input_assessed"] = False
    assert "input uncertainty not assessed for REL-V" in \
        factor(no_input, "output comparison")["evidence"]
    emptied = copy.deepcopy(within)
    emptied["validation"]["sets"] = []
    assert factor(emptied, "output comparison")["status"] == NOT_ASSESSED


def test_failed_record_is_summarised():
    """A record the engine could not solve holds provenance only."""
    record = {"status": "failed", "checks": [], "provenance": {"engine_version": "0.1.0"}}
    statuses = {f["factor"]: f["status"] for f in credibility_block(record)["factors"]}
    assert statuses.pop("software quality assurance") == EVIDENCED
    assert set(statuses.values()) == {NOT_ASSESSED}


def test_a_lumen_records_grid_studies_in_both_directions_count():
    """A flow case refines across the lumen and along it (``convergence.space_r``,
    ``convergence.space_z``): both are the record's discretization evidence; without them the
    factor is not assessed."""
    from tests.unit.schemas.test_flow_case import FIBRE

    record = check_case(copy.deepcopy(FIBRE))
    factor = {f["factor"]: f for f in credibility_block(record)["factors"]}
    found = factor["discretization error"]
    assert found["status"] == "evidenced", found
    assert "convergence.space_r" in found["evidence"]
    assert "convergence.space_z" in found["evidence"]
    stripped = copy.deepcopy(record)
    stripped["checks"] = [c for c in stripped["checks"]
                          if not c["name"].startswith("convergence.space")]
    factor = {f["factor"]: f for f in credibility_block(stripped)["factors"]}
    assert factor["discretization error"]["status"] == "not assessed"
