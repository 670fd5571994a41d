"""The exported JSON Schema files: in sync with the marshmallow schemas, valid draft 2020-12,
and in agreement with ``validate_case`` on the demo cases and on a set of bad documents.

The fixture documents are invented inputs; the reference for "valid JSON Schema" is the
``jsonschema`` library's Draft 2020-12 metaschema check.
"""

from __future__ import annotations

import copy
import json
from pathlib import Path

import pytest
from jsonschema import Draft202012Validator
from marshmallow import Schema, ValidationError, fields

from schemas import CaseError, export, validate_case
from schemas.case import WholeMatch
from schemas.json_schema import JsonSchemaConverter
from schemas.result import validate_result

DEMO_CASES = sorted((Path(__file__).parents[3] / "service" / "demo_cases").glob("*.json"))

#: Invented: a solid sphere with first-order uptake, values in object form.
SPHERE_STEADY = {
    "schema_version": 1,
    "title": "Fixture: solid sphere with first-order uptake",
    "geometry": "sphere",
    "inner": "0 m",
    "layers": [
        {
            "thickness": "1 mm",
            "diffusivity": {"value": 1e-9, "unit": "m^2/s"},
            "reaction": {"kind": "first_order", "rate_constant": "0.01 1/s"},
        }
    ],
    "inner_boundary": {"kind": "symmetry"},
    "outer_boundary": {"kind": "concentration", "value": {"value": 0.1, "unit": "mol/m^3"}},
    "regime": {"kind": "steady"},
    "tolerances": {"cross_check.flux_outer": 1e-5},
}

#: Invented: a slab releasing into a film, transient.
SLAB_TRANSIENT = {
    "schema_version": 1,
    "title": "Fixture: slab releasing through a film",
    "geometry": "slab",
    "inner": 0,
    "layers": [{"thickness": "0.5 mm", "diffusivity": "3e-11 m^2/s", "initial": "5 mg/mL"}],
    "inner_boundary": {"kind": "symmetry"},
    "outer_boundary": {"kind": "mass_transfer", "coefficient": "1e-5 m/s", "bulk": "0 mg/mL"},
    "regime": {"kind": "transient", "duration": "10 d", "times": ["1 h", "1 d", "10 d"]},
    "probes": ["0.25 mm"],
}

FIXTURES = {"sphere_steady": SPHERE_STEADY, "slab_transient": SLAB_TRANSIENT}


def _load(path: Path) -> dict:
    with path.open(encoding="utf-8") as handle:
        return json.load(handle)


@pytest.fixture(scope="module")
def case_validator() -> Draft202012Validator:
    return Draft202012Validator(_load(export.JSON_DIR / "case-v1.schema.json"))


@pytest.fixture(scope="module")
def result_validator() -> Draft202012Validator:
    return Draft202012Validator(_load(export.JSON_DIR / "result-v1.schema.json"))


def test_files_are_in_sync_with_the_generator():
    assert export.stale_files() == [], "run: python -m schemas.export"


def test_check_mode_detects_a_stale_file(tmp_path, monkeypatch, capsys):
    monkeypatch.setattr(export, "JSON_DIR", tmp_path)
    assert export.main(["--check"]) == 1  # nothing written yet
    assert export.main([]) == 0
    assert export.main(["--check"]) == 0
    target = tmp_path / "case-v1.schema.json"
    target.write_text(target.read_text(encoding="utf-8").replace('"slab"', '"slabs"'),
                      encoding="utf-8")
    assert export.main(["--check"]) == 1
    assert "out of date" in capsys.readouterr().err
    assert not list(tmp_path.glob("*.tmp"))


@pytest.mark.parametrize("name", ["case-v1.schema.json", "result-v1.schema.json"])
def test_files_are_valid_draft_2020_12_with_header(name):
    document = _load(export.JSON_DIR / name)
    Draft202012Validator.check_schema(document)
    assert document["$schema"] == "https://json-schema.org/draft/2020-12/schema"
    for key in ("$id", "title", "description"):
        assert document[key]


def test_functions_return_what_the_files_hold():
    assert export.case_json_schema() == _load(export.JSON_DIR / "case-v1.schema.json")
    assert export.result_json_schema() == _load(export.JSON_DIR / "result-v1.schema.json")


def _case_documents():
    documents = [pytest.param(_load(p), id=p.name) for p in DEMO_CASES]
    documents += [pytest.param(doc, id=name) for name, doc in FIXTURES.items()]
    return documents


def test_there_are_demo_cases():
    assert DEMO_CASES, "service/demo_cases/*.json is empty"


@pytest.mark.parametrize("document", _case_documents())
def test_case_documents_validate_both_ways(document, case_validator):
    assert list(case_validator.iter_errors(document)) == []
    validated = validate_case(document)
    assert list(case_validator.iter_errors(validated.normalised)) == []


def _bad(change):
    doc = copy.deepcopy(SPHERE_STEADY)
    change(doc)
    return doc


BAD_DOCUMENTS = {
    "unknown top-level key": lambda d: d.update(colour="blue"),
    "missing title": lambda d: d.pop("title"),
    "blank title": lambda d: d.update(title="   "),
    "schema_version 2": lambda d: d.update(schema_version=2),
    "schema_version true": lambda d: d.update(schema_version=True),
    "geometry cube": lambda d: d.update(geometry="cube"),
    "no layers": lambda d: d.update(layers=[]),
    "quantity without unit": lambda d: d["layers"][0].update(thickness="1"),
    "quantity as bare number": lambda d: d["layers"][0].update(thickness=0.001),
    "quantity object without unit": lambda d: d["layers"][0].update(thickness={"value": 1}),
    "quantity object extra key": lambda d: d["layers"][0].update(
        thickness={"value": 1, "unit": "mm", "note": "x"}),
    "negative thickness, object form": lambda d: d["layers"][0].update(
        thickness={"value": -1, "unit": "mm"}),
    "zero diffusivity, object form": lambda d: d["layers"][0].update(
        diffusivity={"value": 0, "unit": "m^2/s"}),
    "partition true": lambda d: d["layers"][0].update(partition=True),
    "partition zero": lambda d: d["layers"][0].update(partition=0),
    "unknown reaction": lambda d: d["layers"][0].update(reaction={"kind": "second_order"}),
    "flux boundary with partition": lambda d: d.update(
        outer_boundary={"kind": "flux", "value": "0 mol/m^2/s", "partition": 1.0}),
    "steady regime with times": lambda d: d.update(regime={"kind": "steady", "times": ["1 s"]}),
    "bad tag": lambda d: d.update(tags=["has space"]),
    "unknown tolerance": lambda d: d.update(tolerances={"tightness": 1e-3}),
    "negative tolerance": lambda d: d.update(tolerances={"gci": -1}),
}


@pytest.mark.parametrize("change", BAD_DOCUMENTS.values(), ids=BAD_DOCUMENTS.keys())
def test_bad_documents_are_refused_both_ways(change, case_validator):
    doc = _bad(change)
    assert list(case_validator.iter_errors(doc)), "JSON Schema accepted it"
    with pytest.raises(CaseError):
        validate_case(doc)


def test_semantic_rules_are_left_to_validate_case(case_validator):
    # Dimensions are beyond JSON Schema: it accepts a length where a diffusivity belongs.
    doc = _bad(lambda d: d["layers"][0].update(diffusivity="40 um"))
    assert list(case_validator.iter_errors(doc)) == []
    with pytest.raises(CaseError):
        validate_case(doc)


# --- result document --------------------------------------------------------------------------

_SHA = "0" * 63 + "a"

#: A made-up record in the documented shape (the figures are placeholders, not results).
RESULT = {
    "run_id": None,
    "case_id": None,
    "case_sha256": _SHA,
    "status": "succeeded",
    "verdict": "pass",
    "error": None,
    "quantities": {
        "flux_outer": {"value": -1.0e-9, "unit": "mol/(m^2*s)"},
        "thiele_modulus": {"value": [None, 0.5], "unit": "1"},
        "depletion_front": {"value": None, "unit": "m", "note": "solvers may add keys"},
    },
    "series": {
        "profile": {"position": [0.0, 1.0e-3], "concentration": [0.1, 0.05], "layer": [0, 0],
                    "units": {"position": "m", "concentration": "mol/m^3"}},
        "probes": {"position": [5e-4], "concentration": [[0.0], [0.07]],
                   "units": {"position": "m", "concentration": "mol/m^3"}},
        "time": {"values": [1.0, 2.0], "unit": "s"},
        "released_outer": {"values": [0.0, 1e-9], "unit": "mol/m^2"},
        "diagnostics": {"cells": 400},
    },
    "methods": [{"role": "primary", "name": "closed form", "reference": "a textbook"}],
    "checks": [{"name": "cross_check.flux_outer", "value": 3e-7, "limit": 1e-4, "passed": True,
                "detail": "relative difference"}],
    "warnings": [],
    "provenance": {"engine_version": "0.1.0", "schema_version": 1, "python": "3.11",
                   "numpy": "2", "scipy": "1", "pint": "0.25", "platform": "linux",
                   "worker": "local", "started_at": "t0", "finished_at": "t1",
                   "case_sha256": _SHA, "host_note": "extra keys allowed"},
    "inputs": {"schema_version": 1},
    "caution": "supports, does not replace, design verification",
}


def test_result_document_validates_both_ways(result_validator):
    assert list(result_validator.iter_errors(RESULT)) == []
    validate_result(copy.deepcopy(RESULT))


def test_failed_and_queued_records_are_valid(result_validator):
    failed = {"case_sha256": _SHA, "status": "failed", "verdict": None, "error": "did not solve"}
    queued = {"run_id": "r1", "case_id": "c1", "case_sha256": _SHA, "status": "queued"}
    for doc in (failed, queued):
        assert list(result_validator.iter_errors(doc)) == []
        validate_result(doc)


RESULT_BAD = {
    "unknown top-level key": lambda r: r.update(colour="blue"),
    "bad status": lambda r: r.update(status="done"),
    "bad verdict": lambda r: r.update(verdict="maybe"),
    "succeeded without verdict": lambda r: r.update(verdict=None),
    "succeeded without checks": lambda r: r.pop("checks"),
    "failed without error": lambda r: r.update(status="failed", error=None),
    "bad sha": lambda r: r.update(case_sha256="xyz"),
    "check passed as string": lambda r: r["checks"][0].update(passed="yes"),
    "check with extra key": lambda r: r["checks"][0].update(colour="red"),
    "method role": lambda r: r["methods"][0].update(role="oracle"),
    "quantity without unit": lambda r: r["quantities"].update(flux_inner={"value": 1.0}),
    "quantity value string": lambda r: r["quantities"].update(
        flux_inner={"value": "1", "unit": "m"}),
    "probe rows not numbers": lambda r: r["series"]["probes"].update(concentration=[["a"]]),
}


@pytest.mark.parametrize("change", RESULT_BAD.values(), ids=RESULT_BAD.keys())
def test_bad_result_documents_are_refused_both_ways(change, result_validator):
    doc = copy.deepcopy(RESULT)
    change(doc)
    assert list(result_validator.iter_errors(doc)), "JSON Schema accepted it"
    with pytest.raises(ValidationError):
        validate_result(doc)


@pytest.mark.parametrize(
    "change",
    [
        lambda d: d.update(tags=["ok\n"]),
        lambda d: d.update(tolerances={"gci\n": 0.1}),
    ],
    ids=["tag with final newline", "tolerance key with final newline"],
)
def test_final_newline_is_refused_both_ways(change, case_validator):
    # Python's "$" matches before a final newline, JSON Schema's does not: both must refuse.
    doc = _bad(change)
    assert list(case_validator.iter_errors(doc))
    with pytest.raises(CaseError):
        validate_case(doc)


def test_trailing_whitespace_after_a_unit_is_accepted_both_ways(case_validator):
    doc = _bad(lambda d: d["layers"][0].update(thickness="1 mm\n"))
    assert list(case_validator.iter_errors(doc)) == []
    assert validate_case(doc).problem.layers[0].thickness == pytest.approx(1e-3)


def test_sha256_with_final_newline_is_refused(result_validator):
    doc = copy.deepcopy(RESULT)
    doc["case_sha256"] = _SHA + "\n"
    assert list(result_validator.iter_errors(doc))
    with pytest.raises(ValidationError):
        validate_result(doc)


def test_nested_fields_convert_from_schema_classes_and_instances_only():
    class Inner(Schema):
        x = fields.Integer()

    converter = JsonSchemaConverter()
    assert converter.field(fields.Nested(Inner)) == {"$ref": "#/$defs/Inner"}
    assert converter.field(fields.Nested(Inner())) == {"$ref": "#/$defs/Inner"}
    named = fields.Nested("Inner")
    with pytest.raises(TypeError, match="expected a Nested field of a Schema class or instance"):
        converter.field(named)
    assert WholeMatch(r"^[a-z]+$").pattern_text == "^[a-z]+$"
    with pytest.raises(TypeError, match="expected a str pattern"):
        _ = WholeMatch(rb"^x$").pattern_text
