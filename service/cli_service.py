"""``fluxproof serve`` and ``fluxproof db upgrade``."""

from __future__ import annotations

import signal
from typing import Any

import click
from werkzeug.serving import make_server

from service.app import create_app, shutdown_app
from service.server_keys import SecretError
from service.settings import database_url, settings_from_env
from service.store import Store
from service.store.migrate import upgrade


@click.command("serve")
@click.option("--host", default="127.0.0.1", show_default=True, help="Interface to listen on.")
@click.option("--port", default=8000, show_default=True, type=click.IntRange(0, 65535),
              help="Port to listen on.")
def serve(host: str, port: int) -> None:
    """Run the HTTP service (embedded: SQLite, in-process runs; with a broker: queue to
    workers). Ctrl-C (SIGINT) or SIGTERM (a service manager's stop) ends it cleanly: queued
    embedded runs finish and the store is closed."""
    signal.signal(signal.SIGTERM, _stop_on_signal)
    try:
        app = create_app()
    except SecretError as exc:
        raise click.ClickException(f"refusing to start: {exc}") from exc
    services = app.extensions["fluxproof"]
    server = make_server(host, port, app, threaded=True)
    actual_host, actual_port = server.server_address[:2]
    click.echo(f"fluxproof serving on http://{actual_host}:{actual_port}  "
               f"(store: {services.store.dialect}, runs: {services.dispatcher.mode})")
    try:
        server.serve_forever()  # returns on either signal: werkzeug catches the KeyboardInterrupt
    except KeyboardInterrupt:
        pass
    finally:
        click.echo("stopping")
        server.server_close()
        shutdown_app(app)


def _stop_on_signal(signum: int, frame: Any) -> None:
    raise KeyboardInterrupt(f"signal {signum}")


@click.group("db")
def db() -> None:
    """The store's schema."""


@db.command("upgrade")
def db_upgrade() -> None:
    """Apply every pending migration to the store (FLUXPROOF_DATABASE_URL or the SQLite
    default)."""
    settings = settings_from_env()
    store = Store(database_url(settings), settings)
    try:
        revision = upgrade(store)
    finally:
        store.dispose()
    click.echo(f"store at revision {revision} ({store!r})")


__all__ = ["db", "serve"]
