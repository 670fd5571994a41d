"""The runs list, the run page (the report, with sign-off for reviewers) and its sign-off form."""

from __future__ import annotations

from typing import Any

from flask import flash, g, jsonify, redirect, render_template, request, url_for

from schemas.text import hidden_character_problem
from service import listing, signoffs
from service import runs as run_service
from service.api.bodies import COMMENT_MAX
from service.api.context import services
from service.api.pdf import pdf_response
from service.errors import Conflict, Forbidden, Unauthorized, ValidationFailed
from service.report.html import render_report, report_context
from service.report.pdf_record import render_record_pdf
from service.store.models import DECISIONS, MEANINGS, RUN_STATES
from service.ui.blueprint import ui


def _offset() -> int:
    return listing.page_offset(request.args.get("offset"))


def parse_filters(args: Any) -> tuple[listing.RunFilters, list[dict[str, str]]]:
    """The runs list's filters from its query string; unknown values are reported (field, what
    was expected)."""
    errors: list[dict[str, str]] = []

    def choice(name: str, allowed: tuple[str, ...]) -> str | None:
        value = (args.get(name) or "").strip()
        if not value:
            return None
        if value not in allowed:
            errors.append({"path": name, "message": f"expected one of {', '.join(allowed)}, "
                                                    f"got {value!r}"})
            return None
        return value

    def yes_no(name: str) -> bool | None:
        value = choice(name, ("yes", "no"))
        return None if value is None else value == "yes"

    tag = (args.get("tag") or "").strip() or None
    filters = listing.RunFilters(verdict=choice("verdict", listing.VERDICTS),
                                 design=choice("design", listing.DESIGN_STATUSES),
                                 status=choice("status", RUN_STATES), tag=tag,
                                 signed=yes_no("signed"), drifted=yes_no("drifted"))
    return filters, errors



@ui.get("/runs")
def runs():
    filters, errors = parse_filters(request.args)
    store = services().store
    offset = _offset()
    page = listing.list_runs(store, filters, offset=offset)
    return render_template("ui_runs.html", page=page, filters=filters, errors=errors,
                           tags=listing.all_tags(store), states=RUN_STATES,
                           verdicts=listing.VERDICTS, design_statuses=listing.DESIGN_STATUSES,
                           query=filters.as_query(),
                           page_size=listing.PAGE_SIZE), 422 if errors else 200


def _run_page(run_id: str, *, status: int = 200, form_errors: list[dict[str, str]] | None = None,
              comment: str = "", refusal: str | None = None, meaning: str = "",
              justification: str = ""):
    record, document = run_service.get_run_and_case(services().store, run_id)
    context = report_context(record, document)
    return render_template("ui_run.html", signoff=signoffs.signoff_permission(record, g.person),
                           decisions=DECISIONS, meanings=MEANINGS, meaning=meaning,
                           justification=justification, form_errors=form_errors or [],
                           comment=comment, refusal=refusal, comment_max=COMMENT_MAX,
                           **context), status


@ui.get("/runs/<run_id>")
def run(run_id: str):
    return _run_page(run_id)


@ui.get("/runs/<run_id>/report")
def run_report(run_id: str):
    record, document = run_service.get_run_and_case(services().store, run_id)
    return render_report(record, document)


@ui.get("/runs/<run_id>/record.pdf")
def run_record_pdf(run_id: str):
    record, document = run_service.get_run_and_case(services().store, run_id)
    return pdf_response(render_record_pdf(record, document), f"record-{run_id}.pdf")


@ui.get("/runs/<run_id>/record.json")
def run_record(run_id: str):
    response = jsonify(run_service.get_record(services().store, run_id))
    response.headers["Content-Disposition"] = f'attachment; filename="record-{run_id}.json"'
    return response


@ui.post("/runs/<run_id>/signoff")
def signoff(run_id: str):
    decision = request.form.get("decision", "")
    meaning = request.form.get("meaning", "")
    comment = request.form.get("comment", "").strip()
    justification = request.form.get("justification", "").strip()
    password = request.form.get("password", "")
    kept = {"comment": comment, "meaning": meaning, "justification": justification}
    errors = []
    if decision not in DECISIONS:
        errors.append({"path": "decision", "message": f"expected one of {', '.join(DECISIONS)}"})
    if meaning not in MEANINGS:
        errors.append({"path": "meaning", "message": "choose what your signature means: "
                                                     f"{', '.join(MEANINGS)}"})
    if not 1 <= len(comment) <= COMMENT_MAX:
        errors.append({"path": "comment", "message": "write the reasons for your decision "
                                                     f"(1 to {COMMENT_MAX} characters)"})
    for path, text in (("comment", comment), ("justification", justification)):
        problem = hidden_character_problem(text, multiline=True)
        if problem is not None:
            errors.append({"path": path, "message": problem})
    if not password:
        errors.append({"path": "password", "message": "give your password again to sign"})
    if errors:
        return _run_page(run_id, status=422, form_errors=errors, **kept)
    svc = services()
    try:
        signoffs.sign_off(svc.store, run_id, g.person, decision=decision, comment=comment,
                          meaning=meaning, password=password, key=svc.signing_key,
                          justification=justification or None)
    except Unauthorized as exc:  # not the signer's password
        return _run_page(run_id, status=401, refusal=exc.detail, **kept)
    except Forbidden as exc:  # four-eyes, or not a reviewer
        return _run_page(run_id, status=403, refusal=exc.detail, **kept)
    except Conflict as exc:  # signed already, not succeeded, approving a failed verification
        return _run_page(run_id, status=409, refusal=exc.detail, **kept)
    except ValidationFailed as exc:  # approving deviations without a justification
        return _run_page(run_id, status=422, form_errors=exc.errors, refusal=exc.detail, **kept)
    flash(f"Signed off: {decision} ({meaning}). The record is now sealed.", "ok")
    return redirect(url_for("ui.run", run_id=run_id), code=303)
