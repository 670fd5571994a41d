"""execute_run and the Celery task function: idempotency, attempts, failure reasons."""

from __future__ import annotations

import pytest
from sqlalchemy import func, select

from service.runs import create_run, execute_run
from service.store.models import AuditEvent, Run
from tests.api.support import make_case


@pytest.fixture
def store(data_dir):  # noqa: F811
    from service.store import default_store

    return default_store()


def _events(store, run_id, kind):
    with store.transaction() as session:
        return session.execute(select(func.count()).select_from(AuditEvent).where(
            AuditEvent.subject == run_id, AuditEvent.kind == kind)).scalar_one()


def _run(store, run_id):
    with store.transaction() as session:
        run = session.get(Run, run_id)
        return run.status, run.record, run.finished_at, run.attempts, run.error


def test_second_delivery_of_a_finished_run_changes_nothing(store, controlled_engine):  # noqa: F811
    run_id = create_run(store, actor="eng", document=make_case())["run_id"]
    assert execute_run(run_id, store) == "succeeded"
    first = _run(store, run_id)
    assert execute_run(run_id, store) == "succeeded"
    assert _run(store, run_id) == first
    assert controlled_engine.calls == 1
    assert _events(store, run_id, "run.finished") == 1
    assert _events(store, run_id, "run.started") == 1
    assert first[1]["run_id"] == run_id and first[3] == 1


def test_a_run_lost_mid_solve_is_taken_up_again(store, controlled_engine):  # noqa: F811
    run_id = create_run(store, actor="eng", document=make_case())["run_id"]
    with store.transaction() as session:  # as if a worker died after marking it running
        run = session.get(Run, run_id)
        run.status, run.attempts = "running", 1
    assert execute_run(run_id, store) == "succeeded"
    assert _run(store, run_id)[3] == 2


def test_a_run_that_never_finishes_is_ended_after_max_attempts(store, controlled_engine):  # noqa: F811
    run_id = create_run(store, actor="eng", document=make_case())["run_id"]
    with store.transaction() as session:
        run = session.get(Run, run_id)
        run.status, run.attempts = "running", 3
    assert execute_run(run_id, store, max_attempts=3) == "failed"
    status, record, _, attempts, error = _run(store, run_id)
    assert (status, record, attempts) == ("failed", None, 3)
    assert "gave up after 3 deliveries" in error
    assert controlled_engine.calls == 0


def test_soft_time_limit_ends_the_run_failed_with_the_reason(store, monkeypatch):
    from celery.exceptions import SoftTimeLimitExceeded

    import worker.engine

    def too_slow(case):
        raise SoftTimeLimitExceeded()

    monkeypatch.setattr(worker.engine, "check_case", too_slow)
    run_id = create_run(store, actor="eng", document=make_case())["run_id"]
    assert execute_run(run_id, store) == "failed"
    assert "soft time limit" in _run(store, run_id)[4]


def test_an_invalid_stored_case_fails_with_the_validation_errors(store, controlled_engine):  # noqa: F811
    from service.store.models import Case

    run_id = create_run(store, actor="eng", document=make_case())["run_id"]
    with store.transaction() as session:  # a case stored under an older, looser schema
        case = session.get(Case, session.get(Run, run_id).case_id)
        case.document = {**case.document, "geometry": "torus"}
    assert execute_run(run_id, store) == "failed"
    error = _run(store, run_id)[4]
    assert error.startswith("the stored case no longer passes validation") and "geometry" in error
    assert controlled_engine.calls == 0


def test_engine_reported_failure_is_stored_failed(store, controlled_engine):  # noqa: F811
    controlled_engine.status = "failed"
    run_id = create_run(store, actor="eng", document=make_case())["run_id"]
    assert execute_run(run_id, store) == "failed"
    status, record, _, _, error = _run(store, run_id)
    assert record["status"] == "failed" and error == "controlled failure"


def test_missing_run_is_reported_not_raised(store):
    assert execute_run("no-such-run", store) == "missing"


def test_transient_store_errors_propagate_for_retry(store, monkeypatch, controlled_engine):  # noqa: F811
    """The task retries OperationalError, so execute_run must not swallow it."""
    import sqlalchemy.exc

    run_id = create_run(store, actor="eng", document=make_case())["run_id"]

    def locked(*_args, **_kwargs):
        raise sqlalchemy.exc.OperationalError("UPDATE", {}, Exception("database is locked"))

    monkeypatch.setattr(store.runs, "claim", locked)  # the first store access of a run
    with pytest.raises(sqlalchemy.exc.OperationalError):
        execute_run(run_id, store)


def test_celery_task_called_as_a_function_executes_the_run(store, controlled_engine):  # noqa: F811
    import worker.tasks

    run_id = create_run(store, actor="eng", document=make_case())["run_id"]
    assert worker.tasks.execute_run(run_id) == "succeeded"
    assert worker.tasks.execute_run(run_id) == "succeeded"
    assert controlled_engine.calls == 1
    assert _events(store, run_id, "run.finished") == 1


def test_task_options_are_the_crash_safe_ones():
    import sqlalchemy.exc

    import worker.tasks

    task = worker.tasks.execute_run
    assert task.acks_late and task.reject_on_worker_lost and task.ignore_result
    assert task.max_retries == 5 and task.retry_backoff and task.retry_jitter
    assert sqlalchemy.exc.OperationalError in task.autoretry_for
    assert ValueError not in task.autoretry_for
    assert 0 < task.soft_time_limit < task.time_limit


def test_nightly_task_starts_a_batch_of_every_case(store, monkeypatch, controlled_engine):  # noqa: F811
    import service.dispatch
    import worker.tasks
    from service.batches import get_batch

    sent = []
    monkeypatch.setattr(service.dispatch.CeleryDispatcher, "__init__", lambda self, s: None)
    monkeypatch.setattr(service.dispatch.CeleryDispatcher, "send",
                        lambda self, ids: sent.extend(ids))
    closed = []
    monkeypatch.setattr(service.dispatch.CeleryDispatcher, "shutdown",
                        lambda self: closed.append(True))
    create_run(store, actor="eng", document=make_case())
    create_run(store, actor="eng", document=make_case(title="second"))
    batch_id = worker.tasks.reverify_all()
    batch = get_batch(store, batch_id)
    assert batch["selector"] == {"all": True} and batch["created_by"] == "nightly"
    assert sorted(sent) == sorted(batch["run_ids"]) and len(sent) == 2
    assert closed == [True]  # the client app made for this batch is closed again


def test_non_finite_engine_output_is_a_failed_run_not_a_broken_row(store, controlled_engine):  # noqa: F811
    controlled_engine.quantities = {"flux_outer": float("nan"), "flux_inner": float("inf")}
    run_id = create_run(store, actor="eng", document=make_case())["run_id"]
    assert execute_run(run_id, store) == "failed"
    status, record, _, _, error = _run(store, run_id)
    assert record is None
    assert "quantities.flux_outer.value" in error and "quantities.flux_inner.value" in error


def _batch_of_two(store):
    from service.batches import start_batch

    for n in range(2):
        create_run(store, actor="eng", document=make_case(title=f"batch member {n}",
                                                          tags=["closing"]))
    return start_batch(store, actor="eng", tag="closing")


def _batch_events(store, batch_id):
    with store.transaction() as session:
        return session.execute(select(AuditEvent.kind).where(AuditEvent.subject == batch_id)
                               .order_by(AuditEvent.seq)).scalars().all()


def test_the_last_run_of_a_batch_closes_it_once(store, controlled_engine):  # noqa: F811
    from service.store.models import Batch

    batch = _batch_of_two(store)
    first, last = batch["run_ids"]
    execute_run(first, store)
    with store.transaction() as session:
        assert session.get(Batch, batch["batch_id"]).status == "queued"
    execute_run(last, store)
    execute_run(last, store)  # a second delivery closes nothing again
    with store.transaction() as session:
        closed = session.get(Batch, batch["batch_id"])
        assert closed.status == "finished" and closed.drift == []
    assert _batch_events(store, batch["batch_id"]) == ["batch.started", "batch.finished"]


def test_a_batch_left_open_by_a_dead_worker_is_closed_by_its_reader(store, controlled_engine,  # noqa: F811
                                                                    monkeypatch):
    import service.batches
    from service.batches import get_batch

    batch = _batch_of_two(store)
    with monkeypatch.context() as patch:  # the worker dies between its commit and the close
        patch.setattr(service.batches, "close_batch_if_done",
                      lambda *_args: (_ for _ in ()).throw(ConnectionError("worker lost")))
        for run_id in batch["run_ids"]:
            assert execute_run(run_id, store) == "succeeded"
    assert _batch_events(store, batch["batch_id"]) == ["batch.started"]
    state = get_batch(store, batch["batch_id"])
    assert state["status"] == "finished" and state["finished_at"] is not None
    assert _batch_events(store, batch["batch_id"]) == ["batch.started", "batch.finished"]


def test_the_upkeep_sweep_closes_stranded_batches_only(store, controlled_engine,  # noqa: F811
                                                      monkeypatch):
    import service.batches
    from service.batches import close_finished_batches, start_batch

    stranded = _batch_of_two(store)
    with monkeypatch.context() as patch:
        patch.setattr(service.batches, "close_batch_if_done", lambda *_args: False)
        for run_id in stranded["run_ids"]:
            execute_run(run_id, store)
    unfinished = start_batch(store, actor="eng", tag="closing")  # its runs not executed
    assert close_finished_batches(store) == [stranded["batch_id"]]
    assert close_finished_batches(store) == []
    assert _batch_events(store, unfinished["batch_id"]) == ["batch.started"]
