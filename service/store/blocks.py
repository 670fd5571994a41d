"""Monte Carlo blocks of a run in the store: written once, read by the run's coordinator.

A block row is keyed by (run id, block index) and written by an insert that does nothing when
the row exists (``ON CONFLICT DO NOTHING`` on both databases) and nothing when the run is
finished or gone: a redelivered block task, or two processes that computed the same block,
leave one row. The run's seed (when its case states none) is fixed once with a conditional
update, and its progress is written only while it runs. See :mod:`service.runs.waves`.
"""

from __future__ import annotations

from collections.abc import Iterable
from typing import Any

from sqlalchemy import (
    BigInteger,
    Integer,
    String,
    bindparam,
    delete,
    exists,
    select,
    update,
)
from sqlalchemy.dialects.postgresql import insert as pg_insert
from sqlalchemy.dialects.sqlite import insert as sqlite_insert

from service.store.models import (
    UNFINISHED_STATES,
    Case,
    Run,
    RunBlock,
    RunStatus,
    UtcDateTime,
    utc_now,
)
from service.store.session import Store

_RUNS = Run.__table__
_BLOCKS = RunBlock.__table__
_CASES = Case.__table__

_RUN_UNFINISHED = exists(select(_RUNS.c.id).where(_RUNS.c.id == bindparam("run_id"),
                                                  _RUNS.c.status.in_(UNFINISHED_STATES)))


def _insert_block(dialect_insert: Any) -> Any:
    row = select(bindparam("run_id", type_=String), bindparam("block_index", type_=Integer),
                 bindparam("seed", type_=BigInteger),
                 bindparam("result", type_=_BLOCKS.c.result.type),
                 bindparam("computed_by", type_=String),
                 bindparam("computed_at", type_=UtcDateTime())).where(_RUN_UNFINISHED)
    return (dialect_insert(_BLOCKS)
            .from_select(["run_id", "block_index", "seed", "result", "computed_by",
                          "computed_at"], row)
            .on_conflict_do_nothing(index_elements=["run_id", "block_index"])
            .returning(_BLOCKS.c.block_index))


_INSERT_BLOCK = {"sqlite": _insert_block(sqlite_insert),
                 "postgresql": _insert_block(pg_insert)}
_BLOCKS_OF_RUN = (select(_BLOCKS.c.block_index, _BLOCKS.c.seed, _BLOCKS.c.result)
                  .where(_BLOCKS.c.run_id == bindparam("run_id"),
                         _BLOCKS.c.block_index.in_(bindparam("indices", expanding=True)))
                  .order_by(_BLOCKS.c.block_index))
_BLOCK_WRITERS = (select(_BLOCKS.c.block_index, _BLOCKS.c.computed_by, _BLOCKS.c.computed_at)
                  .where(_BLOCKS.c.run_id == bindparam("run_id"))
                  .order_by(_BLOCKS.c.block_index))
_DELETE_BLOCKS = delete(_BLOCKS).where(_BLOCKS.c.run_id == bindparam("run_id"))
_FIX_SEED = (update(_RUNS)
             .where(_RUNS.c.id == bindparam("run_id"), _RUNS.c.monte_carlo_seed.is_(None))
             .values(monte_carlo_seed=bindparam("seed")))
_SEED_OF = select(_RUNS.c.monte_carlo_seed).where(_RUNS.c.id == bindparam("run_id"))
_WRITE_PROGRESS = (update(_RUNS)
                   .where(_RUNS.c.id == bindparam("run_id"),
                          _RUNS.c.status == RunStatus.RUNNING.value)
                   .values(progress=bindparam("progress")))
_CASE_OF_UNFINISHED_RUN = (select(_CASES.c.document)
                           .join_from(_RUNS, _CASES, _CASES.c.id == _RUNS.c.case_id)
                           .where(_RUNS.c.id == bindparam("run_id"),
                                  _RUNS.c.status.in_(UNFINISHED_STATES)))


class BlockSeedMismatch(RuntimeError):
    """A stored block was drawn with another seed than the run's (the store was tampered with
    or a run's seed changed): its trials are not this run's."""


def store_block(store: Store, run_id: str, index: int, seed: int, result: dict[str, Any],
                computed_by: str) -> bool:
    """Write block ``index`` of run ``run_id`` unless it is stored or the run is finished or
    gone; True when this call wrote it."""
    with store.transaction() as session:
        written = session.execute(_INSERT_BLOCK[store.dialect], {
            "run_id": run_id, "block_index": index, "seed": seed, "result": result,
            "computed_by": computed_by, "computed_at": utc_now()}).first()
    return written is not None


def stored_blocks(store: Store, run_id: str, indices: Iterable[int], seed: int
                  ) -> dict[int, dict[str, Any]]:
    """The stored blocks of ``run_id`` among ``indices``: index → the block's JSON.

    Raises :class:`BlockSeedMismatch` when a stored block was drawn with another seed."""
    wanted = sorted(set(indices))
    if not wanted:
        return {}
    found: dict[int, dict[str, Any]] = {}
    for row in store.read(_BLOCKS_OF_RUN, {"run_id": run_id, "indices": wanted}):
        if int(row.seed) != int(seed):
            raise BlockSeedMismatch(f"block {row.block_index} of run {run_id} was stored with "
                                    f"seed {row.seed}, the run uses seed {seed}")
        found[int(row.block_index)] = dict(row.result)
    return found


def block_writers(store: Store, run_id: str) -> list[tuple[int, str, Any]]:
    """(index, computed_by, computed_at) of every stored block of ``run_id``, by index."""
    return [(int(r.block_index), r.computed_by, r.computed_at)
            for r in store.read(_BLOCK_WRITERS, {"run_id": run_id})]


def delete_blocks(store: Store, run_id: str) -> None:
    """Remove the stored blocks of a run (once its record holds what they gave)."""
    with store.transaction() as session:
        session.execute(_DELETE_BLOCKS, {"run_id": run_id})


def fix_seed(store: Store, run_id: str, drawn: int) -> int:
    """The run's Monte Carlo seed: the one stored with it, else ``drawn``, stored now."""
    with store.transaction() as session:
        session.execute(_FIX_SEED, {"run_id": run_id, "seed": drawn})
        seed = session.execute(_SEED_OF, {"run_id": run_id}).scalar_one()
    return int(seed)


def write_progress(store: Store, run_id: str, progress: dict[str, Any]) -> None:
    """Store how far a running run has got (nothing once it is finished)."""
    with store.transaction() as session:
        session.execute(_WRITE_PROGRESS, {"run_id": run_id, "progress": progress})


def unfinished_run_case(store: Store, run_id: str) -> dict[str, Any] | None:
    """The case document of run ``run_id`` while it is queued or running, else None."""
    document = store.read_scalar(_CASE_OF_UNFINISHED_RUN, {"run_id": run_id})
    return None if document is None else dict(document)
