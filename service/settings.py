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
    # The installation's secret (at least 32 characters). Unset on the embedded default: one is
    # made in DATA_DIR/secret_key (mode 0600); any configuration with DATABASE_URL refuses to
    # start without a strong one (service.server_keys).
    "SECRET_KEY": None,
    # PEM file of the server's Ed25519 signing key (e-signatures; it also keys the audit
    # chain, so the API and every worker read the same file); unset on the embedded default:
    # DATA_DIR/signing_key.pem, created on first start.
    "SIGNING_KEY_FILE": None,
    # The audit chain's anchor file (append-only checkpoints the operator keeps apart from the
    # database; service.store.audit_seal). Unset: DATA_DIR/audit_anchor.jsonl. The API and
    # every worker must append to the same file.
    "AUDIT_ANCHOR_FILE": None,
    # Browser sessions end after this many minutes without a request ...
    "SESSION_IDLE_MINUTES": 30,
    # ... and this many hours after sign-in, whichever comes first.
    "SESSION_MAX_HOURS": 8,
    # Secure flag of the session cookie: "auto" (when the request came over TLS), true, false.
    "SESSION_COOKIE_SECURE": "auto",
    # Proxies in front of the service whose X-Forwarded-For/-Proto/-Host are trusted (0: none).
    # Behind one TLS-terminating proxy set 1, so that the cookie is Secure.
    "PROXY_FIX_HOPS": 0,
    # Days a new bearer token lives unless its creator says otherwise.
    "TOKEN_LIFETIME_DAYS": 90,
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
    # How the embedded executor runs a run: "process" (a run process of its own per
    # EMBEDDED_WORKERS, so TASK_SOFT_TIME_LIMIT, TASK_TIME_LIMIT and WORKER_MEMORY_LIMIT_MB hold
    # as on workers) or "thread" (in the service process, no limits; for tests that replace the
    # engine in-process). An in-memory SQLite store always uses threads.
    "EMBEDDED_ISOLATION": "process",
    # Run processes (threads with EMBEDDED_ISOLATION=thread) of the embedded executor.
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
    # Cost budgets of one run (worker/engine/cost.py) are multiplied by this factor; raise it
    # only together with the workers' time and memory limits.
    "COST_BUDGET_SCALE": 1.0,
    # Address-space limit of each worker process (Celery pool processes and the embedded run
    # processes), in MiB; 0 leaves it unlimited. A solve that needs more fails with a memory
    # error recorded on its run instead of exhausting the host.
    "WORKER_MEMORY_LIMIT_MB": 4096,
    # The recovery sweep (service/recovery.py): seconds between sweeps, and the age in seconds
    # of an unfinished run before one the broker does not know about counts as lost. It runs in
    # the API process and in every worker (beat is not needed), one at a time.
    "RECOVERY_INTERVAL": 30,
    "RECOVERY_AFTER": 60,
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


def cost_budget_scale(settings: Mapping[str, Any]) -> float:
    """The factor on the engine's cost budgets (``COST_BUDGET_SCALE``, a positive number)."""
    raw = settings.get("COST_BUDGET_SCALE", DEFAULTS["COST_BUDGET_SCALE"])
    if isinstance(raw, bool) or not isinstance(raw, int | float) or not raw > 0:
        raise ValueError(f"FLUXPROOF_COST_BUDGET_SCALE: expected a positive number, got {raw!r}")
    return float(raw)


def worker_memory_limit_bytes(settings: Mapping[str, Any]) -> int | None:
    """The address-space limit of a worker process in bytes (``WORKER_MEMORY_LIMIT_MB``);
    None when it is 0 (unlimited)."""
    raw = settings.get("WORKER_MEMORY_LIMIT_MB", DEFAULTS["WORKER_MEMORY_LIMIT_MB"])
    if isinstance(raw, bool) or not isinstance(raw, int) or raw < 0:
        raise ValueError(f"FLUXPROOF_WORKER_MEMORY_LIMIT_MB: expected a whole number of MiB "
                         f"(0: unlimited), got {raw!r}")
    return raw * 1024 * 1024 if raw else None


def embedded_isolation(settings: Mapping[str, Any], store_url: str) -> str:
    """``EMBEDDED_ISOLATION`` ("process" or "thread"); "thread" for an in-memory SQLite store,
    which another process cannot open."""
    value = str(settings.get("EMBEDDED_ISOLATION") or DEFAULTS["EMBEDDED_ISOLATION"])
    if value not in ("process", "thread"):
        raise ValueError(f"FLUXPROOF_EMBEDDED_ISOLATION: expected process or thread, got "
                         f"{value!r}")
    in_memory = store_url.startswith("sqlite") and (
        store_url in ("sqlite://", "sqlite:///:memory:") or "mode=memory" in store_url)
    return "thread" if in_memory else value


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
