"""What views reach through the app: the store, the dispatcher, the settings, the server's
signing key (:mod:`service.server_keys`)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey
from flask import current_app

from service.dispatch import Dispatcher
from service.store import Store


@dataclass
class Services:
    store: Store
    dispatcher: Dispatcher
    settings: dict[str, Any]
    signing_key: Ed25519PrivateKey


def services() -> Services:
    return current_app.extensions["fluxproof"]
