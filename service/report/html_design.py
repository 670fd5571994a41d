"""The design parts of the HTML report and the run page: what ``report_design.html`` and the
report's glance show (the two verdicts apart, the headline requirements, the requirements
table, the uncertainty, limit and sweep blocks with their figures).

:func:`design_context` is merged into :func:`service.report.html.report_context`.
"""

from __future__ import annotations

import logging
from collections.abc import Callable, Mapping
from typing import Any

from markupsafe import Markup

from service.report.design_view import (
    bounds_of,
    calculation_statement,
    design_statement,
    headline_requirements,
    limit_view,
    requirement_rows,
    requirements_on,
    sweep_view,
    uncertainty_view,
)
from service.report.plot_design import histogram_svg, sensitivity_svg, sweep_svg

logger = logging.getLogger(__name__)


def _drawn(make: Callable[[], str | None], what: str, record: Mapping[str, Any]
           ) -> Markup | None:
    """A figure, or None: one that cannot be drawn is logged and left out, never taking the
    report down with it (the tables beside it say everything)."""
    try:
        svg = make()
    except Exception:  # noqa: BLE001 - see the docstring
        logger.exception("design figure %r of run %s could not be drawn", what,
                         record.get("run_id"))
        return None
    return Markup(svg) if svg else None


def _uncertainty_figures(record: Mapping[str, Any], view) -> dict[str, list]:
    histograms = []
    for row in view.rows:
        svg = _drawn(lambda row=row: histogram_svg(row), f"histogram {row.key}", record)
        if svg is not None:
            histograms.append((row, svg))
    sensitivity = []
    for quantity in dict.fromkeys(s.quantity for s in view.sensitivity):
        svg = _drawn(lambda q=quantity: sensitivity_svg(view.sensitivity, q),
                     f"sensitivity {quantity}", record)
        if svg is not None:
            sensitivity.append((quantity, svg))
    return {"histograms": histograms, "sensitivity": sensitivity}


def _sweep_figures(record: Mapping[str, Any], view) -> list[tuple[str, Markup]]:
    """One figure per swept quantity that a requirement bounds (every swept quantity when
    none is bounded)."""
    bounded = {name: requirements_on(record, name) for name in view.quantities}
    names = [n for n, entries in bounded.items() if entries] or list(view.quantities)
    figures = []
    for name in names:
        svg = _drawn(lambda name=name: sweep_svg(
            view.vary, view.unit, view.values, name, view.quantity_units[name],
            view.quantities[name], bounds_of(bounded[name])),
            f"sweep {name}", record)
        if svg is not None:
            figures.append((name, svg))
    return figures


def design_context(record: Mapping[str, Any], document: Mapping[str, Any] | None
                   ) -> dict[str, Any]:
    """The names ``report_design.html`` and the glance read."""
    uncertainty = uncertainty_view(record)
    sweep = sweep_view(record)
    return {
        "calculation": calculation_statement(record),
        "design": design_statement(record),
        "requirements": requirement_rows(record, document),
        "headline_requirements": headline_requirements(record, document),
        "uncertainty": uncertainty,
        "uncertainty_figures": (_uncertainty_figures(record, uncertainty)
                                if uncertainty is not None else {}),
        "design_limit": limit_view(record),
        "sweep": sweep,
        "sweep_figures": _sweep_figures(record, sweep) if sweep is not None else [],
    }
