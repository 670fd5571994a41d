"""A Celery app for the hang fault test ONLY: the real fluxproof app with a solve that hangs.

``celery -A tests.faults.hang_app worker`` loads :mod:`worker.celery_app` and its real tasks,
then replaces ``worker.engine.check_case`` in the worker's processes according to
``FAULT_TEST_HANG``:

* ``sleeps``: the solve sleeps for an hour (a solve that never returns); the soft time limit
  interrupts it.
* ``ignores_soft_limit``: the solve swallows the soft limit and keeps on sleeping (as a solve
  stuck in compiled code would); only the hard time limit ends it, by killing the process.

This module lives in the test tree on purpose: the product has no switch that makes it hang.
"""

from __future__ import annotations

import os
import time

# Imported here, in the main process, so that the pool processes forked from it do not spend
# the short test time limits on first imports.
import psycopg  # noqa: F401
import sqlalchemy.dialects.postgresql.psycopg  # noqa: F401
from celery.exceptions import SoftTimeLimitExceeded

import schemas  # noqa: F401
import service.runs  # noqa: F401
import worker.engine
from worker.celery_app import celery_app

MODE = os.environ.get("FAULT_TEST_HANG", "")


def _sleeping_solve(case: dict) -> dict:
    time.sleep(3600)
    raise AssertionError("unreachable: the solve was meant to be stopped")


def _stubborn_solve(case: dict) -> dict:
    deadline = time.monotonic() + 3600
    while time.monotonic() < deadline:
        try:
            time.sleep(3600)
        except SoftTimeLimitExceeded:
            continue
    raise AssertionError("unreachable: the solve was meant to be killed")


if MODE == "sleeps":
    worker.engine.check_case = _sleeping_solve
elif MODE == "ignores_soft_limit":
    worker.engine.check_case = _stubborn_solve
elif MODE:
    raise SystemExit(f"FAULT_TEST_HANG: expected sleeps or ignores_soft_limit, got {MODE!r}")

app = celery_app
