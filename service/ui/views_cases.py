"""A case's history: every run side by side, and the trend of its key figures."""

from __future__ import annotations

from flask import render_template
from markupsafe import Markup

from service import cases, listing
from service.api.context import services
from service.batches import drift_tolerance
from service.report.html import QUANTITY_WORDS
from service.report.numbers import quantity_markup
from service.report.plot_trend import scalar, trend_names, trend_svg
from service.ui.blueprint import ui

#: The history table shows at most this many runs (the newest), side by side.
HISTORY_COLUMNS = 12


@ui.get("/cases/<case_id>")
def case(case_id: str):
    store = services().store
    stored = cases.get_case(store, case_id)
    runs = listing.case_runs_with_figures(store, case_id)
    tolerance = drift_tolerance(stored["document"])
    names = sorted({name for run in runs for name, q in run["quantities"].items()
                    if scalar(q) is not None or q is None})
    key = trend_names(runs)
    names = key + [n for n in names if n not in key]
    shown = runs[-HISTORY_COLUMNS:]
    numbered = list(enumerate(runs, start=1))[-HISTORY_COLUMNS:]
    trend = trend_svg(runs, tolerance)
    return render_template("ui_case.html", case=stored, runs=shown, numbered=numbered,
                           total_runs=len(runs), names=names, words=QUANTITY_WORDS,
                           tolerance=tolerance, trend=Markup(trend) if trend else None,
                           qty=quantity_markup)
