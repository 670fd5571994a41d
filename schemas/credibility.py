"""The credibility summary of a finished check record, factor by factor of ASME V&V 40-2018.

ASME V&V 40-2018, *Assessing Credibility of Computational Modeling through Verification and
Validation: Application to Medical Devices*, §5 lists the credibility factors. This module
states, for each factor a single calculation can evidence, what this record holds:

- verification, code: *software quality assurance* (the record's provenance; the installation
  qualification is run apart), *numerical code verification* (the record's cross-checks against
  closed forms and independent routes; the qualification and manufactured-solution suites are
  run apart and named);
- verification, calculation: *discretization error* (the grid studies' GCI and observed order),
  *numerical solver error* (a solver-tolerance or time-step study), *use error* (the case read
  twice by independent code; the second person's review is the run's sign-off);
- validation: *model inputs* (the ``uncertainty`` and ``calibration`` blocks) and *output
  comparison* (the ``validation`` block, ASME V&V 20-2009).

Each factor gets one of three statuses: ``evidenced`` (the record holds evidence and every part
of it passed), ``not supported`` (the record holds the evidence but a part of it failed: a check
over its limit, a fit that did not converge, data beyond the validation uncertainty) and ``not
assessed`` (the record holds none). The model form, the comparator (test samples and
conditions) and the applicability of the validation to the context of use are judged by the
reviewer against the context of use; no calculation evidences them, and the block says so.

The figures come from the record alone (checks, blocks, provenance), never recomputed here.
"""

from __future__ import annotations

import math
import re
from collections.abc import Callable, Mapping, Sequence
from typing import Any

from marshmallow import RAISE, Schema, fields, validate

STANDARD = "ASME V&V 40-2018"
EVIDENCED, NOT_SUPPORTED, NOT_ASSESSED = "evidenced", "not supported", "not assessed"
STATUSES = (EVIDENCED, NOT_SUPPORTED, NOT_ASSESSED)

#: The factors in the order V&V 40-2018 lists them.
FACTORS = ("software quality assurance", "numerical code verification", "discretization error",
           "numerical solver error", "use error", "model inputs", "output comparison")

#: What no calculation record can evidence.
SCOPE = ("Model form, the comparator (test samples, test conditions) and the applicability of "
         "the validation to the context of use are not evidenced by a calculation: the reviewer "
         "judges them against the context of use.")

#: Where the code verification run apart from any one case lives.
QUALIFICATION_WORDS = (
    "apart from this record, `fluxproof qualify` runs the operational qualification's cases "
    "against published closed forms on the installation (service/qualification/cases), and the "
    "project's test suite checks the finite-volume solver's observed order by manufactured "
    "solutions (tests/reference/test_fv_manufactured.py: order within 1.8 to 2.2)")

SIGNOFF_WORDS = ("the second person's review is the run's sign-off, recorded and signed with "
                 "the record, not inside it")

__all__ = ["FACTORS", "STANDARD", "STATUSES", "CredibilitySchema", "credibility_block"]

Factor = tuple[str, str]  # (evidence, status)


def _g(value: Any, digits: int = 3) -> str:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return "—"
    return f"{value:.{digits}g}"


def _checks(record: Mapping[str, Any], match: Callable[[str], bool]) -> list[Mapping[str, Any]]:
    return [c for c in record.get("checks") or []
            if isinstance(c, Mapping) and match(str(c.get("name", "")))]


def _failed(checks: Sequence[Mapping[str, Any]]) -> list[str]:
    return [str(c.get("name")) for c in checks if not c.get("passed")]


def _worst_share(checks: Sequence[Mapping[str, Any]]) -> tuple[float, str] | None:
    """The largest value/limit over checks that carry both, with that check's name."""
    shares = []
    for c in checks:
        value, limit = c.get("value"), c.get("limit")
        if isinstance(value, (int, float)) and isinstance(limit, (int, float)) and limit > 0 \
                and math.isfinite(value):
            shares.append((float(value) / float(limit), str(c.get("name"))))
    return max(shares) if shares else None


def _failed_words(names: Sequence[str], total: int) -> str:
    return f"{len(names)} of {total} failed ({', '.join(names)})"


def software_quality_assurance(record: Mapping[str, Any]) -> Factor:
    """The code and libraries that produced the record (its provenance)."""
    provenance = record.get("provenance") or {}
    version = provenance.get("engine_version")
    qualify = ("installation qualification (`fluxproof qualify`: Python and library versions "
               "against the release's requirements, the SHA-256 of every installed file "
               "against the release manifest) is run apart; its report (qualification.json, "
               ".html, .pdf in its --out directory) is the evidence for this installation")
    if not version:
        return f"The record names no engine version; {qualify}.", NOT_ASSESSED
    libraries = ", ".join(f"{name} {provenance[name]}" for name in
                          ("python", "numpy", "scipy", "pint", "marshmallow")
                          if provenance.get(name))
    where = f" on {provenance['platform']}" if provenance.get("platform") else ""
    case = record.get("case_sha256")
    case_words = f"; case SHA-256 {case}" if case else ""
    return (f"fluxproof engine {version} with {libraries or 'no libraries named'}{where}"
            f"{case_words}; {qualify}.", EVIDENCED)


#: Checks that compare the case's figures with another route: the cross-checks, the long-time
#: state against the steady engine, and a compartment's exact equilibrium.
CODE_CHECKS = ("steady_limit", "compartment.equilibrium")


def _is_code_check(name: str) -> bool:
    return name.startswith("cross_check.") or name in CODE_CHECKS


def numerical_code_verification(record: Mapping[str, Any]) -> Factor:
    """The record's comparisons of its figures with closed forms, exact limits and independent
    routes (:data:`CODE_CHECKS`)."""
    checks = _checks(record, _is_code_check)
    if not checks:
        return (f"No comparison with a closed form, an exact limit or an independent route in "
                f"this record; "
                f"{QUALIFICATION_WORDS}.", NOT_ASSESSED)
    failed = _failed(checks)
    routes = [m for m in record.get("methods") or [] if isinstance(m, Mapping)]
    if failed:
        return (f"Comparisons with closed forms, exact limits and independent routes: "
                f"{_failed_words(failed, len(checks))}; {QUALIFICATION_WORDS}.", NOT_SUPPORTED)
    worst = _worst_share(checks)
    worst_words = (f", the closest at {_g(worst[0], 2)} of its limit ({worst[1]})"
                   if worst else "")
    return (f"{len(checks)} comparisons of this case's figures with closed forms, exact limits "
            f"and independent routes ({len(routes)} methods) passed{worst_words}; "
            f"{QUALIFICATION_WORDS}.", EVIDENCED)


_ORDER = re.compile(r"observed order (not formed|[-+]?\d[\d.eE+-]*)")


def discretization_error(record: Mapping[str, Any]) -> Factor:
    """The grid studies: GCI (Celik et al. 2008) and observed order of each (a lumen case has
    one per direction, ``convergence.space_r`` and ``convergence.space_z``)."""
    checks = _checks(record, lambda n: n == "convergence.space"
                     or n.startswith(("convergence.space_", "gci.")))
    if not checks:
        return "No grid-convergence study in this record.", NOT_ASSESSED
    names = ", ".join(str(c.get("name")) for c in checks)
    failed = _failed(checks)
    if failed:
        return (f"Grid-convergence studies ({names}): {_failed_words(failed, len(checks))}.",
                NOT_SUPPORTED)
    values = [float(c["value"]) for c in checks if isinstance(c.get("value"), (int, float))]
    limits = {float(c["limit"]) for c in checks if isinstance(c.get("limit"), (int, float))}
    orders = list(dict.fromkeys(m.group(1) for c in checks
                                for m in [_ORDER.search(str(c.get("detail", "")))] if m))
    order_words = (f"; observed order {', '.join(orders)}" if orders
                   else "; no observed order recorded")
    limit_words = f" (limit {', '.join(_g(v, 2) for v in sorted(limits))})" if limits else ""
    return (f"{len(checks)} grid studies ({names}): GCI_fine at most "
            f"{_g(max(values) if values else None, 2)} of the scale{limit_words}"
            f"{order_words}.", EVIDENCED)


_TIGHTENED = re.compile(r"tolerance is tightened from (\S+) to (\S+?)\s")
_TIME_ORDER = re.compile(r"observed order in time ([-+]?\d[\d.eE+-]*|nan)")


def numerical_solver_error(record: Mapping[str, Any]) -> Factor:
    """A solver-tolerance or time-step study (``convergence.time``)."""
    checks = _checks(record, lambda n: n == "convergence.time")
    if not checks:
        residuals = _checks(record, lambda n: n.endswith("_residual"))
        shown = "; ".join(f"{c.get('name')} {_g(c.get('value'), 2)}" for c in residuals)
        also = (f" (the solution's residuals of its face and interface conditions are among "
                f"the checks: {shown})" if residuals else "")
        return f"No solver-tolerance study in this record{also}.", NOT_ASSESSED
    check = checks[0]
    detail = str(check.get("detail", ""))
    if not check.get("passed"):
        return (f"Solver study failed (convergence.time): {detail}.", NOT_SUPPORTED)
    tightened = _TIGHTENED.search(detail)
    order = _TIME_ORDER.search(detail)
    if tightened:
        how = (f"when the integrator's relative tolerance is tightened from {tightened.group(1)} "
               f"to {tightened.group(2)}")
    elif "halved" in detail:
        how = "when every implicit time step is halved" + (
            f" (observed order in time {order.group(1)})" if order else "")
    else:
        how = f"in the solver study ({detail})"
    return (f"The amounts change by at most {_g(check.get('value'), 2)} of their scale {how} "
            f"(limit {_g(check.get('limit'), 2)}; convergence.time).", EVIDENCED)


_COUNT = re.compile(r"^(\d+) ")


def use_error(record: Mapping[str, Any]) -> Factor:
    """The case read twice by independent code (``inputs.*`` checks)."""
    checks = _checks(record, lambda n: n.startswith("inputs."))
    if not checks:
        return (f"No independent second reading of the inputs in this record; "
                f"{SIGNOFF_WORDS}.", NOT_ASSESSED)
    failed = _failed(checks)
    if failed:
        return (f"The independent second reading of the inputs: "
                f"{_failed_words(failed, len(checks))}; {SIGNOFF_WORDS}.", NOT_SUPPORTED)
    parts = []
    for c in checks:
        count = _COUNT.match(str(c.get("detail", "")))
        name = c.get("name")
        if name == "inputs.interpretation":
            what = f"{count.group(1)} fields" if count else "the fields"
            parts.append(f"{what} of the case as two independent readers read it agree within "
                         f"{_g(c.get('limit'), 2)} (inputs.interpretation)")
        elif name == "inputs.units":
            what = f"{count.group(1)} dimensional values" if count else "the dimensional values"
            parts.append(f"{what} converted by pint and by the unit table agree within "
                         f"{_g(c.get('limit'), 2)} (inputs.units)")
        else:
            parts.append(f"{name} passed")
    return f"{'; '.join(parts)}; {SIGNOFF_WORDS}.", EVIDENCED


def _calibration_words(calibration: Mapping[str, Any]) -> str:
    parameters = [p for p in calibration.get("parameters") or [] if isinstance(p, Mapping)]
    fitted = "; ".join(
        f"{p.get('field')} = {_g(p.get('estimate'))} ± {_g(p.get('standard_error'), 2)} "
        f"{p.get('unit') or ''}".rstrip()
        + (f" (interval [{_g(p['interval'][0])}, {_g(p['interval'][1])}])"
           if isinstance(p.get("interval"), list) and len(p["interval"]) == 2 else "")
        for p in parameters)
    sets = calibration.get("sets") or []
    warnings = calibration.get("warnings") or []
    return (f"{len(parameters)} input(s) calibrated to {calibration.get('points', '—')} measured "
            f"points{' (' + ', '.join(map(str, sets)) + ')' if sets else ''}: {fitted}; reduced "
            f"chi-square {_g(calibration.get('reduced_chi_square'))} on "
            f"{calibration.get('degrees_of_freedom', '—')} degrees of freedom"
            + (f"; {len(warnings)} warning(s)" if warnings else ""))


def model_inputs(record: Mapping[str, Any]) -> Factor:
    """Input uncertainty (the ``uncertainty`` block) and calibration (``calibration``)."""
    uncertainty = record.get("uncertainty")
    calibration = record.get("calibration")
    parts, problems = [], []
    if isinstance(uncertainty, Mapping):
        inputs = [i.get("field") for i in uncertainty.get("inputs") or []
                  if isinstance(i, Mapping)]
        converged = uncertainty.get("converged")
        sensitivity = uncertainty.get("sensitivity")
        named = f"the uncertainty of {len(inputs)} input(s) ({', '.join(map(str, inputs))})"
        if uncertainty.get("propagation") == "law_of_propagation":
            warned = uncertainty.get("warnings") or []
            parts.append(f"{named} propagated by the law of propagation (JCGM 100:2008, first "
                         f"order, normal output assumed) over "
                         f"{uncertainty.get('evaluations', '—')} evaluations, with sensitivity "
                         "coefficients" + (f"; {len(warned)} warning(s)" if warned else ""))
            curved = [str(name) for name, q in (uncertainty.get("quantities") or {}).items()
                      if isinstance(q, Mapping) and q.get("curvature_significant")]
            if curved:
                problems.append("the second-order term is not negligible for "
                                f"{', '.join(curved)}: the first-order result is in doubt")
        else:
            parts.append(f"{named} propagated by Monte Carlo over "
                         f"{uncertainty.get('trials', '—')} trials"
                         + ("" if converged else ", not converged")
                         + (", with sensitivity indices" if sensitivity else ""))
            if converged is False:
                problems.append("the Monte Carlo run did not converge")
    if isinstance(calibration, Mapping):
        parts.append(_calibration_words(calibration))
        if calibration.get("converged") is False:
            problems.append("the fit did not converge")
    if not parts:
        return ("No input uncertainty and no calibration in this record: the inputs are taken "
                "as given.", NOT_ASSESSED)
    failed = _failed(_checks(record, lambda n: n.startswith(("uncertainty.", "calibration."))))
    if failed:
        problems.append(f"failed checks: {', '.join(failed)}")
    sentence = "; ".join(parts)
    sentence = sentence[0].upper() + sentence[1:]
    if problems:
        return f"{sentence}; {'; '.join(problems)}.", NOT_SUPPORTED
    return f"{sentence}.", EVIDENCED


def output_comparison(record: Mapping[str, Any]) -> Factor:
    """The ``validation`` block: measured data against the simulation (ASME V&V 20-2009)."""
    validation = record.get("validation")
    if not isinstance(validation, Mapping):
        validation = {}
    sets = [s for s in validation.get("sets") or [] if isinstance(s, Mapping)]
    points = sum(len(s.get("points") or []) for s in sets)
    if not points:
        return "No measured data compared with the simulation in this record.", NOT_ASSESSED
    k = validation.get("coverage_factor")
    flagged = sum(int(s.get("flagged") or 0) for s in sets)
    ratios = [float(s["largest_ratio"]) for s in sets
              if isinstance(s.get("largest_ratio"), (int, float))]
    without_input = [str(s.get("id")) for s in sets if not s.get("u_input_assessed")]
    sentence = (f"{points} measured points in {len(sets)} validation set(s) "
                f"({', '.join(str(s.get('id')) for s in sets)}) compared by ASME V&V 20-2009: "
                f"{flagged} outside E ± {_g(k)}·u_val, largest |E|/u_val "
                f"{_g(max(ratios) if ratios else None)}")
    if without_input:
        sentence += (f"; input uncertainty not assessed for {', '.join(without_input)} (u_val "
                     f"without it)")
    if flagged or validation.get("agrees") is False:
        return (f"{sentence}: the data disagree with the model beyond the validation "
                f"uncertainty.", NOT_SUPPORTED)
    return f"{sentence}.", EVIDENCED


_MAKERS: dict[str, Callable[[Mapping[str, Any]], Factor]] = {
    "software quality assurance": software_quality_assurance,
    "numerical code verification": numerical_code_verification,
    "discretization error": discretization_error,
    "numerical solver error": numerical_solver_error,
    "use error": use_error,
    "model inputs": model_inputs,
    "output comparison": output_comparison,
}


def credibility_block(record: Mapping[str, Any]) -> dict:
    """The record's ``credibility`` block, built from the finished record (every other block
    and check in place): ``{"standard": "ASME V&V 40-2018", "factors": [{"factor",
    "evidence", "status"}], "scope"}``, the factors in :data:`FACTORS` order."""
    factors = []
    for name in FACTORS:
        evidence, status = _MAKERS[name](record)
        factors.append({"factor": name, "evidence": evidence, "status": status})
    return {"standard": STANDARD, "factors": factors, "scope": SCOPE}


class CredibilityFactorSchema(Schema):
    """One V&V 40 credibility factor: the evidence this record holds for it and its status."""

    class Meta:
        unknown = RAISE

    factor = fields.String(required=True, validate=validate.OneOf(FACTORS))
    evidence = fields.String(required=True)
    status = fields.String(required=True, validate=validate.OneOf(STATUSES))


class CredibilitySchema(Schema):
    """The credibility summary (ASME V&V 40-2018 factors a calculation can evidence)."""

    class Meta:
        unknown = RAISE

    standard = fields.String(required=True, validate=validate.Equal(STANDARD))
    factors = fields.List(fields.Nested(CredibilityFactorSchema), required=True)
    scope = fields.String(required=True)
