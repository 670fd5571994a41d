"""The HTML report of one run (Jinja2, autoescaped)."""

from __future__ import annotations

from typing import Any

from flask import render_template

#: Shown on every report when the record carries no caution text of its own.
DEFAULT_CAUTION = ("These results support, but do not replace, design verification testing and "
                   "qualified independent review; local regulations and licensed practice "
                   "govern.")


def flatten(value: Any, prefix: str = "") -> dict[str, Any]:
    """``{"layers[0].thickness": "40 um", ...}``: leaves of a nested document by path."""
    leaves: dict[str, Any] = {}
    if isinstance(value, dict) and not ({"value", "unit"} >= set(value) and "value" in value):
        for key, item in value.items():
            leaves.update(flatten(item, f"{prefix}.{key}" if prefix else str(key)))
    elif isinstance(value, (list, tuple)) and value and all(isinstance(v, (dict, list))
                                                            for v in value):
        for index, item in enumerate(value):
            leaves.update(flatten(item, f"{prefix}[{index}]"))
    else:
        if isinstance(value, dict):
            value = f"{value.get('value')} {value.get('unit', '')}".strip()
        leaves[prefix] = value
    return leaves


def input_rows(document: dict[str, Any], normalised: dict[str, Any] | None
               ) -> list[tuple[str, Any, Any]]:
    """(path, as given, in SI) for every input leaf."""
    given = flatten(document)
    si = flatten(normalised or {})
    paths = list(given) + [p for p in si if p not in given]
    return [(path, given.get(path, ""), si.get(path, "")) for path in paths]


def _normalised(document: dict[str, Any]) -> dict[str, Any] | None:
    import schemas

    try:
        return dict(schemas.validate_case(document).normalised)
    except schemas.CaseError:
        return None


def render_report(record: dict[str, Any], document: dict[str, Any]) -> str:
    """The report page of ``record`` (a run record) computed from case ``document``."""
    quantities = []
    for name, quantity in (record.get("quantities") or {}).items():
        if isinstance(quantity, dict):
            quantities.append((name, quantity.get("value"), quantity.get("unit", "")))
        else:
            quantities.append((name, quantity, ""))
    return render_template(
        "report.html",
        record=record,
        document=document,
        inputs=input_rows(document, _normalised(document)),
        quantities=quantities,
        checks=record.get("checks") or [],
        methods=record.get("methods") or [],
        warnings=record.get("warnings") or [],
        provenance=record.get("provenance") or {},
        signoffs=record.get("signoffs") or [],
        caution=record.get("caution") or DEFAULT_CAUTION,
    )
