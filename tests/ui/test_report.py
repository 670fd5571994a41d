"""The HTML report: sections, units, the drawings and plots (SVG that parses and shows what the
record says, where the record says it).

Scenario values are invented for these tests. Check values come from published closed forms:
- zero-order consumption in a slab fed at one face, sealed at the other: the solute reaches a
  depth sqrt(2 D C0 / k) from the fed face, beyond which the material is depleted (A.V. Hill,
  Proc. R. Soc. B 104 (1928) 39; J. Crank, The Mathematics of Diffusion, 2nd ed., 1975, §14);
- the time lag of an initially empty membrane, L^2/(6 D) (H.A. Daynes, Proc. R. Soc. A 97
  (1920) 286; R.M. Barrer, Trans. Faraday Soc. 35 (1939) 628);
- release from a plane sheet of half-thickness l into a perfect sink, M_t/M_inf = 1 - sum
  8/((2n+1)^2 pi^2) exp(-D (2n+1)^2 pi^2 t / (4 l^2)) (Crank 1975, eq. 4.18), solved for the
  times of 50 % and 90 % release with mpmath.
"""

from __future__ import annotations

import copy
import re
import xml.etree.ElementTree as ET

import mpmath
import pytest
from flask import Flask

import worker.engine
from service.report.html import render_report, report_context
from service.report.layer_stack import layer_stack_svg

SVG_NS = "{http://www.w3.org/2000/svg}"

DEPLETING_SLAB = {
    "schema_version": 1,
    "title": "Test slab <with> a depleted core",
    "reference": "report test",
    "tags": ["report-test", "zero-order"],
    "geometry": "slab",
    "inner": "0 m",
    "layers": [{"name": "gel", "thickness": "1 mm", "diffusivity": "1e-9 m^2/s",
                "partition": 1.0, "reaction": {"kind": "zero_order",
                                               "rate": "0.05 mol/m^3/s"}}],
    "inner_boundary": {"kind": "symmetry"},
    "outer_boundary": {"kind": "concentration", "value": "0.2 mol/m^3"},
    "regime": {"kind": "steady"},
}
SLAB_L, SLAB_D, SLAB_K, SLAB_C0 = 1e-3, 1e-9, 0.05, 0.2

RELEASING_SHEET = {
    "schema_version": 1,
    "title": "Test sheet releasing into a sink",
    "geometry": "slab",
    "inner": "0 m",
    "area": "1 cm^2",
    "layers": [{"name": "matrix", "thickness": "0.5 mm", "diffusivity": "2e-11 m^2/s",
                "partition": 1.0, "initial": "1 mol/m^3"}],
    "inner_boundary": {"kind": "symmetry"},
    "outer_boundary": {"kind": "concentration", "value": "0 mol/m^3"},
    "regime": {"kind": "transient", "duration": "30000 s",
               "times": ["500 s", "2000 s", "5000 s", "10000 s", "20000 s", "30000 s"]},
}
SHEET_L, SHEET_D = 0.5e-3, 2e-11


@pytest.fixture(scope="module")
def flask_app() -> Flask:
    return Flask("service")  # the service package's templates, nothing else


def _run(case: dict) -> dict:
    record = worker.engine.check_case(copy.deepcopy(case))
    assert record["status"] == "succeeded", record.get("error")
    record.update(run_id="run-under-test", case_id="case-under-test",
                  submitted_by="erin.engineer", created_at="2026-03-01T09:00:00+00:00",
                  finished_at="2026-03-01T09:00:02+00:00", signoffs=[])
    return record


@pytest.fixture(scope="module")
def slab_record() -> dict:
    return _run(DEPLETING_SLAB)


@pytest.fixture(scope="module")
def sheet_record() -> dict:
    return _run(RELEASING_SHEET)


def _render(app: Flask, record: dict, case: dict) -> str:
    with app.test_request_context():
        return render_report(record, case)


def _plots(html: str) -> list[ET.Element]:
    """Every inline SVG of the page, parsed as XML (a parse error fails the test)."""
    return [ET.fromstring(svg) for svg in re.findall(r"<svg\b.*?</svg>", html, re.DOTALL)]


def _by_id(svg: ET.Element, element_id: str) -> ET.Element | None:
    return next((e for e in svg.iter() if e.get("id") == element_id), None)


def _x_extent(group: ET.Element) -> tuple[float, float]:
    """Smallest and largest x of the path(s) in a matplotlib group (``M x y L x y ... z``)."""
    xs = []
    for path in group.iter(f"{SVG_NS}path"):
        numbers = [float(n) for n in re.findall(r"-?\d+(?:\.\d+)?(?:e-?\d+)?", path.get("d", ""))]
        xs.extend(numbers[0::2])
    assert xs, "no path in the group"
    return min(xs), max(xs)


def _data_fraction(svg: ET.Element, element_id: str) -> tuple[float, float]:
    """The x extent of an element as fractions of the plot area's width."""
    area_lo, area_hi = _x_extent(_by_id(svg, "plot-area"))
    lo, hi = _x_extent(_by_id(svg, element_id))
    return (lo - area_lo) / (area_hi - area_lo), (hi - area_lo) / (area_hi - area_lo)


def test_depleted_core_is_marked_where_the_closed_form_puts_the_front(flask_app, slab_record):
    html = _render(flask_app, slab_record, DEPLETING_SLAB)
    plots = [svg for svg in _plots(html) if _by_id(svg, "profile-line") is not None]
    assert len(plots) == 1
    profile = plots[0]
    zone = _by_id(profile, "depleted-zone")
    assert zone is not None, "the depleted zone is not marked"
    front_expected = SLAB_L - (2 * SLAB_D * SLAB_C0 / SLAB_K) ** 0.5  # Hill 1928
    lo, hi = _data_fraction(profile, "depleted-zone")
    assert lo == pytest.approx(0.0, abs=2e-3)
    assert hi == pytest.approx(front_expected / SLAB_L, abs=2e-3)
    front_lo, front_hi = _data_fraction(profile, "depletion-front")
    assert front_lo == pytest.approx(front_expected / SLAB_L, abs=2e-3)
    assert "Depleted zone" in html and "depleted zone" in profile.find(f"{SVG_NS}title").text


def test_profile_without_a_depleted_zone_has_no_hatch(flask_app, sheet_record):
    html = _render(flask_app, sheet_record, RELEASING_SHEET)
    assert all(_by_id(svg, "depleted-zone") is None for svg in _plots(html))
    assert "no depleted zone" in html


def test_release_curve_marks_t50_and_t90_at_the_closed_form_times(flask_app, sheet_record):
    html = _render(flask_app, sheet_record, RELEASING_SHEET)
    curves = [svg for svg in _plots(html) if _by_id(svg, "release-curve") is not None]
    assert len(curves) == 1
    duration = 30000.0

    def released(tau):  # Crank 1975, eq. 4.18, tau = D t / l^2
        return 1 - mpmath.nsum(lambda n: 8 / ((2 * n + 1) ** 2 * mpmath.pi ** 2)
                               * mpmath.exp(-(2 * n + 1) ** 2 * mpmath.pi ** 2 * tau / 4),
                               [0, mpmath.inf])

    for name, fraction in (("t50", 0.5), ("t90", 0.9)):
        tau = mpmath.findroot(lambda t, f=fraction: released(t) - f, 0.3)
        expected = float(tau) * SHEET_L ** 2 / SHEET_D
        lo, hi = _data_fraction(curves[0], f"{name}-marker")
        assert lo == pytest.approx(hi, abs=1e-6)  # a vertical line
        assert lo == pytest.approx(expected / duration, abs=2e-3), name
    assert "t50" in html and "t90" in html


EMPTY_MEMBRANE = {
    "schema_version": 1,
    "title": "Test membrane that starts empty",
    "geometry": "slab",
    "inner": "0 m",
    "area": "1 cm^2",
    "layers": [{"name": "film", "thickness": "20 um", "diffusivity": "1e-13 m^2/s",
                "partition": 1.0}],
    "inner_boundary": {"kind": "concentration", "value": "5 mol/m^3"},
    "outer_boundary": {"kind": "concentration", "value": "0 mol/m^3"},
    "regime": {"kind": "transient", "duration": "8 h",
               "times": ["10 min", "30 min", "1 h", "2 h", "3 h", "4 h", "6 h", "8 h"]},
}


def test_time_lag_line_meets_the_time_axis_at_the_closed_form_lag(flask_app):
    record = _run(EMPTY_MEMBRANE)
    html = _render(flask_app, record, EMPTY_MEMBRANE)
    curves = [svg for svg in _plots(html) if _by_id(svg, "release-curve") is not None]
    assert len(curves) == 1
    lag_expected = (20e-6) ** 2 / (6 * 1e-13)  # Daynes 1920, Barrer 1939
    lo, _hi = _data_fraction(curves[0], "time-lag-marker")
    assert lo == pytest.approx(lag_expected / (8 * 3600.0), abs=2e-3)
    assert "time lag" in html


def test_every_section_units_and_the_caution(flask_app, slab_record):
    html = _render(flask_app, slab_record, DEPLETING_SLAB)
    for heading in ("Layers and profile", "Inputs", "Quantities", "Checks", "Methods", "Warnings",
                    "Provenance", "Sign-off"):
        assert f"<h2>{heading}" in html, heading
    assert "Test slab &lt;with&gt; a depleted core" in html and "<with>" not in html
    # As given beside SI: "1 mm" next to the exact 0.001 m.
    row = re.search(r"<code>layers\[0\]\.thickness</code></td><td>(.*?)</td><td>(.*?)</td>",
                    html)
    assert row and row.group(1) == "1 mm" and 'value="0.001"' in row.group(2)
    assert "Hill" in html  # the methods carry their published references
    assert "do not replace, design verification testing" in html
    assert "@media print" in html  # the print stylesheet travels with the file
    for check in slab_record["checks"]:
        assert check["name"] in html
    assert "Not signed off" in html and "erin.engineer" in html


def test_signoff_block_shows_who_when_decision_comment(flask_app, slab_record):
    record = dict(slab_record, signoffs=[{"reviewer": "rafael.reviewer", "decision": "approved",
                                          "comment": "front position checked by hand",
                                          "at": "2026-03-02T10:00:00+00:00"}])
    html = _render(flask_app, record, DEPLETING_SLAB)
    block = html[html.index('<section id="signoff"'):]
    for text in ("rafael.reviewer", "approved", "front position checked by hand",
                 "2026-03-02T10:00:00+00:00"):
        assert text in block
    assert "Not signed off" not in html


def test_failed_run_renders_its_error_without_figures(flask_app):
    record = {"run_id": "r", "case_id": "c", "status": "failed", "error": "engine error: boom",
              "submitted_by": "erin.engineer", "signoffs": []}
    html = _render(flask_app, record, DEPLETING_SLAB)
    assert "engine error: boom" in html and "Run failed" in html
    assert "No quantities" in html and "profile-line" not in html
    assert _plots(html)  # the layer stack still comes from the case document


def test_figures_are_the_same_on_every_render(flask_app, slab_record):
    first = report_context(slab_record, DEPLETING_SLAB)["figures"]
    second = report_context(slab_record, DEPLETING_SLAB)["figures"]
    assert set(first) == {"stack", "profile"} and first == second
    assert "<dc:date>" not in first["profile"]


def test_layer_stack_is_drawn_to_scale():
    inputs = {"geometry": "cylinder", "inner": {"value": 1e-4, "unit": "m"},
              "layers": [{"name": "wall", "thickness": {"value": 4e-5, "unit": "m"},
                          "partition": 0.8},
                         {"name": "a thin coating with a long name",
                          "thickness": {"value": 2e-6, "unit": "m"}, "partition": 2.0,
                          "reaction": {"kind": "first_order"}},
                         {"name": "tissue", "thickness": {"value": 1.5e-4, "unit": "m"},
                          "partition": 1.0}],
              "inner_boundary": {"kind": "concentration", "value": {"value": 0.2,
                                                                   "unit": "mol/m^3"}},
              "outer_boundary": {"kind": "flux", "value": {"value": 0.0, "unit": "mol/m^2/s"}}}
    svg = ET.fromstring(layer_stack_svg(inputs))
    rects = [r for r in svg.iter(f"{SVG_NS}rect") if r.get("data-layer") is not None]
    widths = [float(r.get("width")) for r in rects]
    thicknesses = [4e-5, 2e-6, 1.5e-4]
    assert widths[0] / widths[2] == pytest.approx(thicknesses[0] / thicknesses[2], rel=1e-3)
    assert widths[1] / widths[2] == pytest.approx(thicknesses[1] / thicknesses[2], rel=2e-2)
    texts = " ".join(t.text or "" for t in svg.iter(f"{SVG_NS}text"))
    assert "a thin coating with a long name" in texts  # labelled below the bar, with a leader
    assert "sealed (no flux)" in texts and "fluid at 0.2 mol/m³" in texts
    assert "r / mm" in texts  # radial axis, real positions 0.1 to 0.292 mm
    assert "drawn to scale" in svg.find(f"{SVG_NS}title").text


def _modules_loaded_by(statement: str) -> set[str]:
    """Top-level project and library modules a fresh interpreter holds after ``statement``."""
    import json
    import subprocess
    import sys

    probe = f"{statement}\nimport json, sys\nprint(json.dumps(sorted(sys.modules)))"
    out = subprocess.run([sys.executable, "-c", probe], check=True, capture_output=True,
                         text=True).stdout
    return set(json.loads(out.splitlines()[-1]))


def test_the_report_package_never_imports_the_browser_pages():
    loaded = _modules_loaded_by("import service.report.html, service.report.plot_trend")
    assert "service.report.html" in loaded
    assert not {name for name in loaded if name.startswith("service.ui")}


def test_the_text_report_loads_neither_flask_nor_matplotlib():
    """``fluxproof check`` prints it on the base install, which has neither."""
    loaded = _modules_loaded_by("import service.report.text")
    assert "service.report.text" in loaded
    assert not {"flask", "matplotlib", "sqlalchemy"} & loaded
    assert "flask" in _modules_loaded_by("from service.report.html import render_report")


def test_release_table_at_the_requested_times_with_readable_times(flask_app, sheet_record):
    html = _render(flask_app, sheet_record, RELEASING_SHEET)
    section = html[html.index('id="over-time"'):html.index('id="checks"')]
    rows = re.findall(r"<tr><th scope=\"row\" class=\"num\">", section)
    assert len(rows) == 6
    assert "<code>release_fraction</code>" in section and "<code>uptake</code>" not in section
    assert "(8.333\u00a0min)" in section  # 500 s
    # t50 by Crank 1975 eq. 4.18 (above), shown in minutes beside its SI value
    tau = mpmath.findroot(lambda t: 1 - mpmath.nsum(
        lambda n: 8 / ((2 * n + 1) ** 2 * mpmath.pi ** 2)
        * mpmath.exp(-(2 * n + 1) ** 2 * mpmath.pi ** 2 * t / 4), [0, mpmath.inf]) - 0.5, 0.3)
    t50_minutes = float(tau) * SHEET_L ** 2 / SHEET_D / 60.0
    assert f"({t50_minutes:.4g}\u00a0min)" in html
    assert 'id="minimum-curve"' not in html  # a release: its minimum sits at the sink


FED_GEL = {
    "schema_version": 1,
    "title": "Test gel fed at one face, first-order uptake",
    "geometry": "slab",
    "inner": "0 m",
    "layers": [{"name": "gel", "thickness": "1 mm", "diffusivity": "1e-9 m^2/s",
                "partition": 1.0, "reaction": {"kind": "first_order",
                                               "rate_constant": "2e-3 1/s"}}],
    "inner_boundary": {"kind": "symmetry"},
    "outer_boundary": {"kind": "concentration", "value": "0.2 mol/m^3"},
    "regime": {"kind": "transient", "duration": "2 h",
               "times": ["2 min", "10 min", "30 min", "2 h"]},
}


def test_uptake_case_shows_its_lowest_concentration_over_time(flask_app):
    record = _run(FED_GEL)
    html = _render(flask_app, record, FED_GEL)
    section = html[html.index('id="over-time"'):html.index('id="checks"')]
    assert "<code>uptake</code>" in section and "<code>release_fraction</code>" not in section
    assert section.count('<table class="minimum">') == 1
    curves = [svg for svg in _plots(html) if _by_id(svg, "minimum-curve") is not None]
    assert len(curves) == 1
    # the lowest concentration at 2 h: the mid-plane value of Danckwerts' transformation of
    # Crank 1975 eq. 4.17, C/C_s = 1 - sum a_n (k + lam_n e^(-(lam_n + k) t)) / (lam_n + k)
    k, d, half, t = 2e-3, 1e-9, 1e-3, 7200.0
    total = 0.0
    for n in range(4000):
        lam = d * (2 * n + 1) ** 2 * mpmath.pi ** 2 / (4 * half ** 2)
        a = 4 * (-1) ** n / ((2 * n + 1) * mpmath.pi)
        total += a * (k + lam * mpmath.exp(-(lam + k) * t)) / (lam + k)
    expected = 0.2 * float(1 - total)
    assert f'<data value="{record["series"]["concentration_min"]["values"][-1]!r}">' in section
    assert record["series"]["concentration_min"]["values"][-1] == pytest.approx(expected,
                                                                                 rel=1e-7)
    assert f"{expected:.4g}" in section
    assert "time_to_steady" in html and "(2\u00a0h)" in section
