"""The design parts of the text report (``fluxproof check``) on records built in
``design_records``: what the record says is what the report prints."""

from __future__ import annotations

from service.report.text import render_text
from service.report.text_design import (
    design_verdict_line,
    limit_lines,
    requirement_lines,
    sweep_lines,
    uncertainty_lines,
)
from tests.unit.service.report import design_records as records


def test_report_opens_with_both_verdicts_labelled_and_closes_with_both():
    text = render_text(records.record("not_met"), records.case())
    lines = text.splitlines()
    top = lines[:lines.index(next(line for line in lines if line.startswith("Inputs")))]
    assert "[✓] Calculation verified: yes (1 of 1 checks within their limits)" in top
    assert any(line.startswith("[✗] Design requirements met: NO") for line in top)
    assert "CALCULATION VERDICT: PASS  (1/1 checks passed)" in lines
    assert "DESIGN REQUIREMENTS: NOT MET  (1 of 2 not met: REQ-LOW)" in lines
    assert "test caution" in lines[-1]


def test_closing_design_line_for_every_status():
    assert design_verdict_line(records.record("met")).startswith("DESIGN REQUIREMENTS: MET  (")
    assert design_verdict_line(records.record("indeterminate")).startswith(
        "DESIGN REQUIREMENTS: UNDECIDED")
    assert design_verdict_line(records.record("none_stated")).startswith(
        "DESIGN REQUIREMENTS: NONE STATED")
    assert design_verdict_line(records.record("met", verdict="fail")).startswith(
        "DESIGN REQUIREMENTS: MET ON UNVERIFIED FIGURES")


def test_requirements_table_marks_the_missed_one_only():
    lines = requirement_lines(records.record("not_met"), records.case())
    missed = [line for line in lines if "<<< requirement missed" in line]
    assert [line.split() for line in missed] == [
        ["✗", "REQ-LOW", "NOT", "MET", "<<<", "requirement", "missed"]]
    assert "      value       0.002 mol/m^3 (2 µmol/L)" in lines
    assert "      required    ≥ 0.005 mol/m^3 (5 µmol/L)" in lines
    assert "      margin      -0.003 mol/m^3 (-3 µmol/L)   relative -0.6" in lines
    assert ["✓", "REQ-HIGH", "met"] in [line.split() for line in lines]
    met = requirement_lines(records.record("met"), records.case())
    assert not [line for line in met if "NOT MET" in line or "missed" in line]
    assert requirement_lines(records.record("none_stated"), None) == [
        "Design requirements: none stated (only the calculation is judged)"]


def test_uncertainty_limit_and_sweep_blocks():
    record = records.full_record()
    uncertainty = "\n".join(uncertainty_lines(record))
    assert "4096 trials, sampler latin_hypercube, seed 20261204; converged" in uncertainty
    assert "[0.002, 0.006] mol/m^3 (95 %)" in uncertainty
    assert "REQ-LOW      0.27 ± 0.007" in uncertainty
    assert "layers[0].diffusivity" in uncertainty and "0.61" in uncertainty
    assert "verification subset: 7 trial(s)" in uncertainty
    limit = limit_lines(record)
    assert limit[1] == ("  Design limit of layers[0].thickness for REQ-LOW: 8.1e-05 m = 81 µm; "
                        "the requirement is met at or below it")
    no_limit = limit_lines(dict(record, design_limit=records.NO_LIMIT))
    assert "No design limit" in no_limit[1] and "whole range" in no_limit[1]
    sweep = sweep_lines(record)
    assert sweep[3].split() == ["0.0001", "(100", "µm)", "0.006", "met", "yes"]
    assert sweep[5].split() == ["0.0002", "(200", "µm)", "0", "NOT", "MET", "NO"]
    text = render_text(record, records.case())
    for heading in ("Input uncertainty (Monte Carlo, JCGM 101:2008)", "Design limit",
                    "Sweep of layers[0].thickness"):
        assert heading in text
    plain = render_text(records.record(), records.case())
    assert "Input uncertainty" not in plain and "Sweep of" not in plain
