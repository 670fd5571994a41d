"""The measured-data blocks in the HTML, text and PDF renderings, on records built in
``measured_records``: each block is shown where the record holds it and nowhere else; flagged
points are said plainly; the validation figure draws the band, the data and the flagged points.
"""

from __future__ import annotations

import copy
import html as html_text
import io
import re
import xml.etree.ElementTree as ET

import pypdf
import pytest
from flask import Flask

from service.report.html import render_report
from service.report.pdf_record import render_record_pdf
from service.report.text import render_text
from service.report.text_measured import calibration_lines, credibility_lines, validation_lines
from tests.unit.service.report import measured_records as records

BLOCKS = ("calibration", "validation", "credibility")
HTML_MARK = {"calibration": '<section id="calibration"', "validation": '<section id="validation"',
             "credibility": '<section id="credibility"'}
TEXT_MARK = {"calibration": "Calibration (weighted least squares",
             "validation": "Validation (ASME V&V 20-2009",
             "credibility": "Credibility evidence (ASME V&V 40-2018"}
PDF_MARK = {"calibration": "Calibration", "validation": "Validation against measured data",
            "credibility": "Credibility evidence (ASME V&V 40-2018)"}


def _html(record: dict) -> str:
    with Flask("service").test_request_context():
        return render_report(record, records.case())


def _pdf(record: dict) -> tuple[str, int]:
    reader = pypdf.PdfReader(io.BytesIO(render_record_pdf(record, records.case())))
    text = " ".join(" ".join(page.extract_text().split()) for page in reader.pages)
    return text, sum(len(page.images) for page in reader.pages)


def _section(html: str, name: str) -> str:
    start = html.index(HTML_MARK[name])
    return html[start:html.index("</section>", start)]


def _plain(html: str) -> str:
    return " ".join(html_text.unescape(re.sub(r"<[^>]+>", " ", html)).split())


@pytest.mark.parametrize("present", [(), *[(b,) for b in BLOCKS], BLOCKS])
def test_each_block_only_where_the_record_holds_it(present):
    record = records.record(*present)
    html, text = _html(record), render_text(record, records.case())
    pdf, images = _pdf(record)
    for block in BLOCKS:
        assert (HTML_MARK[block] in html) is (block in present), block
        assert (TEXT_MARK[block] in text) is (block in present), block
        assert (PDF_MARK[block] in pdf) is (block in present), block
    assert (images > 0) is ("validation" in present)  # the validation figure, as PNG


def test_calibration_shows_the_fit():
    record = records.record("calibration")
    html = _plain(_section(_html(record), "calibration"))
    text = "\n".join(calibration_lines(record))
    pdf, _ = _pdf(record)
    fit = "The record's figures were computed with these inputs taken from the fit: " \
          "layers[0].diffusivity."
    for rendered in (html, text, pdf):
        assert fit in rendered
        for words in ("layers[0].diffusivity", "profile likelihood", "log",
                      "reduced chi-square 0.911", "19 degrees of freedom",
                      "only early data: the fit does not test the late release",
                      "weighted least squares (trust region)", "Crank 1975 §4.3"):
            assert words.lower() in rendered.lower(), (words, rendered[:200])
    assert "2.4e-14" in text and "1.1e-15" in text and "[2.2e-14, 2.63e-14]" in text
    assert re.search(r"\b1\s+0\.212\s+0\.219\s+0\.005\s+1\.4\b", text)  # a residual row
    none = records.record("calibration")
    none["calibration"]["fitted_inputs"] = []
    assert "  No input of this record was taken from the fit." in calibration_lines(none)
    assert "layers[0].diffusivity *" not in _plain(_section(_html(none), "calibration"))


@pytest.mark.parametrize("shift, flagged", [(0.1, True), (-0.1, True), (0.03, False),
                                            (-0.03, False)])
def test_flagged_points_said_plainly(shift, flagged):
    """u_val ≈ 0.0224 (see ``measured_records.validation``): a datum 0.1 off either way is
    beyond 2·u_val, 0.03 off either way within."""
    record = records.record("validation", shift_at_2h=shift)
    html = _section(_html(record), "validation")
    text = "\n".join(validation_lines(record))
    pdf, _ = _pdf(record)
    said = "1 of 4 points disagree with the simulation beyond the validation uncertainty " \
           "(|E| > 2·u_val) at 2 h"
    agreed = "All 4 points lie within ±2·u_val of the simulation"
    for rendered in (_plain(html), text, pdf):
        assert (said in rendered) is flagged
        assert (agreed in rendered) is not flagged
    assert ("<<< beyond k·u_val" in text) is flagged
    assert ("YES: model error indicated" in html) is flagged
    assert html.count('class="row-fail"') == int(flagged)
    row = next(line for line in text.splitlines() if line.strip().startswith("2 h"))
    assert f"{-100 * shift:.3g}" in row  # E = S − D, a release fraction read in %


def test_validation_interval_and_uncertainties_in_the_table():
    record = records.record("validation", shift_at_2h=0.1)
    point = record["validation"]["sets"][0]["points"][1]
    text = "\n".join(validation_lines(record))
    percent = 100.0  # a release fraction reads in % in the table (SI stated beside it)
    assert f"[{percent * point['interval'][0]:.3g}, {percent * point['interval'][1]:.3g}]" in text
    assert f"{percent * point['u_val']:.3g}" in text
    assert "release_fraction [%] (SI: 1)" in text
    assert "k = 2" in text and "u_input: Monte Carlo over the uncertainty block" in text


def test_input_uncertainty_not_assessed_is_said():
    record = records.record("validation", u_input=None)
    html = _plain(_section(_html(record), "validation"))
    text = "\n".join(validation_lines(record))
    for rendered in (html, text):
        assert "The input uncertainty was not assessed" in rendered
    assert "not assessed" in html
    assessed = "\n".join(validation_lines(records.record("validation")))
    assert "The input uncertainty was not assessed" not in assessed


def _figure(html: str) -> ET.Element:
    svgs = re.findall(r"<svg\b.*?</svg>", _section(html, "validation"), re.DOTALL)
    assert len(svgs) == 1
    return ET.fromstring(svgs[0])


@pytest.mark.parametrize("shift, flagged", [(0.1, True), (0.0, False)])
def test_validation_figure(shift, flagged):
    svg = _figure(_html(records.record("validation", shift_at_2h=shift)))
    ids = {e.get("id") for e in svg.iter() if e.get("id")}
    assert {"validation-simulation", "validation-band", "validation-data"} <= ids
    assert ("validation-flagged" in ids) is flagged
    title = next(e.text for e in svg.iter() if e.tag.endswith("title"))
    assert f"{int(flagged)} point(s) beyond 2·u_val" in title


def test_credibility_table_pastes_as_it_stands():
    record = records.record("validation", "credibility", shift_at_2h=0.1)
    lines = credibility_lines(record)
    assert lines[1:3] == ["| factor | evidence | status |", "|---|---|---|"]
    factors = record["credibility"]["factors"]
    assert len(lines) >= 3 + len(factors)
    for factor, line in zip(factors, lines[3:], strict=False):
        evidence = factor["evidence"].replace("|", "\\|")
        assert line == f"| {factor['factor']} | {evidence} | {factor['status']} |"
    assert "largest \\|E\\|/u_val" in "\n".join(lines)
    html = _section(_html(record), "credibility")
    rows = re.findall(r"<tr><th scope=\"row\">(.*?)</th><td>(.*?)</td>\s*<td class=\"(\w*)\">"
                      r"(.*?)</td></tr>", html, re.DOTALL)
    assert [r[0] for r in rows] == [f["factor"] for f in factors]
    assert [r[3] for r in rows] == [f["status"] for f in factors]
    comparison = dict((r[0], r[2]) for r in rows)
    assert comparison["output comparison"] == "fail"  # the flagged point: not supported
    assert comparison["software quality assurance"] == "pass"
    pdf, _ = _pdf(record)
    assert "not supported" in pdf and "output comparison" in pdf


def test_a_real_record_with_its_blocks_renders():
    """A record from check_case (an invented releasing film), its release compared with data
    on the simulation by the engine's comparison and its credibility block built from it: every
    rendering holds the credibility rows the block states and the validation sentence."""
    import copy

    from schemas.checking import check_case
    from schemas.credibility import credibility_block
    from tests.unit.schemas.test_credibility import RELEASE_CASE
    from worker.engine.design.validation import compare, validation_block

    case = copy.deepcopy(RELEASE_CASE)
    record = check_case(case)
    series = record["series"]
    simulated = series["release_fraction"]["values"]
    result = compare(simulated, simulated, 0.0, None, 0.01)  # data on the simulation
    record["validation"] = validation_block(
        [result.as_dict("FILM", "release_fraction", "1", series["time"]["values"])],
        coverage_factor=2.0, u_input_method="not assessed", u_num_method="test")
    record["credibility"] = credibility_block(record)
    text = render_text(record, case)
    html = _plain(_section(_html_of(record, case), "credibility"))
    for factor in record["credibility"]["factors"]:
        assert f"| {factor['factor']} |" in text
        assert factor["evidence"] in html
    points = len(simulated)
    assert f"All {points} points lie within ±2·u_val of the simulation" in text


def _html_of(record: dict, case: dict) -> str:
    with Flask("service").test_request_context():
        return render_report(record, case)


@pytest.mark.parametrize("calibrated", [True, False])
def test_the_inputs_say_which_value_the_fit_replaced(calibrated):
    """Beside the inputs as given, the text and HTML reports name each fitted input and its
    estimate (the figures are the fitted case's); without a calibration they say nothing."""
    record = records.record("calibration") if calibrated else records.record()
    text = render_text(record, records.case())
    html = _html(record)
    assert ("fitted: layers[0].diffusivity = 2.4e-14 m^2/s replaces the value above"
            in text) is calibrated
    assert ('class="fitted-inputs"' in html) is calibrated
    if calibrated:
        inputs = html[html.index('<section id="inputs"'):]
        inputs = _plain(inputs[:inputs.index("</section>")])
        assert "layers[0].diffusivity = 2.4e-14 m^2/s" in inputs


def test_the_simulation_is_drawn_from_the_records_series_where_it_has_one():
    """Between the measured times the figure follows the record's own series of the quantity;
    a record without that series draws the simulation at the measured times only."""
    from service.report.measured_view import validation_view
    from service.report.plot_validation import validation_svg

    record = records.record("validation")
    bare = validation_view(record).sets[0]
    record = copy.deepcopy(record)
    quantity = bare.quantity
    record.setdefault("series", {})["time"] = {"values": [0.0, 1800.0, 3600.0, 28800.0]}
    record["series"][quantity] = {"values": [0.0, 0.05, 0.1, 0.7]}
    drawn = validation_view(record).sets[0]
    assert bare.curve is None
    assert drawn.curve == ([0.0, 1800.0, 3600.0, 28800.0], [0.0, 0.05, 0.1, 0.7])
    assert "simulation (record" in validation_svg(drawn)
    assert "simulation at the measured times" in validation_svg(bare)
