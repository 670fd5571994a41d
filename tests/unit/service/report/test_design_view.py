"""The two verdicts apart, the requirement rows and the design blocks as the reports read them
(``service.report.design_view``), on records built in ``design_records``."""

from __future__ import annotations

import pytest

from service.report.design_view import (
    CALCULATION_LABEL,
    DESIGN_LABEL,
    calculation_statement,
    design_statement,
    headline_requirements,
    limit_view,
    requirement_rows,
    requirements_on,
    sweep_view,
    uncertainty_view,
)
from tests.unit.service.report import design_records as records


def test_a_missed_requirement_is_a_no_with_its_own_state_and_never_a_pass():
    missed = design_statement(records.record("not_met"))
    assert missed.label == DESIGN_LABEL
    assert missed.answer.startswith("NO") and missed.state == "miss" and missed.mark == "✗"
    assert "REQ-LOW" in missed.detail and "REQ-HIGH" not in missed.detail
    met = design_statement(records.record("met"))
    assert met.answer == "yes" and met.state == "met" and met.mark == "✓"
    assert "not met" not in met.detail


def test_indeterminate_and_none_stated_read_apart_from_met_and_missed():
    undecided = design_statement(records.record("indeterminate"))
    assert undecided.state == "undecided" and undecided.answer.startswith("UNDECIDED")
    none = design_statement(records.record("none_stated"))
    assert none.state == "none" and none.answer == "no design requirements stated"
    older = records.record("met")
    older.pop("design")  # a record made before requirements existed
    assert design_statement(older).answer == "no design requirements stated"


def test_calculation_verdict_stands_apart_from_the_design():
    verified_but_missed = records.record("not_met", verdict="pass")
    assert calculation_statement(verified_but_missed).answer == "yes"
    assert calculation_statement(verified_but_missed).label == CALCULATION_LABEL
    assert design_statement(verified_but_missed).state == "miss"
    failed_check_but_met = records.record("met", verdict="fail")
    calculation = calculation_statement(failed_check_but_met)
    assert calculation.state == "fail" and calculation.answer.startswith("NO")
    design = design_statement(failed_check_but_met)
    assert design.state != "met" and "not to be relied on" in design.detail


def test_a_run_not_finished_has_neither_verdict_yet():
    queued = records.record(status="queued")
    assert calculation_statement(queued).state == "open"
    assert design_statement(queued).state == "open"
    failed = dict(records.record(), status="failed", error="engine error: boom")
    assert "boom" in calculation_statement(failed).detail


def test_requirement_rows_carry_units_readable_units_and_the_relation_from_the_case():
    low, high = requirement_rows(records.record(), records.case())
    assert (low.id, low.what, low.relation, low.status) == (
        "REQ-LOW", "concentration_min [core]", "≥", "not_met")
    assert low.readable_value == "2 µmol/L" and low.readable_bound == "5 µmol/L"
    assert low.readable_margin == "-3 µmol/L" and low.source == "design input 7 rev A"
    assert high.relation == "≤" and high.words == "met"


@pytest.mark.parametrize(("value", "bound", "margin", "expected"), [
    (0.002, 0.005, -0.003, "≥"),   # margin = value − bound: a lower bound
    (0.002, 0.005, 0.003, "≤"),    # margin = bound − value: an upper bound
])
def test_relation_without_the_case_follows_the_margin(value, bound, margin, expected):
    record = records.record()
    record["design"]["requirements"] = [records.requirement(
        "R", "concentration_min", value, bound, margin, "met", "mol/m^3")]
    assert requirement_rows(record, None)[0].relation == expected


def test_range_and_series_requirements_read_whole():
    record = records.record()
    record["design"]["requirements"] = [records.requirement(
        "R", "release_fraction", 0.5, [0.2, 0.6], 0.1, "met", "1", at=604800.0)]
    row = requirement_rows(record, None)[0]
    assert row.relation == "between" and row.bound_list == [0.2, 0.6]
    assert row.what == "release_fraction at 7 d (604800 s)"
    assert row.readable_value == "50 %" and row.readable_bound == "20 % to 60 %"


def test_headline_puts_missed_requirements_first():
    record = records.record()
    record["design"]["requirements"].reverse()  # met first in the record
    assert [r.id for r in headline_requirements(record)] == ["REQ-LOW", "REQ-HIGH"]
    assert headline_requirements(records.record("none_stated")) == []


def test_uncertainty_view_reads_every_part_of_the_block():
    view = uncertainty_view(records.full_record())
    assert view is not None
    [row] = view.rows
    assert (row.key, row.unit, row.mean, row.interval) == (
        "concentration_min[core]", "mol/m^3", 0.004, [0.002, 0.006])
    assert row.bounds == [0.005]  # REQ-LOW bounds concentration_min in layer core
    assert row.readable_mean == "4 µmol/L" and row.readable_interval == "2 µmol/L to 6 µmol/L"
    assert [(p.id, p.probability_met, p.standard_error) for p in view.probabilities] == [
        ("REQ-LOW", 0.27, 0.007)]
    assert {(s.field, s.first_index, s.total_index) for s in view.sensitivity} == {
        ("layers[0].diffusivity", 0.61, 0.66), ("outer_boundary.value", 0.3, 0.35)}
    assert "4096 trials" in view.run_line and "20261204" in view.run_line
    assert "latin_hypercube" in view.run_line and "converged" in view.run_line
    assert "7 trial(s)" in view.verification_line and "every one passed" in view.verification_line
    assert uncertainty_view(records.record()) is None


def test_unconverged_run_and_failed_subset_are_said_plainly():
    record = records.full_record()
    record["uncertainty"].update(converged=False)
    record["uncertainty"]["verification"]["all_passed"] = False
    view = uncertainty_view(record)
    assert "NOT converged" in view.run_line
    assert "SOME FAILED" in view.verification_line


def test_requirements_on_matches_layer_and_time_exactly():
    record = records.record()
    assert [e["id"] for e in requirements_on(record, "concentration_min[core]")] == ["REQ-LOW"]
    assert requirements_on(record, "concentration_min[shell]") == []
    assert requirements_on(record, "concentration_min@3600s") == []
    assert [e["id"] for e in requirements_on(record, "flux_outer")] == ["REQ-HIGH"]


def test_limit_view_with_and_without_a_limit():
    found = records.full_record()
    view = limit_view(found)
    assert view.readable_value == "81 µm" and view.met_side == "below"
    assert "81 µm" in view.sentence and "at or below" in view.sentence
    assert "verified at the limit" in view.verdict_words
    none = dict(records.record(), design_limit=records.NO_LIMIT)
    missing = limit_view(none)
    assert missing.value is None and "No design limit" in missing.sentence
    assert "met over the whole range" in missing.sentence
    failed = dict(records.record(), design_limit=dict(records.LIMIT, verdict="fail"))
    assert "FAILED" in limit_view(failed).verdict_words


def test_sweep_view_rows():
    view = sweep_view(records.full_record())
    assert view.readable_values == ["100 µm", "150 µm", "200 µm"]
    assert view.quantity_units == {"concentration_min[core]": "mol/m^3"}
    assert view.requirements == {"REQ-LOW": ["met", "not_met", "not_met"]}
    assert view.verdicts == ["pass", "pass", "fail"]
    assert sweep_view(records.record()) is None
