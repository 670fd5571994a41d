"""The design parts of the text report (``fluxproof check``): the two verdicts apart, the
requirements table, and the ``uncertainty``, ``design_limit`` and ``sweep`` blocks.

Each function returns lines (no trailing rule); :func:`service.report.text.render_text` places
them. Numbers are SI with the readable unit beside them (:mod:`service.report.readable`).
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from service.report.design_view import (
    NOT_MET,
    RequirementRow,
    Statement,
    UncertaintyView,
    calculation_statement,
    design_statement,
    headline_requirements,
    limit_view,
    requirement_rows,
    sweep_view,
    uncertainty_view,
)


def _g(value: Any, digits: int = 4) -> str:
    if value is None:
        return "—"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, (int, float)):
        return f"{value:.{digits}g}"
    return str(value)


def table_head(header: str, indent: int = 2) -> list[str]:
    """``header`` and a rule of dashes under it from column ``indent`` to the header's end."""
    return [header, " " * indent + "-" * (len(header) - indent)]


def statement_line(statement: Statement) -> str:
    """``[✗] Design requirements met: NO — requirement not met (1 of 2 not met: DI-12)``."""
    return (f"[{statement.mark}] {statement.label}: {statement.answer}"
            + (f" ({statement.detail})" if statement.detail else ""))


def verdict_lines(record: Mapping[str, Any]) -> list[str]:
    """The two verdicts, each on its own labelled line."""
    return [statement_line(calculation_statement(record)),
            statement_line(design_statement(record))]


def design_verdict_line(record: Mapping[str, Any]) -> str:
    """The closing line of the design verdict, beside the calculation's:
    ``DESIGN REQUIREMENTS: NOT MET (1 of 2 not met: DI-12)``."""
    statement = design_statement(record)
    words = {"met": "MET", "miss": "NOT MET", "undecided": "UNDECIDED", "none": "NONE STATED",
             "open": "NOT YET KNOWN"}[statement.state]
    if statement.state == "undecided" and statement.answer == "yes":
        words = "MET ON UNVERIFIED FIGURES"
    return f"DESIGN REQUIREMENTS: {words}  ({statement.detail})"


def _value_text(row: RequirementRow, value: float | None, readable: str) -> str:
    text = f"{_g(value)} {row.unit}" if value is not None else "—"
    return f"{text} ({readable})" if readable and value is not None else text


def _bound_text(row: RequirementRow) -> str:
    bounds = row.bound_list
    if row.relation == "between" and len(bounds) == 2:
        text = f"{_g(bounds[0])} to {_g(bounds[1])} {row.unit}"
    else:
        text = f"{row.relation} {_g(bounds[0]) if bounds else '—'} {row.unit}"
    return f"{text} ({row.readable_bound})" if row.readable_bound else text


def headline_lines(record: Mapping[str, Any], case: Mapping[str, Any] | None) -> list[str]:
    """The required quantities, missed ones first; empty when the case states none."""
    lines = []
    for row in headline_requirements(record, case):
        lines.append(f"  {row.mark} {row.what} = {_value_text(row, row.value, row.readable_value)}"
                     f"   required {_bound_text(row)}   {row.id} {row.words}")
    return lines


def requirement_lines(record: Mapping[str, Any], case: Mapping[str, Any] | None) -> list[str]:
    """The requirements table, one block per requirement (the columns do not fit 78 characters
    side by side with units)."""
    rows = requirement_rows(record, case)
    if not rows:
        return ["Design requirements: none stated (only the calculation is judged)"]
    lines = ["Design requirements (SI, readable unit in brackets; margin > 0 means met)"]
    for row in rows:
        flag = "   <<< requirement missed" if row.status == NOT_MET else ""
        lines.append(f"  {row.mark} {row.id:<10} {row.words}{flag}")
        lines.append(f"      quantity    {row.what}")
        lines.append(f"      value       {_value_text(row, row.value, row.readable_value)}")
        lines.append(f"      required    {_bound_text(row)}")
        lines.append(f"      margin      {_value_text(row, row.margin, row.readable_margin)}"
                     f"   relative {_g(row.relative_margin)}")
        lines.append(f"      numerical uncertainty  ± {_g(row.numerical_uncertainty)} {row.unit}")
        if row.source:
            lines.append(f"      source      {row.source}")
        if row.reason:
            lines.append(f"      note        {row.reason}")
    return lines


def uncertainty_lines(record: Mapping[str, Any]) -> list[str]:
    """The ``uncertainty`` block: the run, quantities, probabilities, sensitivity, subset."""
    view = uncertainty_view(record)
    if view is None:
        return []
    if view.by_law_of_propagation:
        return _propagation_lines(view)
    lines = ["Input uncertainty (Monte Carlo, JCGM 101:2008)", f"  {view.run_line}"]
    if view.rows:
        header = f"  {'quantity':<30} {'mean':>11} {'std. unc.':>11}  coverage interval"
        lines += table_head(header)
        for row in view.rows:
            low, high = (row.interval + [None, None])[:2]
            coverage = f"{100 * row.coverage:.4g} %" if row.coverage is not None else "—"
            lines.append(f"  {row.key:<30} {_g(row.mean):>11} {_g(row.standard_uncertainty):>11}"
                         f"  [{_g(low)}, {_g(high)}] {row.unit} ({coverage})")
            if row.readable_mean:
                lines.append(f"  {'':<30} {row.readable_mean:>11}"
                             f"  {'':>11}[{row.readable_interval}]")
    if view.probabilities:
        lines.append("  Probability each requirement is met")
        for p in view.probabilities:
            text = f"    {p.id:<12} {_g(p.probability_met)} ± {_g(p.standard_error)}"
            if p.zero_event_bound is not None:
                text += f"   (one-sided 95 % bound {_g(p.zero_event_bound)})"
            lines.append(text)
    if view.sensitivity:
        lines.append(f"  Sensitivity  {'quantity':<24} {'field':<28} {'elast.':>8} "
                     f"{'first':>7} {'total':>7}")
        for s in view.sensitivity:
            lines.append(f"               {s.quantity:<24} {s.field:<28} {_g(s.elasticity, 3):>8} "
                         f"{_g(s.first_index, 3):>7} {_g(s.total_index, 3):>7}")
    lines.append(f"  {view.verification_line}")
    return lines


def _propagation_lines(view: UncertaintyView) -> list[str]:
    """The law of propagation's block: inputs, coefficients, u_c, U, the requirements judged on
    the estimate and U, the assumptions and warnings, the points checked in full."""
    lines = ["Input uncertainty (law of propagation of uncertainty, JCGM 100:2008)",
             f"  {view.run_line}", "  Inputs: estimate (the distribution's expectation) and "
             "standard uncertainty"]
    for i in view.inputs:
        lines.append(f"    {i.field:<30} {_g(i.estimate):>11} ± {_g(i.standard_uncertainty):<11}"
                     f" {i.unit}  ({i.distribution}; {i.basis})")
    if view.coefficients:
        lines.append(f"  Sensitivity  {'quantity':<24} {'field':<28} {'c_i':>11} {'c_i u_i':>11} "
                     f"{'elast.':>8}")
        for c in view.coefficients:
            lines.append(f"               {c.quantity:<24} {c.field:<28} {_g(c.coefficient):>11} "
                         f"{_g(c.contribution):>11} {_g(c.elasticity, 3):>8}")
    if view.rows:
        header = (f"  {'quantity':<30} {'estimate':>11} {'u_c':>11} {'U':>11}  interval y ± U"
                  "   2nd-order change of u_c")
        lines += table_head(header)
        for row in view.rows:
            low, high = (row.interval + [None, None])[:2]
            flag = "  <<< not negligible" if row.curvature_significant else ""
            lines.append(f"  {row.key:<30} {_g(row.mean):>11} {_g(row.standard_uncertainty):>11}"
                         f" {_g(row.expanded_uncertainty):>11}  [{_g(low)}, {_g(high)}] "
                         f"{row.unit}   {_g(row.second_order_change)}{flag}")
            if row.readable_mean:
                lines.append(f"  {'':<30} {row.readable_mean:>11}  [{row.readable_interval}]")
    if view.probabilities:
        lines.append("  Each requirement on the estimate and U (probability met: normal output "
                     "assumed)")
        for p in view.probabilities:
            lines.append(f"    {p.id:<12} margin {_g(p.margin)}, U {_g(p.expanded_uncertainty)}: "
                         f"{p.decided_words}; probability met {_g(p.probability_met)}")
    lines += [f"  assumption: {a}" for a in view.assumptions]
    lines += [f"  WARNING: {w}" for w in view.warnings]
    lines.append(f"  {view.verification_line}")
    return lines


def limit_lines(record: Mapping[str, Any]) -> list[str]:
    """The ``design_limit`` block in words."""
    view = limit_view(record)
    if view is None:
        return []
    lines = ["Design limit", f"  {view.sentence}"]
    if len(view.bracket) == 2:
        lines.append(f"  bracket [{_g(view.bracket[0], 6)}, {_g(view.bracket[1], 6)}] {view.unit}")
    if view.value is not None:
        lines.append(f"  {view.verdict_words}")
    return lines


def sweep_lines(record: Mapping[str, Any]) -> list[str]:
    """The ``sweep`` block as a table: one row per value."""
    view = sweep_view(record)
    if view is None:
        return []
    names, ids = list(view.quantities), list(view.requirements)
    widths = {n: max(12, len(n)) for n in names + ids}
    header = (f"  {view.vary + ' [' + view.unit + ']':<26}"
              + "".join(f" {n:>{widths[n]}}" for n in names + ids) + "  verified")
    lines = [f"Sweep of {view.vary}", *table_head(header)]
    for k, value in enumerate(view.values):
        readable = f" ({view.readable_values[k]})" if view.readable_values[k] else ""
        cells = f"  {_g(value, 6) + readable:<26}"
        cells += "".join(f" {_g(_at(view.quantities[n], k)):>{widths[n]}}" for n in names)
        cells += "".join(f" {_status_cell(_at(view.requirements[i], k)):>{widths[i]}}"
                         for i in ids)
        verdict = _at(view.verdicts, k)
        cells += f"  {'yes' if verdict == 'pass' else 'NO' if verdict == 'fail' else '—'}"
        lines.append(cells)
    return lines


def _at(column: list, k: int) -> Any:
    return column[k] if k < len(column) else None


def _status_cell(status: Any) -> str:
    return {"met": "met", "not_met": "NOT MET", "indeterminate": "INDETERM."}.get(
        status, str(status) if status else "—")
