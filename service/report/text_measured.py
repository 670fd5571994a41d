"""The measured-data parts of the text report (``fluxproof check``): the ``calibration``,
``validation`` and ``credibility`` blocks, each only where the record holds it.

Each function returns lines (no trailing rule); :func:`service.report.text.render_text` places
them. The credibility table is a Markdown table (``|`` between columns, a bar inside a cell
written ``\\|``) so a reviewer can paste it into a credibility assessment as it stands.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from service.report.measured_view import calibration_view, credibility_view, validation_view
from service.report.readable import readable_unit
from service.report.text_design import _g, table_head


def calibration_lines(record: Mapping[str, Any]) -> list[str]:
    """The fit: parameters, chi-square, warnings, residuals, the inputs taken from it."""
    view = calibration_view(record)
    if view is None:
        return []
    lines = ["Calibration (weighted least squares on the measured data)", f"  {view.summary}"]
    header = (f"  {'parameter':<28} {'estimate':>11} {'std. error':>11}  interval "
              f"(method)   scale  bounds")
    lines += table_head(header)
    for p in view.parameters:
        mark = " *" if p.fitted_input else ""
        lines.append(f"  {p.field + mark:<28} {_g(p.estimate):>11} {_g(p.standard_error):>11}"
                     f"  [{_g(p.interval[0])}, {_g(p.interval[1])}] {p.unit}"
                     f" ({p.interval_method or '—'})   {p.scale or '—'}"
                     f"  [{_g(p.bounds[0])}, {_g(p.bounds[1])}]")
    lines.append(f"  {view.chi_square_line}")
    lines.append(f"  {view.fit_sentence}" + ("  (* in the table)" if view.fitted_inputs else ""))
    if view.short_time_line:
        lines.append(f"  {view.short_time_line}")
    if view.trial_check is not None:
        passed = "pass" if view.trial_check.get("passed") else "FAIL"
        lines.append(f"  calibration.trial_model: {passed} — {view.trial_check.get('detail', '')}")
    for warning in view.warnings:
        lines.append(f"  ! {warning}")
    if view.residuals:
        lines.append(f"  {'point':>6} {'predicted':>12} {'measured':>12} {'std. unc.':>11} "
                     f"{'normalised':>11}")
        for r in view.residuals:
            lines.append(f"  {_g(r.index):>6} {_g(r.predicted):>12} {_g(r.measured):>12} "
                         f"{_g(r.standard_uncertainty):>11} {_g(r.normalised, 3):>11}")
    return lines


def validation_lines(record: Mapping[str, Any]) -> list[str]:
    """Each validation set: its points with E, u_val and the interval E ± k·u_val, flagged
    points marked, and the comparison said plainly."""
    view = validation_view(record)
    if view is None:
        return []
    k = _g(view.coverage_factor)
    lines = [f"Validation (ASME V&V 20-2009; E = S − D, u_val = √(u_num² + u_input² + u_D²), "
             f"k = {k})", f"  {view.headline}"]
    if view.u_num_method:
        lines.append(f"  u_num: {view.u_num_method}")
    if view.u_input_method:
        lines.append(f"  u_input: {view.u_input_method}")
    for s in view.sets:
        chosen = readable_unit(s.unit, [v for p in s.points for v in (p.simulated, p.measured)],
                               s.quantity)
        symbol, size = chosen if chosen is not None else (s.unit or "1", 1.0)
        si_note = f" (SI: {s.unit or '1'})" if chosen is not None else ""

        def shown(value: float | None, significant: int = 4, size: float = size) -> str:
            return _g(None if value is None else value / size, significant)

        lines.append(f"  Set {s.id}: {s.quantity} [{symbol}]{si_note}")
        header = (f"    {'time':>10} {'simulated':>11} {'measured':>11} {'E':>11} {'u_val':>10} "
                  f"  model-error interval E ± {k}·u_val")
        lines += table_head(header, indent=4)
        for p in s.points:
            flag = "   <<< beyond k·u_val" if p.flagged else ""
            lines.append(f"    {p.readable_time:>10} {shown(p.simulated):>11} "
                         f"{shown(p.measured):>11} {shown(p.comparison_error, 3):>11} "
                         f"{shown(p.u_val, 3):>10}   "
                         f"[{shown(p.interval[0], 3)}, {shown(p.interval[1], 3)}]{flag}")
        lines.append(f"    {s.sentence}")
    return lines


def credibility_lines(record: Mapping[str, Any]) -> list[str]:
    """The credibility table, ``factor | evidence | status``."""
    view = credibility_view(record)
    if view is None:
        return []
    lines = [f"Credibility evidence ({view.standard} factors this calculation can evidence)",
             "| factor | evidence | status |", "|---|---|---|"]
    for row in view.rows:
        evidence = row.evidence.replace("|", "\\|")  # a literal bar in a Markdown table cell
        lines.append(f"| {row.factor} | {evidence} | {row.status} |")
    if view.scope:
        lines.append(view.scope)
    return lines
