"""The Flask application factory."""

from __future__ import annotations

import logging
from typing import Any

from flask import Flask

from service import errors
from service.api import api
from service.api.context import Services
from service.dispatch import make_dispatcher
from service.runs import pending_run_ids
from service.settings import DEFAULTS, database_url, dispatch_mode
from service.store import Store
from service.store.migrate import upgrade
from service.ui import init_app as init_ui

logger = logging.getLogger(__name__)


def create_app(test_config: dict[str, Any] | None = None) -> Flask:
    """Build the app: defaults, then ``FLUXPROOF_*`` environment variables, then test overrides.

    Opens the store (applying migrations when ``AUTO_MIGRATE``), chooses the dispatcher
    (Celery when ``BROKER_URL`` is set, else the embedded thread pool) and registers the API.
    In embedded mode, runs left unfinished by an earlier process are sent again at start.
    """
    app = Flask(__name__, static_folder=None)
    app.config.from_mapping(DEFAULTS)
    app.config.from_prefixed_env("FLUXPROOF")
    if test_config is not None:
        app.config.from_mapping(test_config)
    settings = {key: app.config.get(key) for key in DEFAULTS}
    try:
        max_body = int(settings["MAX_BODY_BYTES"])
    except (TypeError, ValueError) as exc:
        raise ValueError(f"FLUXPROOF_MAX_BODY_BYTES: expected a whole number of bytes, got "
                         f"{settings['MAX_BODY_BYTES']!r}") from exc
    app.config["MAX_CONTENT_LENGTH"] = max_body
    app.config["MAX_BODY_BYTES"] = max_body
    app.json.sort_keys = False

    store = Store(database_url(settings), settings)
    if settings["AUTO_MIGRATE"]:
        upgrade(store)
    mode = dispatch_mode(settings)
    dispatcher = make_dispatcher(mode, store, settings)
    app.extensions["fluxproof"] = Services(store=store, dispatcher=dispatcher,
                                           settings=settings)

    errors.init_app(app)
    app.register_blueprint(api)
    init_ui(app)

    if mode == "embedded" and settings["AUTO_MIGRATE"]:
        pending = pending_run_ids(store)
        if pending:
            logger.info("re-sending %d unfinished runs to the embedded executor", len(pending))
            dispatcher.send(pending)
    return app


def shutdown_app(app: Flask) -> None:
    """Finish queued embedded work and close the store's connections."""
    services = app.extensions.get("fluxproof")
    if services is not None:
        services.dispatcher.shutdown()
        services.store.dispose()
