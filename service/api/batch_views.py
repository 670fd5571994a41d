"""Batches: start a re-verification, read its progress and drift."""

from __future__ import annotations

from typing import Any

from service import batches
from service.api import api
from service.api.bodies import BatchAcceptedSchema, BatchRequestSchema, BatchSchema
from service.api.context import services
from service.api.declare import Reply, Returns, declare
from service.auth import ADMIN, READERS, current_identity


@declare(api, "post", "/batches", summary="Re-verify stored cases (all, or those with a tag)",
         roles=ADMIN, request=BatchRequestSchema, request_name="batch request",
         responses={202: Returns("Started", BatchAcceptedSchema,
                                 headers={"Location": "URL to poll"})},
         problems={503: "The broker is unreachable (the runs stay queued)"})
def create_batch(body: dict[str, Any]):
    svc = services()
    started = batches.start_batch(svc.store, actor=current_identity().login,
                                  tag=body.get("tag"), all_cases=bool(body.get("all")))
    svc.dispatcher.send(started["run_ids"])  # after the commit in start_batch
    return Reply({"batch_id": started["batch_id"], "status": started["status"],
                  "runs": len(started["run_ids"])}, 202,
                 {"Location": f"/v1/batches/{started['batch_id']}"})


@declare(api, "get", "/batches/<batch_id>", summary="Progress and drift of a batch",
         roles=READERS, responses={200: Returns("The batch", BatchSchema)})
def get_batch(batch_id: str):
    return batches.get_batch(services().store, batch_id)
