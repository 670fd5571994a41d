"""Service settings: documented defaults, overridable from ``FLUXPROOF_*`` environment variables.

The Flask app loads these with ``app.config.from_prefixed_env("FLUXPROOF")``; processes without
a Flask app (the Celery worker, the command line) read the same names with
:func:`settings_from_env`, so both see one configuration.
"""

from __future__ import annotations

import json
import os
from collections.abc import Mapping
from pathlib import Path
from typing import Any

ENV_PREFIX = "FLUXPROOF_"

#: Documented defaults. Keys are the environment names without the ``FLUXPROOF_`` prefix.
DEFAULTS: Mapping[str, Any] = {
    # SQLAlchemy URL of the store; unset: SQLite file ``fluxproof.sqlite3`` under DATA_DIR.
    "DATABASE_URL": None,
    # Celery broker URL (e.g. redis://127.0.0.1:6379/0); unset: runs execute in-process.
    "BROKER_URL": None,
    # Directory for the default SQLite store (created when missing).
    "DATA_DIR": "./var",
    # Largest accepted request body in bytes (1 MiB); larger bodies get 413.
    "MAX_BODY_BYTES": 1_048_576,
    # Time of day (UTC, HH:MM) of the nightly re-verification of every stored case.
    "NIGHTLY_AT": "02:30",
    # Secret for signed cookies of the browser pages; set it in every deployment.
    "SECRET_KEY": "dev-only-change-me",
    # The server's Ed25519 key (PEM file outside the database; service.server_keys). Unset on
    # the embedded default: DATA_DIR/signing_key.pem; every other deployment names one file
    # that the API and every worker read (it also keys the audit chain).
    "SIGNING_KEY_FILE": None,
    # The audit chain's anchor file (append-only checkpoints the operator keeps apart from the
    # database; service.store.audit_seal). Unset: DATA_DIR/audit_anchor.jsonl. The API and
    # every worker must append to the same file.
    "AUDIT_ANCHOR_FILE": None,
    # Celery task limits in seconds: the soft limit ends a run ``failed``; the hard limit kills it.
    "TASK_SOFT_TIME_LIMIT": 300,
    "TASK_TIME_LIMIT": 360,
    # Redis visibility timeout in seconds: must exceed TASK_TIME_LIMIT, or a long solve is
    # delivered a second time while it is still running.
    "BROKER_VISIBILITY_TIMEOUT": 3600,
    # Task messages each worker pool process reserves ahead of the one it is running (Celery's
    # worker_prefetch_multiplier). Safe with late acknowledgement: reserved messages stay
    # unacknowledged, so a lost worker's reserved runs are delivered again.
    "WORKER_PREFETCH_MULTIPLIER": 8,
    # Niceness added to each worker pool process (0-19; 0 leaves it as started). Solving is
    # background work: on a host that also serves the API, the API then keeps the CPU when
    # both want it, and the workers still use every cycle the API leaves.
    "WORKER_NICE": 10,
    # Threads of the embedded executor (no broker).
    "EMBEDDED_WORKERS": 2,
    # Monte Carlo blocks of one run in flight at once (the run's own process computes one of
    # them): the number of worker pool processes, across machines, that should share a large
    # run; on the embedded default also the size of its block pool (threads).
    "MONTE_CARLO_WAVE": 4,
    # Keep a run's stored Monte Carlo blocks once its record is stored (else they are deleted;
    # only a run that is still executing needs them).
    "MONTE_CARLO_KEEP_BLOCKS": False,
    # Deliveries of one run before it is ended ``failed`` (a worker lost or killed each time).
    "MAX_RUN_ATTEMPTS": 3,
    # Apply the store's migrations when the app starts.
    "AUTO_MIGRATE": True,
    # Dispatch mode: "auto" (celery when BROKER_URL is set, else embedded), "embedded",
    # "celery", or "inline" (run synchronously after the commit; for tests and tools).
    "DISPATCH": "auto",
}

SQLITE_FILE_NAME = "fluxproof.sqlite3"


def _parse(value: str) -> Any:
    """Parse an environment value the way Flask's ``from_prefixed_env`` does (JSON, else str)."""
    try:
        return json.loads(value)
    except ValueError:
        return value


def settings_from_env(environ: Mapping[str, str] | None = None) -> dict[str, Any]:
    """Return DEFAULTS overridden by every ``FLUXPROOF_<NAME>`` variable in ``environ``."""
    environ = os.environ if environ is None else environ
    settings = dict(DEFAULTS)
    for key, value in environ.items():
        if key.startswith(ENV_PREFIX):
            settings[key[len(ENV_PREFIX) :]] = _parse(value)
    return settings


def database_url(settings: Mapping[str, Any]) -> str:
    """The store URL: DATABASE_URL, else a SQLite file under DATA_DIR (created when missing)."""
    url = settings.get("DATABASE_URL")
    if url:
        return str(url)
    data_dir = Path(str(settings.get("DATA_DIR") or DEFAULTS["DATA_DIR"])).expanduser()
    data_dir.mkdir(parents=True, exist_ok=True)
    return f"sqlite:///{(data_dir / SQLITE_FILE_NAME).resolve()}"


def parse_nightly_at(value: str) -> tuple[int, int]:
    """Parse ``HH:MM`` (24 h, UTC) into (hour, minute); ValueError names what was expected."""
    text = str(value).strip()
    parts = text.split(":")
    if len(parts) != 2 or not all(p.isdigit() for p in parts):
        raise ValueError(f"FLUXPROOF_NIGHTLY_AT: expected HH:MM (24 h, UTC), got {value!r}")
    hour, minute = int(parts[0]), int(parts[1])
    if not (0 <= hour <= 23 and 0 <= minute <= 59):
        raise ValueError(f"FLUXPROOF_NIGHTLY_AT: hour 0-23 and minute 0-59 expected, got {value!r}")
    return hour, minute


def worker_nice(settings: Mapping[str, Any]) -> int:
    """The niceness increment of worker pool processes (``WORKER_NICE``, 0-19)."""
    value = settings.get("WORKER_NICE", DEFAULTS["WORKER_NICE"])
    if isinstance(value, bool) or not isinstance(value, int) or not 0 <= value <= 19:
        raise ValueError(f"FLUXPROOF_WORKER_NICE: expected a whole number from 0 to 19, "
                         f"got {value!r}")
    return value


def dispatch_mode(settings: Mapping[str, Any]) -> str:
    """Resolve DISPATCH "auto" into "celery" (broker set) or "embedded"."""
    mode = str(settings.get("DISPATCH") or "auto")
    if mode == "auto":
        return "celery" if settings.get("BROKER_URL") else "embedded"
    if mode not in ("embedded", "celery", "inline"):
        raise ValueError(
            f"FLUXPROOF_DISPATCH: expected auto, embedded, celery or inline, got {mode!r}"
        )
    return mode


def monte_carlo_wave(settings: Mapping[str, Any]) -> int:
    """Blocks of one run in flight at once (``MONTE_CARLO_WAVE``, a whole number >= 1)."""
    value = settings.get("MONTE_CARLO_WAVE", DEFAULTS["MONTE_CARLO_WAVE"])
    if isinstance(value, bool) or not isinstance(value, int) or value < 1:
        raise ValueError(f"FLUXPROOF_MONTE_CARLO_WAVE: expected a whole number of at least 1, "
                         f"got {value!r}")
    return value
