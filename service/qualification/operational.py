"""Operational qualification: published closed-form cases run on this installation.

Each case file in ``cases/`` (package data) holds a case document, the figure of the record it
tests (``quantity``: a name in ``quantities``, optionally ``name[i]`` for a per-layer list), the
value the published closed form gives (``expected``: SI value and the record's unit), its
source, the formula with the case's numbers, and a relative tolerance with its reason. A case
passes when the record's calculation is verified (``verdict: pass``), the figure is in the
expected unit and it lies within the tolerance of the published value.
"""

from __future__ import annotations

import json
import math
import re
import time
from collections.abc import Callable, Iterable
from dataclasses import asdict, dataclass, fields
from pathlib import Path
from typing import Any

from schemas.checking import check_case
from schemas.errors import CaseError

CASE_DIRECTORY = Path(__file__).resolve().parent / "cases"
_INDEXED = re.compile(r"^([a-z0-9_]+)(?:\[(\d+)\])?$")


@dataclass(frozen=True)
class ReferenceFacts:
    """What a reference case states: its published value, source and tolerance."""

    id: str
    title: str
    covers: dict[str, str]
    source: str
    formula: str
    quantity: str
    expected: float
    unit: str
    tolerance: float
    tolerance_reason: str


@dataclass(frozen=True)
class ReferenceCase(ReferenceFacts):
    """A reference case: its facts and the case document run to check them."""

    case: dict[str, Any]


@dataclass(frozen=True)
class CaseResult(ReferenceFacts):
    """A reference case's facts and what this installation found."""

    result: float | None
    relative_error: float | None
    verdict: str | None
    passed: bool
    reason: str
    seconds: float

    def as_dict(self) -> dict[str, Any]:
        return asdict(self)


def read_case(path: Path) -> ReferenceCase:
    data = json.loads(path.read_text(encoding="utf-8"))
    return ReferenceCase(id=data["id"], title=data["title"], covers=dict(data["covers"]),
                         source=data["source"], formula=data["formula"],
                         quantity=data["quantity"], expected=float(data["expected"]["value"]),
                         unit=data["expected"]["unit"],
                         tolerance=float(data["tolerance"]["relative"]),
                         tolerance_reason=data["tolerance"]["why"], case=data["case"])


def reference_cases(directory: Path | None = None) -> list[ReferenceCase]:
    directory = directory or CASE_DIRECTORY
    return [read_case(path) for path in sorted(directory.glob("*.json"))]


def figure(record: dict[str, Any], quantity: str) -> tuple[float | None, str | None]:
    """(value, unit) of ``quantity`` (``name`` or ``name[i]``) in the record, or (None, None)."""
    match = _INDEXED.match(quantity)
    entry = (record.get("quantities") or {}).get(match.group(1)) if match else None
    if not isinstance(entry, dict):
        return None, None
    value = entry.get("value")
    if match and match.group(2) is not None:
        index = int(match.group(2))
        value = value[index] if isinstance(value, list) and index < len(value) else None
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return None, entry.get("unit")
    return float(value), entry.get("unit")


def judge(reference: ReferenceCase, record: dict[str, Any], seconds: float) -> CaseResult:
    """The case's result: passed only if verified, in the expected unit and within tolerance."""
    value, unit = figure(record, reference.quantity)
    error = None
    reasons = []
    if record.get("status") != "succeeded":
        reasons.append(f"the run {record.get('status')}: {record.get('error')}")
    elif record.get("verdict") != "pass":
        failed = [c["name"] for c in record.get("checks") or [] if not c.get("passed")]
        reasons.append(f"calculation not verified (failed checks: {', '.join(failed)})")
    if value is None:
        reasons.append(f"the record has no figure {reference.quantity}")
    else:
        if unit != reference.unit:
            reasons.append(f"unit {unit} differs from the expected {reference.unit}")
        scale = abs(reference.expected) or 1.0
        error = abs(value - reference.expected) / scale
        if not math.isfinite(error) or error > reference.tolerance:
            reasons.append(f"{reference.quantity} = {value:.12g} {unit} differs from the "
                           f"published {reference.expected:.12g} {reference.unit} by "
                           f"{error:.3g} relative (tolerance {reference.tolerance:g})")
    facts = {f.name: getattr(reference, f.name) for f in fields(ReferenceFacts)}
    return CaseResult(**facts, result=value,
                      relative_error=error, verdict=record.get("verdict"),
                      passed=not reasons,
                      reason="; ".join(reasons) or "within tolerance, calculation verified",
                      seconds=round(seconds, 3))


def run_case(reference: ReferenceCase) -> CaseResult:
    started = time.perf_counter()
    try:
        record = check_case(reference.case)
    except CaseError as error:
        record = {"status": "invalid", "error": str(error)}
    return judge(reference, record, time.perf_counter() - started)


def qualify_operation(cases: Iterable[ReferenceCase] | None = None,
                      on_case: Callable[[CaseResult], None] | None = None) -> list[CaseResult]:
    """Run every reference case through ``check_case`` here and judge each."""
    results = []
    for reference in cases if cases is not None else reference_cases():
        result = run_case(reference)
        if on_case is not None:
            on_case(result)
        results.append(result)
    return results
