"""The same task message delivered more than once leaves one record and one finished event."""

from __future__ import annotations

import uuid

from sqlalchemy import func, select

from service.task_names import EXECUTE_RUN_TASK
from tests.api.support import bearer
from tests.integration.invented_cases import single_layer_case, two_layer_case
from tests.integration.support import wait_finished
from tests.integration.worker_processes import wait_for_log


def _events(store, run_id: str) -> dict[str, int]:
    from service.store.models import AuditEvent

    with store.transaction() as session:
        rows = session.execute(
            select(AuditEvent.kind, func.count()).where(AuditEvent.subject == run_id)
            .group_by(AuditEvent.kind)).all()
    return dict(rows)


def _publish(app, run_id: str, task_id: str) -> None:
    celery = app.extensions["fluxproof"].dispatcher.celery
    celery.send_task(EXECUTE_RUN_TASK, args=[run_id], task_id=task_id)


def test_a_finished_run_delivered_again_is_left_as_it_was(live_app, live_client, live_store,
                                                          live_tokens, live_workers):
    case = single_layer_case(41.0, 0.9e-10, tags=[f"it-{uuid.uuid4().hex[:8]}"])
    run_id = live_client.post("/v1/runs", json={"case": case},
                              headers=bearer(live_tokens["engineer"])).get_json()["run_id"]
    first = wait_finished(live_client, live_tokens["engineer"], run_id)
    assert first["status"] == "succeeded"

    # Two more copies of the message, as the broker sends after a lost acknowledgement.
    task_ids = [f"redeliver-{uuid.uuid4()}" for _ in range(2)]
    for task_id in task_ids:
        _publish(live_app, run_id, task_id)
    for task_id in task_ids:
        wait_for_log(live_workers, rf"\[{task_id}\] succeeded in [0-9.e-]+s: 'succeeded'")

    again = live_client.get(f"/v1/runs/{run_id}",
                            headers=bearer(live_tokens["engineer"])).get_json()
    assert again == first  # the stored record did not change at all
    assert _events(live_store, run_id) == {"run.queued": 1, "run.started": 1, "run.finished": 1}


def test_two_copies_delivered_at_once_store_one_record(live_app, live_client, live_store,
                                                       live_tokens, live_workers):
    """Both copies are queued before either runs, so the two worker processes may take them at
    the same time; the run still ends with one record and one finished event."""
    from service.runs import create_run
    from service.store.models import Run

    case = two_layer_case(44.0, 1.1e-10, tags=[f"it-{uuid.uuid4().hex[:8]}"])
    run_id = create_run(live_store, actor="ivo.integration-engineer", document=case)["run_id"]
    task_ids = [f"twice-{uuid.uuid4()}" for _ in range(2)]
    for task_id in task_ids:
        _publish(live_app, run_id, task_id)
    for task_id in task_ids:
        wait_for_log(live_workers, rf"\[{task_id}\] succeeded in [0-9.e-]+s: 'succeeded'")

    record = wait_finished(live_client, live_tokens["engineer"], run_id)
    assert record["status"] == "succeeded"
    events = _events(live_store, run_id)
    assert events["run.queued"] == 1
    assert events["run.finished"] == 1
    # A second start is allowed (the copies may overlap) but never more than the deliveries.
    assert 1 <= events["run.started"] <= 2
    with live_store.transaction() as session:
        assert session.get(Run, run_id).attempts == events["run.started"]
