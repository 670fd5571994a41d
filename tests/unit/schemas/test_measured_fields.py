"""The measured-data fields of a case (``measurements``, ``calibration``): every rule names its
path and what was expected; valid sets normalise to SI, and their times join the output times."""

from __future__ import annotations

import copy

import pytest

from schemas.build import validate_case
from schemas.errors import CaseError
from worker.engine.cost import calibration_evaluations, estimate_cost

FILM = {
    "schema_version": 1, "title": "plane sheet release", "geometry": "slab", "inner": "0 m",
    "area": "1 cm^2",
    "layers": [{"name": "film", "thickness": "100 um", "diffusivity": "1e-13 m^2/s",
                "initial": "1 mol/m^3"}],
    "inner_boundary": {"kind": "symmetry"},
    "outer_boundary": {"kind": "concentration", "value": "0 mol/m^3"},
    "regime": {"kind": "transient", "duration": "10 d", "times": ["1 d", "10 d"]},
    "probes": ["0 m"],
}
FRACTIONS = {"id": "S1", "quantity": "release_fraction", "times": ["2 d", "3 d"],
             "values": [0.2, 0.3], "standard_uncertainty": [0.01, 0.01], "use": "calibration"}
FIT = {"parameters": [{"field": "layers[0].diffusivity",
                       "bounds": ["1e-15 m^2/s", "1e-11 m^2/s"], "scale": "log"}]}


def _with(**extra) -> dict:
    doc = copy.deepcopy(FILM)
    doc.update(copy.deepcopy(extra))
    return doc


def _set(**changes) -> dict:
    found = copy.deepcopy(FRACTIONS)
    for key, value in changes.items():
        if value is None:
            found.pop(key, None)
        else:
            found[key] = value
    return found


def _errors(doc: dict) -> list[tuple[str, str]]:
    with pytest.raises(CaseError) as caught:
        validate_case(doc)
    return [(e["path"], e["message"]) for e in caught.value.errors]


@pytest.mark.parametrize(("measurement", "path", "words"), [
    (_set(quantity="flux_outer"), "measurements[0].quantity", "not a series this case reports"),
    (_set(quantity="t50"), "measurements[0].quantity", "not a series this case reports"),
    (_set(values=[0.2]), "measurements[0].values", "one value per time"),
    (_set(standard_uncertainty=[0.01]), "measurements[0].standard_uncertainty", "one per value"),
    (_set(standard_uncertainty=None), "measurements[0]", "exactly one of standard_uncertainty"),
    (_set(relative_uncertainty=0.1), "measurements[0]", "exactly one of standard_uncertainty"),
    (_set(standard_uncertainty=None, relative_uncertainty=0.1, values=[0.0, 0.3]),
     "measurements[0].relative_uncertainty", "zero uncertainty"),
    (_set(times=["2 d", "11 d"]), "measurements[0].times[1]", "after the end of the run"),
    (_set(times=["2 d", "0 d"]), "measurements[0].times[1]", "greater than 0"),
    (_set(unit="mg"), "measurements[0].unit", "dimensionless"),
    (_set(quantity="released_outer"), "measurements[0].unit", "give the unit"),
    (_set(quantity="released_outer", unit="m"), "measurements[0].unit", "not a unit of"),
    (_set(quantity="released_outer", unit="mg"), "measurements[0].unit", "mass basis"),
    (_set(quantity="probe_concentration"), "measurements[0].probe", "probe index"),
    (_set(quantity="probe_concentration", probe=3, unit="mol/m^3"), "measurements[0].probe",
     "the case has 1 probes"),
    (_set(probe=0), "measurements[0].probe", "only with it"),
    (_set(layer="core"), "measurements[0].layer", "not reported per layer"),
    (_set(quantity="concentration_min", layer="core", unit="mol/m^3"),
     "measurements[0].layer", "no layer is named 'core'"),
    (_set(use="fitting"), "measurements[0].use", "must be one of"),
])
def test_a_wrong_measurement_set_names_its_path(measurement, path, words):
    errors = _errors(_with(measurements=[measurement], calibration=FIT))
    assert any(p == path and words in m for p, m in errors), errors


def test_set_ids_are_unique():
    errors = _errors(_with(measurements=[FRACTIONS, FRACTIONS], calibration=FIT))
    assert ("measurements[1].id", "'S1' is used by an earlier set: ids are unique among the "
                                  "measurement sets") in errors


def test_a_steady_case_takes_no_measurements():
    doc = _with(measurements=[_set(use="validation")])
    doc["regime"] = {"kind": "steady"}
    del doc["layers"][0]["initial"]
    assert any(p == "measurements" and "must be transient" in m for p, m in _errors(doc))


@pytest.mark.parametrize(("calibration", "measurements", "path", "words"), [
    (None, [FRACTIONS], "measurements[0].use", "need a calibration block"),
    (FIT, [_set(use="validation")], "calibration", "nothing to fit"),
    ({"parameters": [{"field": "layers[0].diffusivity", "bounds": ["1e-15 m^2/s", "1e-14 m^2/s"]}]},
     [FRACTIONS], "calibration.parameters[0].bounds", "must lie within the bounds"),
    ({"parameters": [{"field": "layers[0].diffusivity", "bounds": ["1e-11 m^2/s", "1e-15 m^2/s"]}]},
     [FRACTIONS], "calibration.parameters[0].bounds", "below the second"),
    ({"parameters": [{"field": "layers[0].diffusivity", "bounds": ["1e-15 m", "1e-11 m"]}]},
     [FRACTIONS], "calibration.parameters[0].bounds[0]", "expected a diffusivity"),
    ({"parameters": [{"field": "layers[0].partition", "bounds": [0.0, 2.0], "scale": "log"}]},
     [FRACTIONS], "calibration.parameters[0].bounds[0]", "must be >"),
    ({"parameters": [{"field": "layers[2].diffusivity", "bounds": [1, 2]}]}, [FRACTIONS],
     "calibration.parameters[0].field", "layers[2]"),
    ({"parameters": [FIT["parameters"][0], FIT["parameters"][0]]}, [FRACTIONS],
     "calibration.parameters[1].field", "fitted already"),
    ({"parameters": [FIT["parameters"][0],
                     {"field": "layers[0].thickness", "bounds": ["10 um", "1 mm"]}]},
     [FRACTIONS], "calibration.parameters", "more than 2 calibration points"),
    ({"parameters": [{"field": "layers[0].diffusivity", "bounds": [1, 2], "scale": "cubic"}]},
     [FRACTIONS], "calibration.parameters[0].scale", "must be one of"),
])
def test_a_wrong_calibration_names_its_path(calibration, measurements, path, words):
    extra: dict = {"measurements": measurements}
    if calibration is not None:
        extra["calibration"] = calibration
    errors = _errors(_with(**extra))
    assert any(p == path and words in m for p, m in errors), errors


def test_a_calibrated_input_cannot_also_be_uncertain_or_varied():
    doc = _with(measurements=[FRACTIONS], calibration=FIT,
                uncertainty={"inputs": [{"field": "layers[0].diffusivity",
                                         "distribution": "lognormal", "relative_sd": 0.2}]},
                sweep={"vary": "layers[0].diffusivity", "values": ["1e-13 m^2/s"]})
    errors = _errors(doc)
    for where in ("uncertainty.inputs", "sweep.vary"):
        assert any(p == where and "is calibrated" in m for p, m in errors), errors


def test_valid_sets_normalise_to_si_and_join_the_output_times():
    amounts = {"id": "S2", "quantity": "released_outer", "unit": "nmol", "times": ["12 h"],
               "values": [5.0], "relative_uncertainty": 0.1, "use": "validation"}
    probe = {"id": "S3", "quantity": "probe_concentration", "probe": 0, "unit": "mmol/L",
             "times": ["5 d"], "values": [0.5], "standard_uncertainty": [0.05],
             "use": "validation"}
    case = validate_case(_with(measurements=[FRACTIONS, amounts, probe], calibration=FIT))
    sets = case.design.measurements
    assert sets[1].values == pytest.approx((5e-9,)) and sets[1].unit == "mol"
    assert sets[1].standard_uncertainty == pytest.approx((5e-10,))
    assert sets[2].values == pytest.approx((0.5,)) and sets[2].unit == "mol/m^3"
    assert set(case.problem.regime.times) >= {43200.0, 172800.0, 259200.0, 432000.0}
    assert [t.key for t in case.design.validation_targets] == [
        "released_outer@43200s", "probe_concentration[probe 0]@432000s"]
    normalised = case.normalised["measurements"][1]
    assert normalised["unit"] == "mol" and normalised["values"] == pytest.approx([5e-9])
    assert case.normalised["calibration"]["parameters"][0]["scale"] == "log"


def test_the_percent_sign_reads_fractions():
    case = validate_case(_with(measurements=[_set(unit="%", values=[20.0, 30.0],
                                                  standard_uncertainty=[1.0, 1.0])],
                               calibration=FIT))
    assert case.design.measurements[0].values == pytest.approx((0.2, 0.3))


def test_the_calibration_is_charged_to_the_cost_estimate():
    case = validate_case(_with(measurements=[FRACTIONS], calibration=FIT))
    plain = validate_case(_with())
    estimate = estimate_cost(case.problem, case.design)
    assert estimate.calibration_work == pytest.approx(
        calibration_evaluations(1) * estimate.trial_work)
    assert estimate.work > estimate_cost(plain.problem, plain.design).work
    assert calibration_evaluations(2) > calibration_evaluations(1) > 0


def test_both_unit_routes_read_the_measured_values():
    """``inputs.units`` compares pint's reading of every measured value, its uncertainty and
    time, and the calibration bounds, with the unit table's; an error in either fails it."""
    from types import MappingProxyType

    from worker.engine.independent_problem import build_independent_problem
    from worker.engine.input_checks import unit_routes_check

    amounts = {"id": "S2", "quantity": "released_outer", "unit": "nmol", "times": ["12 h"],
               "values": [5.0], "standard_uncertainty": [0.4], "use": "validation"}
    case = validate_case(_with(measurements=[FRACTIONS, amounts], calibration=FIT))
    independent = build_independent_problem(case.original)
    assert independent.regime.times == case.problem.regime.times
    check = unit_routes_check(case.problem, independent, case.normalised, case.original)
    assert check.passed, check.detail
    for path in ("measurements[1].values[0]", "measurements[1].standard_uncertainty[0]",
                 "measurements[0].times[1]", "calibration.parameters[0].bounds[1]"):
        assert path in independent.table_values
    for factor in (1.001, 0.999):  # the primary route's reading off high, then low
        wrong = copy.deepcopy(case.normalised)
        wrong["measurements"][1]["values"][0] *= factor
        check = unit_routes_check(case.problem, independent, wrong, case.original)
        assert not check.passed and "measurements[1].values[0]" in check.detail
    unread = dict(independent.table_values)
    del unread["measurements[1].standard_uncertainty[0]"]
    blind = type(independent).__new__(type(independent))
    blind.__dict__.update(independent.__dict__)
    object.__setattr__(blind, "table_values", MappingProxyType(unread))
    check = unit_routes_check(case.problem, blind, case.normalised, case.original)
    assert not check.passed and "not read by the table route" in check.detail


def test_calibration_data_never_count_as_validation():
    """A validation point repeating a calibration point is refused; the same time with another
    value (a second lot) is a fair comparison."""
    repeated = _set(id="S2", use="validation", times=["3 d"], values=[0.3],
                    standard_uncertainty=[0.01])
    errors = _errors(_with(measurements=[FRACTIONS, repeated], calibration=FIT))
    assert any(p == "measurements[1].values[0]" and "never count as validation" in m
               for p, m in errors), errors
    other_lot = _set(id="S2", use="validation", times=["3 d"], values=[0.31],
                     standard_uncertainty=[0.01])
    validate_case(_with(measurements=[FRACTIONS, other_lot], calibration=FIT))
