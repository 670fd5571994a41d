"""The law of propagation's uncertainty block (JCGM 100:2008) in the text report, the HTML
report and the archival PDF: each says the method, its reference, the coefficients, u_c, U and
k, the requirements judged on the estimate and U, and that the method is first order with a
normal output assumed; a curvature warning is shown where the record has one."""

from __future__ import annotations

import copy
import io

import pypdf
import pytest
from flask import Flask

from schemas.checking import check_case
from service.report.html import render_report
from service.report.pdf_record import render_record_pdf
from service.report.text import render_text
from tests.unit.schemas.test_propagation_runs import _reacting_sheet, _sheet


def _html(record, case) -> str:
    with Flask("service").test_request_context():
        return render_report(record, case)


@pytest.fixture(scope="module")
def sheet():
    case = _sheet(inputs=[{"field": "inner_boundary.value", "distribution": "normal",
                           "sd": "0.05 mol/m^3"}])
    return check_case(copy.deepcopy(case)), case


def test_text_report_states_the_method_and_its_figures(sheet):
    record, case = sheet
    text = render_text(record, case)
    assert "Input uncertainty (law of propagation of uncertainty, JCGM 100:2008)" in text
    assert "3 evaluations (2k + 1 for k inputs); coverage factor k = 1.96 for 95 %" in text
    assert "first order, the output taken as normal" in text
    assert "c_i u_i" in text and "inner_boundary.value" in text
    assert "FLUX" in text and "met beyond U" in text
    assert "Monte Carlo" not in text.split("Input uncertainty")[1].split("\n")[0]


def test_html_report_shows_the_block_and_the_assumptions(sheet):
    record, case = sheet
    html = _html(record, case)
    assert "Law of propagation of uncertainty (JCGM 100:2008)" in html
    assert "Sensitivity coefficients c<sub>i</sub>" in html
    assert "Assumed: the output is taken as normally distributed" in html
    assert "Monte Carlo propagation" not in html


def test_pdf_record_carries_the_block(sheet):
    record, case = sheet
    pdf = render_record_pdf(record, case)
    text = " ".join(" ".join(page.extract_text().split())
                    for page in pypdf.PdfReader(io.BytesIO(pdf)).pages)
    assert "JCGM 100:2008" in text
    assert "first order" in text


def test_a_curvature_warning_is_shown_in_every_rendering():
    case = _reacting_sheet(inputs=[{"field": "layers[0].reaction.rate_constant",
                                    "distribution": "uniform", "low": "0.008 1/s",
                                    "high": "0.032 1/s"}])
    record = check_case(copy.deepcopy(case))
    assert "WARNING: concentration_min: the second-order (curvature) term is not negligible" \
        in render_text(record, case)
    assert "<strong>not negligible</strong>" in _html(record, case)
