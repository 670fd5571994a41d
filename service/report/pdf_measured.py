"""The measured-data parts of the archival PDF: the ``calibration``, ``validation`` (with its
figure as PNG) and ``credibility`` blocks, each only where the record holds it, in the words of
the HTML and text reports (:mod:`service.report.measured_view`)."""

from __future__ import annotations

import io
import logging
from collections.abc import Mapping
from typing import Any

from service.report.measured_view import calibration_view, credibility_view, validation_view
from service.report.numbers import plain_number, unit_text
from service.report.pdf_document import PagedDocument
from service.report.plot_validation import validation_png

logger = logging.getLogger(__name__)


def _n(value: Any, significant: int = 4) -> str:
    return "—" if value is None else plain_number(value, significant)


def _pair(pair: tuple[Any, Any]) -> str:
    return f"[{_n(pair[0])}, {_n(pair[1])}]"


def calibration_section(doc: PagedDocument, record: Mapping[str, Any]) -> None:
    view = calibration_view(record)
    if view is None:
        return
    doc.heading("Calibration")
    doc.paragraph(view.summary + ".")
    doc.paragraph(view.fit_sentence, bold=True)
    doc.data_table(
        ("parameter", "estimate", "standard error", "interval", "method", "scale", "bounds",
         "start"),
        [(p.field + (" *" if p.fitted_input else ""),
          f"{_n(p.estimate)} {unit_text(p.unit)}".strip(), _n(p.standard_error),
          _pair(p.interval), p.interval_method or "—", p.scale or "—", _pair(p.bounds),
          _n(p.start)) for p in view.parameters],
        (36, 24, 20, 30, 22, 12, 22, 14))
    doc.paragraph(view.chi_square_line[0].upper() + view.chi_square_line[1:] + ".")
    if view.short_time_line:
        doc.paragraph(view.short_time_line + ".")
    if view.trial_check is not None:
        doc.paragraph(f"calibration.trial_model: "
                      f"{'pass' if view.trial_check.get('passed') else 'FAIL'} — "
                      f"{view.trial_check.get('detail', '')}")
    if view.warnings:
        doc.bullets(view.warnings)
    if view.residuals:
        doc.data_table(("point", "predicted", "measured", "standard uncertainty", "normalised"),
                       [(str(r.index), _n(r.predicted), _n(r.measured),
                         _n(r.standard_uncertainty), _n(r.normalised, 3))
                        for r in view.residuals], (20, 40, 40, 45, 35))


def validation_section(doc: PagedDocument, record: Mapping[str, Any]) -> None:
    view = validation_view(record)
    if view is None:
        return
    k = _n(view.coverage_factor)
    doc.heading("Validation against measured data")
    doc.paragraph(f"ASME V&V 20-2009: E = S − D; u_val = √(u_num² + u_input² + u_D²); the "
                  f"model error lies in E ± k·u_val, k = {k}; a point is flagged where |E| > "
                  f"k·u_val." + (f" u_num: {view.u_num_method}." if view.u_num_method else "")
                  + (f" u_input: {view.u_input_method}." if view.u_input_method else ""))
    doc.paragraph(view.headline, bold=True)
    for s in view.sets:
        doc.paragraph(f"Set {s.id}: {s.quantity} [{unit_text(s.unit) or '1'}]", bold=True)
        doc.data_table(
            ("time", "S", "D", "E", "u_num", "u_input", "u_D", "u_val", f"E ± {k}·u_val",
             "beyond"),
            [(p.readable_time, _n(p.simulated), _n(p.measured), _n(p.comparison_error, 3),
              _n(p.u_num, 2), "not assessed" if p.u_input is None else _n(p.u_input, 2),
              _n(p.u_d, 2), _n(p.u_val, 3), _pair(p.interval), "YES" if p.flagged else "no")
             for p in s.points],
            (16, 18, 18, 16, 14, 18, 14, 16, 32, 18))
        doc.paragraph(s.sentence)
        try:
            png = validation_png(s)
        except Exception:  # noqa: BLE001 - the table above says everything
            logger.exception("validation figure %r of run %s could not be drawn", s.id,
                             record.get("run_id"))
            png = None
        if png:
            if doc.get_y() > doc.h - 90:
                doc.add_page()
            doc.image(io.BytesIO(png), w=doc.epw)
            doc.paragraph(f"Set {s.id}: the simulation with its band ± k·u_S, u_S = √(u_num² + "
                          f"u_input²); the data with error bars ± k·u_D; hollow red points are "
                          f"those where |E| > k·u_val.", size=7.5)


def credibility_section(doc: PagedDocument, record: Mapping[str, Any]) -> None:
    view = credibility_view(record)
    if view is None:
        return
    doc.heading(f"Credibility evidence ({view.standard})")
    doc.data_table(("factor", "evidence", "status"),
                   [(r.factor, r.evidence, r.status) for r in view.rows], (36, 120, 24))
    if view.scope:
        doc.paragraph(view.scope, size=7.5)


def measured_sections(doc: PagedDocument, record: Mapping[str, Any]) -> None:
    """Every measured-data section the record has a block for, in report order."""
    calibration_section(doc, record)
    validation_section(doc, record)
    credibility_section(doc, record)
