"""The case's release fields (issue 14): a layer's ``loading`` and ``solubility``, and the rules
on a ``compartment`` face. Each field and rule is shown accepting what it should and refusing
what it should, the error naming the field.

Check values are unit definitions (SI Brochure 2019: 1 mg/mL = 1 kg/m^3, 1 mL = 1e-6 m^3,
1 h = 3600 s); the documents are invented scenarios used only as inputs.
"""

from __future__ import annotations

import copy

import pytest

from schemas import CaseError, validate_case
from schemas.case import SIValue, case_rule_errors

#: Invented: a coating loaded above its solubility, releasing into a sink.
COATING = {
    "schema_version": 1,
    "title": "Fixture: coating loaded above solubility",
    "geometry": "slab",
    "inner": 0,
    "area": "1 cm^2",
    "layers": [{"name": "coat", "thickness": "50 um", "diffusivity": "1e-14 m^2/s",
                "loading": "100 mg/mL", "solubility": "1 mg/mL"}],
    "inner_boundary": {"kind": "symmetry"},
    "outer_boundary": {"kind": "concentration", "value": "0 mg/mL"},
    "regime": {"kind": "transient", "duration": "30 d", "times": ["1 d", "10 d", "30 d"]},
}


def _doc(**layer_changes) -> dict:
    doc = copy.deepcopy(COATING)
    layer = doc["layers"][0]
    for key, value in layer_changes.items():
        if value is None:
            layer.pop(key, None)
        else:
            layer[key] = value
    return doc


def _errors(doc) -> list[dict]:
    with pytest.raises(CaseError) as info:
        validate_case(doc)
    return info.value.errors


def _only_error(doc, path: str, contains: str) -> str:
    errors = _errors(doc)
    assert [e["path"] for e in errors] == [path], errors
    assert contains in errors[0]["message"], errors[0]["message"]
    return errors[0]["message"]


# --- loading and solubility ------------------------------------------------------------------


def test_loading_is_the_layers_content_and_solubility_its_limit():
    validated = validate_case(COATING)
    layer = validated.problem.layers[0]
    assert layer.initial == 100.0 and layer.solubility == 1.0  # kg/m^3 (1 mg/mL = 1 kg/m^3)
    assert layer.is_loaded_above_solubility and validated.problem.can_saturate
    assert not validated.problem.is_linear
    normalised = validated.normalised["layers"][0]
    assert normalised["loading"] == {"value": 100.0, "unit": "kg/m^3"}
    assert normalised["solubility"] == {"value": 1.0, "unit": "kg/m^3"}
    assert "initial" not in normalised  # the alternatives stay alternatives


def test_the_normalised_document_is_a_valid_case_with_the_same_problem():
    validated = validate_case(COATING)
    again = validate_case(validated.normalised)
    assert again.problem == validated.problem


def test_initial_with_a_solubility_at_or_below_it_is_accepted():
    below = validate_case(_doc(loading=None, initial="0.5 mg/mL"))
    assert below.problem.layers[0].initial == 0.5
    assert below.problem.layers[0].solubility == 1.0
    assert not below.problem.layers[0].is_loaded_above_solubility
    assert validate_case(_doc(loading=None, initial="1 mg/mL")).problem.layers[0].initial == 1.0


def test_initial_above_the_solubility_is_refused_pointing_to_loading():
    message = _only_error(_doc(loading=None, initial="2 mg/mL"), "layers[0].initial",
                          "above the layer's solubility")
    assert "loading" in message


def test_initial_and_loading_together_are_refused():
    _only_error(_doc(initial="0.5 mg/mL"), "layers[0].loading", "alternatives")


def test_loading_without_solubility_is_all_dissolved():
    validated = validate_case(_doc(solubility=None))
    layer = validated.problem.layers[0]
    assert layer.initial == 100.0 and layer.solubility is None
    assert not validated.problem.can_saturate


@pytest.mark.parametrize(("key", "value", "contains"), [
    ("loading", "-1 mg/mL", "must be at least 0"),
    ("loading", "1 m", "concentration"),
    ("loading", 5, "concentration"),
    ("solubility", "0 mg/mL", "must be greater than 0"),
    ("solubility", "-1 mg/mL", "must be greater than 0"),
    ("solubility", "1 m^2/s", "concentration"),
])
def test_bad_values_are_refused_naming_the_field(key, value, contains):
    errors = _errors(_doc(**{key: value}))
    assert [e["path"] for e in errors] == [f"layers[0].{key}"], errors
    assert contains in errors[0]["message"]


def test_a_zero_loading_is_accepted():
    assert validate_case(_doc(loading="0 mg/mL")).problem.layers[0].initial == 0.0


@pytest.mark.parametrize("key", ["loading", "solubility"])
def test_loading_and_solubility_are_refused_in_a_steady_case(key):
    doc = _doc(**({"solubility": None} if key == "loading" else {"loading": None}))
    doc["regime"] = {"kind": "steady"}
    _only_error(doc, f"layers[0].{key}", "only in transient cases")


def test_one_basis_per_case_covers_the_new_fields():
    _only_error(_doc(solubility="1 mol/m^3"), "layers[0].solubility", "one concentration basis")
    # an initial in another basis is not compared with the solubility: the basis rule speaks
    errors = _errors(_doc(loading=None, initial="1 mol/m^3", solubility="0.5 mg/mL"))
    assert [e["path"] for e in errors] == ["layers[0].solubility", "outer_boundary.value"]
    assert all("one concentration basis" in e["message"] for e in errors)


@pytest.mark.parametrize("key", ["compartment.equilibrium", "convergence.time"])
def test_the_release_checks_limits_may_be_overridden(key):
    assert validate_case({**COATING, "tolerances": {key: 1e-6}}).problem.tolerances == {key: 1e-6}


def test_the_second_layer_is_named_in_its_errors():
    doc = _doc()
    doc["layers"].append({"name": "top", "thickness": "5 um", "diffusivity": "1e-13 m^2/s",
                          "initial": "3 mg/mL", "solubility": "2 mg/mL"})
    _only_error(doc, "layers[1].initial", "above the layer's solubility")


# --- compartment rules -------------------------------------------------------------------------
# The rules read the loaded document, so they are shown here on loaded data; the same documents
# go through validate_case in the tests further below.


def _loaded(geometry="slab", side="outer", regime="transient", **top) -> dict:
    si = SIValue
    data = {
        "geometry": geometry,
        "inner": si(0.0 if geometry == "slab" else 1e-3, "length"),
        "layers": [{"thickness": si(5e-5, "length"), "diffusivity": si(1e-14, "diffusivity")}],
        "inner_boundary": {"kind": "symmetry"},
        "outer_boundary": {"kind": "concentration", "value": si(0.0, "concentration")},
        "regime": ({"kind": "transient", "duration": si(86400.0, "time"),
                    "times": [si(3600.0, "time")]} if regime == "transient"
                   else {"kind": "steady"}),
    }
    data[f"{side}_boundary"] = {"kind": "compartment", "volume": si(1e-6, "volume")}
    data.update(top)
    return data


def test_a_compartment_with_its_size_in_a_transient_case_passes_the_rules():
    assert case_rule_errors(_loaded(area=SIValue(1e-4, "area"))) == []
    assert case_rule_errors(_loaded("cylinder", length=SIValue(0.01, "length"))) == []
    assert case_rule_errors(_loaded("sphere")) == []
    inner = _loaded("cylinder", side="inner", length=SIValue(0.01, "length"))
    inner["outer_boundary"] = {"kind": "symmetry"}
    assert case_rule_errors(inner) == []


def test_a_compartment_in_a_steady_case_is_refused():
    data = _loaded(regime="steady", area=SIValue(1e-4, "area"))
    data["inner_boundary"] = {"kind": "concentration", "value": SIValue(1.0, "concentration")}
    errors = case_rule_errors(data)
    assert [path for path, _ in errors] == ["outer_boundary.kind"]
    assert "transient" in errors[0][1]


def test_a_slab_compartment_needs_the_area_and_a_cylinders_the_length():
    errors = case_rule_errors(_loaded("slab"))
    assert [path for path, _ in errors] == ["area"] and "outer_boundary" in errors[0][1]
    errors = case_rule_errors(_loaded("cylinder"))
    assert [path for path, _ in errors] == ["length"] and "outer_boundary" in errors[0][1]


def test_a_compartment_at_a_solid_centre_is_refused():
    data = _loaded("sphere", side="inner")
    data["inner"] = SIValue(0.0, "length")
    errors = case_rule_errors(data)
    assert [path for path, _ in errors] == ["inner_boundary.kind"]
    assert "symmetry" in errors[0][1]




def _release_medium(**changes) -> dict:
    doc = copy.deepcopy(COATING)
    doc["outer_boundary"] = {"kind": "compartment", "volume": "2 mL", "initial": "0 mg/mL",
                             "clearance": "0.5 1/h"}
    doc.update(changes)
    return doc


def test_a_compartment_case_builds_its_face():
    face = validate_case(_release_medium()).problem.outer_boundary
    assert face.kind == "compartment" and face.volume == pytest.approx(2e-6, rel=1e-15)
    assert face.clearance == pytest.approx(0.5 / 3600.0, rel=1e-15)


def test_a_compartment_case_is_refused_without_area_or_in_a_steady_case():
    doc = _release_medium()
    del doc["area"]
    assert [e["path"] for e in _errors(doc)] == ["area"]
    doc = _release_medium(regime={"kind": "steady"})
    doc["layers"][0].pop("loading")
    doc["layers"][0].pop("solubility")
    assert "outer_boundary.kind" in [e["path"] for e in _errors(doc)]


def test_a_compartment_volume_is_required_and_positive():
    doc = _release_medium()
    doc["outer_boundary"]["volume"] = "0 mL"
    assert [e["path"] for e in _errors(doc)] == ["outer_boundary.volume"]
