"""The dissolution front and the compartment concentrations in every rendering of a record (the
HTML report and run page, the text report of ``fluxproof check``, the archival PDF), on records
built in ``release_records`` in the shapes of the record contract; and records without them
render as before.

The figures of the records are invented; these tests check what the renderings say and where
the figures draw it, not the physics.
"""

from __future__ import annotations

import html as markup
import io
import re
import xml.etree.ElementTree as ET

import pypdf
import pytest
from flask import Flask

from service.report.html import release_table, render_report
from service.report.pdf_record import render_record_pdf
from service.report.plot_release_physics import compartment_svg, front_svg
from service.report.release_view import (
    compartment_columns,
    depletion_times,
    front_columns,
    layer_edges,
    per_layer_values,
)
from service.report.text import format_over_time_table, render_text
from tests.unit.service.report import release_records as records

DAY = records.DAY
_NUMBER = re.compile(r"-?\d+(?:\.\d+)?(?:e[-+]?\d+)?")


def _render(record: dict) -> str:
    with Flask("service").test_request_context():
        return render_report(record, records.case_of(record))


def _svg(markup: str) -> ET.Element:
    return ET.fromstring(markup)


def _by_id(svg: ET.Element, element_id: str) -> ET.Element | None:
    return next((e for e in svg.iter() if e.get("id") == element_id), None)


def _points(group: ET.Element) -> list[tuple[float, float]]:
    """The (x, y) vertices of the first path of a matplotlib group: the line itself, before
    the marker definitions (SVG coordinates, y down)."""
    path = next(group.iter("{http://www.w3.org/2000/svg}path"))
    numbers = [float(n) for n in _NUMBER.findall(path.get("d") or "")]
    return list(zip(numbers[0::2], numbers[1::2], strict=False))


def _fraction_x(svg: ET.Element, x: float) -> float:
    """Where SVG x lies across the plot area (0 at its left edge, 1 at its right)."""
    xs = [p[0] for p in _points(_by_id(svg, "plot-area"))]
    return (x - min(xs)) / (max(xs) - min(xs))


def _table(html: str, css_class: str) -> str:
    start = html.index(f'<table class="{css_class}">')
    return html[start:html.index("</table>", start)]


def _text_of(html: str) -> str:
    """The words of some HTML, entities read and every run of white space one space."""
    return re.sub(r"\s+", " ", markup.unescape(re.sub(r"<[^>]+>", " ", html))).strip()


# --- the view every rendering reads -------------------------------------------------------------

def test_front_columns_read_each_loaded_layer_in_one_readable_length_unit():
    (column,) = front_columns(records.coating_record())
    assert (column.label, column.layer, column.shown_unit) == ("front in drug matrix",
                                                               "drug matrix", "µm")
    assert column.shown(3) == pytest.approx((11.0, 0.002))
    assert column.shown(4) == (None, None) and column.empty_word == "dissolved"
    labels = [c.label for c in front_columns(records.two_front_record())]
    # the core's inner edge never moves: no column for it
    assert labels == ["front in core", "front in drug matrix", "inner front in drug matrix"]
    assert front_columns(records.two_front_record())[2].empty_word == "—"


def test_compartment_columns_share_one_concentration_unit():
    inner, outer = compartment_columns(records.permeation_record())
    assert (inner.label, outer.label) == ("inner compartment", "outer compartment")
    assert inner.shown_unit == outer.shown_unit == "mg/L"  # 0.99 kg/m³ reads as 990 mg/L
    assert inner.shown(0)[0] == pytest.approx(990.0) and outer.shown(5)[0] == pytest.approx(340)


def test_series_that_do_not_match_the_times_give_no_columns():
    record = records.coating_record()
    record["series"]["front_position"]["values"].pop()
    record["series"]["compartment_outer"]["values"] = [0.1]
    assert front_columns(record) == [] and compartment_columns(record) == []
    assert front_columns(records.plain_release_record()) == []
    assert compartment_columns(records.plain_release_record()) == []


def test_depletion_times_whole_body_first_then_each_layer():
    coating = depletion_times(records.coating_record())
    assert [(d.layer, d.seconds) for d in coating] == [(None, 10 * DAY),
                                                       ("drug matrix", 10 * DAY)]
    # a front series without time_depleted: not within the duration (the record's note says so)
    two = depletion_times(records.two_front_record())
    assert [(d.layer, d.seconds) for d in two] == [(None, None), ("core", None),
                                                   ("drug matrix", 10 * DAY)]
    assert depletion_times(records.plain_release_record()) == []
    assert depletion_times(records.permeation_record()) == []


def test_per_layer_values_and_layer_edges():
    quantity = records.two_front_record()["quantities"]["time_depleted_layers"]
    assert per_layer_values(quantity) == [("core", None), ("drug matrix", 10 * DAY)]
    assert per_layer_values({"value": 3.0, "unit": "s"}) is None
    assert per_layer_values({"value": [1.0, 2.0], "unit": ""}) is None  # thiele_modulus shape
    edges = layer_edges(records.coating_record()["inputs"])
    assert edges == {"primer": (0.0, 5e-6), "drug matrix": pytest.approx((5e-6, 25e-6))}
    assert layer_edges({}) == {}


# --- the figures --------------------------------------------------------------------------------

def test_front_figure_draws_the_front_until_the_layer_is_depleted_within_its_edges():
    svg = _svg(front_svg(records.coating_record()))
    title = svg.find("{http://www.w3.org/2000/svg}title").text
    assert title == "Dissolution front over 21 d in drug matrix; drug matrix gone at 10 d"
    front = _points(_by_id(svg, "front-0"))
    # four requested times hold undissolved drug (0.5, 1, 3 and 7 d); the line ends there
    assert len(front) == 4
    assert _fraction_x(svg, front[-1][0]) == pytest.approx(7 / 21, abs=2e-3)
    ys = [p[1] for p in front]
    assert ys == sorted(ys)  # SVG y runs down: the front recedes toward the inner edge
    gone = _points(_by_id(svg, "depleted-0"))
    assert _fraction_x(svg, gone[0][0]) == pytest.approx(10 / 21, abs=2e-3)
    assert _by_id(svg, "layer-edges-0") is not None
    assert "drug matrix: 5 to 25 µm" in ET.tostring(svg, encoding="unicode")


def test_front_figure_of_two_fronts_and_a_layer_still_loaded():
    svg = _svg(front_svg(records.two_front_record()))
    assert {f"front-{i}" for i in range(3)} <= {e.get("id") for e in svg.iter()}
    assert _by_id(svg, "depleted-0") is None  # the core is never depleted
    assert _by_id(svg, "depleted-1") is not None
    title = svg.find("{http://www.w3.org/2000/svg}title").text
    assert "drug matrix gone at 10 d" in title and "core gone" not in title
    assert len(_points(_by_id(svg, "front-0"))) == 6  # the core's front at every time


def test_compartment_figure_starts_from_the_initial_and_marks_the_required_bound():
    svg = _svg(compartment_svg(records.permeation_record()))
    donor, receptor = _by_id(svg, "compartment-inner"), _by_id(svg, "compartment-outer")
    assert donor is not None and receptor is not None
    # t = 0 from the case's initial (1 g/L in the donor, 0 in the receptor), then six times
    donor_points, receptor_points = _points(donor), _points(receptor)
    assert len(donor_points) == len(receptor_points) == 7
    assert _fraction_x(svg, donor_points[0][0]) == pytest.approx(0.0, abs=1e-6)
    assert donor_points[0][1] < donor_points[-1][1] < receptor_points[-1][1] \
        < receptor_points[0][1]  # the donor falls, the receptor rises, and they have not met
    text = ET.tostring(svg, encoding="unicode")
    assert "required bound 100 mg/L at 7 d" in text and _by_id(svg, "compartment-bound-0") \
        is not None
    assert "inner compartment 660 mg/L; outer compartment 340 mg/L" in \
        svg.find("{http://www.w3.org/2000/svg}title").text


def test_no_figures_without_the_series():
    plain = records.plain_release_record()
    assert front_svg(plain) is None and compartment_svg(plain) is None
    assert front_svg(records.permeation_record()) is None
    assert compartment_svg(records.two_front_record()) is None


# --- the HTML report and run page ---------------------------------------------------------------

def test_html_report_shows_both_panels_beside_the_release_curve():
    html = _render(records.coating_record())
    section = html[html.index('<section id="profile"'):html.index('<section id="inputs"')]
    release, front, compartment = (section.index('id="release-curve"'),
                                   section.index('id="front-figure"'),
                                   section.index('id="compartment-figure"'))
    assert release < front < compartment
    assert "could not be drawn" not in html


def test_html_release_table_has_front_and_compartment_columns_per_requested_time():
    table = _table(_render(records.coating_record()), "release")
    head = _text_of(table[:table.index("</thead>")])
    assert "front in drug matrix / µm" in head and "outer compartment / mg/L" in head
    rows = re.findall(r"<tr>(.*?)</tr>", table[table.index("<tbody>"):], re.DOTALL)
    assert len(rows) == len(records.TIMES)
    week = _text_of(rows[3])
    assert "(7 d)" in week and "11 ± 0.002" in week and "27 ± 0.0001" in week
    assert "dissolved" in _text_of(rows[4]) and "44" in _text_of(rows[4])


def test_html_quantities_and_glance_read_time_depleted():
    html = _render(records.coating_record())
    glance = html[html.index('<section class="glance"'):]
    glance = _text_of(glance[:glance.index("</section>")])
    assert "Undissolved drug gone at 8.64 × 10 5 s (10 d)" in glance
    quantities = _table(html, "quantities")
    row = re.search(r"<code>time_depleted_layers</code>(.*?)</tr>", quantities, re.DOTALL)
    assert "drug matrix: 8.64 × 10 5 s (10 d)" in _text_of(row.group(1))
    assert "each loaded layer" in _text_of(row.group(1))
    two = _render(records.two_front_record())
    glance = two[two.index('<section class="glance"'):]
    assert "Undissolved drug gone not within the duration" in _text_of(
        glance[:glance.index("</section>")])
    row = re.search(r"<code>time_depleted_layers</code>(.*?)</tr>", _table(two, "quantities"),
                    re.DOTALL)
    assert "core: not within the duration" in _text_of(row.group(1))


def test_html_permeation_cell_shows_donor_and_receptor_without_a_front():
    html = _render(records.permeation_record())
    assert 'id="compartment-figure"' in html and 'id="front-figure"' not in html
    head = _text_of(_table(html, "release")[:_table(html, "release").index("</thead>")])
    assert "inner compartment / mg/L" in head and "outer compartment / mg/L" in head
    assert "front in" not in head and "glance-time-depleted" not in html
    assert "a short bar marks a required bound at its time" in html


def test_html_report_without_the_series_is_unchanged():
    html = _render(records.plain_release_record())
    for absent in ('id="front-figure"', 'id="compartment-figure"', "front-column",
                   "compartment-column", "glance-time-depleted", "dissolution front of each"):
        assert absent not in html, absent
    table = release_table(records.plain_release_record())
    assert table["extra"] == [] and [n for n, _ in table["columns"]] == [
        "released_inner", "released_outer", "release_fraction", "remaining"]


def test_a_front_figure_that_cannot_be_drawn_leaves_the_tables(monkeypatch):
    def broken(_record):
        raise ValueError("injected")
    monkeypatch.setattr("service.report.html.front_svg", broken)
    html = _render(records.coating_record())
    assert 'id="front-figure"' not in html and "could not be drawn" in html
    assert "front in drug matrix" in _table(html, "release")


# --- the text report (fluxproof check) ----------------------------------------------------------

def test_text_report_table_of_front_and_compartment():
    lines = format_over_time_table(records.coating_record()).splitlines()
    assert lines[0] == "Dissolution front and compartment concentrations at the requested times"
    assert "front in drug matrix [µm]" in lines[1] and "outer compartment [mg/L]" in lines[1]
    week = next(line for line in lines if " 7 d " in line)
    assert week.split()[3:] == ["11", "±0.002", "27", "±0.0001"]
    fortnight = next(line for line in lines if " 14 d " in line)
    assert fortnight.split()[3:] == ["dissolved", "44", "±0.0001"]
    assert "undissolved drug gone: 864000 s (10 d)" in lines
    assert format_over_time_table(records.plain_release_record()) == ""
    permeation = format_over_time_table(records.permeation_record()).splitlines()
    assert permeation[0] == "Compartment concentrations at the requested times"


def test_text_report_quantities_per_layer_and_absent():
    record = records.two_front_record()
    text = render_text(record, records.case_of(record))
    assert "time_depleted_layers" in text
    assert re.search(r"core +— +not within the duration", text)
    assert re.search(r"drug matrix +864000 s \(10 d\)", text)
    assert "inner front in drug matrix [µm]" in text
    plain = records.plain_release_record()
    plain_text = render_text(plain, records.case_of(plain))
    assert "Dissolution front" not in plain_text and "compartment" not in plain_text
    assert "undissolved" not in plain_text


# --- the archival PDF ---------------------------------------------------------------------------

def _pdf_text(record: dict) -> str:
    reader = pypdf.PdfReader(io.BytesIO(render_record_pdf(record, records.case_of(record))))
    return " ".join(" ".join(page.extract_text().split()) for page in reader.pages)


def test_pdf_record_holds_the_front_and_compartment_table():
    text = _pdf_text(records.coating_record())
    assert "Dissolution front and compartments at the requested times" in text
    assert "front in drug matrix / µm" in text and "outer compartment / mg/L" in text
    assert "Undissolved drug gone: 864000 s (10 d)" in text
    assert "drug matrix: 864000 s (10 d)" in text  # time_depleted_layers in the quantities
    assert "dissolved" in text
    plain = _pdf_text(records.plain_release_record())
    assert "Dissolution front" not in plain and "Undissolved" not in plain
