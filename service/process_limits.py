"""The memory limit of a process that solves: its address space (``RLIMIT_AS``).

Celery pool processes set it as they start (``worker.celery_app``), and so do the embedded
run processes (:mod:`service.dispatch`). Past the limit an allocation fails with
``MemoryError``, which the run records as its failure, instead of the host swapping or the
kernel's out-of-memory killer choosing a victim. ``FLUXPROOF_WORKER_MEMORY_LIMIT_MB`` sets it
(0: unlimited); a limit is only ever lowered, never raised past what the process was given.
"""

from __future__ import annotations

import logging
import resource

logger = logging.getLogger(__name__)


def limit_address_space(limit_bytes: int | None) -> int | None:
    """Lower this process's address-space limit to ``limit_bytes`` (None: leave it); returns
    the soft limit now in force (None: unlimited)."""
    soft, hard = resource.getrlimit(resource.RLIMIT_AS)
    if limit_bytes is not None:
        wanted = limit_bytes if hard == resource.RLIM_INFINITY else min(limit_bytes, hard)
        if soft == resource.RLIM_INFINITY or wanted < soft:
            resource.setrlimit(resource.RLIMIT_AS, (wanted, hard))
            soft = wanted
    return None if soft == resource.RLIM_INFINITY else soft
