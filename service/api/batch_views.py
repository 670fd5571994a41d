"""Batches: start a re-verification, read its progress and drift."""

from __future__ import annotations

from flask import jsonify

from service import batches
from service.api import api
from service.api.bodies import BatchRequestSchema, load_or_422
from service.api.context import services
from service.auth import current_identity


@api.post("/batches")
def create_batch():
    from service.jsonbody import json_object_body

    body = load_or_422(BatchRequestSchema(), json_object_body(), "batch request")
    svc = services()
    started = batches.start_batch(svc.store, actor=current_identity().name,
                                  tag=body.get("tag"), all_cases=bool(body.get("all")))
    svc.dispatcher.send(started["run_ids"])  # after the commit in start_batch
    response = jsonify({"batch_id": started["batch_id"], "status": started["status"],
                        "runs": len(started["run_ids"])})
    response.status_code = 202
    response.headers["Location"] = f"/v1/batches/{started['batch_id']}"
    return response


@api.get("/batches/<batch_id>")
def get_batch(batch_id: str):
    return jsonify(batches.get_batch(services().store, batch_id))
