"""The axial profiles of a lumen case in the text report: shown where the record holds
``series.axial`` (the contract's columns, in the units the series states), absent otherwise.
The figures are invented for the rendering test, not check values."""

from __future__ import annotations

import copy

from service.report.text import render_text
from service.report.text_axial import axial_lines
from tests.unit.service.report import measured_records as records

AXIAL = {"position": [0.0, 0.05, 0.1], "mixing_cup": [0.2, 0.15, 0.12],
         "wall": [0.2, 0.1, 0.08], "wall_flux": [1e-6, 5e-7, 4e-7],
         "concentration_min": [0.1, 0.05, 0.03],
         "units": {"position": "m", "mixing_cup": "mol/m^3", "wall": "mol/m^3",
                   "wall_flux": "mol/m^2/s", "concentration_min": "mol/m^3"}}


def test_the_axial_table_lists_every_position_in_the_series_units():
    record = copy.deepcopy(records.record())
    record.setdefault("series", {})["axial"] = AXIAL
    lines = axial_lines(record)
    assert lines[0] == "Along the lumen (inlet to outlet)"
    assert "mixing cup [mol/m^3]" in lines[1] and "wall flux [mol/m^2/s]" in lines[1]
    assert len(lines) == 3 + len(AXIAL["position"])
    assert lines[-1].split() == ["0.1", "0.12", "0.08", "4e-07", "0.03"]
    assert "Along the lumen" in render_text(record, records.case())


def test_no_axial_table_without_the_series():
    record = records.record()
    assert axial_lines(record) == []
    assert "Along the lumen" not in render_text(record, records.case())


def test_the_html_report_draws_the_axial_profiles_only_for_a_lumen_record():
    from flask import Flask

    from service.report.html import render_report
    from service.report.plot_axial import axial_svg

    record = copy.deepcopy(records.record())
    record.setdefault("series", {})["axial"] = AXIAL
    svg = axial_svg(record)
    for gid in ("axial-mixing-cup", "axial-wall", "axial-minimum"):
        assert f'id="{gid}"' in svg
    with Flask("service").test_request_context():
        drawn = render_report(record, records.case())
        plain = render_report(records.record(), records.case())
    assert '<section id="axial"' in drawn and 'id="axial-mixing-cup"' in drawn
    assert '<section id="axial"' not in plain
    assert axial_svg(records.record()) is None


def test_the_picture_of_the_body_only_where_the_record_holds_it():
    from flask import Flask

    from service.report.html import render_report
    from service.report.plot_axial import axial_field_svg

    record = copy.deepcopy(records.record())
    record.setdefault("series", {})["axial"] = AXIAL
    record["series"]["axial_field"] = {
        "position": [0.0, 0.05, 0.1], "radius": [1e-5, 3e-5, 1e-4, 2e-4], "fluid_cells": 2,
        "concentration": [[0.2, 0.2, 0.15, 0.1], [0.18, 0.16, 0.1, 0.05],
                          [0.15, 0.12, 0.08, 0.03]],
        "units": {"position": "m", "radius": "m", "concentration": "mol/m^3"}}
    svg = axial_field_svg(record)
    assert svg is not None and 'id="axial-field-wall"' in svg and "<image" in svg
    with Flask("service").test_request_context():
        drawn = render_report(record, records.case())
    assert 'id="axial-field-figure"' in drawn
    del record["series"]["axial_field"]
    assert axial_field_svg(record) is None
    with Flask("service").test_request_context():
        assert 'id="axial-field-figure"' not in render_report(record, records.case())
