"""The archival record of one run as a PDF (``GET /v1/runs/{run_id}/report.pdf``).

Every page is headed with the run id, the case's SHA-256 and ``page x of y`` (and the number of
deviations when the record lists any). The body says what the HTML report says, in the same
words (:mod:`service.report.design_view`, :mod:`service.report.text_design`): title, the two
verdicts apart, requirements, inputs as given and in SI, quantities, the design blocks, the
measured-data blocks (calibration, validation with its figure, credibility:
:mod:`service.report.pdf_measured`), checks,
warnings, methods, provenance, every sign-off with every field it carries, and the caution.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from service.report.design_view import (
    calculation_statement,
    design_statement,
    requirement_rows,
)
from service.report.html import DEFAULT_CAUTION, input_rows
from service.report.numbers import plain_number, readable_time, unit_text
from service.report.pdf_document import PagedDocument
from service.report.pdf_measured import measured_sections
from service.report.release_view import (
    depletion_times,
    over_time_columns,
    per_layer_values,
    requested_times,
)
from service.report.text_design import limit_lines, sweep_lines, uncertainty_lines

#: Sign-off fields shown first, in this order; any other field follows under its own name.
SIGNOFF_ORDER = ("name", "reviewer", "meaning", "decision", "at", "comment",
                 "justification", "record_sha256", "payload_sha256", "signature", "key_id")


#: Sign-off fields whose name alone says too little.
SIGNOFF_LABELS = {"name": "printed name"}


def _si(value: Any, significant: int = 6) -> str:
    if isinstance(value, Mapping) and "value" in value:
        number = plain_number(value.get("value"), significant)
        return f"{number} {unit_text(value.get('unit'))}".strip()
    if isinstance(value, list):
        return ", ".join("—" if v is None else plain_number(v, significant) for v in value)
    return "—" if value is None else plain_number(value, significant)


def _readable(text: str) -> str:
    return f" ({text})" if text else ""


def _words(key: str) -> str:
    return key.replace("_", " ")


def _text(value: Any) -> str:
    if value is None or value == "":
        return "—"
    if isinstance(value, Mapping):
        return "; ".join(f"{_words(str(k))}: {_text(v)}" for k, v in value.items())
    if isinstance(value, (list, tuple)):
        return ", ".join(_text(v) for v in value)
    return str(value)


def header_lines(record: Mapping[str, Any]) -> list[str]:
    """The lines every page of a run's record starts with."""
    lines = [f"fluxproof archival record · run {record.get('run_id') or '—'}"]
    deviations = record.get("deviations") or []
    if deviations:
        lines.append(f"DEVIATIONS: {len(deviations)} loosened limit(s), listed in the record")
    lines.append(f"case sha256 {record.get('case_sha256') or '—'}")
    return lines


def signoff_rows(signoff: Mapping[str, Any]) -> list[tuple[str, str]]:
    """(field, value) for every field of one sign-off, the usual ones first."""
    keys = [k for k in SIGNOFF_ORDER if k in signoff]
    keys += [k for k in signoff if k not in keys]
    return [(SIGNOFF_LABELS.get(k, _words(k)), _text(signoff[k])) for k in keys]


def _identity(doc: PagedDocument, record: Mapping[str, Any]) -> None:
    rows = [("run id", record.get("run_id")), ("case id", record.get("case_id")),
            ("case sha256", record.get("case_sha256")), ("status", record.get("status")),
            ("submitted by", record.get("submitted_by")),
            ("created", record.get("created_at")), ("finished", record.get("finished_at"))]
    doc.data_table(("field", "value"), [(k, _text(v)) for k, v in rows], (35, 145))


def _verdicts(doc: PagedDocument, record: Mapping[str, Any]) -> None:
    doc.heading("Verdicts")
    for statement in (calculation_statement(record), design_statement(record)):
        doc.paragraph(f"{statement.mark} {statement.label}: {statement.answer}", bold=True)
        if statement.detail:
            doc.paragraph(statement.detail)


def _requirements(doc: PagedDocument, record: Mapping[str, Any],
                  document: Mapping[str, Any]) -> None:
    rows = requirement_rows(record, document)
    doc.heading("Requirements")
    if not rows:
        doc.paragraph("The case states no design requirements.")
        return
    doc.data_table(
        ("id", "requirement", "value", "bound", "margin", "status", "source"),
        [(r.id, r.what, f"{_si(r.value)} {unit_text(r.unit)}{_readable(r.readable_value)}",
          f"{r.relation} {_si(r.bound)}{_readable(r.readable_bound)}",
          _si(r.margin), f"{r.mark} {r.words}", r.source or "—") for r in rows],
        (18, 38, 28, 28, 18, 20, 30))


def _inputs(doc: PagedDocument, record: Mapping[str, Any], document: Mapping[str, Any]) -> None:
    doc.heading("Inputs (as given, and in SI)")
    normalised = record.get("inputs") if isinstance(record.get("inputs"), dict) else None
    rows = [(path, _text(given), _si(si) if si != "" else "")
            for path, given, si in input_rows(dict(document), normalised)]
    doc.data_table(("field", "as given", "SI"), rows, (70, 60, 50))


def _quantities(doc: PagedDocument, record: Mapping[str, Any]) -> None:
    doc.heading("Quantities (SI; fluxes positive outward)")
    rows = []
    for name, quantity in (record.get("quantities") or {}).items():
        value = quantity.get("value") if isinstance(quantity, Mapping) else quantity
        unit = quantity.get("unit") if isinstance(quantity, Mapping) else ""
        per_layer = per_layer_values(quantity)
        if per_layer is not None:
            shown = "; ".join(f"{layer}: {_timed(v, unit)}" for layer, v in per_layer)
        else:
            shown = _timed(value, unit)
        uncertainty = quantity.get("uncertainty") if isinstance(quantity, Mapping) else None
        verified = quantity.get("verified_by") if isinstance(quantity, Mapping) else None
        rows.append((name, shown, _si(uncertainty) if uncertainty is not None else "—",
                     verified or "—"))
    if rows:
        doc.data_table(("quantity", "value", "numerical uncertainty", "verified by"), rows,
                       (45, 55, 35, 45))
    else:
        doc.paragraph("No quantities (the engine produced no result).")


def _timed(value: Any, unit: Any) -> str:
    """A value with its unit, a time also in the unit that reads best; a missing time is not
    within the duration."""
    if value is None and unit == "s":
        return "not within the duration"
    shown = f"{_si(value)} {unit_text(unit)}".strip()
    if unit == "s" and readable_time(value):
        shown += f" ({readable_time(value)})"
    return shown


def _over_time(doc: PagedDocument, record: Mapping[str, Any]) -> None:
    """The dissolution front of each loaded layer and the compartment concentrations at the
    requested times, and when the undissolved drug is gone (nothing for other records)."""
    columns = over_time_columns(record)
    times = requested_times(record)
    if not columns or not times:
        return
    doc.heading("Dissolution front and compartments at the requested times")
    rows = []
    for k, t in enumerate(times):
        cells = [f"{_si(t)} s{_readable(readable_time(t) or '')}"]
        for column in columns:
            value, spread = column.shown(k)
            if value is None:
                cells.append(column.empty_word)
            else:
                cells.append(_si(value, 4) + (f" ± {_si(spread, 2)}" if spread is not None
                                              else ""))
        rows.append(cells)
    share = int(140 / len(columns))
    doc.data_table(("time", *[f"{c.label} / {unit_text(c.shown_unit)}" for c in columns]), rows,
                   (40, *[share] * len(columns)))
    for gone in depletion_times(record):
        where = f" in {gone.layer}" if gone.layer is not None else ""
        doc.paragraph(f"Undissolved drug{where} gone: {_timed(gone.seconds, 's')}")


def _design_blocks(doc: PagedDocument, record: Mapping[str, Any]) -> None:
    for title, lines in (("Uncertainty", uncertainty_lines(record)),
                         ("Design limit", limit_lines(record)), ("Sweep", sweep_lines(record))):
        if lines:
            doc.heading(title)
            for line in lines:
                doc.paragraph(line.strip())


def _checks(doc: PagedDocument, record: Mapping[str, Any]) -> None:
    doc.heading("Checks")
    rows = [(c.get("name"), _si(c.get("value"), 4), _si(c.get("limit"), 4),
             "✓ pass" if c.get("passed") else "✗ FAIL", c.get("detail") or "")
            for c in record.get("checks") or []]
    if rows:
        doc.data_table(("check", "value", "limit", "result", "detail"), rows,
                       (36, 20, 18, 14, 92))
    else:
        doc.paragraph("No checks were made.")


def _deviations(doc: PagedDocument, record: Mapping[str, Any]) -> None:
    deviations = record.get("deviations") or []
    if deviations:
        doc.heading("Deviations")
        doc.bullets([_text(d) for d in deviations])


def _methods(doc: PagedDocument, record: Mapping[str, Any]) -> None:
    doc.heading("Methods")
    rows = [(m.get("role", ""), m.get("name", ""), m.get("reference", ""))
            for m in record.get("methods") or []]
    if rows:
        doc.data_table(("role", "method", "published source"), rows, (20, 70, 90))


def _signoffs(doc: PagedDocument, record: Mapping[str, Any]) -> None:
    doc.heading("Sign-offs")
    signoffs = record.get("signoffs") or []
    if not signoffs:
        doc.paragraph("Not signed off.")
    for index, signoff in enumerate(signoffs, start=1):
        doc.paragraph(f"Sign-off {index}", bold=True)
        doc.data_table(("field", "value"), signoff_rows(signoff), (35, 145))


def _provenance(doc: PagedDocument, record: Mapping[str, Any]) -> None:
    provenance = record.get("provenance") or {}
    if provenance:
        doc.heading("Provenance")
        doc.data_table(("field", "value"), [(_words(k), _text(v)) for k, v in provenance.items()],
                       (35, 145))


def render_record_pdf(record: Mapping[str, Any], document: Mapping[str, Any]) -> bytes:
    """The archival PDF of a run: ``record`` as :func:`service.runs.get_record` returns it
    (result document and run fields), ``document`` the stored case."""
    title = str(document.get("title") or "(untitled case)")
    doc = PagedDocument(title=f"fluxproof record: {title}", header_lines=header_lines(record))
    doc.title_block(title, str(document.get("reference") or ""))
    _identity(doc, record)
    _verdicts(doc, record)
    _deviations(doc, record)
    _requirements(doc, record, document)
    if record.get("error"):
        doc.heading("Engine failure")
        doc.paragraph(str(record["error"]))
    _inputs(doc, record, document)
    _quantities(doc, record)
    _over_time(doc, record)
    _design_blocks(doc, record)
    measured_sections(doc, record)
    _checks(doc, record)
    if record.get("warnings"):
        doc.heading("Warnings")
        doc.bullets([str(w) for w in record["warnings"]])
    _methods(doc, record)
    _provenance(doc, record)
    _signoffs(doc, record)
    doc.heading("Caution")
    doc.paragraph(str(record.get("caution") or DEFAULT_CAUTION))
    return doc.finish()
