"""Tests of the case document schema v1: every rule refused at its exact path, both quantity
forms, SI conversion (facts of the SI, common practice), the normalised document and the Problem.

The two fixture documents below are invented scenarios used only as inputs; no value in them is
a check value.
"""

from __future__ import annotations

import copy
import hashlib
import math

import pytest

from schemas import CaseError, ValidatedCase, canonical_json, case_sha256, validate_case
from schemas import case as case_module
from worker.engine import model

#: Invented: a hollow-fibre-like annulus, two layers, Michaelis-Menten uptake in the outer one.
ANNULUS_STEADY = {
    "schema_version": 1,
    "title": "Fixture: annulus with an uptake layer",
    "reference": "test fixture",
    "tags": ["fixture", "annulus"],
    "geometry": "cylinder",
    "inner": "100 um",
    "length": "12 cm",
    "layers": [
        {"name": "wall", "thickness": "40 um", "diffusivity": "1.5e-9 m^2/s", "partition": 0.8},
        {
            "name": "uptake",
            "thickness": "150 um",
            "diffusivity": {"value": 2.0e-9, "unit": "m^2/s"},
            "reaction": {"kind": "michaelis_menten", "vmax": "4e-3 mol/m^3/s", "km": "5e-3 mM"},
        },
    ],
    "inner_boundary": {"kind": "concentration", "value": "0.2 mol/m^3"},
    "outer_boundary": {"kind": "flux", "value": "0 mol/m^2/s"},
    "regime": {"kind": "steady"},
    "probes": ["150 um", {"value": 0.29, "unit": "mm"}],
    "tolerances": {"cross_check": 1e-4, "cross_check.flux_outer": 1e-5},
}

#: Invented: a coated slab releasing its load through a surface film.
SLAB_TRANSIENT = {
    "schema_version": 1,
    "title": "Fixture: coated slab releasing through a film",
    "geometry": "slab",
    "inner": 0,
    "area": "2 cm^2",
    "layers": [
        {"name": "matrix", "thickness": "0.5 mm", "diffusivity": "3e-11 m^2/s",
         "initial": "5 mg/mL"},
        {"name": "coat", "thickness": "20 um", "diffusivity": "1e-12 m^2/s", "partition": 0.5},
    ],
    "inner_boundary": {"kind": "symmetry"},
    "outer_boundary": {"kind": "mass_transfer", "coefficient": "1e-3 cm/s", "bulk": "0 mg/mL",
                       "partition": 0.4},
    "regime": {"kind": "transient", "duration": "10 d", "times": ["1 h", "1 d", "5 d", "10 d"]},
    "probes": ["0 m", "0.25 mm"],
}


def _doc(base=ANNULUS_STEADY, **changes):
    doc = copy.deepcopy(base)
    doc.update(copy.deepcopy(changes))
    return doc


def _errors(doc) -> list[dict]:
    with pytest.raises(CaseError) as info:
        validate_case(doc)
    return info.value.errors


def _paths(doc) -> list[str]:
    return [e["path"] for e in _errors(doc)]


def _only_error(doc, path: str, contains: str = "") -> str:
    errors = _errors(doc)
    assert [e["path"] for e in errors] == [path], errors
    assert contains in errors[0]["message"], errors[0]["message"]
    return errors[0]["message"]


def _set(doc, dotted: str, value):
    """Set a value at a path such as ``layers[1].reaction.vmax`` (for building bad documents)."""
    parts = dotted.replace("[", ".").replace("]", "").split(".")
    target = doc
    for part in parts[:-1]:
        target = target[int(part)] if part.isdigit() else target[part]
    last = parts[-1]
    if last.isdigit():
        target[int(last)] = value
    else:
        target[last] = value
    return doc


def _with(path: str, value, base=ANNULUS_STEADY):
    return _set(copy.deepcopy(base), path, value)


def _without(path: str, base=ANNULUS_STEADY):
    doc = copy.deepcopy(base)
    parts = path.replace("[", ".").replace("]", "").split(".")
    target = doc
    for part in parts[:-1]:
        target = target[int(part)] if part.isdigit() else target[part]
    del target[parts[-1]]
    return doc


# --- valid documents -------------------------------------------------------------------------


def test_fixtures_are_valid():
    for doc in (ANNULUS_STEADY, SLAB_TRANSIENT):
        assert isinstance(validate_case(doc), ValidatedCase)


def test_problem_is_si():
    # SI facts (common practice): 1 um = 1e-6 m, 1 cm = 1e-2 m, 1 mM = 1 mol/m^3.
    problem = validate_case(ANNULUS_STEADY).problem
    assert isinstance(problem, model.Problem)
    assert problem.geometry == "cylinder"
    assert problem.inner == pytest.approx(1e-4, rel=1e-15)
    assert problem.length == pytest.approx(0.12, rel=1e-15)
    assert problem.area is None
    wall, uptake = problem.layers
    assert (wall.name, wall.thickness, wall.diffusivity, wall.partition) == (
        "wall", pytest.approx(4e-5), pytest.approx(1.5e-9), 0.8)
    assert uptake.partition == 1.0
    assert uptake.reaction == model.Reaction(kind="michaelis_menten", vmax=pytest.approx(4e-3),
                                             km=pytest.approx(5e-3))
    assert wall.reaction == model.Reaction()
    assert problem.inner_boundary == model.Boundary(kind="concentration", value=0.2)
    assert problem.outer_boundary == model.Boundary(kind="flux", value=0.0)
    assert problem.regime == model.Regime(kind="steady")
    assert problem.probes == (pytest.approx(1.5e-4), pytest.approx(2.9e-4))
    assert dict(problem.tolerances) == {"cross_check": 1e-4, "cross_check.flux_outer": 1e-5}
    assert problem.basis == "molar"


def test_transient_problem_and_mass_basis():
    # SI facts: 1 h = 3600 s, 1 d = 86400 s, 1 mg/mL = 1 kg/m^3, 1 cm/s = 1e-2 m/s.
    validated = validate_case(SLAB_TRANSIENT)
    problem = validated.problem
    assert validated.basis == problem.basis == "mass"
    assert problem.inner == 0.0
    assert problem.area == pytest.approx(2e-4)
    assert problem.layers[0].initial == pytest.approx(5.0)
    assert problem.layers[1].initial == 0.0
    assert problem.outer_boundary == model.Boundary(
        kind="mass_transfer", coefficient=pytest.approx(1e-5), bulk=0.0, partition=0.4)
    assert problem.regime.kind == "transient"
    assert problem.regime.duration == pytest.approx(864000.0)
    assert problem.regime.times == pytest.approx((3600.0, 86400.0, 432000.0, 864000.0))


@pytest.mark.parametrize(
    ("raw", "expected"),
    [("40 um", 4e-5), ({"value": 40, "unit": "um"}, 4e-5), ("0.04 mm", 4e-5),
     ({"value": 4e-5, "unit": "m"}, 4e-5)],
)
def test_both_quantity_forms(raw, expected):
    problem = validate_case(_with("layers[0].thickness", raw)).problem
    assert problem.layers[0].thickness == pytest.approx(expected, rel=1e-15)


def test_unit_conversions_common_practice():
    doc = _with("layers[0].diffusivity", "1 cm^2/s")
    assert validate_case(doc).problem.layers[0].diffusivity == pytest.approx(1e-4, rel=1e-15)
    doc = _with("layers[0].initial", "1.2 mg/mL", base=SLAB_TRANSIENT)
    assert validate_case(doc).problem.layers[0].initial == pytest.approx(1.2, rel=1e-15)


def test_normalised_document():
    normalised = validate_case(ANNULUS_STEADY).normalised
    assert normalised["inner"] == {"value": pytest.approx(1e-4), "unit": "m"}
    assert normalised["layers"][0]["reaction"] == {"kind": "none"}
    assert normalised["layers"][1]["partition"] == 1.0
    assert normalised["layers"][0]["initial"] == {"value": 0.0, "unit": "mol/m^3"}
    assert normalised["layers"][1]["reaction"]["vmax"] == {
        "value": pytest.approx(4e-3), "unit": "mol/(m^3*s)"}
    assert normalised["outer_boundary"] == {
        "kind": "flux", "value": {"value": 0.0, "unit": "mol/(m^2*s)"}}
    assert normalised["regime"] == {"kind": "steady"}
    normalised = validate_case(SLAB_TRANSIENT).normalised
    assert normalised["tags"] == [] and normalised["tolerances"] == {}
    assert normalised["inner"] == {"value": 0.0, "unit": "m"}
    assert normalised["layers"][0]["initial"] == {"value": pytest.approx(5.0), "unit": "kg/m^3"}
    assert normalised["regime"]["times"][0] == {"value": pytest.approx(3600.0), "unit": "s"}
    assert normalised["outer_boundary"]["coefficient"] == {"value": pytest.approx(1e-5),
                                                         "unit": "m/s"}


def test_layer_name_default():
    doc = _without("layers[1].name")
    assert validate_case(doc).normalised["layers"][1]["name"] == "layer 2"


@pytest.mark.parametrize("base", [ANNULUS_STEADY, SLAB_TRANSIENT])
def test_normalised_is_a_valid_case_with_the_same_problem(base):
    first = validate_case(base)
    second = validate_case(first.normalised)
    assert second.problem == first.problem
    assert second.normalised == first.normalised


def test_original_is_untouched_and_copied():
    doc = _doc()
    before = copy.deepcopy(doc)
    validated = validate_case(doc)
    assert doc == before
    assert validated.original == before
    doc["title"] = "changed afterwards"
    assert validated.original["title"] == before["title"]


def test_inner_accepts_bare_zero_and_zero_with_unit():
    for zero in (0, 0.0, "0 m", {"value": 0, "unit": "mm"}):
        doc = _with("inner", zero, base=SLAB_TRANSIENT)
        assert validate_case(doc).problem.inner == 0.0


def test_symmetry_allowed_at_outer_face_of_radial_body():
    doc = _doc(outer_boundary={"kind": "symmetry"})
    assert validate_case(doc).problem.outer_boundary.kind == "symmetry"


def test_slab_takes_any_kind_at_inner_zero():
    doc = _doc(SLAB_TRANSIENT, inner_boundary={"kind": "concentration", "value": "1 mg/mL"})
    assert validate_case(doc).problem.inner_boundary.kind == "concentration"


def test_initial_is_allowed_in_a_steady_case():
    doc = _with("layers[0].initial", "0.1 mol/m^3")
    assert validate_case(doc).problem.layers[0].initial == pytest.approx(0.1)


def test_dotted_tolerance_keys_with_digits():
    doc = _doc(tolerances={"cross_check.t50": 1e-3, "gci": 0.02})
    assert dict(validate_case(doc).problem.tolerances) == {"cross_check.t50": 1e-3, "gci": 0.02}


# --- document-level rules --------------------------------------------------------------------


def test_not_an_object():
    with pytest.raises(CaseError) as info:
        validate_case(["not", "a", "case"])
    assert info.value.errors == [
        {"path": "", "message": "a case document is a JSON object, got list"}]


def test_unknown_field_is_refused_naming_the_allowed_ones():
    message = _only_error(_doc(colour="blue"), "colour", "unknown field")
    assert "schema_version" in message and "tolerances" in message


@pytest.mark.parametrize("version", [2, 0, True, 1.0, "1"])
def test_schema_version_must_be_1(version):
    _only_error(_doc(schema_version=version), "schema_version")


def test_schema_version_required():
    _only_error(_without("schema_version"), "schema_version")


@pytest.mark.parametrize("title", ["", "   ", "x" * 201, 12])
def test_title_rules(title):
    _only_error(_doc(title=title), "title")


def test_title_required():
    _only_error(_without("title"), "title")


def test_title_at_limit_is_fine():
    validate_case(_doc(title="x" * case_module.MAX_TITLE_LENGTH))


def test_reference_length():
    _only_error(_doc(reference="r" * 501), "reference")


def test_too_many_tags():
    _only_error(_doc(tags=[f"t{i}" for i in range(21)]), "tags")


@pytest.mark.parametrize("tag", ["has space", "", "x" * 65, "ünï", 5])
def test_tag_rules(tag):
    _only_error(_doc(tags=["ok", tag]), "tags[1]")


def test_geometry_choice():
    _only_error(_doc(geometry="cube"), "geometry", "got 'cube'")


def test_inner_negative():
    _only_error(_doc(inner="-1 um"), "inner", "at least 0")


@pytest.mark.parametrize("inner", [5, 1e-4, True, None])
def test_inner_bare_number_only_when_zero(inner):
    _only_error(_doc(inner=inner), "inner")


def test_inner_bare_number_message_says_only_zero_goes_without_unit():
    _only_error(_doc(inner=5), "inner", "only 0 may be given without a unit")


def test_length_only_for_cylinder():
    _only_error(_doc(SLAB_TRANSIENT, length="1 cm"), "length", "only a cylinder")


def test_area_only_for_slab():
    _only_error(_doc(area="1 cm^2"), "area", "only a slab")


@pytest.mark.parametrize(("key", "value"), [("length", "0 m"), ("length", "-2 cm"),
                                            ("length", "2 cm^2")])
def test_length_positive_length(key, value):
    _only_error(_doc(**{key: value}), key)


def test_area_positive():
    _only_error(_doc(SLAB_TRANSIENT, area="0 cm^2"), "area", "greater than 0")


# --- layers ----------------------------------------------------------------------------------


def test_at_least_one_layer():
    _only_error(_doc(layers=[]), "layers")


def test_at_most_20_layers():
    layer = {"thickness": "1 um", "diffusivity": "1e-9 m^2/s"}
    _only_error(_doc(layers=[layer] * 21), "layers")


@pytest.mark.parametrize(
    ("path", "value", "contains"),
    [
        ("layers[0].thickness", "0 um", "greater than 0"),
        ("layers[0].thickness", "-3 um", "greater than 0"),
        ("layers[1].thickness", "3 um^2", "expected a length"),
        ("layers[0].diffusivity", "0 m^2/s", "greater than 0"),
        ("layers[1].diffusivity", "40 um", 'got "40 um" ([length])'),
        ("layers[0].partition", 0, "greater than 0"),
        ("layers[0].partition", -0.5, "greater than 0"),
        ("layers[0].partition", True, "plain number"),
        ("layers[0].partition", "0.8", "plain number"),
        ("layers[0].name", "n" * 101, ""),
        ("layers[0].name", "", ""),
        ("layers[1].reaction.vmax", "-1 mol/m^3/s", "at least 0"),
        ("layers[1].reaction.vmax", "1 mol/m^3", "expected a volumetric reaction rate"),
        ("layers[1].reaction.km", "0 mol/m^3", "greater than 0"),
        ("layers[1].reaction.km", "5 mmHg", "expected a concentration"),
        ("layers[1].reaction.kind", "second_order", "must be one of"),
    ],
)
def test_layer_field_rules(path, value, contains):
    _only_error(_with(path, value), path, contains)


def test_layer_name_limit():
    validate_case(_with("layers[0].name", "n" * case_module.MAX_LAYER_NAME_LENGTH))


@pytest.mark.parametrize(
    ("reaction", "path", "contains"),
    [
        ({"kind": "zero_order", "rate": "-1 mol/m^3/s"}, "layers[1].reaction.rate", "at least 0"),
        ({"kind": "zero_order"}, "layers[1].reaction.rate", ""),
        ({"kind": "first_order", "rate_constant": "-0.1 1/s"},
         "layers[1].reaction.rate_constant", "at least 0"),
        ({"kind": "first_order", "rate_constant": "0.1 m/s"},
         "layers[1].reaction.rate_constant", "expected a first-order rate constant"),
        ({"kind": "none", "rate": "1 mol/m^3/s"}, "layers[1].reaction.rate", "unknown field"),
        ({"kind": "michaelis_menten", "vmax": "1 mol/m^3/s"}, "layers[1].reaction.km", ""),
        ({"rate": "1 mol/m^3/s"}, "layers[1].reaction.kind", "needs a 'kind'"),
        ("first_order", "layers[1].reaction", "expected a reaction object"),
    ],
)
def test_reaction_rules(reaction, path, contains):
    _only_error(_with("layers[1].reaction", reaction), path, contains)


def test_initial_non_negative():
    _only_error(_with("layers[0].initial", "-1 mg/mL", base=SLAB_TRANSIENT),
                "layers[0].initial", "at least 0")


# --- boundaries ------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("boundary", "path", "contains"),
    [
        ({"kind": "mass_transfer", "coefficient": "0 m/s", "bulk": "0.1 mol/m^3"},
         "outer_boundary.coefficient", "greater than 0"),
        ({"kind": "mass_transfer", "coefficient": "1e-5 m^2/s", "bulk": "0.1 mol/m^3"},
         "outer_boundary.coefficient", "expected a mass-transfer coefficient"),
        ({"kind": "mass_transfer", "coefficient": "1e-5 m/s"}, "outer_boundary.bulk", ""),
        ({"kind": "mass_transfer", "coefficient": "1e-5 m/s", "bulk": "-1 mol/m^3"},
         "outer_boundary.bulk", "at least 0"),
        ({"kind": "flux", "value": "1 mol/m^3"}, "outer_boundary.value", "expected a flux"),
        ({"kind": "flux", "value": "0 mol/m^2/s", "partition": 0.5},
         "outer_boundary.partition", "unknown field: a flux boundary takes kind, value"),
        ({"kind": "symmetry", "partition": 0.5}, "outer_boundary.partition", "unknown field"),
        ({"kind": "concentration", "value": "0.1 mol/m^3", "partition": 0},
         "outer_boundary.partition", "greater than 0"),
        ({"kind": "concentration", "value": "0.1 mol/m^3", "partition": False},
         "outer_boundary.partition", "plain number"),
        ({"kind": "concentration", "value": "-0.1 mol/m^3"}, "outer_boundary.value",
         "at least 0"),
        ({"kind": "wall"}, "outer_boundary.kind", "must be one of"),
        ({}, "outer_boundary.kind", "needs a 'kind'"),
    ],
)
def test_boundary_rules(boundary, path, contains):
    _only_error(_doc(outer_boundary=boundary), path, contains)


def test_boundaries_required():
    _only_error(_without("inner_boundary"), "inner_boundary")


def test_boundary_partition_allowed_on_concentration_and_mass_transfer():
    doc = _doc(inner_boundary={"kind": "concentration", "value": "0.2 mol/m^3",
                               "partition": 0.7})
    assert validate_case(doc).problem.inner_boundary.partition == 0.7
    assert validate_case(SLAB_TRANSIENT).problem.outer_boundary.partition == 0.4


@pytest.mark.parametrize("geometry", ["cylinder", "sphere"])
def test_symmetry_required_at_centre_of_solid_body(geometry):
    doc = _doc(geometry=geometry, inner="0 m", probes=[])
    doc.pop("length")
    message = _only_error(doc, "inner_boundary.kind", f"centre of a solid {geometry}")
    assert "'concentration'" in message


def test_symmetry_is_enough_at_centre():
    doc = _doc(geometry="sphere", inner=0, inner_boundary={"kind": "symmetry"},
               outer_boundary={"kind": "concentration", "value": "0.2 mol/m^3"}, probes=[])
    doc.pop("length")
    assert validate_case(doc).problem.solid_centre


def test_steady_problem_without_a_fixed_level_is_refused():
    doc = _doc(layers=[{"thickness": "1 mm", "diffusivity": "1e-9 m^2/s"}],
               inner_boundary={"kind": "flux", "value": "1e-6 mol/m^2/s"},
               outer_boundary={"kind": "symmetry"})
    _only_error(doc, "", "no unique solution")


def test_zero_rate_reaction_does_not_fix_the_level():
    doc = _doc(layers=[{"thickness": "1 mm", "diffusivity": "1e-9 m^2/s",
                        "reaction": {"kind": "first_order", "rate_constant": "0 1/s"}}],
               inner_boundary={"kind": "flux", "value": "1e-6 mol/m^2/s"},
               outer_boundary={"kind": "flux", "value": "0 mol/m^2/s"})
    _only_error(doc, "", "no unique solution")


def test_flux_faces_with_consumption_or_transient_are_fine():
    consuming = _doc(inner_boundary={"kind": "flux", "value": "1e-7 mol/m^2/s"})
    validate_case(consuming)
    transient = _doc(SLAB_TRANSIENT, outer_boundary={"kind": "flux", "value": "0 kg/m^2/s"})
    validate_case(transient)


# --- basis -----------------------------------------------------------------------------------


def test_one_basis_per_case():
    doc = _with("layers[1].reaction.km", "5 ug/mL")
    message = _only_error(doc, "layers[1].reaction.km", "one concentration basis")
    assert "mass basis (kg/m^3)" in message
    assert "layers[1].reaction.vmax set the molar basis (mol/(m^3*s))" in message


def test_basis_error_at_every_field_of_the_other_basis():
    doc = _doc(SLAB_TRANSIENT, outer_boundary={"kind": "flux", "value": "0 mol/m^2/s"})
    doc["layers"][1]["initial"] = "1 mM"
    assert _paths(doc) == ["layers[1].initial", "outer_boundary.value"]


# --- regime ----------------------------------------------------------------------------------


def test_regime_required():
    _only_error(_without("regime"), "regime")


def test_steady_takes_no_duration_or_times():
    doc = _doc(regime={"kind": "steady", "duration": "1 d", "times": ["1 h"]})
    assert sorted(_paths(doc)) == ["regime.duration", "regime.times"]


def test_transient_needs_duration():
    _only_error(_without("regime.duration", base=SLAB_TRANSIENT), "regime.duration")


@pytest.mark.parametrize("duration", ["0 s", "-1 d", "3 m"])
def test_transient_duration_positive_time(duration):
    _only_error(_with("regime.duration", duration, base=SLAB_TRANSIENT), "regime.duration")


def test_transient_needs_times():
    _only_error(_without("regime.times", base=SLAB_TRANSIENT), "regime.times")
    _only_error(_with("regime.times", [], base=SLAB_TRANSIENT), "regime.times")


def test_too_many_times():
    times = [f"{i + 1} s" for i in range(501)]
    doc = _doc(SLAB_TRANSIENT, regime={"kind": "transient", "duration": "1 h", "times": times})
    _only_error(doc, "regime.times")


def test_time_zero_refused():
    _only_error(_with("regime.times[0]", "0 s", base=SLAB_TRANSIENT), "regime.times[0]",
                "greater than 0")


def test_time_after_duration():
    _only_error(_with("regime.times[3]", "11 d", base=SLAB_TRANSIENT), "regime.times[3]",
                "after the end")


def test_time_equal_to_duration_is_fine():
    validate_case(_with("regime.times[3]", "240 h", base=SLAB_TRANSIENT))


def test_times_strictly_increasing():
    _only_error(_with("regime.times[2]", "1 d", base=SLAB_TRANSIENT), "regime.times[2]",
                "increase strictly")


# --- probes and tolerances -------------------------------------------------------------------


def test_probe_outside_body():
    # the annulus spans [100 um, 290 um]
    doc = _doc(probes=["150 um", "50 um", "0.3 mm"])
    assert _paths(doc) == ["probes[1]", "probes[2]"]


def test_probes_on_the_faces_are_inside():
    validate_case(_doc(probes=["100 um", "290 um"]))


def test_probe_must_be_a_length():
    _only_error(_doc(probes=["1 s"]), "probes[0]", "expected a length")


def test_too_many_probes():
    _only_error(_doc(probes=["200 um"] * 201), "probes")


@pytest.mark.parametrize(
    ("tolerances", "path", "contains"),
    [
        ({"tightness": 1e-3}, "tolerances.tightness", "unknown check"),
        ({"cross_check": -1e-3}, "tolerances.cross_check", "positive"),
        ({"cross_check": 0}, "tolerances.cross_check", "positive"),
        ({"mass_balance": True}, "tolerances.mass_balance", "positive"),
        ({"gci": "0.1"}, "tolerances.gci", "positive"),
        ({"Cross_Check": 1e-3}, "tolerances.Cross_Check", "not a check name"),
        ({"cross_check.a.b": 1e-3}, "tolerances.cross_check.a.b", "not a check name"),
        ([1e-3], "tolerances", "expected an object"),
    ],
)
def test_tolerance_rules(tolerances, path, contains):
    _only_error(_doc(tolerances=tolerances), path, contains)


def test_tolerance_infinity_refused():
    _only_error(_doc(tolerances={"bracket": math.inf}), "tolerances.bracket", "finite")


# --- errors collected together ----------------------------------------------------------------


def test_all_errors_are_collected():
    doc = _doc(SLAB_TRANSIENT, geometry="cube", colour="blue")
    _set(doc, "layers[0].thickness", "-2 mm")
    _set(doc, "layers[1].diffusivity", "1e-12 m/s")
    _set(doc, "regime.times[3]", "20 d")
    _set(doc, "outer_boundary.bulk", "0 mol/m^3")
    doc["tags"] = ["bad tag"]
    errors = _errors(doc)
    assert sorted(e["path"] for e in errors) == sorted([
        "geometry", "colour", "layers[0].thickness", "layers[1].diffusivity",
        "regime.times[3]", "outer_boundary.bulk", "tags[0]",
    ])
    assert all(e["message"] for e in errors)


def test_case_error_text_lists_every_error():
    with pytest.raises(CaseError) as info:
        validate_case(_doc(geometry="cube", title=""))
    text = str(info.value)
    assert text.startswith("invalid case (2 errors)")
    assert "geometry: must be one of" in text and "title:" in text


def test_case_error_for_the_whole_document_has_empty_path():
    error = CaseError([{"path": "", "message": "bad"}])
    assert "(document): bad" in str(error)
    assert error.errors == [{"path": "", "message": "bad"}]


def test_quantity_errors_carry_the_field_path():
    _only_error(_with("inner_boundary.value", "nan mol/m^3"), "inner_boundary.value",
                "not finite")
    _only_error(_with("inner_boundary.value", "0.2"), "inner_boundary.value", "unit is missing")
    _only_error(_with("inner_boundary.value", "0.2 zorkmids"), "inner_boundary.value",
                "unknown unit")


# --- canonical form ---------------------------------------------------------------------------


def test_canonical_json_form():
    # The canonical text is written out by hand from the rule (sorted keys, no spaces, UTF-8 kept).
    assert canonical_json({"b": [1, 2.5], "a": "é"}) == '{"a":"é","b":[1,2.5]}'


def test_case_sha256_is_sha256_of_canonical_text():
    expected = hashlib.sha256('{"a":"é","b":[1,2.5]}'.encode()).hexdigest()
    assert case_sha256({"b": [1, 2.5], "a": "é"}) == expected
    assert case_sha256(dict(reversed(list(ANNULUS_STEADY.items())))) == case_sha256(
        ANNULUS_STEADY)


def test_canonical_json_refuses_nan():
    with pytest.raises(ValueError):
        canonical_json({"x": math.nan})


@pytest.mark.parametrize("choices", [case_module.REACTION_SCHEMAS, case_module.BOUNDARY_SCHEMAS,
                                     case_module.REGIME_SCHEMAS])
def test_a_kind_only_object_loads_as_its_schema_loads_it(choices):
    """``ByKind`` returns ``{"kind": k}`` itself for schemas that hold only the kind; that must be
    what the schema's own load gives, and any other key still goes through the schema (and is
    refused as unknown)."""
    field = case_module.ByKind(choices, "a test object")
    kind_only = [k for k, cls in choices.items() if set(cls().load_fields) == {"kind"}]
    assert kind_only  # none, symmetry, steady
    for kind in kind_only:
        assert field.deserialize({"kind": kind}) == choices[kind]().load({"kind": kind})
        with pytest.raises(case_module.ValidationError) as refused:
            field.deserialize({"kind": kind, "value": 1})
        assert "value" in refused.value.messages
