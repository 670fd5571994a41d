"""Embedded runs in run processes of their own (service/run_processes.py, service/dispatch.py):
a run executes there; a run past the soft limit ends ``failed`` with that reason, one past the
hard limit has its process killed and ends ``failed`` with the reason, and the next run gets a
fresh process; the memory limit makes a large allocation fail in the limited process only.
On main the embedded executor ran in the service's threads with no limit at all."""

from __future__ import annotations

import multiprocessing

import numpy as np
import pytest

from service.dispatch import EmbeddedDispatcher
from service.process_limits import limit_address_space
from service.run_processes import RunProcessConfig
from service.runs import create_run
from service.store import Store
from service.store.migrate import upgrade
from service.store.models import Run
from tests.api.support import make_case

GIB = 2**30


@pytest.fixture
def file_store(tmp_path):
    store = Store(f"sqlite:///{tmp_path / 'runs.sqlite3'}")
    upgrade(store)
    yield store
    store.dispose()


def _dispatcher(store: Store, *, soft: float = 300.0, hard: float = 360.0):
    config = RunProcessConfig(database_url=store.url, max_attempts=3, wave=2, keep_blocks=False,
                              soft_time_limit=soft, time_limit=hard, memory_limit=2 * GIB)
    return EmbeddedDispatcher(store, 3, workers=1, wave=2, processes=config)


def _run_row(store: Store, run_id: str) -> Run:
    with store.transaction() as session:
        return session.get(Run, run_id)


def _execute(store: Store, dispatcher: EmbeddedDispatcher, title: str) -> Run:
    run_id = create_run(store, actor="test", document=make_case(title=title))["run_id"]
    dispatcher.send([run_id])
    dispatcher.wait_idle(timeout=120)
    return _run_row(store, run_id)


def test_a_run_executes_in_a_run_process(file_store):
    dispatcher = _dispatcher(file_store)
    try:
        assert dispatcher.isolation == "process"
        row = _execute(file_store, dispatcher, "in a process")
    finally:
        dispatcher.shutdown()
    assert row.status == "succeeded"


def test_the_hard_limit_kills_the_process_and_fails_the_run(file_store):
    dispatcher = _dispatcher(file_store, hard=0.05)  # less than the first run's imports
    try:
        row = _execute(file_store, dispatcher, "past the hard limit")
        first_process = dispatcher._all_processes[0].process
        assert first_process.is_alive()  # a fresh one replaced the killed process
    finally:
        dispatcher.shutdown()
    assert row.status == "failed"
    assert "past the time limit of 0.05 s" in row.error


def test_the_soft_limit_fails_the_run_with_its_reason(file_store):
    dispatcher = _dispatcher(file_store, soft=0.001, hard=120.0)
    try:
        row = _execute(file_store, dispatcher, "past the soft limit")
    finally:
        dispatcher.shutdown()
    assert row.status == "failed"
    assert "soft time limit" in row.error


def _allocate(limit: int | None, size: int, answers) -> None:
    limit_address_space(limit)
    try:
        block = np.empty(size, dtype=np.uint8)  # address space only: no page is touched
        answers.put(int(block.size))
    except MemoryError:
        answers.put("MemoryError")


@pytest.mark.parametrize(("limit", "expected"), [(GIB, "MemoryError"), (None, 2 * GIB)])
def test_the_memory_limit_refuses_a_large_allocation(limit, expected):
    context = multiprocessing.get_context("spawn")
    answers = context.Queue()
    process = context.Process(target=_allocate, args=(limit, 2 * GIB, answers))
    process.start()
    try:
        assert answers.get(timeout=60) == expected
    finally:
        process.join(30)


def test_a_limit_is_only_lowered():
    context = multiprocessing.get_context("spawn")
    answers = context.Queue()
    process = context.Process(target=_lowered_twice, args=(answers,))
    process.start()
    try:
        assert answers.get(timeout=60) == GIB
    finally:
        process.join(30)


def _lowered_twice(answers) -> None:
    limit_address_space(GIB)
    answers.put(limit_address_space(4 * GIB))
