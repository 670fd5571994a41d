"""``fluxproof serve``, ``fluxproof worker`` and ``fluxproof db upgrade``."""

from __future__ import annotations

import click

from service.settings import database_url, dispatch_mode, settings_from_env


@click.command("serve")
@click.option("--host", default="127.0.0.1", show_default=True, help="Interface to listen on.")
@click.option("--port", default=8000, show_default=True, type=click.IntRange(0, 65535),
              help="Port to listen on.")
def serve(host: str, port: int) -> None:
    """Run the HTTP service (embedded: SQLite, in-process runs; with a broker: queue to
    workers)."""
    from werkzeug.serving import make_server

    from service.app import create_app, shutdown_app

    app = create_app()
    services = app.extensions["fluxproof"]
    server = make_server(host, port, app, threaded=True)
    actual_host, actual_port = server.server_address[:2]
    click.echo(f"fluxproof serving on http://{actual_host}:{actual_port}  "
               f"(store: {services.store.dialect}, runs: {services.dispatcher.mode})")
    try:
        server.serve_forever()
    except KeyboardInterrupt:
        click.echo("stopping")
    finally:
        server.server_close()
        shutdown_app(app)


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
    from service.celery_client import run_worker

    argv = [f"--loglevel={loglevel}"]
    if concurrency:
        argv.append(f"--concurrency={concurrency}")
    if beat:
        argv.append("--beat")
    run_worker(argv)


@click.group("db")
def db() -> None:
    """The store's schema."""


@db.command("upgrade")
def db_upgrade() -> None:
    """Apply every pending migration to the store (FLUXPROOF_DATABASE_URL or the SQLite
    default)."""
    from service.store import Store
    from service.store.migrate import upgrade

    settings = settings_from_env()
    store = Store(database_url(settings))
    try:
        revision = upgrade(store)
    finally:
        store.dispose()
    click.echo(f"store at revision {revision} ({store!r})")


__all__ = ["db", "dispatch_mode", "serve", "worker"]
