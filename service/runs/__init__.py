"""Runs, split by job: :mod:`~service.runs.records` (a run as a document),
:mod:`~service.runs.queueing` (queueing runs), :mod:`~service.runs.execution` (executing one)
and :mod:`~service.runs.finite` (numbers a record cannot hold). How a run is written is the
store's (:mod:`service.store.run_writer`); closing a batch after its last run is
:mod:`service.batches`'."""

from service.runs.execution import DEFAULT_MAX_ATTEMPTS, execute_run, failure_reason
from service.runs.finite import non_finite_paths_of_record
from service.runs.queueing import create_run, pending_run_ids
from service.runs.records import (
    get_record,
    get_run_and_case,
    record_of,
    run_summary,
    signoff_to_dict,
)

__all__ = ["DEFAULT_MAX_ATTEMPTS", "create_run", "execute_run", "failure_reason", "get_record",
           "get_run_and_case", "non_finite_paths_of_record", "pending_run_ids", "record_of",
           "run_summary", "signoff_to_dict"]
