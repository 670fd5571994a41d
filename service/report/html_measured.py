"""The measured-data parts of the HTML report and the run page: what ``report_measured.html``
shows (the ``calibration``, ``validation`` and ``credibility`` blocks, each only where the record
holds it, and one validation figure per set).

:func:`measured_context` is merged into :func:`service.report.html.report_context`.
"""

from __future__ import annotations

import logging
from collections.abc import Mapping
from typing import Any

from markupsafe import Markup

from service.report.measured_view import calibration_view, credibility_view, validation_view
from service.report.plot_validation import validation_svg

logger = logging.getLogger(__name__)


def _validation_figures(record: Mapping[str, Any], view) -> dict[str, Markup]:
    """One figure per set, by set id; a set whose figure cannot be drawn is logged and left out
    (its table says everything)."""
    figures = {}
    for entry in view.sets:
        try:
            svg = validation_svg(entry)
        except Exception:  # noqa: BLE001 - a figure must never take the report down with it
            logger.exception("validation figure %r of run %s could not be drawn", entry.id,
                             record.get("run_id"))
            continue
        if svg:
            figures[entry.id] = Markup(svg)
    return figures


def measured_context(record: Mapping[str, Any]) -> dict[str, Any]:
    """The names ``report_measured.html`` reads."""
    validation = validation_view(record)
    return {
        "calibration": calibration_view(record),
        "validation": validation,
        "validation_figures": (_validation_figures(record, validation)
                               if validation is not None else {}),
        "credibility": credibility_view(record),
    }
