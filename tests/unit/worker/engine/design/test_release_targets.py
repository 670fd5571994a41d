"""The design targets of the release physics (issue 14; worker/engine/design/targets.py, the
requirements' reading of a record in requirements.py, the case's design rules): which cases
offer ``time_depleted``, ``front_position`` and ``compartment_inner``/``compartment_outer``, in
which dimension, for which layers, and how a requirement reads them from a record shaped as
the shared record contract states (``series.front_position`` with its ``layers``,
``quantities.time_depleted_layers``).

Check values are unit definitions (1 d = 86400 s, 1 um = 1e-6 m); the cases and the record
figures are invented inputs, not results.
"""

from __future__ import annotations

import copy
import dataclasses

import pytest

from schemas import CaseError, validate_case
from worker.engine.design.paths import parse_field, resolve, value_of, with_values
from worker.engine.design.requirements import (
    MET,
    NOT_MET,
    Requirement,
    judge,
    read_figure,
)
from worker.engine.design.targets import Target, TargetError, check_target, quantities
from worker.engine.model import Boundary

DAY = 86400.0

#: Invented: a drug layer loaded above solubility under a top coat with none.
COATING = {
    "schema_version": 1, "title": "Fixture: loaded coating", "geometry": "slab", "inner": 0,
    "area": "1 cm^2",
    "layers": [{"name": "drug layer", "thickness": "40 um", "diffusivity": "2e-14 m^2/s",
                "loading": "150 mg/mL", "solubility": "1.5 mg/mL"},
               {"name": "top coat", "thickness": "10 um", "diffusivity": "1e-14 m^2/s"}],
    "inner_boundary": {"kind": "symmetry"},
    "outer_boundary": {"kind": "concentration", "value": "0 mg/mL"},
    "regime": {"kind": "transient", "duration": "30 d", "times": ["1 d", "30 d"]},
}


def _case(**changes) -> dict:
    doc = copy.deepcopy(COATING)
    doc.update(changes)
    return doc


def _problem(doc=None):
    return validate_case(doc or COATING).problem


def test_a_dispersed_case_offers_the_depletion_time_and_the_front():
    offered = quantities(_problem())
    assert offered["time_depleted"].dimension == "time"
    assert offered["time_depleted"].per_layer and not offered["time_depleted"].at_time
    assert offered["front_position"].dimension == "length"
    assert offered["front_position"].at_time and offered["front_position"].layers == (0,)
    assert "compartment_outer" not in offered and "compartment_inner" not in offered


def test_a_case_loaded_at_or_below_solubility_offers_neither():
    doc = _case()
    doc["layers"][0]["loading"] = "1.5 mg/mL"
    offered = quantities(_problem(doc))
    assert "time_depleted" not in offered and "front_position" not in offered
    assert "release_fraction" in offered


def test_targets_are_checked_against_the_loaded_layers():
    problem = _problem()
    assert check_target(problem, Target("front_position", at=DAY)).key == \
        "front_position@86400s"
    named = check_target(problem, Target("time_depleted", layer=0))
    assert named.layer_name == "drug layer"
    with pytest.raises(TargetError, match="only for the layers 'drug layer'"):
        check_target(problem, Target("time_depleted", layer=1))
    with pytest.raises(TargetError, match="give the time"):
        check_target(problem, Target("front_position"))
    with pytest.raises(TargetError, match="not a series"):
        check_target(problem, Target("time_depleted", at=DAY))


def test_with_two_loaded_layers_the_front_needs_its_layer():
    doc = _case()
    doc["layers"][1].update(loading="20 mg/mL", solubility="0.5 mg/mL")
    problem = _problem(doc)
    assert quantities(problem)["front_position"].layers == (0, 1)
    with pytest.raises(TargetError, match="name one of the layers 'drug layer', 'top coat'"):
        check_target(problem, Target("front_position", at=DAY))
    assert check_target(problem, Target("front_position", layer=1, at=DAY)).layer_name == \
        "top coat"
    # time_depleted without a layer is the case's own figure (the last reserve gone)
    assert check_target(problem, Target("time_depleted")).layer is None


def test_a_compartment_face_offers_its_concentration_series():
    problem = _problem()
    medium = dataclasses.replace(problem, outer_boundary=Boundary("compartment", volume=2e-6))
    offered = quantities(medium)
    assert offered["compartment_outer"].dimension == "concentration"
    assert offered["compartment_outer"].at_time and not offered["compartment_outer"].per_layer
    assert "compartment_inner" not in offered
    assert check_target(medium, Target("compartment_outer", at=DAY)).at == DAY
    with pytest.raises(TargetError, match="no quantity 'compartment_outer'"):
        check_target(problem, Target("compartment_outer", at=DAY))


# --- requirements in the case ------------------------------------------------------------------


def test_requirements_on_the_new_quantities_are_read_in_their_dimension():
    validated = validate_case(_case(requirements=[
        {"id": "R1", "quantity": "time_depleted", "at_least": "20 d"},
        {"id": "R2", "quantity": "front_position", "at": "10 d", "at_most": "30 um"},
        {"id": "R3", "quantity": "time_depleted", "layer": "drug layer", "at_least": "20 d"},
    ]))
    r1, r2, r3 = validated.design.requirements
    assert r1.low == 20 * DAY and r1.unit == "s"
    assert r2.high == pytest.approx(3e-5, rel=1e-15) and r2.at == 10 * DAY and r2.unit == "m"
    assert r3.layer == 0 and r3.layer_name == "drug layer"
    assert 10 * DAY in validated.problem.regime.times  # the series time is added to the run


@pytest.mark.parametrize(("requirement", "path", "contains"), [
    ({"quantity": "time_depleted", "layer": "top coat", "at_least": "20 d"},
     "requirements[0].layer", "only for the layers 'drug layer'"),
    ({"quantity": "front_position", "at_most": "30 um"}, "requirements[0].at", "series"),
    ({"quantity": "front_position", "at": "1 d", "at_most": "30 s"}, "requirements[0].at_most",
     "length"),
    ({"quantity": "compartment_outer", "at": "1 d", "at_most": "1 mg/mL"},
     "requirements[0].quantity", "not a quantity"),
])
def test_bad_requirements_on_the_new_quantities_name_their_field(requirement, path, contains):
    with pytest.raises(CaseError) as info:
        validate_case(_case(requirements=[{"id": "R", **requirement}]))
    errors = info.value.errors
    assert [e["path"] for e in errors] == [path], errors
    assert contains in errors[0]["message"]


def test_a_plain_case_refuses_the_dispersed_quantities():
    doc = _case(requirements=[{"id": "R", "quantity": "time_depleted", "at_least": "1 d"}])
    doc["layers"][0].pop("solubility")
    with pytest.raises(CaseError) as info:
        validate_case(doc)
    assert [e["path"] for e in info.value.errors] == ["requirements[0].quantity"]


def test_uncertainty_sweep_and_limit_vary_the_release_fields():
    problem = _problem()
    for path, expected in (("layers[0].loading", 150.0), ("layers[0].solubility", 1.5),
                           ("layers[0].initial", 150.0)):
        assert value_of(problem, resolve(problem, path)) == expected
    changed = with_values(problem, {parse_field("layers[0].loading"): 90.0,
                                    parse_field("layers[0].solubility"): 2.0})
    assert changed.layers[0].initial == 90.0 and changed.layers[0].solubility == 2.0
    with pytest.raises(ValueError, match="no solubility"):
        resolve(problem, "layers[1].solubility")
    validated = validate_case(_case(
        requirements=[{"id": "R", "quantity": "time_depleted", "at_least": "20 d"}],
        sweep={"vary": "layers[0].solubility", "values": ["1 mg/mL", "2 mg/mL"]},
        design_limit={"vary": "layers[0].loading", "requirement": "R",
                      "range": ["50 mg/mL", "200 mg/mL"]}), budgets=None)  # the rules only
    assert validated.design.sweep.values == (1.0, 2.0)
    assert validated.design.limit.low == 50.0 and validated.design.limit.high == 200.0


# --- reading a record --------------------------------------------------------------------------

#: Invented figures in the record contract's shapes (not results).
SERIES = {
    "time": {"values": [DAY, 10 * DAY, 30 * DAY], "unit": "s"},
    "front_position": {"values": [[1.0e-5, 3.0e-5], [2.5e-5, None], [None, None]],
                       "unit": "m", "layers": ["drug layer", "top coat"],
                       "uncertainty": [[1e-8, 2e-8], [3e-8, None], [None, None]]},
    "compartment_outer": {"values": [0.1, 0.2, 0.25], "unit": "kg/m^3",
                          "uncertainty": [1e-4, 1e-4, 1e-4]},
}
QUANTITIES = {
    "time_depleted": {"value": 12 * DAY, "unit": "s", "uncertainty": 600.0},
    "time_depleted_layers": {"value": [12 * DAY, None],
                             "unit": "s", "layers": ["drug layer", "top coat"]},
}


def _req(**kwargs) -> Requirement:
    return Requirement(id="R", **kwargs)


def test_the_front_is_read_by_its_layers_name_at_the_time():
    drug = read_figure(_req(quantity="front_position", layer=0, layer_name="drug layer",
                            at=10 * DAY, high=3e-5), {}, SERIES)
    assert drug.value == 2.5e-5 and drug.uncertainty == 3e-8
    top = read_figure(_req(quantity="front_position", layer=1, layer_name="top coat",
                           at=DAY, high=3e-5), {}, SERIES)
    assert top.value == 3.0e-5
    gone = read_figure(_req(quantity="front_position", layer=1, layer_name="top coat",
                            at=10 * DAY, high=3e-5), {}, SERIES)
    assert gone.value is None and "no undissolved solute" in gone.missing
    unnamed = read_figure(_req(quantity="front_position", at=DAY, high=3e-5), {}, SERIES)
    assert unnamed.value is None and "name one" in unnamed.missing
    one = {**SERIES, "front_position": {**SERIES["front_position"], "layers": ["drug layer"],
                                        "values": [[1.0e-5], [2.5e-5], [None]]}}
    assert read_figure(_req(quantity="front_position", at=DAY, high=3e-5), {}, one).value \
        == 1.0e-5


def test_the_depletion_time_is_an_event_time():
    requirement = _req(quantity="time_depleted", high=20 * DAY, unit="s")
    assert judge(requirement, read_figure(requirement, QUANTITIES, {}, 30 * DAY))["status"] \
        == MET
    late = _req(quantity="time_depleted", high=10 * DAY, unit="s")
    assert judge(late, read_figure(late, QUANTITIES, {}, 30 * DAY))["status"] == NOT_MET
    # not reached within a 30-day run: known only to exceed it
    absent = read_figure(requirement, {}, {}, 30 * DAY)
    assert absent.value is None and absent.beyond == 30 * DAY
    assert judge(requirement, absent)["status"] == NOT_MET


def test_a_layers_depletion_time_is_read_by_name_and_null_means_beyond_the_run():
    drug = _req(quantity="time_depleted", layer=0, layer_name="drug layer", low=10 * DAY)
    assert read_figure(drug, QUANTITIES, {}, 30 * DAY).value == 12 * DAY
    top = _req(quantity="time_depleted", layer=1, layer_name="top coat", low=10 * DAY)
    reading = read_figure(top, QUANTITIES, {}, 30 * DAY)
    assert reading.value is None and reading.beyond == 30 * DAY
    assert judge(top, reading)["status"] == MET


def test_the_compartment_series_is_read_at_the_time():
    reading = read_figure(_req(quantity="compartment_outer", at=10 * DAY, high=1.0), {}, SERIES)
    assert reading.value == 0.2 and reading.uncertainty == 1e-4
    missing = read_figure(_req(quantity="compartment_inner", at=10 * DAY, high=1.0), {}, SERIES)
    assert missing.value is None and "no series compartment_inner" in missing.missing
