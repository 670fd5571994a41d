"""Hypothesis-generated case documents through ``worker.engine.check_case``: whatever comes in
(valid, near-valid or hostile), out comes a result document or a ``schemas.CaseError`` that
names at least one field, never another exception.

The documents are built from the case schema's own vocabulary and then bent: wrong units and
wrong dimensions, magnitudes from 1e-300 to 1e300, NaN and infinity, odd unicode, deep
nesting where a scalar belongs, missing and unknown fields, too many layers or probes. The
generated values are inputs only; nothing here is a check value of the engine's figures.
"""

from __future__ import annotations

import math

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import schemas
from worker.engine import check_case

UNITS = ["m", "um", "mm", "cm", "m^2/s", "cm^2/s", "mol/m^3", "mg/mL", "mol/m^2/s", "m/s",
         "1/s", "mol/m^3/s", "s", "h", "kg", "K", "", "furlong", "m^2/(s", "m**", "µm", "㎛"]
ODD_TEXT = st.text(alphabet=st.characters(codec="utf-8", exclude_categories=("Cs",)),
                   max_size=40)
MAGNITUDES = st.one_of(
    st.floats(min_value=1e-300, max_value=1e300),
    st.floats(allow_nan=True, allow_infinity=True),
    st.sampled_from([0.0, -0.0, 1.0, 40.0, 1.5e-9, 2e-10, 1e308, 5e-324]),
    st.integers(min_value=-10**30, max_value=10**30),
)


def _deep(depth: int):
    """A value nested ``depth`` levels deep, where a scalar is expected."""
    value: object = "1 m"
    for level in range(depth):
        value = [value] if level % 2 else {"value": value}
    return value


def quantity(preferred_units: list[str]):
    as_text = st.builds(lambda m, u: f"{m!r} {u}".strip(), MAGNITUDES,
                        st.sampled_from(preferred_units + UNITS))
    as_object = st.fixed_dictionaries(
        {"value": MAGNITUDES, "unit": st.sampled_from(preferred_units + UNITS)})
    hostile = st.one_of(ODD_TEXT, st.none(), st.booleans(), MAGNITUDES,
                        st.integers(1, 60).map(_deep),
                        st.dictionaries(ODD_TEXT, ODD_TEXT, max_size=3))
    return st.one_of(as_text, as_text, as_object, hostile)


REACTIONS = st.one_of(
    st.just({"kind": "none"}),
    st.fixed_dictionaries({"kind": st.just("first_order"),
                           "rate_constant": quantity(["1/s"])}),
    st.fixed_dictionaries({"kind": st.just("zero_order"), "rate": quantity(["mol/m^3/s"])}),
    st.fixed_dictionaries({"kind": st.just("michaelis_menten"),
                           "vmax": quantity(["mol/m^3/s"]), "km": quantity(["mol/m^3"])}),
    st.fixed_dictionaries({"kind": ODD_TEXT}),
)

LAYER = st.fixed_dictionaries(
    {"name": ODD_TEXT, "thickness": quantity(["um", "mm"]),
     "diffusivity": quantity(["m^2/s"]),
     "partition": st.one_of(st.floats(allow_nan=True, allow_infinity=True), st.just(1.0),
                            ODD_TEXT)},
    optional={"reaction": REACTIONS, "initial": quantity(["mol/m^3"]),
              "colour": ODD_TEXT},
)

BOUNDARY = st.one_of(
    st.fixed_dictionaries({"kind": st.just("concentration"), "value": quantity(["mol/m^3"])},
                          optional={"partition": MAGNITUDES}),
    st.fixed_dictionaries({"kind": st.just("flux"), "value": quantity(["mol/m^2/s"])}),
    st.fixed_dictionaries({"kind": st.just("mass_transfer"), "coefficient": quantity(["m/s"]),
                           "bulk": quantity(["mol/m^3"])}),
    st.just({"kind": "symmetry"}),
    st.dictionaries(ODD_TEXT, ODD_TEXT, max_size=3),
)

REGIME = st.one_of(
    st.just({"kind": "steady"}), st.just({"kind": "steady"}), st.just({"kind": "steady"}),
    st.fixed_dictionaries({"kind": st.just("transient"), "duration": quantity(["s", "h"]),
                           "times": st.lists(quantity(["s"]), max_size=4)}),
    st.fixed_dictionaries({"kind": ODD_TEXT}),
)

CASES = st.fixed_dictionaries(
    {"schema_version": st.one_of(st.just(1), st.just(1), st.integers(-3, 5), ODD_TEXT),
     "title": st.one_of(st.just("fuzz"), ODD_TEXT, st.text(min_size=300, max_size=2000)),
     "geometry": st.one_of(st.sampled_from(["slab", "cylinder", "sphere"]), ODD_TEXT),
     "inner": st.one_of(st.just("0 m"), st.just("100 um"), quantity(["um"])),
     "layers": st.one_of(st.lists(LAYER, min_size=1, max_size=3),
                         st.lists(LAYER, min_size=0, max_size=60), ODD_TEXT),
     "inner_boundary": BOUNDARY,
     "outer_boundary": BOUNDARY,
     "regime": REGIME},
    optional={"probes": st.lists(quantity(["um"]), max_size=8),
              "tolerances": st.dictionaries(ODD_TEXT, MAGNITUDES, max_size=3),
              "tags": st.lists(ODD_TEXT, max_size=4),
              "length": quantity(["cm"]), "area": quantity(["cm^2"]),
              "reference": ODD_TEXT, "extra_field": ODD_TEXT},
)


def _sensible_layer(thickness_um: float, diffusivity: float, reaction: dict) -> dict:
    return {"name": "layer", "thickness": f"{thickness_um:.6g} um",
            "diffusivity": f"{diffusivity:.6g} m^2/s", "partition": 1.0, "reaction": reaction}


SENSIBLE_REACTIONS = st.one_of(
    st.just({"kind": "none"}),
    st.floats(1e-4, 10).map(lambda k: {"kind": "first_order",
                                       "rate_constant": f"{k:.6g} 1/s"}),
    st.floats(1e-6, 1e-1).map(lambda r: {"kind": "zero_order", "rate": f"{r:.6g} mol/m^3/s"}),
)

#: Documents that should pass validation: a solid or hollow body of 1 to 3 layers.
SENSIBLE_CASES = st.builds(
    lambda geometry, solid, layers, c_in, c_out: {
        "schema_version": 1, "title": "fuzz: sensible case", "geometry": geometry,
        "inner": "0 m" if solid else "100 um", "layers": layers,
        "inner_boundary": ({"kind": "symmetry"} if solid
                           else {"kind": "concentration", "value": f"{c_in:.6g} mol/m^3"}),
        "outer_boundary": {"kind": "concentration", "value": f"{c_out:.6g} mol/m^3"},
        "regime": {"kind": "steady"}},
    st.sampled_from(["slab", "cylinder", "sphere"]), st.booleans(),
    st.lists(st.builds(_sensible_layer, st.floats(1, 1000), st.floats(1e-12, 1e-8),
                       SENSIBLE_REACTIONS), min_size=1, max_size=3),
    st.floats(0, 10), st.floats(0, 10))

HOSTILE_VALUES = st.one_of(quantity(["m"]), ODD_TEXT, MAGNITUDES, st.integers(1, 60).map(_deep),
                           st.none(), st.lists(ODD_TEXT, max_size=3))
TOP_LEVEL_KEYS = ["schema_version", "title", "geometry", "inner", "layers", "inner_boundary",
                  "outer_boundary", "regime", "probes", "tolerances", "tags", "length", "area",
                  "reference", "unknown_field"]


def _mutate(document: dict, key: str, value: object, drop: bool) -> dict:
    changed = dict(document)
    if drop:
        changed.pop(key, None)
    else:
        changed[key] = value
    return changed


def _mutate_layer(document: dict, field: str, value: object) -> dict:
    changed = dict(document)
    layers = [dict(layer) for layer in changed["layers"]]
    layers[0][field] = value
    changed["layers"] = layers
    return changed


#: One field of a sensible document replaced by something hostile, or dropped.
NEAR_VALID_CASES = st.one_of(
    st.builds(_mutate, SENSIBLE_CASES, st.sampled_from(TOP_LEVEL_KEYS), HOSTILE_VALUES,
              st.booleans()),
    st.builds(_mutate_layer, SENSIBLE_CASES,
              st.sampled_from(["thickness", "diffusivity", "partition", "reaction", "name",
                               "initial"]),
              st.one_of(HOSTILE_VALUES, REACTIONS)),
)

ALL_CASES = st.one_of(SENSIBLE_CASES, NEAR_VALID_CASES, NEAR_VALID_CASES, CASES)


def _outcome(document) -> str:
    try:
        result = check_case(document)
    except schemas.CaseError as error:
        assert error.errors, "a CaseError must name what is wrong"
        for item in error.errors:
            assert set(item) >= {"path", "message"} and isinstance(item["message"], str)
        return "case_error"
    assert isinstance(result, dict)
    assert result.get("status") in ("succeeded", "failed"), result.get("status")
    if result["status"] == "succeeded":
        assert result.get("verdict") in ("pass", "fail")
    return result["status"]


@pytest.mark.slow
def test_any_document_gives_a_record_or_a_case_error():
    seen: dict[str, int] = {}

    @settings(max_examples=400, derandomize=True, deadline=None, database=None,
              suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large,
                                     HealthCheck.filter_too_much])
    @given(document=ALL_CASES)
    def fuzz(document):
        outcome = _outcome(document)
        seen[outcome] = seen.get(outcome, 0) + 1

    fuzz()
    print(f"\nFUZZ check_case outcomes over generated documents: {seen}")
    # The generator reaches both sides of validation, or it tests only one of them.
    assert seen.get("case_error", 0) > 0
    assert seen.get("succeeded", 0) + seen.get("failed", 0) > 0


@pytest.mark.slow
@settings(max_examples=150, derandomize=True, deadline=None, database=None,
          suppress_health_check=[HealthCheck.too_slow])
@given(thickness=st.floats(1e-12, 1e6), diffusivity=st.floats(1e-30, 1e10),
       concentration=st.floats(0, 1e12), geometry=st.sampled_from(["slab", "cylinder",
                                                                    "sphere"]),
       inner=st.sampled_from(["0 m", "50 um", "1 mm"]))
def test_near_valid_documents_with_extreme_magnitudes(thickness, diffusivity, concentration,
                                                      geometry, inner):
    inner_boundary = ({"kind": "symmetry"} if inner == "0 m" and geometry != "slab"
                      else {"kind": "concentration", "value": f"{concentration!r} mol/m^3"})
    document = {
        "schema_version": 1, "title": "fuzz: extreme magnitudes", "geometry": geometry,
        "inner": inner,
        "layers": [{"name": "wall", "thickness": f"{thickness!r} m",
                    "diffusivity": f"{diffusivity!r} m^2/s", "partition": 1.0,
                    "reaction": {"kind": "first_order", "rate_constant": "0.01 1/s"}}],
        "inner_boundary": inner_boundary,
        "outer_boundary": {"kind": "concentration", "value": f"{concentration!r} mol/m^3"},
        "regime": {"kind": "steady"},
    }
    assert math.isfinite(thickness)
    _outcome(document)
