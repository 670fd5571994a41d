"""Cases: store, list, read, history."""

from __future__ import annotations

from typing import Any

from schemas.case import CaseSchema
from service import cases
from service.api import api
from service.api.bodies import (
    CaseCreatedSchema,
    CaseListQuerySchema,
    CasePageSchema,
    CaseRunsSchema,
    StoredCaseSchema,
)
from service.api.context import services
from service.api.declare import Reply, Returns, declare
from service.auth import ENGINEER, READERS, current_identity


@declare(api, "post", "/cases", summary="Store a case (content-addressed)", roles=ENGINEER,
         request=CaseSchema, request_loaded=False,
         responses={201: Returns("Stored", CaseCreatedSchema,
                                 headers={"Location": "URL of the case"}),
                    200: Returns("The same content was stored already", CaseCreatedSchema,
                                 headers={"Location": "URL of the case"})})
def create_case(body: dict[str, Any]):
    stored, created = cases.store_case(services().store, body, current_identity().login)
    return Reply(stored, 201 if created else 200,
                 {"Location": f"/v1/cases/{stored['case_id']}"})


@declare(api, "get", "/cases", summary="List stored cases, newest first", roles=READERS,
         query=CaseListQuerySchema, responses={200: Returns("A page of cases", CasePageSchema)})
def list_cases(query: dict[str, Any]):
    return cases.list_cases(services().store, limit=query["limit"], offset=query["offset"],
                            tag=query.get("tag"))


@declare(api, "get", "/cases/<case_id>", summary="Read one stored case", roles=READERS,
         responses={200: Returns("The case", StoredCaseSchema)})
def get_case(case_id: str):
    return cases.get_case(services().store, case_id)


@declare(api, "get", "/cases/<case_id>/runs", summary="Every run of one case, newest first",
         roles=READERS, responses={200: Returns("The case's runs", CaseRunsSchema)})
def list_case_runs(case_id: str):
    return cases.case_history(services().store, case_id)
