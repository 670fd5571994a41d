"""The Flask application factory."""

from __future__ import annotations

import logging
from typing import Any

from flask import Flask

from service import errors
from service.api import api
from service.api.context import Services
from service.dispatch import CeleryDispatcher, make_dispatcher
from service.recovery import SweepTimer, recovery_settings
from service.runs import pending_run_ids
from service.server_keys import installation_secret, load_signing_key
from service.settings import DEFAULTS, database_url, dispatch_mode
from service.store import Store
from service.store.migrate import upgrade
from service.ui import init_app as init_ui

logger = logging.getLogger(__name__)


def create_app(test_config: dict[str, Any] | None = None) -> Flask:
    """Build the app: defaults, then ``FLUXPROOF_*`` environment variables, then test overrides.

    Opens the store (applying migrations when ``AUTO_MIGRATE``), chooses the dispatcher
    (Celery when ``BROKER_URL`` is set, else the embedded thread pool) and registers the API.
    In embedded mode, runs left unfinished by an earlier process are sent again at start; with
    Celery (outside tests) a thread runs the recovery sweep (:class:`service.recovery.SweepTimer`).

    Raises
    ------
    SecretError
        A configuration with its own database and no strong ``FLUXPROOF_SECRET_KEY``, or no
        ``FLUXPROOF_SIGNING_KEY_FILE`` (:mod:`service.server_keys`): it refuses to start.
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
    app.secret_key = installation_secret(settings)
    app.config["SECRET_KEY"] = app.secret_key
    signing_key = load_signing_key(settings)

    store = Store(database_url(settings), settings)
    if settings["AUTO_MIGRATE"]:
        upgrade(store)
    mode = dispatch_mode(settings)
    dispatcher = make_dispatcher(mode, store, settings)
    app.extensions["fluxproof"] = Services(store=store, dispatcher=dispatcher,
                                           settings=settings, signing_key=signing_key)

    errors.init_app(app)
    app.register_blueprint(api)
    init_ui(app)

    if isinstance(dispatcher, CeleryDispatcher) and not app.config.get("TESTING"):
        # The recovery sweep runs here too, so no deployment needs beat for it.
        interval, after = recovery_settings(settings)
        app.extensions["fluxproof.recovery"] = SweepTimer(
            store, dispatcher.celery, interval=interval, older_than_s=after,
            name="fluxproof-api-recovery").start()
    if mode == "embedded" and settings["AUTO_MIGRATE"]:
        pending = pending_run_ids(store)
        if pending:
            logger.info("re-sending %d unfinished runs to the embedded executor", len(pending))
            dispatcher.send(pending)
    return app


def shutdown_app(app: Flask) -> None:
    """Finish queued embedded work and close the store's connections."""
    timer = app.extensions.pop("fluxproof.recovery", None)
    if timer is not None:
        timer.stop()
    services = app.extensions.get("fluxproof")
    if services is not None:
        services.dispatcher.shutdown()
        services.store.dispose()
