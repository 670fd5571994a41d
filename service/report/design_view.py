"""What every rendering says about the design, read from a record: the two verdicts apart
(*calculation verified*: the record's ``verdict``; *design requirements met*: ``design.status``),
the requirements table, the headline figures, and the ``uncertainty``, ``design_limit`` and
``sweep`` blocks as rows.

The text report, the HTML report and the run page all render from these, so that they say the
same thing in the same words. Values stay SI numbers here (each renderer formats them); the
readable unit beside SI comes from :mod:`service.report.readable`. Standard library only: the
text report runs on the base install.
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

from service.report.readable import readable_text

#: Statuses of a requirement and of the design (the record's words), and how each reads.
MET, NOT_MET, INDETERMINATE, NONE_STATED = "met", "not_met", "indeterminate", "none_stated"
STATUS_WORDS = {MET: "met", NOT_MET: "NOT MET", INDETERMINATE: "INDETERMINATE",
                NONE_STATED: "none stated"}
STATUS_MARKS = {MET: "✓", NOT_MET: "✗", INDETERMINATE: "?", NONE_STATED: "–"}

CALCULATION_LABEL = "Calculation verified"
DESIGN_LABEL = "Design requirements met"


@dataclass(frozen=True)
class Statement:
    """One labelled verdict: ``label`` (what is asked), ``answer`` (a few words, capitals when
    it is no), ``state`` (the style: ``pass``, ``fail``, ``miss``, ``undecided``, ``none``,
    ``open``), ``mark`` (a sign that does not rely on colour) and ``detail``."""

    label: str
    answer: str
    state: str
    mark: str
    detail: str = ""


def _number(value: Any) -> float | None:
    if isinstance(value, (int, float)) and not isinstance(value, bool) and math.isfinite(value):
        return float(value)
    return None


def _finished(record: Mapping[str, Any]) -> bool:
    return record.get("status") in ("succeeded", "failed")


def calculation_statement(record: Mapping[str, Any]) -> Statement:
    """*Calculation verified*: the record's ``verdict`` in words."""
    checks = record.get("checks") or []
    passed = sum(1 for c in checks if c.get("passed"))
    if record.get("status") == "failed":
        return Statement(CALCULATION_LABEL, "NO — no result", "fail", "✗",
                         f"Run failed, the engine produced no result: "
                         f"{record.get('error') or 'no reason recorded'}")
    if not _finished(record):
        return Statement(CALCULATION_LABEL, "not yet known", "open", "…",
                         f"the run is {record.get('status') or 'not started'}")
    if record.get("verdict") == "pass":
        return Statement(CALCULATION_LABEL, "yes", "pass", "✓",
                         f"{passed} of {len(checks)} checks within their limits")
    return Statement(CALCULATION_LABEL, "NO — a check failed", "fail", "✗",
                     f"{len(checks) - passed} of {len(checks)} checks failed")


def design_status(record: Mapping[str, Any]) -> str:
    """``design.status`` of the record; a record made before requirements existed states none."""
    design = record.get("design")
    status = design.get("status") if isinstance(design, Mapping) else None
    return status if status in STATUS_WORDS else NONE_STATED


def design_statement(record: Mapping[str, Any]) -> Statement:
    """*Design requirements met*: ``design.status`` in words, never read as a pass when a
    requirement is missed or undecided."""
    if not _finished(record):
        return Statement(DESIGN_LABEL, "not yet known", "open", "…",
                         f"the run is {record.get('status') or 'not started'}")
    status = design_status(record)
    entries = (record.get("design") or {}).get("requirements") or []
    by_status: dict[str, list[str]] = {}
    for entry in entries:
        by_status.setdefault(entry.get("status"), []).append(str(entry.get("id")))
    total = len(entries)
    unverified = record.get("verdict") != "pass"
    caveat = ("; judged on figures the checks did not verify, so not to be relied on"
              if unverified else "")
    if status == NOT_MET:
        missed = by_status.get(NOT_MET, [])
        return Statement(DESIGN_LABEL, "NO — requirement not met", "miss", "✗",
                         f"{len(missed)} of {total} not met: {', '.join(missed)}{caveat}")
    if status == INDETERMINATE:
        open_ids = by_status.get(INDETERMINATE, [])
        return Statement(DESIGN_LABEL, "UNDECIDED — indeterminate", "undecided", "?",
                         f"{len(open_ids)} of {total} indeterminate (the margin is within the "
                         f"numerical uncertainty, or the run has no value): "
                         f"{', '.join(open_ids)}{caveat}")
    if status == MET:
        return Statement(DESIGN_LABEL, "yes", "undecided" if unverified else "met", "✓",
                         f"all {total} requirement(s) met{caveat}")
    return Statement(DESIGN_LABEL, "no design requirements stated", "none", "–",
                     "the case states no requirement; only the calculation is judged")


# --- the requirements table ----------------------------------------------------------------


@dataclass(frozen=True)
class RequirementRow:
    """One requirement as the reports show it; numbers SI (``unit``), ``readable_*`` text in
    the unit a designer reads (empty where SI reads well)."""

    id: str
    what: str
    quantity: str
    relation: str
    value: float | None
    bound: float | list[float] | None
    unit: str
    margin: float | None
    relative_margin: float | None
    numerical_uncertainty: float | None
    status: str
    source: str
    reason: str
    readable_value: str
    readable_bound: str
    readable_margin: str

    @property
    def words(self) -> str:
        return STATUS_WORDS.get(self.status, self.status)

    @property
    def mark(self) -> str:
        return STATUS_MARKS.get(self.status, "")

    @property
    def bound_list(self) -> list[float]:
        if isinstance(self.bound, list):
            return [b for b in self.bound if isinstance(b, (int, float))]
        return [] if self.bound is None else [self.bound]


def _case_relation(document: Mapping[str, Any] | None, requirement_id: str) -> str | None:
    for stated in (document or {}).get("requirements") or []:
        if isinstance(stated, Mapping) and stated.get("id") == requirement_id:
            for key, relation in (("at_least", "≥"), ("at_most", "≤"), ("between", "between")):
                if key in stated:
                    return relation
    return None


def _relation(entry: Mapping[str, Any], document: Mapping[str, Any] | None) -> str:
    """≥, ≤ or between: from the case document, else from the record's own numbers (a margin
    of value − bound is a lower bound)."""
    if isinstance(entry.get("bound"), list):
        return "between"
    from_case = _case_relation(document, str(entry.get("id")))
    if from_case:
        return from_case
    value, bound, margin = (_number(entry.get(k)) for k in ("value", "bound", "margin"))
    if value is not None and bound is not None and margin is not None:
        return "≥" if math.isclose(margin, value - bound, rel_tol=1e-9, abs_tol=0.0) else "≤"
    return "bound"


def time_words(seconds: float) -> str:
    """A time of the record in the unit it reads best in, SI beside it (``7 d (604800 s)``)."""
    readable = readable_text(seconds, "s")
    return f"{readable} ({seconds:.6g} s)" if readable else f"{seconds:.6g} s"


def requirement_what(entry: Mapping[str, Any]) -> str:
    """``concentration_min [islet]``, ``release_fraction at 7 d (604800 s)``."""
    what = str(entry.get("quantity"))
    if entry.get("layer") is not None:
        what += f" [{entry['layer']}]"
    at = _number(entry.get("at"))
    if at is not None:
        what += f" at {time_words(at)}"
    return what


def requirement_rows(record: Mapping[str, Any], document: Mapping[str, Any] | None = None
                     ) -> list[RequirementRow]:
    """The record's ``design.requirements`` as rows, in the record's order."""
    rows = []
    for entry in (record.get("design") or {}).get("requirements") or []:
        unit = str(entry.get("unit") or "1")
        quantity = str(entry.get("quantity"))
        value, margin = _number(entry.get("value")), _number(entry.get("margin"))
        bound = entry.get("bound")
        bounds = bound if isinstance(bound, list) else [bound]
        readable_bound = " to ".join(t for t in (readable_text(b, unit, quantity, also=[value])
                                                 for b in bounds) if t)
        rows.append(RequirementRow(
            id=str(entry.get("id")), what=requirement_what(entry), quantity=quantity,
            relation=_relation(entry, document), value=value, bound=bound, unit=unit,
            margin=margin, relative_margin=_number(entry.get("relative_margin")),
            numerical_uncertainty=_number(entry.get("numerical_uncertainty")),
            status=str(entry.get("status")), source=str(entry.get("source") or ""),
            reason=str(entry.get("reason") or ""),
            readable_value=readable_text(value, unit, quantity, also=bounds),
            readable_bound=readable_bound,
            readable_margin=readable_text(margin, unit, quantity, also=bounds)))
    return rows


def headline_requirements(record: Mapping[str, Any], document: Mapping[str, Any] | None = None
                          ) -> list[RequirementRow]:
    """The figures a report puts first when the case states requirements: the required
    quantities, missed ones first (an oxygen case headlines its minimum concentration)."""
    order = {NOT_MET: 0, INDETERMINATE: 1, MET: 2}
    rows = requirement_rows(record, document)
    return sorted(rows, key=lambda row: order.get(row.status, 3))


# --- input uncertainty ---------------------------------------------------------------------

_KEY = re.compile(r"^(?P<quantity>[^\[@]+)(?:\[(?P<layer>[^\]]*)\])?(?:@(?P<at>[^s]+)s)?$")


def _key_parts(key: str) -> tuple[str, str | None, float | None]:
    """``concentration_min[islet]`` → (quantity, layer, None); ``release_fraction@604800s`` →
    (quantity, None, 604800.0)."""
    match = _KEY.match(key)
    if not match:
        return key, None, None
    at = match.group("at")
    try:
        time = float(at) if at is not None else None
    except ValueError:
        time = None
    return match.group("quantity"), match.group("layer"), time


def quantity_unit(record: Mapping[str, Any], key: str) -> str:
    """The SI unit of a figure named ``key`` (a quantity, ``name[layer]`` or ``name@<t>s``):
    the quantity's or series' own unit, else a requirement's on it, else ``1``."""
    name = _key_parts(key)[0]
    for block in (record.get("quantities") or {}, record.get("series") or {}):
        entry = block.get(name)
        if isinstance(entry, Mapping) and entry.get("unit"):
            return str(entry["unit"])
    for entry in (record.get("design") or {}).get("requirements") or []:
        if entry.get("quantity") == name and entry.get("unit"):
            return str(entry["unit"])
    return "1"


def requirements_on(record: Mapping[str, Any], key: str) -> list[Mapping[str, Any]]:
    """The record's requirement entries that bound the figure ``key``."""
    name, layer, at = _key_parts(key)
    found = []
    for entry in (record.get("design") or {}).get("requirements") or []:
        if entry.get("quantity") != name:
            continue
        if layer is not None and entry.get("layer") != layer:
            continue
        entry_at = _number(entry.get("at"))
        if (at is None) != (entry_at is None) or (
                at is not None and entry_at is not None
                and not math.isclose(at, entry_at, rel_tol=1e-9)):
            continue
        found.append(entry)
    return found


@dataclass(frozen=True)
class UncertaintyRow:
    key: str
    unit: str
    mean: float | None
    standard_uncertainty: float | None
    interval: list[float | None]
    coverage: float | None
    readable_mean: str
    readable_interval: str
    histogram: Mapping[str, Any] | None
    bounds: list[float] = field(default_factory=list)
    #: Law of propagation only: U = k u_c, the second-order term's change of u_c, and whether
    #: it is not negligible.
    expanded_uncertainty: float | None = None
    second_order_change: float | None = None
    curvature_significant: bool = False


@dataclass(frozen=True)
class ProbabilityRow:
    id: str
    probability_met: float | None
    standard_error: float | None
    zero_event_bound: float | None
    #: Law of propagation only: the margin of the estimate, U, and ``met`` / ``not_met`` /
    #: ``within_expanded_uncertainty``.
    margin: float | None = None
    expanded_uncertainty: float | None = None
    decided: str | None = None

    @property
    def decided_words(self) -> str:
        return {"met": "met beyond U", "not_met": "NOT MET beyond U",
                "within_expanded_uncertainty": "UNDECIDED: the margin lies within ± U"}.get(
                    self.decided or "", "—")


@dataclass(frozen=True)
class CoefficientRow:
    """Law of propagation: one input's sensitivity coefficient for one figure."""

    quantity: str
    field: str
    coefficient: float | None
    contribution: float | None
    elasticity: float | None


@dataclass(frozen=True)
class InputRow:
    """Law of propagation: one input's estimate and standard uncertainty (SI)."""

    field: str
    distribution: str
    estimate: float | None
    standard_uncertainty: float | None
    unit: str
    basis: str


@dataclass(frozen=True)
class SensitivityRow:
    quantity: str
    field: str
    elasticity: float | None
    first_index: float | None
    total_index: float | None


@dataclass(frozen=True)
class UncertaintyView:
    run_line: str
    rows: list[UncertaintyRow]
    probabilities: list[ProbabilityRow]
    sensitivity: list[SensitivityRow]
    verification_line: str
    #: ``monte_carlo`` or ``law_of_propagation``; the latter fills the fields below.
    propagation: str = "monte_carlo"
    inputs: list[InputRow] = field(default_factory=list)
    coefficients: list[CoefficientRow] = field(default_factory=list)
    #: The method's assumptions and the block's warnings, in the record's words.
    assumptions: list[str] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)

    @property
    def by_law_of_propagation(self) -> bool:
        return self.propagation == "law_of_propagation"


def bounds_of(entries: list[Mapping[str, Any]]) -> list[float]:
    """The numeric bounds of the requirement entries given (both ends of a range)."""
    bounds: list[float] = []
    for entry in entries:
        bound = entry.get("bound")
        for b in bound if isinstance(bound, list) else [bound]:
            number = _number(b)
            if number is not None:
                bounds.append(number)
    return bounds


def _run_line(block: Mapping[str, Any]) -> str:
    if block.get("propagation") == "law_of_propagation":
        factor = _number(block.get("coverage_factor"))
        coverage = _number(block.get("coverage"))
        return (f"{block.get('evaluations', '—')} evaluations (2k + 1 for k inputs); coverage "
                f"factor k = {factor:.4g} for {100 * coverage:.4g} % from the normal distribution"
                if factor is not None and coverage is not None
                else f"{block.get('evaluations', '—')} evaluations") + \
            "; first order, the output taken as normal"
    converged = block.get("converged")
    words = ("converged (adaptive stopping reached the stated digits)" if converged is True
             else "NOT converged: the figures have not reached the stated digits"
             if converged is False else "convergence not stated")
    return (f"{block.get('trials', '—')} trials, sampler {block.get('sampler') or '—'}, "
            f"seed {block.get('seed', '—')}; {words}")


def _verification_line(block: Mapping[str, Any]) -> str:
    verification = block.get("verification")
    if not isinstance(verification, Mapping):
        return "no verification subset recorded"
    checked = verification.get("trials_checked", "—")
    passed = verification.get("all_passed")
    verdict = ("every one passed its checks" if passed is True
               else "SOME FAILED their checks" if passed is False else "outcome not stated")
    largest = _number(verification.get("largest_numerical_uncertainty"))
    text = f"verification subset: {checked} trial(s) given the full check; {verdict}"
    if largest is not None:
        text += f"; largest numerical uncertainty {largest:.4g}"
    for key, value in verification.items():
        if key in ("trials_checked", "all_passed", "largest_numerical_uncertainty"):
            continue
        if isinstance(value, (bool, int, float, str)):
            text += f"; {key.replace('_', ' ')}: {_scalar_words(value)}"
    return text


def _scalar_words(value: Any) -> str:
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        return f"{value:.4g}"
    return str(value)


def uncertainty_view(record: Mapping[str, Any]) -> UncertaintyView | None:
    """The record's ``uncertainty`` block as rows, or None when it has none."""
    block = record.get("uncertainty")
    if not isinstance(block, Mapping):
        return None
    rows = []
    for key, entry in (block.get("quantities") or {}).items():
        if not isinstance(entry, Mapping):
            continue
        unit = str(entry.get("unit") or quantity_unit(record, key))
        name = _key_parts(key)[0]
        interval = list(entry.get("interval") or [None, None])
        bounds = bounds_of(requirements_on(record, key))
        mean = _number(entry.get("mean"))
        readable_interval = " to ".join(
            t for t in (readable_text(v, unit, name, also=[mean]) for v in interval) if t)
        histogram = entry.get("histogram")
        rows.append(UncertaintyRow(
            key=key, unit=unit, mean=mean,
            standard_uncertainty=_number(entry.get("standard_uncertainty")),
            interval=[_number(v) for v in interval], coverage=_number(entry.get("coverage")),
            readable_mean=readable_text(mean, unit, name),
            readable_interval=readable_interval,
            histogram=histogram if isinstance(histogram, Mapping) else None, bounds=bounds,
            expanded_uncertainty=_number(entry.get("expanded_uncertainty")),
            second_order_change=_number(entry.get("second_order_change")),
            curvature_significant=entry.get("curvature_significant") is True))
    probabilities = [
        ProbabilityRow(str(rid), _number(entry.get("probability_met")),
                       _number(entry.get("standard_error")),
                       _number(entry.get("zero_event_bound")),
                       margin=_number(entry.get("margin")),
                       expanded_uncertainty=_number(entry.get("expanded_uncertainty")),
                       decided=entry.get("decided") if isinstance(entry.get("decided"), str)
                       else None)
        for rid, entry in (block.get("requirements") or {}).items() if isinstance(entry, Mapping)]
    entries = [(str(quantity), str(name), entry)
               for quantity, fields in (block.get("sensitivity") or {}).items()
               if isinstance(fields, Mapping)
               for name, entry in fields.items() if isinstance(entry, Mapping)]
    propagation = str(block.get("propagation") or "monte_carlo")
    if propagation == "law_of_propagation":
        return UncertaintyView(
            _run_line(block), rows, probabilities, [], _verification_line(block),
            propagation=propagation,
            inputs=[InputRow(str(i.get("field")), str(i.get("distribution")),
                             _number(i.get("estimate")), _number(i.get("standard_uncertainty")),
                             str(i.get("unit") or "1"), str(i.get("basis") or ""))
                    for i in block.get("inputs") or [] if isinstance(i, Mapping)],
            coefficients=[CoefficientRow(q, f, _number(e.get("coefficient")),
                                         _number(e.get("contribution")),
                                         _number(e.get("elasticity"))) for q, f, e in entries],
            assumptions=[str(a) for a in block.get("assumptions") or []],
            warnings=[str(w) for w in block.get("warnings") or []])
    sensitivity = [
        SensitivityRow(q, f, _number(e.get("elasticity")), _number(e.get("first_index")),
                       _number(e.get("total_index"))) for q, f, e in entries]
    return UncertaintyView(_run_line(block), rows, probabilities, sensitivity,
                           _verification_line(block))


# --- design limit and sweep ----------------------------------------------------------------


@dataclass(frozen=True)
class LimitView:
    vary: str
    requirement: str
    value: float | None
    unit: str
    readable_value: str
    met_side: str
    bracket: list[float | None]
    verdict: str
    reason: str

    @property
    def sentence(self) -> str:
        """The limit in one sentence (plain text)."""
        if self.value is None:
            return (f"No design limit of {self.vary} for {self.requirement} in the range "
                    f"searched: {self.reason or 'no reason recorded'}")
        readable = f" = {self.readable_value}" if self.readable_value else ""
        side = {"below": "at or below", "above": "at or above"}.get(self.met_side, "on one side of")
        return (f"Design limit of {self.vary} for {self.requirement}: {self.value:.6g} {self.unit}"
                f"{readable}; the requirement is met {side} it")

    @property
    def verdict_words(self) -> str:
        return {"pass": "calculation verified at the limit (pass)",
                "fail": "the check at the limit FAILED: the limit is not verified"}.get(
                    self.verdict, "no check at the limit")


def limit_view(record: Mapping[str, Any]) -> LimitView | None:
    """The record's ``design_limit`` block, or None."""
    block = record.get("design_limit")
    if not isinstance(block, Mapping):
        return None
    unit = str(block.get("unit") or "1")
    value = _number(block.get("value"))
    bracket = [_number(v) for v in (block.get("bracket") or [])]
    return LimitView(vary=str(block.get("vary")), requirement=str(block.get("requirement")),
                     value=value, unit=unit,
                     readable_value=readable_text(value, unit),
                     met_side=str(block.get("met_side") or ""), bracket=bracket,
                     verdict=str(block.get("verdict") or ""),
                     reason=str(block.get("reason") or ""))


@dataclass(frozen=True)
class SweepView:
    vary: str
    unit: str
    values: list[float | None]
    readable_values: list[str]
    quantities: dict[str, list[float | None]]
    quantity_units: dict[str, str]
    requirements: dict[str, list[str]]
    verdicts: list[str]


def sweep_view(record: Mapping[str, Any]) -> SweepView | None:
    """The record's ``sweep`` block, or None."""
    block = record.get("sweep")
    if not isinstance(block, Mapping):
        return None
    unit = str(block.get("unit") or "1")
    values = [_number(v) for v in block.get("values") or []]
    quantities = {str(name): [_number(v) for v in column]
                  for name, column in (block.get("quantities") or {}).items()
                  if isinstance(column, list)}
    return SweepView(
        vary=str(block.get("vary")), unit=unit, values=values,
        readable_values=[readable_text(v, unit, also=values) for v in values],
        quantities=quantities,
        quantity_units={name: quantity_unit(record, name) for name in quantities},
        requirements={str(rid): [str(s) for s in column]
                      for rid, column in (block.get("requirements") or {}).items()
                      if isinstance(column, list)},
        verdicts=[str(v) for v in block.get("verdicts") or []])
