"""Plain-text rendering of a check record, for the terminal (``fluxproof check``)."""

from __future__ import annotations

from collections.abc import Iterator

from schemas.result import RunStatus
from service.report.numbers import readable_time
from service.report.release_view import (
    depletion_times,
    over_time_columns,
    per_layer_values,
    requested_times,
)
from service.report.text_axial import axial_lines
from service.report.text_design import (
    design_verdict_line,
    headline_lines,
    limit_lines,
    requirement_lines,
    sweep_lines,
    table_head,
    uncertainty_lines,
    verdict_lines,
)
from service.report.text_measured import calibration_lines, credibility_lines, validation_lines

RULE = "-" * 78


def _fmt(value) -> str:
    if value is None:
        return "—"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        return f"{value:.6g}"
    if isinstance(value, list):
        return "[" + ", ".join(_fmt(v) for v in value) + "]"
    return str(value)


def _quantity_text(raw) -> str:
    if isinstance(raw, dict) and "value" in raw:
        return f"{raw['value']} {raw.get('unit', '')}".strip()
    return str(raw)


def _si_text(raw) -> str:
    if isinstance(raw, dict) and "value" in raw and "unit" in raw:
        return f"{_fmt(float(raw['value']))} {raw['unit']}"
    return _fmt(raw)


def _input_rows(original, normalised, path: str = "") -> Iterator[tuple[str, str, str]]:
    """(path, as given, SI) for every leaf of the case that carries a value."""
    if isinstance(original, dict) and not ("unit" in original and "value" in original):
        for key, value in original.items():
            if key in ("title", "reference", "schema_version", "tags"):
                continue
            sub = normalised.get(key) if isinstance(normalised, dict) else None
            yield from _input_rows(value, sub, f"{path}.{key}" if path else key)
    elif isinstance(original, list):
        for i, value in enumerate(original):
            sub = normalised[i] if isinstance(normalised, list) and i < len(normalised) else None
            yield from _input_rows(value, sub, f"{path}[{i}]")
    else:
        dimensional = isinstance(normalised, dict) and "unit" in normalised
        si = _si_text(normalised) if dimensional else ""
        given = _quantity_text(original)
        yield path, given, si if si != given else ""


def deviation_lines(record: dict) -> list[str]:
    """The default limits the case loosens (the record's ``deviations``), or nothing."""
    deviations = record.get("deviations") or []
    if not deviations:
        return []
    return ["DEVIATIONS: this case loosens default limits"] + [
        f"  {d['check']:<32} default {_fmt(d['default']):>12}  this case {_fmt(d['value']):>12}"
        for d in deviations]


def signature_lines(record: dict) -> list[str]:
    """Each sign-off's electronic signature: printed name, meaning, decision, UTC time."""
    lines = []
    for s in record.get("signoffs") or []:
        lines.append(f"SIGNED: {s.get('name') or s['reviewer']} ({s['reviewer']}), "
                     f"{s.get('meaning') or 'sign-off'}, {s['decision']}, {s['at']} UTC")
        if s.get("signature"):
            lines.append(f"  Ed25519 key {s['key_id']}, record sha256 {s['record_sha256']}")
        if s.get("justification"):
            lines.append(f"  justification: {s['justification']}")
    return lines


def render_text(record: dict, case: dict) -> str:
    """The readable report: the two verdicts (calculation verified, design requirements met)
    and the required quantities first, then inputs (as given and SI), quantities, the design
    blocks, checks, verdict, caution."""
    lines: list[str] = []
    add = lines.append
    add(f"fluxproof check record — {case.get('title', '(untitled)')}")
    if case.get("reference"):
        add(f"reference: {case['reference']}")
    add(f"case sha256: {record.get('case_sha256')}")
    lines.extend(deviation_lines(record))
    lines.extend(signature_lines(record))
    add(RULE)
    lines.extend(verdict_lines(record))
    lines.extend(headline_lines(record, case))
    add(RULE)
    add("Inputs (as given → SI)")
    for path, given, si in _input_rows(case, record.get("inputs") or {}):
        add(f"  {path:<42} {given:<20} {('→ ' + si) if si else ''}".rstrip())
    for fitted in (record.get("calibration") or {}).get("parameters", []):
        add(f"  fitted: {fitted.get('field')} = {_fmt(fitted.get('estimate'))} "
            f"{fitted.get('unit', '')} replaces the value above in every figure of this record "
            "(see Calibration)")
    add(RULE)
    if record.get("status") == RunStatus.FAILED:
        add(f"ENGINE FAILURE: {record.get('error')}")
    add("Quantities (SI; fluxes positive outward)")
    for name, q in record.get("quantities", {}).items():
        per_layer = per_layer_values(q)
        if per_layer is not None:
            add(f"  {name:<28} {'per layer':>16} {q.get('unit', '')}")
            for layer, value in per_layer:
                add(f"    {layer[:26]:<26} " + _per_layer_text(value, q.get("unit")))
            continue
        line = f"  {name:<28} {_fmt(q.get('value')):>16} {q.get('unit', '')}"
        if q.get("unit") == "s" and readable_time(q.get("value")):
            line += f" ({readable_time(q['value'])})"
        if q.get("uncertainty") is not None:
            line += f"  ± {_fmt(q['uncertainty'])}"
        if q.get("verified_by"):
            line += f"  [{q['verified_by']}, {len(q.get('routes') or [])} routes]"
        add(line)
    probes = record.get("series", {}).get("probes")
    if probes and probes.get("position") and not isinstance(probes["concentration"][0], list):
        add("Probes")
        unit = probes["units"]["concentration"]
        for r, c in zip(probes["position"], probes["concentration"], strict=True):
            add(f"  r = {r:<12.6g} m   C = {c:.6g} {unit}")
    axial = axial_lines(record)
    if axial:
        add(RULE)
        lines.extend(axial)
    if "time" in record.get("series", {}):
        add(RULE)
        add(format_release_table(record))
        front_table = format_over_time_table(record)
        if front_table:
            add(RULE)
            add(front_table)
    if "concentration_min" in record.get("series", {}) and \
            "release_fraction" not in record.get("series", {}):
        add(RULE)
        add(format_minimum_table(record))
    add(RULE)
    lines.extend(requirement_lines(record, case))
    for block in (uncertainty_lines(record), limit_lines(record), sweep_lines(record),
                  calibration_lines(record), validation_lines(record), credibility_lines(record)):
        if block:
            add(RULE)
            lines.extend(block)
    add(RULE)
    add("Methods")
    for m in record.get("methods", []):
        add(f"  {m['role']:<12} {m['name']}")
        add(f"  {'':<12} {m['reference']}")
    add(RULE)
    add(f"Checks  {'value':>12} {'limit':>12}  result")
    for c in record.get("checks", []):
        mark = "pass" if c["passed"] else "FAIL"
        add(f"  {c['name']:<32} {_fmt(c['value']):>12} {_fmt(c['limit']):>12}  {mark}")
        add(f"      {c['detail']}")
    if record.get("warnings"):
        add(RULE)
        add("Warnings")
        for w in record["warnings"]:
            add(f"  ! {w}")
    add(RULE)
    prov = record.get("provenance", {})
    add("Provenance: " + ", ".join(
        f"{k} {prov[k]}" for k in ("engine_version", "python", "numpy", "scipy", "pint")
        if k in prov))
    add(f"  {prov.get('worker', '')}  {prov.get('started_at', '')} → {prov.get('finished_at', '')}")
    add(RULE)
    passed = sum(1 for c in record.get("checks", []) if c["passed"])
    add(f"CALCULATION VERDICT: {str(record.get('verdict')).upper()}  "
        f"({passed}/{len(record.get('checks', []))} checks passed)")
    add(design_verdict_line(record))
    add(f"CAUTION: {record.get('caution', '')}")
    return "\n".join(lines)


def _per_layer_text(value: float | None, unit: str | None) -> str:
    if value is None:
        return f"{'—':>16}   not within the duration" if unit == "s" else f"{'—':>16}"
    text = f"{_fmt(value):>16} {unit or ''}"
    if unit == "s" and readable_time(value):
        text += f" ({readable_time(value)})"
    return text


def format_over_time_table(record: dict) -> str:
    """Plain-text table of the dissolution front of each loaded layer and the compartment
    concentrations at each requested time, each column in the unit in its heading (the one
    that reads best for the whole column); "dissolved" where a layer's undissolved drug is
    gone; "" for a record without them."""
    columns = over_time_columns(record)
    times = requested_times(record)
    if not columns or not times:
        return ""
    headings = [f"{c.label} [{c.shown_unit}]" for c in columns]
    widths = [max(14, len(h)) for h in headings]
    header = f"{'time [s]':>14} {'time':>12}" + "".join(
        f" {h:>{w}}" for h, w in zip(headings, widths, strict=True))
    fronts = any(c.kind == "front" for c in columns)
    compartments = any(c.kind == "compartment" for c in columns)
    title = " and ".join(t for t, on in (("Dissolution front", fronts),
                                         ("compartment concentrations", compartments)) if on)
    lines = [title[0].upper() + title[1:] + " at the requested times",
             *table_head(header, indent=0)]
    for k, t in enumerate(times):
        cells = []
        for column in columns:
            value, spread = column.shown(k)
            if value is None:
                cells.append(column.empty_word)
            else:
                cells.append(f"{value:.6g}" + (f" ±{spread:.2g}" if spread is not None else ""))
        lines.append(f"{t:>14.6g} {_time_cell(t):>12}"
                     + "".join(f" {c:>{w}}" for c, w in zip(cells, widths, strict=True)))
    for gone in depletion_times(record):
        where = f" in {gone.layer}" if gone.layer is not None else ""
        if gone.seconds is None:
            lines.append(f"undissolved drug{where} gone: not within the duration")
        else:
            readable = readable_time(gone.seconds)
            lines.append(f"undissolved drug{where} gone: {gone.seconds:.6g} s"
                         + (f" ({readable})" if readable else ""))
    return "\n".join(lines)


def _time_cell(seconds: float) -> str:
    return readable_time(seconds) or f"{seconds:.6g} s"


def format_release_table(outcome) -> str:
    """Plain-text release table for the CLI report.

    Columns: time (SI, then in the unit that reads best), released out of the inner face, out
    of the outer face, release fraction (or uptake, the net amount taken in, for a body fed
    through a face or without an initial load), remaining; then the t50, t90, time-lag and
    time-to-steady lines, each in s and in the unit that reads best.
    Accepts a record or an engine ``Outcome`` (same ``series`` and ``quantities``).
    """
    series = outcome["series"] if isinstance(outcome, dict) else outcome.series
    quantities = outcome["quantities"] if isinstance(outcome, dict) else outcome.quantities
    if "time" not in series:
        return ""
    times = series["time"]["values"]
    unit = series["released_outer"]["unit"]
    fraction_key = "uptake" if "uptake" in series else "release_fraction"
    fraction_unit = "-" if fraction_key == "release_fraction" else unit
    header = (f"{'time [s]':>14} {'time':>12} {'out inner [' + unit + ']':>20} "
              f"{'out outer [' + unit + ']':>20} {fraction_key + ' [' + fraction_unit + ']':>22} "
              f"{'remaining [' + unit + ']':>20}")
    lines = ["Release" if fraction_key == "release_fraction" else "Uptake",
             *table_head(header, indent=0)]
    for k, t in enumerate(times):
        lines.append(
            f"{t:>14.6g} {_time_cell(t):>12} {series['released_inner']['values'][k]:>20.6g} "
            f"{series['released_outer']['values'][k]:>20.6g} "
            f"{series[fraction_key]['values'][k]:>22.6g} "
            f"{series['remaining']['values'][k]:>20.6g}")
    for name, label in (("t50", "t50 (50 % released)"), ("t90", "t90 (90 % released)"),
                        ("time_lag", "time lag"),
                        ("time_to_steady", "time to steady (within 1 %)")):
        if name in quantities:
            value = quantities[name]["value"]
            if value is None:
                text = "not reached within the duration"
            else:
                readable = readable_time(value)
                text = f"{value:.6g} s" + (f" ({readable})" if readable else "")
            lines.append(f"{label}: {text}")
    return "\n".join(lines)


def format_minimum_table(outcome) -> str:
    """Plain-text table of the true minimum concentration at each requested time: the body's,
    its numerical uncertainty, and each layer's (``series.concentration_min`` and
    ``series.concentration_min_layers``)."""
    series = outcome["series"] if isinstance(outcome, dict) else outcome.series
    lowest = series.get("concentration_min")
    if not lowest or "time" not in series:
        return ""
    layers = series.get("concentration_min_layers") or {}
    names = layers.get("layers") or []
    unit = lowest["unit"]
    header = (f"{'time [s]':>14} {'time':>12} {'minimum [' + unit + ']':>22} {'±':>10}"
              + "".join(f" {name[:18]:>18}" for name in names))
    lines = ["Lowest concentration (true minimum over the body" +
             (", and per layer" if names else "") + ")", *table_head(header, indent=0)]
    uncertainty = lowest.get("uncertainty") or [None] * len(lowest["values"])
    rows = layers.get("values") or [[] for _ in lowest["values"]]
    for t, value, u, row in zip(series["time"]["values"], lowest["values"], uncertainty, rows,
                                strict=True):
        lines.append(f"{t:>14.6g} {_time_cell(t):>12} {value:>22.6g} {_fmt(u):>10}"
                     + "".join(f" {v:>18.6g}" for v in row))
    return "\n".join(lines)
