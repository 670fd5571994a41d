"""What views reach through the app: the store, the dispatcher, the settings."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from flask import current_app, request

from service.api.bodies import load_or_422
from service.dispatch import Dispatcher
from service.store import Store


@dataclass
class Services:
    store: Store
    dispatcher: Dispatcher
    settings: dict[str, Any]


def services() -> Services:
    return current_app.extensions["fluxproof"]


def query_args(schema: Any) -> dict[str, Any]:
    """Validate the query string with ``schema`` (unknown parameters are refused: 422)."""
    return load_or_422(schema, request.args.to_dict(), "query string")
