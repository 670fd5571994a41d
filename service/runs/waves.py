"""A run's Monte Carlo blocks shared among workers, in waves, through the store.

When a run's case asks for ``uncertainty``, its execution (:mod:`service.runs.execution`)
hands :func:`schemas.checking.check_case` a :class:`WaveScheduler` (a
:data:`worker.engine.design.runner.BlockScheduler`). The process executing the run — the
*coordinator* — then

1. fixes the seed: the case's, else one drawn once and stored with the run
   (:func:`service.store.blocks.fix_seed`), so every worker and a re-execution of the run
   draw the same trials;
2. sends the next ``wave`` block indices to be computed elsewhere (a :class:`BlockSender`:
   Celery tasks sent by name, or the embedded pool); each computes
   :func:`schemas.checking.uncertainty_block` (a pure function of the case, the seed and the
   index) and writes it once under (run id, block index) (:func:`compute_and_store_block`);
3. meanwhile computes blocks of the wave itself, from the top of the wave down: one at once,
   the rest once the wave has waited :data:`HELP_AFTER_BLOCK_TIMES` of its own block times.
   So a run never waits on a busy or lost queue, and a block whose task is lost (worker killed,
   broker emptied) is computed all the same;
4. merges the wave's blocks into the accumulator in block order, stopping as soon as it is
   done (JCGM 101's adaptive stopping, across blocks exactly as in one process), and writes the
   run's ``progress``.

Blocks already stored (by an earlier execution of the run whose worker died, or by a block task
that finished after it) are read, not computed again. The record equals the one the sequential
scheduler gives for the same seed: blocks are pure and merged in the same order.
"""

from __future__ import annotations

import logging
import os
import socket
import threading
import time
from collections.abc import Callable, Sequence
from concurrent.futures import Executor
from dataclasses import dataclass
from typing import Any, Protocol

from schemas.checking import uncertainty_block
from service.store import Store
from service.store.blocks import (
    store_block,
    stored_blocks,
    unfinished_run_case,
    write_progress,
)
from service.store.models import utc_now
from service.task_names import send_monte_carlo_block
from worker.engine.design.monte_carlo import BlockResult, MonteCarloAccumulator

logger = logging.getLogger(__name__)

#: Blocks in flight at once by default (set ``FLUXPROOF_MONTE_CARLO_WAVE`` to the number of
#: worker pool processes that should share a run).
DEFAULT_WAVE = 4
#: Seconds between looks at the store while the coordinator waits for other workers' blocks.
POLL_INTERVAL_S = 0.05
#: The coordinator computes the rest of a wave itself once the wave has waited this many of its
#: own block times (a block another worker is computing is then late or lost).
HELP_AFTER_BLOCK_TIMES = 2.0


def process_name() -> str:
    """``host:pid/thread`` of the caller: who computed a block."""
    return f"{socket.gethostname()}:{os.getpid()}/{threading.current_thread().name}"


class BlockSender(Protocol):
    """Has blocks of a run computed elsewhere (each stored by :func:`compute_and_store_block`)."""

    def send(self, run_id: str, seed: int, indices: Sequence[int]) -> None: ...


@dataclass(frozen=True)
class BlockSharing:
    """How a run's Monte Carlo blocks are shared: ``sender`` (None: the coordinator computes
    every block itself), ``wave`` (blocks in flight at once) and ``keep_blocks`` (keep the
    stored blocks once the run's record is stored; else they are deleted)."""

    sender: BlockSender | None = None
    wave: int = DEFAULT_WAVE
    keep_blocks: bool = False


def compute_and_store_block(store: Store, run_id: str, index: int, seed: int) -> str:
    """What a block task does: compute block ``index`` of the run's uncertainty with ``seed``
    and store it once. Returns what happened: ``"stored"``, ``"stored already"`` (another
    delivery or the coordinator was first) or ``"run finished"`` (nothing to do)."""
    document = unfinished_run_case(store, run_id)
    if document is None:
        return "run finished"
    if stored_blocks(store, run_id, [index], seed):
        return "stored already"
    block = uncertainty_block(document, seed, index)
    written = store_block(store, run_id, index, seed, block.as_dict(), process_name())
    return "stored" if written else "stored already"


class PoolBlockSender:
    """The embedded default: blocks computed by an executor of the service process."""

    def __init__(self, store: Store, executor: Executor) -> None:
        self.store = store
        self.executor = executor

    def _compute(self, run_id: str, index: int, seed: int) -> str:
        try:
            return compute_and_store_block(self.store, run_id, index, seed)
        except Exception:
            # The coordinator computes a block nobody stored; a failure here costs time only.
            logger.exception("block %d of run %s failed in the embedded pool", index, run_id)
            raise

    def send(self, run_id: str, seed: int, indices: Sequence[int]) -> None:
        for index in indices:
            self.executor.submit(self._compute, run_id, index, seed)


class CeleryBlockSender:
    """Block tasks (:data:`~service.task_names.MONTE_CARLO_BLOCK_TASK`) sent by name."""

    def __init__(self, celery_app: Any) -> None:
        self.celery = celery_app

    def send(self, run_id: str, seed: int, indices: Sequence[int]) -> None:
        with self.celery.producer_or_acquire() as producer:
            for index in indices:
                send_monte_carlo_block(self.celery, run_id, index, seed, producer)


def progress_of(accumulator: MonteCarloAccumulator) -> dict[str, Any]:
    """The run document's ``progress``: trials and blocks merged so far and at most."""
    spec = accumulator.spec
    return {"trials": accumulator.trials, "blocks": accumulator.blocks,
            "max_trials": spec.max_blocks * spec.trials_per_block,
            "max_blocks": spec.max_blocks, "updated_at": utc_now().isoformat()}


class WaveScheduler:
    """The block scheduler of one run's execution (see the module notes)."""

    def __init__(self, store: Store, run_id: str, sharing: BlockSharing) -> None:
        self.store = store
        self.run_id = run_id
        self.sharing = sharing
        #: Indices this coordinator computed itself, and those it merged from the store.
        self.computed_here: list[int] = []
        self.read_from_store: list[int] = []
        self._block_time: float | None = None

    def __call__(self, compute: Callable[[int], BlockResult],
                 accumulator: MonteCarloAccumulator) -> None:
        seed = accumulator.spec.seed
        # Alone, one block at a time: a wave would only compute blocks past the stopping point.
        size = 1 if self.sharing.sender is None else max(1, self.sharing.wave)
        write_progress(self.store, self.run_id, progress_of(accumulator))
        while not accumulator.done:
            first = accumulator.blocks
            wave = list(range(first, min(first + size, accumulator.spec.max_blocks)))
            blocks = self._wave(compute, seed, wave)
            for index in wave:
                if accumulator.done:
                    break
                accumulator.add(blocks[index])
            write_progress(self.store, self.run_id, progress_of(accumulator))
        logger.info("run %s: %d Monte Carlo blocks merged; %d read from the store, %d computed "
                    "by this process", self.run_id, accumulator.blocks,
                    len(self.read_from_store), len(self.computed_here))

    def _wave(self, compute: Callable[[int], BlockResult], seed: int, wave: list[int]
              ) -> dict[int, BlockResult]:
        """Every block of ``wave``: read from the store, computed elsewhere, or here."""
        found = self._stored(seed, wave)
        self.read_from_store.extend(found)
        missing = [i for i in wave if i not in found]
        if missing and self.sharing.sender is not None and len(missing) > 1:
            # The top block is the coordinator's own; the others go to the workers.
            self.sharing.sender.send(self.run_id, seed, missing[:-1])
        sent_at = time.monotonic()
        helped = False
        while missing:
            if helped and self.sharing.sender is not None and not self._may_help(sent_at):
                time.sleep(POLL_INTERVAL_S)
            else:
                index = missing[-1]
                found[index] = self._compute_here(compute, seed, index)
                helped = True
            fresh = self._stored(seed, [i for i in missing if i not in found])
            self.read_from_store.extend(fresh)
            found.update(fresh)
            missing = [i for i in wave if i not in found]
        return found

    def _may_help(self, sent_at: float) -> bool:
        block_time = self._block_time or 0.0
        return time.monotonic() - sent_at >= HELP_AFTER_BLOCK_TIMES * block_time

    def _stored(self, seed: int, indices: list[int]) -> dict[int, BlockResult]:
        return {index: BlockResult.from_dict(data) for index, data in
                stored_blocks(self.store, self.run_id, indices, seed).items()}

    def _compute_here(self, compute: Callable[[int], BlockResult], seed: int, index: int
                      ) -> BlockResult:
        started = time.monotonic()
        block = compute(index)
        elapsed = time.monotonic() - started
        self._block_time = elapsed if self._block_time is None else max(self._block_time,
                                                                         elapsed)
        store_block(self.store, self.run_id, index, seed, block.as_dict(), process_name())
        self.computed_here.append(index)
        return block

