"""What the reports show of a record's measured-data blocks, in one place for the HTML, text and
PDF renderings: the ``calibration`` block (the fit), the ``validation`` block (ASME V&V 20-2009
comparison) and the ``credibility`` block (ASME V&V 40-2018 factors).

Each view is None when the record holds no such block; nothing here computes a figure the
record does not hold, except counts and the plain sentence that says them.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

from service.report.numbers import finite_number as _number
from service.report.numbers import plain_number, readable_time


def _pair(value: Any) -> tuple[float | None, float | None]:
    if isinstance(value, (list, tuple)) and len(value) == 2:
        return _number(value[0]), _number(value[1])
    return None, None


def _when(seconds: float | None) -> str:
    if seconds is None:
        return "—"
    return readable_time(seconds) or f"{plain_number(seconds)} s"


# --- calibration ------------------------------------------------------------------------------

@dataclass(frozen=True)
class ParameterRow:
    field: str
    estimate: float | None
    unit: str
    standard_error: float | None
    interval: tuple[float | None, float | None]
    interval_method: str
    scale: str
    bounds: tuple[float | None, float | None]
    start: float | None
    fitted_input: bool


@dataclass(frozen=True)
class ResidualRow:
    index: Any
    predicted: float | None
    measured: float | None
    standard_uncertainty: float | None
    normalised: float | None


@dataclass(frozen=True)
class CalibrationView:
    parameters: list[ParameterRow]
    method: str
    chi_square: float | None
    degrees_of_freedom: Any
    reduced_chi_square: float | None
    converged: bool | None
    evaluations: Any
    warnings: list[str]
    residuals: list[ResidualRow]
    sets: list[str]
    points: Any
    fitted_inputs: list[str]
    correlation: list[list[float | None]]
    short_time: Mapping[str, Any] | None
    trial_check: Mapping[str, Any] | None

    @property
    def fit_sentence(self) -> str:
        """Which of the record's inputs came from the fit, said plainly."""
        if not self.fitted_inputs:
            return "No input of this record was taken from the fit."
        return ("The record's figures were computed with these inputs taken from the fit: "
                + ", ".join(self.fitted_inputs) + ".")

    @property
    def summary(self) -> str:
        converged = {True: "converged", False: "DID NOT CONVERGE", None: "convergence not stated"}
        return (f"{self.method or 'fit'}: {len(self.parameters)} parameter(s) fitted to "
                f"{self.points if self.points is not None else '—'} points"
                + (f" of {', '.join(self.sets)}" if self.sets else "")
                + f"; {converged[self.converged]}"
                + (f" after {self.evaluations} model evaluations"
                   if self.evaluations is not None else ""))

    @property
    def chi_square_line(self) -> str:
        return (f"chi-square {plain_number(self.chi_square, 4)} on {self.degrees_of_freedom} "
                f"degrees of freedom; reduced chi-square "
                f"{plain_number(self.reduced_chi_square, 4)}")

    @property
    def short_time_line(self) -> str | None:
        short = self.short_time
        if not isinstance(short, Mapping):
            return None
        agrees = {True: "agrees with the fit within their uncertainties",
                  False: "DOES NOT agree with the fit within their uncertainties"}.get(
            short.get("agrees"), "agreement not stated")
        return (f"Second estimate from early data ({short.get('source') or 'short-time form'}): "
                f"{plain_number(short.get('estimate'))} ± "
                f"{plain_number(short.get('standard_error'), 2)} (SI) from "
                f"{short.get('points', '—')} points; {agrees}")


def calibration_view(record: Mapping[str, Any]) -> CalibrationView | None:
    block = record.get("calibration")
    if not isinstance(block, Mapping):
        return None
    fitted = [str(f) for f in block.get("fitted_inputs") or []]
    parameters = [
        ParameterRow(field=str(p.get("field", "")), estimate=_number(p.get("estimate")),
                     unit=str(p.get("unit") or ""),
                     standard_error=_number(p.get("standard_error")),
                     interval=_pair(p.get("interval")),
                     interval_method=str(p.get("interval_method") or ""),
                     scale=str(p.get("scale") or ""), bounds=_pair(p.get("bounds")),
                     start=_number(p.get("start")), fitted_input=str(p.get("field")) in fitted)
        for p in block.get("parameters") or [] if isinstance(p, Mapping)]
    residuals = [
        ResidualRow(index=r.get("index"), predicted=_number(r.get("predicted")),
                    measured=_number(r.get("measured")),
                    standard_uncertainty=_number(r.get("standard_uncertainty")),
                    normalised=_number(r.get("normalised")))
        for r in block.get("residuals") or [] if isinstance(r, Mapping)]
    correlation = [[_number(v) for v in row] for row in block.get("correlation") or []
                   if isinstance(row, list)]
    trial = next((c for c in record.get("checks") or []
                  if isinstance(c, Mapping) and c.get("name") == "calibration.trial_model"), None)
    converged = block.get("converged")
    return CalibrationView(
        parameters=parameters, method=str(block.get("method") or ""),
        chi_square=_number(block.get("chi_square")),
        degrees_of_freedom=block.get("degrees_of_freedom", "—"),
        reduced_chi_square=_number(block.get("reduced_chi_square")),
        converged=converged if isinstance(converged, bool) else None,
        evaluations=block.get("evaluations"),
        warnings=[str(w) for w in block.get("warnings") or []], residuals=residuals,
        sets=[str(s) for s in block.get("sets") or []], points=block.get("points"),
        fitted_inputs=fitted, correlation=correlation,
        short_time=block.get("short_time") if isinstance(block.get("short_time"), Mapping)
        else None,
        trial_check=trial)


# --- validation -------------------------------------------------------------------------------

@dataclass(frozen=True)
class PointRow:
    time: float | None
    readable_time: str
    simulated: float | None
    measured: float | None
    comparison_error: float | None
    u_num: float | None
    u_input: float | None
    u_d: float | None
    u_val: float | None
    interval: tuple[float | None, float | None]
    flagged: bool


@dataclass(frozen=True)
class ValidationSetView:
    id: str
    quantity: str
    unit: str
    points: list[PointRow]
    largest_ratio: float | None
    flagged: int
    agrees: bool
    u_input_assessed: bool
    coverage_factor: float
    #: The record's own series of the quantity at its requested times (times s, values), for
    #: drawing the simulation between the measured times; None where the record has none.
    curve: tuple[list[float], list[float]] | None = None

    @property
    def sentence(self) -> str:
        """The comparison said plainly: which points the data put beyond the validation
        uncertainty, or that none does."""
        k = plain_number(self.coverage_factor)
        ratio = plain_number(self.largest_ratio, 3)
        n = len(self.points)
        if self.flagged:
            when = ", ".join(p.readable_time for p in self.points if p.flagged)
            text = (f"{self.flagged} of {n} points disagree with the simulation beyond the "
                    f"validation uncertainty (|E| > {k}·u_val) at {when}: a model error is "
                    f"indicated there (largest |E|/u_val = {ratio}).")
        else:
            text = (f"All {n} points lie within ±{k}·u_val of the simulation: no model error "
                    f"beyond the validation uncertainty is indicated (largest |E|/u_val = "
                    f"{ratio}).")
        if not self.u_input_assessed:
            text += (" The input uncertainty was not assessed: u_val leaves it out, so it is "
                     "smaller than it should be.")
        return text


@dataclass(frozen=True)
class ValidationView:
    coverage_factor: float
    u_input_method: str
    u_num_method: str
    sets: list[ValidationSetView]
    agrees: bool | None

    @property
    def headline(self) -> str:
        flagged = sum(s.flagged for s in self.sets)
        points = sum(len(s.points) for s in self.sets)
        if flagged:
            return (f"The data disagree with the model beyond the validation uncertainty at "
                    f"{flagged} of {points} points.")
        return (f"All {points} measured points agree with the model within "
                f"±{plain_number(self.coverage_factor)}·u_val.")


def _curve(record: Mapping[str, Any], quantity: str) -> tuple[list[float], list[float]] | None:
    """(times, values) of a plain series of the record (one number per requested time)."""
    series = record.get("series")
    if not isinstance(series, Mapping):
        return None
    entry, times = series.get(quantity), series.get("time")
    if not isinstance(entry, Mapping) or not isinstance(times, Mapping):
        return None
    pairs = [(_number(t), _number(v)) for t, v in zip(times.get("values") or [],
                                                      entry.get("values") or [], strict=False)]
    kept = [(t, v) for t, v in pairs if t is not None and v is not None]
    if len(kept) < 2:
        return None
    return [t for t, _ in kept], [v for _, v in kept]


def validation_view(record: Mapping[str, Any]) -> ValidationView | None:
    block = record.get("validation")
    if not isinstance(block, Mapping):
        return None
    k = _number(block.get("coverage_factor")) or 2.0
    sets = []
    for entry in block.get("sets") or []:
        if not isinstance(entry, Mapping):
            continue
        points = []
        for p in entry.get("points") or []:
            if not isinstance(p, Mapping):
                continue
            time = _number(p.get("time"))
            points.append(PointRow(
                time=time, readable_time=_when(time), simulated=_number(p.get("simulated")),
                measured=_number(p.get("measured")),
                comparison_error=_number(p.get("comparison_error")),
                u_num=_number(p.get("u_num")), u_input=_number(p.get("u_input")),
                u_d=_number(p.get("u_D")), u_val=_number(p.get("u_val")),
                interval=_pair(p.get("interval")), flagged=bool(p.get("flagged"))))
        sets.append(ValidationSetView(
            curve=_curve(record, str(entry.get("quantity", ""))),
            id=str(entry.get("id", "")), quantity=str(entry.get("quantity", "")),
            unit=str(entry.get("unit") or ""), points=points,
            largest_ratio=_number(entry.get("largest_ratio")),
            flagged=sum(p.flagged for p in points), agrees=not any(p.flagged for p in points),
            u_input_assessed=bool(entry.get("u_input_assessed")), coverage_factor=k))
    agrees = block.get("agrees")
    return ValidationView(coverage_factor=k, u_input_method=str(block.get("u_input_method") or ""),
                          u_num_method=str(block.get("u_num_method") or ""), sets=sets,
                          agrees=agrees if isinstance(agrees, bool) else None)


# --- credibility ------------------------------------------------------------------------------

@dataclass(frozen=True)
class CredibilityRow:
    factor: str
    evidence: str
    status: str

    @property
    def css(self) -> str:
        return {"evidenced": "pass", "not supported": "fail"}.get(self.status, "")


@dataclass(frozen=True)
class CredibilityView:
    standard: str
    rows: list[CredibilityRow]
    scope: str


def credibility_view(record: Mapping[str, Any]) -> CredibilityView | None:
    block = record.get("credibility")
    if not isinstance(block, Mapping):
        return None
    rows = [CredibilityRow(factor=str(f.get("factor", "")), evidence=str(f.get("evidence", "")),
                           status=str(f.get("status", "")))
            for f in block.get("factors") or [] if isinstance(f, Mapping)]
    return CredibilityView(standard=str(block.get("standard") or "ASME V&V 40-2018"), rows=rows,
                           scope=str(block.get("scope") or ""))
