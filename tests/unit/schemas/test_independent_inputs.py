"""Seeded bugs in the shared input path turn the record's verdict to fail (schemas.checking).

Two bugs a seeded-bug study found invisible while every method read the same problem:
(a) pint reading ``um`` as 1e-3 m (or, the other way, as 1e-9 m), injected into the cached
conversion of ``worker.engine.units``; (b) ``Problem.face_partition`` answering the layer's
partition for a face that gives its own, injected into the primary class only. Each must fail
``inputs.units`` or ``inputs.interpretation`` through ``check_case``, and the same cases must
pass without the bug.

The cases are invented for these tests (not the demo cases); the check values are unit
definitions (1 um = 1e-6 m, SI Brochure 2019) and the cases' own boundary partitions.
"""

from __future__ import annotations

import copy
import decimal

import pytest

from schemas.checking import check_case
from worker.engine import model, units

STEADY = {
    "schema_version": 1, "title": "drug-eluting cylinder wall (invented)",
    "geometry": "cylinder", "inner": "1.5 mm", "length": "18 mm",
    "layers": [{"name": "wall", "thickness": "400 um", "diffusivity": "5e-12 m^2/s",
                "partition": 2.0,
                "reaction": {"kind": "first_order", "rate_constant": "1e-5 1/s"}}],
    "inner_boundary": {"kind": "concentration", "value": "10 ug/mL", "partition": 0.5},
    "outer_boundary": {"kind": "mass_transfer", "coefficient": "2e-8 m/s", "bulk": "0 ug/mL"},
    "regime": {"kind": "steady"},
    "probes": ["1.5 mm"],
}
TRANSIENT = {
    "schema_version": 1, "title": "loaded film releasing into a sink (invented)",
    "geometry": "slab", "inner": "0 m", "area": "1 cm^2",
    "layers": [{"name": "film", "thickness": "50 um", "diffusivity": "1e-13 m^2/s",
                "partition": 1.0, "initial": "20 mg/mL"}],
    "inner_boundary": {"kind": "symmetry"},
    "outer_boundary": {"kind": "concentration", "value": "0.5 mg/mL", "partition": 4.0},
    "regime": {"kind": "transient", "duration": "10 h", "times": ["1 h", "4 h", "10 h"]},
}


def _check(record: dict, name: str) -> dict:
    return next(c for c in record["checks"] if c["name"] == name)


@pytest.mark.parametrize("case", [STEADY, TRANSIENT], ids=["steady", "transient"])
def test_both_inputs_checks_pass_without_a_bug(case):
    record = check_case(copy.deepcopy(case))
    assert record["verdict"] == "pass"
    assert [c["name"] for c in record["checks"][:2]] == ["inputs.units", "inputs.interpretation"]
    assert all(c["passed"] for c in record["checks"][:2])


@pytest.fixture
def micrometre_read_as(monkeypatch):
    """Make the pint route read ``um`` with the given factor (the conversion is cached, so the
    cached function itself is replaced)."""
    cached = units.unit_to_si

    def inject(factor: str) -> None:
        def misread(unit: str):
            if unit == "um":
                return decimal.Decimal(factor), cached("um")[1]
            return cached(unit)

        monkeypatch.setattr(units, "unit_to_si", misread)

    return inject


@pytest.mark.parametrize(
    ("case", "factor"),
    [(STEADY, "1e-3"), (STEADY, "1e-9"), (TRANSIENT, "1e-3")],
    # (a transient film read 1000 times too thin is also caught, but the time-step check then
    # integrates the primary's stiff film on the independent mesh for a minute or more)
    ids=["steady-too high", "steady-too low", "transient-too high"],
)
def test_micrometre_misread_by_pint_fails_the_record(micrometre_read_as, case, factor):
    micrometre_read_as(factor)
    record = check_case(copy.deepcopy(case))
    assert record["status"] == "succeeded"
    assert record["verdict"] == "fail"
    units_check = _check(record, "inputs.units")
    assert not units_check["passed"]
    assert "worst: layers[0].thickness" in units_check["detail"]
    assert units_check["value"] == pytest.approx(0.999, rel=1e-12)
    assert not _check(record, "inputs.interpretation")["passed"]


@pytest.mark.parametrize("case", [STEADY, TRANSIENT], ids=["steady", "transient"])
def test_face_partition_ignoring_the_boundarys_own_fails_the_record(monkeypatch, case):
    monkeypatch.setattr(model.Problem, "face_partition", lambda self, side: (
        self.layers[0] if side == "inner" else self.layers[-1]).partition)
    record = check_case(copy.deepcopy(case))
    assert record["verdict"] == "fail"
    assert _check(record, "inputs.units")["passed"]  # the units are read alike
    interpretation = _check(record, "inputs.interpretation")
    assert not interpretation["passed"]
    assert "worst: face_partition(" in interpretation["detail"]
    # and the independent methods, on the other reading, disagree with the primary
    assert any(not c["passed"] for c in record["checks"] if c["name"].startswith("cross_check"))


def test_a_unit_outside_the_table_fails_both_inputs_checks_by_name():
    case = copy.deepcopy(STEADY)
    case["probes"] = ["5e-20 parsec"]  # pint's parsec; not in the second route's table
    record = check_case(case)
    assert record["status"] == "succeeded" and record["verdict"] == "fail"
    for name in ("inputs.units", "inputs.interpretation"):
        check = _check(record, name)
        assert not check["passed"] and check["value"] is None
        assert "probes[0]" in check["detail"]
