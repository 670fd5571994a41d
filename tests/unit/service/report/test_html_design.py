"""The design parts of the HTML report (the standalone report and the run page share
``report_body.html``), on records built in ``design_records``: the two verdicts apart, a missed
requirement marked as such, the headline, the tables and the figures."""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET

from flask import Flask

from service.report.html import render_report
from service.report.html_design import design_context
from tests.unit.service.report import design_records as records

SVG_NS = "{http://www.w3.org/2000/svg}"


def _render(record: dict, case: dict) -> str:
    with Flask("service").test_request_context():
        return render_report(record, case)


def _stamp(html: str, stamp_id: str) -> str:
    match = re.search(rf'<p class="stamp stamp-(\w+)" id="{stamp_id}">(.*?)</p>', html, re.DOTALL)
    assert match, f"no {stamp_id}"
    return match.group(1) + " " + re.sub(r"\s+", " ", re.sub(r"<[^>]+>", " ", match.group(2)))


def _svgs(html: str) -> list[ET.Element]:
    return [ET.fromstring(svg) for svg in re.findall(r"<svg\b.*?</svg>", html, re.DOTALL)]


def _ids(svg: ET.Element) -> set[str]:
    return {e.get("id") for e in svg.iter() if e.get("id")}


def test_two_stamps_a_missed_requirement_never_in_the_pass_style():
    html = _render(records.record("not_met"), records.case())
    calculation, design = _stamp(html, "stamp-calculation"), _stamp(html, "stamp-design")
    assert calculation.startswith("pass ") and "Calculation verified" in calculation
    assert design.startswith("miss ") and "Design requirements met" in design
    assert "NO — requirement not met" in design and "REQ-LOW" in design
    assert 'class="statement statement-miss"' in html
    met = _render(records.record("met"), records.case())
    assert _stamp(met, "stamp-design").startswith("met ")
    assert "statement statement-miss" not in met and "statement statement-met" in met
    assert "NOT MET" not in met


def test_indeterminate_and_none_stated_have_their_own_stamps():
    undecided = _render(records.record("indeterminate"), records.case())
    assert _stamp(undecided, "stamp-design").startswith("undecided ")
    none = _render(records.record("none_stated"), records.case(without_requirements=True))
    stamp = _stamp(none, "stamp-design")
    assert stamp.startswith("none ") and "no design requirements stated" in stamp


def test_requirements_table_rows_carry_status_classes_and_readable_units():
    html = _render(records.record("not_met"), records.case())
    table = html[html.index('<table class="requirements">'):]
    table = table[:table.index("</table>")]
    rows = re.findall(r'<tr class="req-(\w+)">(.*?)</tr>', table, re.DOTALL)
    assert [status for status, _ in rows] == ["not_met", "met"]
    low = rows[0][1]
    for text in ("REQ-LOW", "concentration_min [core]", "2 µmol/L", "5 µmol/L", "-3 µmol/L",
                 "NOT MET", "design input 7 rev A", "≥"):
        assert text in low, text
    assert "design-not_met" in low and "design-met" in rows[1][1]


def test_headline_is_the_required_quantity_not_the_flux():
    html = _render(records.record("not_met"), records.case())
    glance = html[html.index('<section class="glance"'):]
    glance = glance[:glance.index("</section>")]
    assert "concentration_min [core]" in glance and 'class="headline-not_met"' in glance
    assert glance.index("concentration_min [core]") < glance.index("flux_outer")
    plain = _render(records.record("none_stated"), records.case(without_requirements=True))
    glance = plain[plain.index('<section class="glance"'):]
    assert "<dt>flux_outer</dt>" in glance[:glance.index("</section>")]  # today's headline


def test_design_blocks_render_with_their_figures():
    html = _render(records.full_record(), records.case())
    for section in ('id="uncertainty"', 'id="design-limit"', 'id="sweep"'):
        assert section in html
    assert "81 µm" in html and "at or below the limit" in html
    assert "latin_hypercube" in html and "Verification subset: 7 trial(s)" in html
    figures = _svgs(html)
    histogram = next(svg for svg in figures if "histogram-bar-0" in _ids(svg))
    assert {"histogram-bar-1", "histogram-bar-2", "bound-0"} <= _ids(histogram)
    sensitivity = next(svg for svg in figures if "first-index-0" in _ids(svg))
    assert {"first-index-1", "total-index-0", "total-index-1"} <= _ids(sensitivity)
    sweep = next(svg for svg in figures if "sweep-curve" in _ids(svg))
    assert "sweep-bound-0" in _ids(sweep)
    plain = _render(records.record(), records.case())
    assert 'id="uncertainty"' not in plain and 'id="sweep"' not in plain


def test_no_limit_in_range_is_a_result():
    html = _render(dict(records.record(), design_limit=records.NO_LIMIT), records.case())
    block = html[html.index('id="design-limit"'):]
    assert "no limit in the range" in block and "met over the whole range" in block


def test_a_figure_that_cannot_be_drawn_leaves_the_tables(caplog):
    record = records.full_record()
    record["uncertainty"]["quantities"]["concentration_min[core]"]["histogram"] = {
        "edges": [0.0, 1.0], "counts": [1.0, 2.0]}  # one count too many: no figure
    context = design_context(record, records.case())
    assert context["uncertainty_figures"]["histograms"] == []
    assert context["uncertainty"].rows[0].mean == 0.004


def test_the_caution_stays_on_every_report():
    for record in (records.record("not_met"), records.full_record(),
                   records.record("none_stated")):
        html = _render(record, records.case())
        assert "design verification testing" in html and "qualified" in html


def test_a_running_monte_carlo_run_shows_how_far_it_has_got():
    running = {"run_id": "r-1", "case_id": "c-1", "status": "running", "verdict": None,
               "signoffs": [], "progress": {"trials": 30000, "blocks": 3,
                                            "max_trials": 1000000, "max_blocks": 100,
                                            "updated_at": "2026-12-06T10:00:00+00:00"}}
    html = _render(running, records.case())
    shown = re.search(r'<div id="monte-carlo-progress">(.*?)</div>', html, re.DOTALL)
    assert shown, "no progress on the page of a running Monte Carlo run"
    text = re.sub(r"\s+", " ", re.sub(r"<[^>]+>", " ", shown.group(1)))
    assert "30,000 trials in 3 blocks" in text and "1,000,000 in 100" in text
    finished = {key: value for key, value in running.items() if key != "progress"}
    assert 'id="monte-carlo-progress"' not in _render(finished, records.case())
