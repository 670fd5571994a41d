"""Cases: store, list, read, history."""

from __future__ import annotations

from flask import jsonify

from service import cases
from service.api import api
from service.api.bodies import CaseListQuerySchema
from service.api.context import query_args, services
from service.auth import current_identity
from service.jsonbody import json_object_body


@api.post("/cases")
def create_case():
    stored, created = cases.store_case(services().store, json_object_body(),
                                       current_identity().name)
    response = jsonify(stored)
    response.status_code = 201 if created else 200
    response.headers["Location"] = f"/v1/cases/{stored['case_id']}"
    return response


@api.get("/cases")
def list_cases():
    args = query_args(CaseListQuerySchema())
    return jsonify(cases.list_cases(services().store, limit=args["limit"],
                                    offset=args["offset"], tag=args.get("tag")))


@api.get("/cases/<case_id>")
def get_case(case_id: str):
    return jsonify(cases.get_case(services().store, case_id))


@api.get("/cases/<case_id>/runs")
def list_case_runs(case_id: str):
    return jsonify(cases.case_history(services().store, case_id))
