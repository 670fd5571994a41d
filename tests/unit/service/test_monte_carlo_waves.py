"""A run's Monte Carlo blocks shared in waves (:mod:`service.runs.waves`): the record's
uncertainty block equals the sequential scheduler's for the same seed, each block is stored
once, a re-execution reuses stored blocks, the seed is fixed once, progress shows while the run
is running. The check value of every comparison is the engine's own sequential scheduler
(``schemas.checking.check_case``), not a number of the test."""

from __future__ import annotations

import functools
import json

import pytest

import service.runs.execution as execution
import service.runs.waves as waves
from schemas.checking import check_case, uncertainty_block
from service.dispatch import EmbeddedDispatcher
from service.runs import create_run, execute_run, get_record
from service.runs.waves import (
    BlockSharing,
    CeleryBlockSender,
    WaveScheduler,
    compute_and_store_block,
)
from service.settings import monte_carlo_wave
from service.store.blocks import (
    BlockSeedMismatch,
    block_writers,
    store_block,
    stored_blocks,
)
from service.store.models import Run
from service.task_names import MONTE_CARLO_BLOCK_TASK
from tests.api.support import uncertain_case

BLOCK_TRIALS = 10_000  # JCGM 101 §7.9.4 b)'s M for 95 % coverage: the engine's block size


@pytest.fixture
def store(data_dir):  # noqa: F811
    from service.store import default_store

    return default_store()


@functools.cache
def _sequential_json(max_trials: int, seed: int) -> str:
    return json.dumps(check_case(uncertain_case(max_trials, seed))["uncertainty"],
                      sort_keys=True)


def sequential_uncertainty(max_trials: int = 80_000, seed: int = 7) -> dict:
    """The uncertainty block the sequential scheduler records for the same case and seed."""
    return json.loads(_sequential_json(max_trials, seed))


def _claim_as_a_lost_worker(store, run_id: str) -> None:
    """As if a worker had claimed the run and died mid-solve (attempt 1, running)."""
    assert store.runs.claim(run_id, 3, "worker@lost") is not None


class SpyScheduler(WaveScheduler):
    made: list[WaveScheduler] = []

    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        SpyScheduler.made.append(self)


@pytest.fixture
def schedulers(monkeypatch) -> list[WaveScheduler]:
    SpyScheduler.made = []
    monkeypatch.setattr(execution, "WaveScheduler", SpyScheduler)
    return SpyScheduler.made


def test_the_sequential_case_needs_many_blocks():
    """The premise of the tests below: the invented case runs to its 8 blocks."""
    sequential = sequential_uncertainty()
    assert (sequential["blocks"], sequential["trials"]) == (8, 8 * BLOCK_TRIALS)
    assert sequential["stop_reason"] == "max_trials"


@pytest.mark.parametrize("wave", [1, 3])
def test_embedded_pool_gives_the_sequential_record_each_block_stored_once(store, wave,
                                                                          schedulers):
    dispatcher = EmbeddedDispatcher(store, 3, workers=1, wave=wave, keep_blocks=True)
    try:
        run_id = create_run(store, actor="eng", document=uncertain_case())["run_id"]
        dispatcher.send([run_id])
        dispatcher.wait_idle(timeout=120)
    finally:
        dispatcher.shutdown()
    record = get_record(store, run_id)
    assert record["status"] == "succeeded", record.get("error")
    assert record["uncertainty"] == sequential_uncertainty()
    writers = block_writers(store, run_id)
    indices = [index for index, _, _ in writers]
    # One row per block; a wave may compute up to wave - 1 blocks past the stopping point.
    assert indices == list(range(len(indices)))
    assert 8 <= len(indices) <= 8 + wave - 1
    threads = {by.rsplit("/", 1)[1].rsplit("_", 1)[0] for _, by, _ in writers}
    if wave == 1:
        assert threads == {"fluxproof-run"}  # nothing to share: the run's thread alone
    else:
        assert threads == {"fluxproof-run", "fluxproof-block"}  # shared with the pool
        assert len(schedulers[0].computed_here) < len(indices)
    assert "progress" not in record


def test_inline_execution_without_sharing_computes_and_stores_every_block(store, schedulers):
    run_id = create_run(store, actor="eng", document=uncertain_case())["run_id"]
    assert execute_run(run_id, store, sharing=BlockSharing(keep_blocks=True)) == "succeeded"
    assert get_record(store, run_id)["uncertainty"] == sequential_uncertainty()
    assert schedulers[0].computed_here == list(range(8))
    assert [index for index, _, _ in block_writers(store, run_id)] == list(range(8))


def test_blocks_are_deleted_once_the_record_is_stored_unless_kept(store):
    run_id = create_run(store, actor="eng", document=uncertain_case(30_000))["run_id"]
    assert execute_run(run_id, store) == "succeeded"
    assert get_record(store, run_id)["uncertainty"]["blocks"] == 3
    assert block_writers(store, run_id) == []


def test_a_re_executed_run_reuses_the_blocks_already_stored(store, schedulers):
    run_id = create_run(store, actor="eng", document=uncertain_case())["run_id"]
    _claim_as_a_lost_worker(store, run_id)
    for index in (0, 1, 2):  # what the first execution's workers stored before it died
        assert compute_and_store_block(store, run_id, index, 7) == "stored"
    before = block_writers(store, run_id)

    assert execute_run(run_id, store, sharing=BlockSharing(keep_blocks=True)) == "succeeded"

    with store.transaction() as session:
        assert session.get(Run, run_id).attempts == 2
    assert get_record(store, run_id)["uncertainty"] == sequential_uncertainty()
    (scheduler,) = schedulers
    assert {0, 1, 2} <= set(scheduler.read_from_store)
    assert not {0, 1, 2} & set(scheduler.computed_here)
    assert block_writers(store, run_id)[:3] == before  # the rows were not written again


def test_a_stored_block_is_what_the_record_merges(store):
    """Injection: block 0 stored from another case (a wider diffusivity) under the run's seed;
    the re-executed run merges it, so its record is not the sequential one."""
    run_id = create_run(store, actor="eng", document=uncertain_case())["run_id"]
    _claim_as_a_lost_worker(store, run_id)
    wider = uncertain_case()
    wider["uncertainty"]["inputs"][0]["relative_sd"] = 0.6
    assert store_block(store, run_id, 0, 7, uncertainty_block(wider, 7, 0).as_dict(), "test")

    assert execute_run(run_id, store) == "succeeded"
    record = get_record(store, run_id)["uncertainty"]
    sequential = sequential_uncertainty()
    assert record["blocks"] == sequential["blocks"]
    assert record["quantities"] != sequential["quantities"]


def test_a_block_stored_with_another_seed_fails_the_run_with_the_reason(store):
    run_id = create_run(store, actor="eng", document=uncertain_case())["run_id"]
    _claim_as_a_lost_worker(store, run_id)
    other = uncertainty_block(uncertain_case(seed=8), 8, 0).as_dict()
    assert store_block(store, run_id, 0, 8, other, "test")
    assert execute_run(run_id, store) == "failed"
    error = get_record(store, run_id)["error"]
    assert "BlockSeedMismatch" in error and "seed 8" in error and "seed 7" in error


def test_a_case_without_seed_gets_one_drawn_once_and_stored_with_the_run(store, schedulers):
    run_id = create_run(store, actor="eng", document=uncertain_case(30_000, seed=None))[
        "run_id"]
    _claim_as_a_lost_worker(store, run_id)
    assert execute_run(run_id, store, sharing=BlockSharing(keep_blocks=True)) == "succeeded"
    with store.transaction() as session:
        seed = session.get(Run, run_id).monte_carlo_seed
    assert seed is not None
    record = get_record(store, run_id)["uncertainty"]
    assert record["seed"] == seed
    assert record == sequential_uncertainty(30_000, seed)
    # A second execution (as after a lost worker) keeps that seed and reuses every block.
    with store.transaction() as session:
        run = session.get(Run, run_id)
        run.status, run.record = "running", None
    assert execute_run(run_id, store, sharing=BlockSharing(keep_blocks=True)) == "succeeded"
    assert get_record(store, run_id)["uncertainty"] == record
    assert schedulers[1].computed_here == []
    assert schedulers[1].read_from_store == [0, 1, 2]


def test_block_storage_is_idempotent(store):
    run_id = create_run(store, actor="eng", document=uncertain_case())["run_id"]
    first = uncertainty_block(uncertain_case(), 7, 0).as_dict()
    assert store_block(store, run_id, 0, 7, first, "first") is True
    changed = dict(first, trials=1)
    assert store_block(store, run_id, 0, 7, changed, "second") is False
    assert stored_blocks(store, run_id, [0], 7) == {0: json.loads(json.dumps(first))}
    assert [by for _, by, _ in block_writers(store, run_id)] == ["first"]
    # A redelivered block task writes nothing new.
    assert compute_and_store_block(store, run_id, 1, 7) == "stored"
    assert compute_and_store_block(store, run_id, 1, 7) == "stored already"
    assert [index for index, _, _ in block_writers(store, run_id)] == [0, 1]
    with pytest.raises(BlockSeedMismatch, match="seed 7, the run uses seed 9"):
        stored_blocks(store, run_id, [0], 9)


def test_no_block_is_written_for_a_finished_run(store):
    run_id = create_run(store, actor="eng", document=uncertain_case(30_000))["run_id"]
    assert execute_run(run_id, store) == "succeeded"
    assert compute_and_store_block(store, run_id, 5, 7) == "run finished"
    block = uncertainty_block(uncertain_case(30_000), 7, 5).as_dict()
    assert store_block(store, run_id, 5, 7, block, "late") is False
    assert block_writers(store, run_id) == []


def test_progress_is_in_the_run_document_while_running(store, monkeypatch):
    seen: list[dict] = []
    real_write = waves.write_progress

    def write_and_read(store_, run_id, progress):
        real_write(store_, run_id, progress)
        seen.append(get_record(store_, run_id))

    monkeypatch.setattr(waves, "write_progress", write_and_read)
    run_id = create_run(store, actor="eng", document=uncertain_case())["run_id"]
    assert execute_run(run_id, store) == "succeeded"  # alone: a wave of one block

    assert all(document["status"] == "running" for document in seen)
    progress = [document["progress"] for document in seen]
    blocks = [p["blocks"] for p in progress]
    assert blocks == list(range(9))  # written before the first wave and after each wave
    assert all(p["trials"] == p["blocks"] * BLOCK_TRIALS for p in progress)
    assert {(p["max_blocks"], p["max_trials"]) for p in progress} == {(8, 8 * BLOCK_TRIALS)}
    assert "progress" not in get_record(store, run_id)  # finished: the record says it all


def test_a_case_without_uncertainty_gets_no_scheduler_and_no_progress(store, schedulers):
    plain = uncertain_case()
    plain.pop("uncertainty")
    _run_without_scheduler(store, schedulers, plain)


def _run_without_scheduler(store, schedulers, case) -> str:
    """Run ``case``: it succeeds with no scheduler started and no progress or seed kept."""
    run_id = create_run(store, actor="eng", document=case)["run_id"]
    assert execute_run(run_id, store) == "succeeded"
    assert schedulers == []
    with store.transaction() as session:
        run = session.get(Run, run_id)
        assert (run.progress, run.monte_carlo_seed) == (None, None)
    return run_id


def test_a_case_taking_the_law_of_propagation_gets_no_scheduler_nor_seed(store, schedulers):
    """``uncertainty.method = "law_of_propagation"`` draws no trials: no scheduler, no seed
    fixed for the run, no blocks; the record says which method ran."""
    case = uncertain_case(seed=None)
    case["uncertainty"].pop("max_trials")
    case["uncertainty"]["method"] = "law_of_propagation"
    run_id = _run_without_scheduler(store, schedulers, case)
    assert get_record(store, run_id)["uncertainty"]["propagation"] == \
        "law_of_propagation"


class _Producer:
    def __enter__(self):
        return self

    def __exit__(self, *exc):
        return False


class _FakeCelery:
    def __init__(self):
        self.sent: list[tuple[str, list, object]] = []

    def producer_or_acquire(self):
        return _Producer()

    def send_task(self, name, args, retry, retry_policy, producer):
        self.sent.append((name, args, producer))


def test_celery_sender_sends_one_block_task_by_name_per_index():
    celery = _FakeCelery()
    CeleryBlockSender(celery).send("run-1", 11, [4, 5, 6])
    assert [(name, args) for name, args, _ in celery.sent] == [
        (MONTE_CARLO_BLOCK_TASK, ["run-1", 4, 11]), (MONTE_CARLO_BLOCK_TASK, ["run-1", 5, 11]),
        (MONTE_CARLO_BLOCK_TASK, ["run-1", 6, 11])]
    assert len({id(producer) for _, _, producer in celery.sent}) == 1  # one producer


def test_a_coordinator_whose_sender_loses_every_block_still_finishes(store, schedulers):
    """Blocks sent to a queue that never runs them (a lost broker, busy workers): the run's own
    process computes them after waiting its own block times, and the record is unchanged."""
    class LostSender:
        sent: list[int] = []

        def send(self, run_id, seed, indices):
            self.sent.extend(indices)

    sender = LostSender()
    run_id = create_run(store, actor="eng", document=uncertain_case())["run_id"]
    assert execute_run(run_id, store, sharing=BlockSharing(sender, wave=3)) == "succeeded"
    assert get_record(store, run_id)["uncertainty"] == sequential_uncertainty()
    assert sender.sent  # blocks were sent, and none came back
    assert sorted(schedulers[0].computed_here) == list(range(8))  # waves of 3, 3 and 2


@pytest.mark.parametrize("value", [0, -2, "4", 2.5, True])
def test_a_bad_wave_setting_is_named(value):
    with pytest.raises(ValueError, match="FLUXPROOF_MONTE_CARLO_WAVE"):
        monte_carlo_wave({"MONTE_CARLO_WAVE": value})
    assert monte_carlo_wave({"MONTE_CARLO_WAVE": 6}) == 6
