"""Runs: queue, read the record, the HTML report, sign-off."""

from __future__ import annotations

from flask import jsonify

from service import runs, signoffs
from service.api import api
from service.api.bodies import RunRequestSchema, SignoffRequestSchema, load_or_422
from service.api.context import services
from service.auth import current_identity
from service.jsonbody import json_object_body
from service.report import render_report


@api.post("/runs")
def create_run():
    body = load_or_422(RunRequestSchema(), json_object_body(), "run request")
    svc = services()
    accepted = runs.create_run(svc.store, actor=current_identity().name,
                               case_id=body.get("case_id"), document=body.get("case"))
    svc.dispatcher.send([accepted["run_id"]])  # after the commit in create_run
    response = jsonify(accepted)
    response.status_code = 202
    response.headers["Location"] = f"/v1/runs/{accepted['run_id']}"
    return response


@api.get("/runs/<run_id>")
def get_run(run_id: str):
    return jsonify(runs.get_record(services().store, run_id))


@api.get("/runs/<run_id>/report")
def get_run_report(run_id: str):
    record, document = runs.get_run_and_case(services().store, run_id)
    return render_report(record, document), 200, {"Content-Type": "text/html; charset=utf-8"}


@api.post("/runs/<run_id>/signoffs")
def create_signoff(run_id: str):
    body = load_or_422(SignoffRequestSchema(), json_object_body(), "sign-off")
    result = signoffs.sign_off(services().store, run_id, current_identity(),
                               decision=body["decision"], comment=body["comment"])
    response = jsonify(result)
    response.status_code = 201
    return response
