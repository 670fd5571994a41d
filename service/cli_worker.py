"""``fluxproof worker``: a Celery worker node for queued runs.

The one command module that imports the Celery app (:mod:`worker.celery_app`, the layer above
``service``); the lazy group in :mod:`service.cli` loads it only when ``fluxproof worker`` runs.
"""

from __future__ import annotations

import click

from service.settings import settings_from_env
from worker.celery_app import celery_app


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
    argv = ["worker", f"--loglevel={loglevel}"]
    if concurrency:
        argv.append(f"--concurrency={concurrency}")
    if beat:
        argv.append("--beat")
    celery_app.worker_main(argv)
