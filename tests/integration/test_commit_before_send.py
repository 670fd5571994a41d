"""A run's row is committed before its task message is published.

The app here dispatches to a Redis database that no worker consumes, so the message stays in
the queue where the test can read it. At the moment of publishing (Celery's
``before_task_publish`` signal, in the API's own process) a *separate* connection to PostgreSQL
looks for the run: it can only see it if the transaction that created it has committed.
"""

from __future__ import annotations

import uuid

from celery.signals import before_task_publish

from service.task_names import EXECUTE_RUN_TASK
from tests.api.support import bearer
from tests.integration.invented_cases import single_layer_case
from tests.integration.support import create_tokens


def test_run_row_is_visible_to_other_connections_when_its_message_is_published(
        idle_app, idle_broker, shared_pg_schema):
    from service.store import Store
    from service.store.models import Run

    observer = Store(shared_pg_schema.url)  # its own engine and connections
    seen_at_publish: list[tuple[str, str | None]] = []

    def look_up_run(sender=None, body=None, headers=None, **_kwargs):
        if sender != EXECUTE_RUN_TASK:
            return
        run_id = body[0][0]
        with observer.transaction() as session:
            run = session.get(Run, run_id)
            seen_at_publish.append((run_id, None if run is None else run.status))

    client = idle_app.test_client()
    tokens = create_tokens(idle_app.extensions["fluxproof"].store)
    before_task_publish.connect(look_up_run, weak=False)
    try:
        case = single_layer_case(52.0, 1.4e-10, tags=[f"it-{uuid.uuid4().hex[:8]}"])
        response = client.post("/v1/runs", json={"case": case},
                               headers=bearer(tokens["engineer"]))
    finally:
        before_task_publish.disconnect(look_up_run)
        observer.dispose()
    assert response.status_code == 202, response.get_json()
    run_id = response.get_json()["run_id"]

    assert seen_at_publish == [(run_id, "queued")]
    messages = idle_broker.queued_messages()
    assert [m["headers"]["task"] for m in messages] == [EXECUTE_RUN_TASK]
    assert messages[0]["decoded_body"][0] == [run_id]
    # Nothing consumed it: the run is still queued, and the record reads so over the API.
    record = client.get(f"/v1/runs/{run_id}", headers=bearer(tokens["engineer"])).get_json()
    assert record["status"] == "queued"


def test_a_failed_validation_publishes_nothing(idle_app, idle_broker):
    client = idle_app.test_client()
    tokens = create_tokens(idle_app.extensions["fluxproof"].store)
    case = single_layer_case(52.0, 1.4e-10, tags=["it-refused"])
    del case["layers"][0]["thickness"]
    response = client.post("/v1/runs", json={"case": case}, headers=bearer(tokens["engineer"]))
    assert response.status_code == 422
    assert idle_broker.queued_messages() == []
