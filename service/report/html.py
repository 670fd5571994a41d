"""The HTML report of one run (Jinja2, autoescaped): what a reviewer reads before signing.

:func:`report_context` gathers everything the report shows (inputs as given beside SI, the
layer-stack drawing, the profile and release plots as inline SVG, quantities, checks, methods,
warnings, provenance, sign-off; the two verdicts apart and the design blocks from
:mod:`service.report.html_design`); ``report_body.html`` lays it out, both in the standalone report
(:func:`render_report`: ``GET /v1/runs/{id}/report`` and the files ``fluxproof demo`` writes) and
in the run page under ``/ui/``.
"""

from __future__ import annotations

import logging
import re
from pathlib import Path
from typing import Any

from flask import render_template
from markupsafe import Markup

import schemas
from service.report.html_design import design_context
from service.report.html_measured import measured_context
from service.report.layer_stack import layer_stack_svg
from service.report.numbers import (
    length_markup,
    number_markup,
    quantity_markup,
    readable_time,
    time_markup,
    unit_text,
)
from service.report.plot_axial import axial_field_svg, axial_svg
from service.report.plot_minimum import minimum_svg
from service.report.plot_profile import profile_svg
from service.report.plot_release import release_svg
from service.report.plot_release_physics import compartment_svg, front_svg
from service.report.release_view import depletion_times, over_time_columns, per_layer_values

logger = logging.getLogger(__name__)

#: Shown on every report when the record carries no caution text of its own.
DEFAULT_CAUTION = ("These results support, but do not replace, design verification testing and "
                   "qualified independent review; local regulations and licensed practice "
                   "govern.")

STYLESHEET = Path(__file__).resolve().parent.parent / "static" / "fluxproof.css"

#: What each quantity means, in a few words (sign convention: positive outward).
QUANTITY_WORDS = {
    "flux_inner": "flux density at the inner face (positive outward)",
    "flux_outer": "flux density at the outer face (positive outward)",
    "surface_inner": "material-side concentration at the inner face",
    "surface_outer": "material-side concentration at the outer face",
    "concentration_min": "lowest concentration in the body",
    "concentration_max": "highest concentration in the body",
    "depletion_front": "where a zero-order layer runs out of solute",
    "thiele_modulus": "reaction against diffusion, per layer (— where it does not react)",
    "biot_inner": "film against body resistance at the inner face",
    "biot_outer": "film against body resistance at the outer face",
    "rate_per_length_inner": "amount per unit length through the inner face",
    "rate_per_length_outer": "amount per unit length through the outer face",
    "consumption_per_length": "amount consumed per unit length",
    "consumption_per_area": "amount consumed per unit face area",
    "rate_inner": "amount per time through the inner face",
    "rate_outer": "amount per time through the outer face",
    "consumption": "amount consumed per time",
    "t50": "time to release half the initial load",
    "t90": "time to release 90 % of the initial load",
    "time_lag": "intercept of the late-time release line (membrane lag)",
    "release_fraction_final": "fraction of the initial load released by the last time",
    "time_to_steady": "time after which the concentration stays within 1 % of the steady "
                      "state's scale everywhere",
    "time_depleted": "time when the last undissolved drug has dissolved",
    "time_depleted_layers": "time when each loaded layer's undissolved drug has dissolved",
}

#: Quantities tried in order for the one figure shown at the top of the report.
KEY_FIGURES = ("flux_outer", "flux_inner", "t50", "t90", "consumption")


def flatten(value: Any, prefix: str = "") -> dict[str, Any]:
    """``{"layers[0].thickness": "40 um", ...}``: leaves of a nested document by path.

    Every list is indexed (``regime.times[0]``); ``{value, unit}`` objects are leaves.
    """
    leaves: dict[str, Any] = {}
    if isinstance(value, dict) and not ({"value", "unit"} >= set(value) and "value" in value):
        for key, item in value.items():
            leaves.update(flatten(item, f"{prefix}.{key}" if prefix else str(key)))
    elif isinstance(value, (list, tuple)) and value:
        for index, item in enumerate(value):
            leaves.update(flatten(item, f"{prefix}[{index}]"))
    else:
        leaves[prefix] = value
    return leaves


_INDEXED = re.compile(r"^(.*)\[(\d+)\]$")


def _collapse_word_lists(rows: list[tuple[str, Any, Any]]) -> list[tuple[str, Any, Any]]:
    """Join lists of plain words that read the same on both sides (tags) into one row."""
    groups: dict[str, list[tuple[str, Any, Any]]] = {}
    for row in rows:
        match = _INDEXED.match(row[0])
        if match:
            groups.setdefault(match.group(1), []).append(row)
    joinable = {base for base, items in groups.items()
                if all(isinstance(g, str) and g == s for _, g, s in items)}
    out: list[tuple[str, Any, Any]] = []
    for row in rows:
        match = _INDEXED.match(row[0])
        if match and match.group(1) in joinable:
            base = match.group(1)
            if match.group(2) == "0":
                words = ", ".join(g for _, g, _s in groups[base])
                out.append((base, words, words))
            continue
        out.append(row)
    return out


def _as_given(value: Any) -> Any:
    if isinstance(value, dict):
        return f"{value.get('value')} {value.get('unit', '')}".strip()
    return value


def input_rows(document: dict[str, Any], normalised: dict[str, Any] | None
               ) -> list[tuple[str, Any, Any]]:
    """(path, as given, in SI) for every input leaf; SI values stay ``{value, unit}``."""
    given = flatten(document)
    si = flatten(normalised or {})
    paths = list(given) + [p for p in si if p not in given]
    rows = [(path, _as_given(given.get(path, "")), si.get(path, "")) for path in paths]
    rows = [(path, "none" if g == [] else g, "none" if s == [] else s) for path, g, s in rows]
    return _collapse_word_lists(rows)


def _normalised(record: dict[str, Any], document: dict[str, Any]) -> dict[str, Any] | None:
    if isinstance(record.get("inputs"), dict):
        return record["inputs"]
    try:
        return dict(schemas.validate_case(document, budgets=None).normalised)
    except schemas.CaseError:
        return None


def key_figure(record: dict[str, Any]) -> tuple[str, Any] | None:
    """(name, quantity) of the figure a reader looks for first, or None."""
    quantities = record.get("quantities") or {}
    for name in KEY_FIGURES:
        quantity = quantities.get(name)
        if isinstance(quantity, dict) and isinstance(quantity.get("value"), (int, float)) \
                and quantity["value"] != 0:
            return name, quantity
    return None


def _figures(record: dict[str, Any], normalised: dict[str, Any] | None) -> dict[str, Markup]:
    """The inline SVG figures; one that cannot be drawn is left out (and logged), so that the
    report itself always renders."""
    names = [str(layer.get("name") or f"layer {i + 1}")
             for i, layer in enumerate((normalised or {}).get("layers") or [])]
    with_inputs = dict(record)
    with_inputs.setdefault("inputs", normalised or {})
    makers = {
        "stack": lambda: layer_stack_svg(normalised) if normalised and normalised.get("layers")
        else None,
        "profile": lambda: profile_svg(with_inputs, names),
        "release": lambda: release_svg(record),
        "front": lambda: front_svg(with_inputs),
        "compartment": lambda: compartment_svg(with_inputs),
        "minimum": lambda: minimum_svg(record),
        "axial": lambda: axial_svg(record),
        "axial_field": lambda: axial_field_svg(record),
    }
    figures: dict[str, Markup] = {}
    for name, make in makers.items():
        try:
            svg = make()
        except Exception:  # noqa: BLE001 - a figure must never take the record down with it
            logger.exception("report figure %r of run %s could not be drawn", name,
                             record.get("run_id"))
            # a non-empty marker: the template's notice tests it for truth
            figures[f"{name}_missing"] = Markup("missing")
            continue
        if svg:
            figures[name] = Markup(svg)
    return figures


def _values(series: dict[str, Any], name: str) -> list[Any] | None:
    entry = series.get(name)
    values = entry.get("values") if isinstance(entry, dict) else None
    return values if isinstance(values, list) else None


def release_table(record: dict[str, Any]) -> dict[str, Any] | None:
    """The release (or uptake) series at the requested times, for the report's table:
    ``{"columns": [(name, unit)], "rows": [(time, readable time, [values])], "extra":
    [OverTimeColumn], "extra_rows": [[(value, uncertainty)] per row]}``; ``extra``: the
    dissolution front of each loaded layer and the compartment concentrations, each in the
    unit that reads best (:mod:`service.report.release_view`). None when the record is not
    transient."""
    series = record.get("series") or {}
    times = _values(series, "time")
    if not times:
        return None
    names = [n for n in ("released_inner", "released_outer", "release_fraction", "uptake",
                         "remaining", "consumed") if _values(series, n) is not None
             and len(_values(series, n) or []) == len(times)]
    columns = [(n, series[n].get("unit")) for n in names]
    rows = [(t, readable_time(t), [series[n]["values"][k] for n in names])
            for k, t in enumerate(times)]
    extra = over_time_columns(record)
    extra_rows = [[column.shown(k) for column in extra] for k in range(len(times))]
    return {"columns": columns, "rows": rows, "extra": extra, "extra_rows": extra_rows}


def minimum_table(record: dict[str, Any]) -> dict[str, Any] | None:
    """The true minimum at each requested time of a record that takes solute up:
    ``{"unit", "layers": [names], "rows": [(time, readable, value, uncertainty, [per layer])],
    "verified_by", "routes"}``; None for a release (its minimum sits at the sink) or a record
    without the series."""
    series = record.get("series") or {}
    times = _values(series, "time")
    values = _values(series, "concentration_min")
    if not times or not values or len(values) != len(times) or "release_fraction" in series:
        return None
    lowest = series["concentration_min"]
    layers = series.get("concentration_min_layers") or {}
    per_layer = layers.get("values") if isinstance(layers.get("values"), list) else None
    uncertainty = lowest.get("uncertainty") or [None] * len(values)
    rows = [(t, readable_time(t), v, u, per_layer[k] if per_layer else [])
            for k, (t, v, u) in enumerate(zip(times, values, uncertainty, strict=True))]
    return {"unit": lowest.get("unit"), "layers": layers.get("layers") or [], "rows": rows,
            "verified_by": lowest.get("verified_by"), "routes": lowest.get("routes") or []}


def report_context(record: dict[str, Any], document: dict[str, Any]) -> dict[str, Any]:
    """Everything ``report_body.html`` shows for ``record`` of case ``document``."""
    normalised = _normalised(record, document)
    quantities = []
    for name, quantity in (record.get("quantities") or {}).items():
        quantities.append((name, quantity, QUANTITY_WORDS.get(name, ""),
                           per_layer_values(quantity)))
    checks = record.get("checks") or []
    front = (record.get("quantities") or {}).get("depletion_front")
    return {
        "record": record,
        "document": document,
        "inputs": input_rows(document, normalised),
        "quantities": quantities,
        "checks": checks,
        "checks_passed": sum(1 for c in checks if c.get("passed")),
        "methods": record.get("methods") or [],
        "warnings": record.get("warnings") or [],
        "provenance": record.get("provenance") or {},
        "signoffs": record.get("signoffs") or [],
        "deviations": record.get("deviations") or [],
        "caution": record.get("caution") or DEFAULT_CAUTION,
        "standard_caution": DEFAULT_CAUTION,
        "figures": _figures(record, normalised),
        "key_figure": key_figure(record),
        "depletion_front": front if isinstance(front, dict) else None,
        "depletion_times": depletion_times(record),
        "transient": ((normalised or {}).get("regime") or {}).get("kind") == "transient",
        "release_table": release_table(record),
        "minimum_table": minimum_table(record),
        "num": number_markup,
        "time": time_markup,
        "qty": quantity_markup,
        "unit": unit_text,
        "length": length_markup,
        "layer_names": [str(layer.get("name") or f"layer {i + 1}")
                        for i, layer in enumerate((normalised or {}).get("layers") or [])],
        **design_context(record, document),
        **measured_context(record),
    }


def stylesheet_text() -> str:
    """The one stylesheet (screen and print), for reports that must stand alone."""
    return STYLESHEET.read_text(encoding="utf-8")


def render_report(record: dict[str, Any], document: dict[str, Any]) -> str:
    """The standalone report page of ``record`` (a run record) computed from case ``document``.

    The stylesheet is inlined so that a saved file reads the same anywhere.
    """
    return render_template("report.html", stylesheet=Markup(stylesheet_text()),
                           **report_context(record, document))
