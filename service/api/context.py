"""What views reach through the app: the store, the dispatcher, the settings."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from flask import current_app

from service.dispatch import Dispatcher
from service.store import Store


@dataclass
class Services:
    store: Store
    dispatcher: Dispatcher
    settings: dict[str, Any]


def services() -> Services:
    return current_app.extensions["fluxproof"]
