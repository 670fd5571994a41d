"""``fluxproof worker``: a Celery worker node for queued runs.

It starts Celery's worker on :mod:`worker.celery_app` by name
(:func:`service.celery_client.run_worker`), so the service never imports the layer above it;
the lazy group in :mod:`service.cli` loads this module only when ``fluxproof worker`` runs.
"""

from __future__ import annotations

import click

from service.celery_client import run_worker
from service.settings import settings_from_env


@click.command("worker")
@click.option("--concurrency", type=click.IntRange(1), default=None,
              help="Worker processes (Celery's default: one per CPU).")
@click.option("--loglevel", default="INFO", show_default=True)
@click.option("--beat/--no-beat", default=False, show_default=True,
              help="Also run the nightly re-verification schedule in this worker.")
def worker(concurrency: int | None, loglevel: str, beat: bool) -> None:
    """Run a Celery worker for queued runs (needs FLUXPROOF_BROKER_URL)."""
    settings = settings_from_env()
    if not settings.get("BROKER_URL"):
        raise click.UsageError("FLUXPROOF_BROKER_URL is not set: a worker needs a broker "
                               "(e.g. redis://127.0.0.1:6379/0). Without one, `fluxproof "
                               "serve` runs checks in-process.")
    argv = [f"--loglevel={loglevel}"]
    if concurrency:
        argv.append(f"--concurrency={concurrency}")
    if beat:
        argv.append("--beat")
    run_worker(argv)
