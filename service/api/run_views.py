"""Runs: queue, read the record, the HTML report, the archival PDF, sign-off."""

from __future__ import annotations

from typing import Any

from service import runs, signoffs
from service.api import api
from service.api.bodies import (
    RecordSchema,
    RunAcceptedSchema,
    RunRequestSchema,
    SignoffCreatedSchema,
    SignoffRequestSchema,
)
from service.api.context import services
from service.api.declare import Raw, Reply, Returns, declare
from service.api.pdf import pdf_response
from service.auth import ENGINEER, READERS, current_identity
from service.report.html import render_report
from service.report.pdf_record import render_record_pdf
from service.signoffs import SIGNOFF_ROLES


@declare(api, "post", "/runs", summary="Queue a check of a stored or a new case",
         roles=ENGINEER, request=RunRequestSchema, request_name="run request",
         responses={202: Returns("Queued; poll the Location", RunAcceptedSchema,
                                 headers={"Location": "URL to poll"})},
         problems={503: "The broker is unreachable (the runs stay queued)"})
def create_run(body: dict[str, Any]):
    svc = services()
    accepted = runs.create_run(svc.store, actor=current_identity().login,
                               case_id=body.get("case_id"), document=body.get("case"))
    svc.dispatcher.send([accepted["run_id"]])  # after the commit in create_run
    return Reply(accepted, 202, {"Location": f"/v1/runs/{accepted['run_id']}"})


@declare(api, "get", "/runs/<run_id>", summary="The check record of one run", roles=READERS,
         responses={200: Returns("The record: result document and run fields", RecordSchema)})
def get_run(run_id: str):
    return runs.get_record(services().store, run_id)


@declare(api, "get", "/runs/<run_id>/report", summary="The check record as an HTML report",
         roles=READERS,
         responses={200: Returns("HTML report", Raw("text/html", {"type": "string"}))})
def get_run_report(run_id: str):
    record, document = runs.get_run_and_case(services().store, run_id)
    return render_report(record, document)


@declare(api, "get", "/runs/<run_id>/report.pdf",
         summary="The archival record as a PDF: every page headed with the run id, the case's "
                 "SHA-256 and page x of y", roles=READERS,
         responses={200: Returns("PDF record", Raw("application/pdf",
                                                   {"type": "string", "format": "binary"}))})
def get_run_report_pdf(run_id: str):
    record, document = runs.get_run_and_case(services().store, run_id)
    return pdf_response(render_record_pdf(record, document), f"record-{run_id}.pdf")


@declare(api, "post", "/runs/<run_id>/signoffs",
         summary="Sign a succeeded run off with an electronic signature (four-eyes: never its "
                 "submitter or its case's author; the signer's password again)",
         roles=SIGNOFF_ROLES, request=SignoffRequestSchema, request_name="sign-off",
         responses={201: Returns("Recorded and signed; the record is now sealed",
                                 SignoffCreatedSchema)},
         problems={401: "The password is not the signer's",
                   403: "The token's role may not do this, or four-eyes: the reviewer "
                        "submitted the run or wrote its case",
                   409: "The run is not succeeded, is already signed off, or its "
                        "verification failed and the decision is approved",
                   422: "Approving a record with deviations needs a justification"})
def create_signoff(run_id: str, body: dict[str, Any]):
    svc = services()
    return Reply(signoffs.sign_off(svc.store, run_id, current_identity(),
                                   decision=body["decision"], comment=body["comment"],
                                   meaning=body["meaning"], password=body["password"],
                                   justification=body.get("justification"),
                                   key=svc.signing_key), 201)
