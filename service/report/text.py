"""Plain-text rendering of a check record, for the terminal (``fluxproof check``)."""

from __future__ import annotations

from collections.abc import Iterator

from worker.engine.transient_check import format_release_table

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


def render_text(record: dict, case: dict) -> str:
    """The readable report: inputs (as given and SI), quantities, checks, verdict, caution."""
    lines: list[str] = []
    add = lines.append
    add(f"fluxproof check record — {case.get('title', '(untitled)')}")
    if case.get("reference"):
        add(f"reference: {case['reference']}")
    add(f"case sha256: {record.get('case_sha256')}")
    add(RULE)
    add("Inputs (as given → SI)")
    for path, given, si in _input_rows(case, record.get("inputs") or {}):
        add(f"  {path:<42} {given:<20} {('→ ' + si) if si else ''}".rstrip())
    add(RULE)
    if record.get("status") == "failed":
        add(f"ENGINE FAILURE: {record.get('error')}")
    add("Quantities (SI; fluxes positive outward)")
    for name, q in record.get("quantities", {}).items():
        add(f"  {name:<28} {_fmt(q.get('value')):>16} {q.get('unit', '')}")
    probes = record.get("series", {}).get("probes")
    if probes and probes.get("position") and not isinstance(probes["concentration"][0], list):
        add("Probes")
        unit = probes["units"]["concentration"]
        for r, c in zip(probes["position"], probes["concentration"], strict=True):
            add(f"  r = {r:<12.6g} m   C = {c:.6g} {unit}")
    if "time" in record.get("series", {}):
        add(RULE)
        add(format_release_table(record))
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
    add(f"VERDICT: {str(record.get('verdict')).upper()}  ({passed}/{len(record.get('checks', []))}"
        " checks passed)")
    add(f"CAUTION: {record.get('caution', '')}")
    return "\n".join(lines)
