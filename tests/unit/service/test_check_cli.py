"""The engine entry point and ``fluxproof check``: verdicts, exit codes, errors with paths."""

from __future__ import annotations

import json
import math
from pathlib import Path

import jsonschema
import pytest
from click.testing import CliRunner

from schemas import CaseError
from service.cli import main
from worker.engine import check_case

DEMO = Path(__file__).parents[3] / "service" / "demo_cases"
RESULT_SCHEMA = json.loads(
    (Path(__file__).parents[3] / "schemas" / "json" / "result-v1.schema.json").read_text())


def _case(**overrides) -> dict:
    case = {
        "schema_version": 1,
        "title": "unit scenario: sealed-centre slab with first-order uptake",
        "geometry": "slab",
        "inner": "0 m",
        "layers": [{"name": "gel", "thickness": "200 um", "diffusivity": "1e-9 m^2/s",
                    "partition": 1.0,
                    "reaction": {"kind": "first_order", "rate_constant": "0.05 1/s"}}],
        "inner_boundary": {"kind": "symmetry"},
        "outer_boundary": {"kind": "concentration", "value": "1 mol/m^3"},
        "regime": {"kind": "steady"},
    }
    case.update(overrides)
    return case


def test_record_has_every_part_and_passes():
    record = check_case(_case())
    assert record["status"] == "succeeded"
    assert record["verdict"] == "pass", [c for c in record["checks"] if not c["passed"]]
    names = {c["name"] for c in record["checks"]}
    assert {"cross_check.flux_outer", "cross_check.profile", "mass_balance", "boundary_residual",
            "gci.flux_outer", "non_negativity"} <= names
    assert {m["role"] for m in record["methods"]} >= {"primary", "independent"}
    assert record["provenance"]["case_sha256"] == record["case_sha256"]
    assert "design verification" in record["caution"]


def test_a_tolerance_override_can_fail_the_verdict():
    # A limit far below round-off cannot be met: the check must fail and the verdict with it.
    record = check_case(_case(tolerances={"cross_check.profile": 1e-300}))
    failing = [c["name"] for c in record["checks"] if not c["passed"]]
    assert failing == ["cross_check.profile"]
    assert record["verdict"] == "fail"


def test_invalid_case_raises_case_error_with_paths():
    bad = _case()
    bad["layers"][0]["diffusivity"] = "40 um"
    with pytest.raises(CaseError) as info:
        check_case(bad)
    assert any(e["path"] == "layers[0].diffusivity" for e in info.value.errors)


@pytest.mark.parametrize("case_file", sorted(DEMO.glob("*.json")), ids=lambda p: p.stem)
def test_demo_cases_check_and_pass(case_file):
    record = check_case(json.loads(case_file.read_text()))
    assert record["status"] == "succeeded", record["error"]
    assert record["verdict"] == "pass", [c for c in record["checks"] if not c["passed"]]
    jsonschema.Draft202012Validator(RESULT_SCHEMA).validate(record)


def test_cli_exit_codes_and_formats(tmp_path):
    runner = CliRunner()
    good = tmp_path / "good.json"
    good.write_text(json.dumps(_case()))
    result = runner.invoke(main, ["check", str(good)])
    assert result.exit_code == 0, result.output
    assert "VERDICT: PASS" in result.output and "CAUTION" in result.output

    result = runner.invoke(main, ["check", str(good), "--format", "json"])
    assert result.exit_code == 0
    document = json.loads(result.output)
    assert document["verdict"] == "pass" and "run_id" not in document

    failing = tmp_path / "failing.json"
    failing.write_text(json.dumps(_case(tolerances={"cross_check.profile": 1e-300})))
    assert runner.invoke(main, ["check", str(failing)]).exit_code == 1


def test_cli_invalid_input_exit_2_without_traceback(tmp_path):
    runner = CliRunner()
    bad = _case()
    bad["layers"][0]["thickness"] = "-1 um"
    bad["geometry"] = "torus"
    path = tmp_path / "bad.json"
    path.write_text(json.dumps(bad))
    result = runner.invoke(main, ["check", str(path)])
    assert result.exit_code == 2
    assert "geometry" in result.output and "layers[0].thickness" in result.output
    assert "Traceback" not in result.output

    broken = tmp_path / "broken.json"
    broken.write_text('{"schema_version": 1, "title": NaN}')
    result = runner.invoke(main, ["check", str(broken)])
    assert result.exit_code == 2 and "Traceback" not in result.output

    result = runner.invoke(main, ["check", str(tmp_path / "missing.json")])
    assert result.exit_code == 2


def test_cli_prints_both_verdicts_and_the_requirements_with_readable_units(tmp_path):
    """A sealed-centre slab with first-order uptake has its minimum at the sealed face,
    C_s / cosh(phi), phi = L sqrt(k/D) (E.W. Thiele, Ind. Eng. Chem. 31 (1939) 916; J. Crank,
    The Mathematics of Diffusion, 2nd ed., 1975, §14.2): 0.4591 mol/m^3 here. One requirement
    above it is missed, one below it is met; the calculation's verdict stays pass."""
    c_min = 1.0 / math.cosh(200e-6 * math.sqrt(0.05 / 1e-9))
    assert f"{c_min:.4g}" == "0.4591"
    case = _case(requirements=[
        {"id": "OX-1", "quantity": "concentration_min", "layer": "gel",
         "at_least": "600 umol/L", "source": "design input OX-1"},
        {"id": "OX-2", "quantity": "concentration_min", "at_least": "0.3 mol/m^3"},
    ])
    path = tmp_path / "required.json"
    path.write_text(json.dumps(case))
    result = CliRunner().invoke(main, ["check", str(path)])
    assert result.exit_code == 0, result.output  # the calculation is verified
    text = result.output
    assert "[✓] Calculation verified: yes" in text
    assert "[✗] Design requirements met: NO — requirement not met (1 of 2 not met: OX-1)" in text
    assert "DESIGN REQUIREMENTS: NOT MET" in text and "CALCULATION VERDICT: PASS" in text
    head = text[:text.index("Inputs (as given")]
    assert head.index("OX-1 NOT MET") < head.index("OX-2 met")  # headline, missed first
    assert "concentration_min [gel] = 0.4591 mol/m^3 (459.1 µmol/L)" in head
    assert "required ≥ 0.6 mol/m^3 (600 µmol/L)" in head
    assert "source      design input OX-1" in text and "CAUTION:" in text

    case["requirements"][0]["at_least"] = "400 umol/L"  # now below the minimum: met
    path.write_text(json.dumps(case))
    met = CliRunner().invoke(main, ["check", str(path)]).output
    assert "[✓] Design requirements met: yes (all 2 requirement(s) met)" in met
    assert "NOT MET" not in met and "DESIGN REQUIREMENTS: MET" in met


def test_cli_without_requirements_says_none_are_stated(tmp_path):
    path = tmp_path / "plain.json"
    path.write_text(json.dumps(_case()))
    text = CliRunner().invoke(main, ["check", str(path)]).output
    assert "Design requirements met: no design requirements stated" in text
    assert "DESIGN REQUIREMENTS: NONE STATED" in text
