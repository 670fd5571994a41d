"""The installation's secrets, kept outside the database: the session secret and the server's
Ed25519 signing key.

Someone with access to the database alone can neither forge a session nor re-sign a record:
both secrets live in files of the data directory (mode 0600) or where the operator points.

* Session secret (``FLUXPROOF_SECRET_KEY``): the embedded default (no ``DATABASE_URL``) creates
  a random one in ``DATA_DIR/secret_key`` on first start; every other configuration must give a
  strong one (at least :data:`MIN_SECRET_LENGTH` characters, not the documented placeholder) or
  refuses to start.
* Signing key (``FLUXPROOF_SIGNING_KEY_FILE``, PEM, PKCS #8): Ed25519 (RFC 8032) via
  ``cryptography``. The embedded default creates ``DATA_DIR/signing_key.pem``; elsewhere the
  operator names the file (created there on first start when missing). Its public key is
  published (``GET /v1/meta/signing-key`` and ``fluxproof audit key``) so that anyone can verify a
  signature without the server.
"""

from __future__ import annotations

import base64
import hashlib
import os
import secrets
from collections.abc import Mapping
from pathlib import Path
from typing import Any

from cryptography.exceptions import InvalidSignature
from cryptography.hazmat.primitives import serialization
from cryptography.hazmat.primitives.asymmetric.ed25519 import (
    Ed25519PrivateKey,
    Ed25519PublicKey,
)

__all__ = [
    "MIN_SECRET_LENGTH",
    "PLACEHOLDER_SECRET",
    "SecretError",
    "installation_secret",
    "key_id",
    "load_signing_key",
    "public_key_pem",
    "sign",
    "verify",
]

#: The placeholder the settings document; never accepted as a secret.
PLACEHOLDER_SECRET = "dev-only-change-me"
#: Shortest session secret accepted (characters; token_urlsafe(48) gives 64).
MIN_SECRET_LENGTH = 32
SECRET_FILE = "secret_key"
SIGNING_KEY_FILE = "signing_key.pem"


class SecretError(ValueError):
    """A secret that is missing or too weak; the message names the setting to change."""


def is_embedded_default(settings: Mapping[str, Any]) -> bool:
    """True for the embedded default: the SQLite store in the data directory."""
    return not settings.get("DATABASE_URL")


def _data_dir(settings: Mapping[str, Any]) -> Path:
    path = Path(str(settings.get("DATA_DIR") or "./var")).expanduser()
    path.mkdir(parents=True, exist_ok=True)
    return path


def _write_private(path: Path, content: bytes) -> None:
    """Create ``path`` readable by its owner only (0600), never overwriting one that exists."""
    path.parent.mkdir(parents=True, exist_ok=True)
    descriptor = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
    with os.fdopen(descriptor, "wb") as handle:
        handle.write(content)


def _read_or_create(path: Path, make: bytes) -> bytes:
    try:
        _write_private(path, make)
    except FileExistsError:
        pass
    return path.read_bytes()


def weak_secret_reason(secret: str | None) -> str | None:
    """Why ``secret`` may not sign sessions, or None when it may."""
    if not secret:
        return "no secret is set"
    if secret == PLACEHOLDER_SECRET:
        return "it is the documented placeholder"
    if len(secret) < MIN_SECRET_LENGTH:
        return f"it has {len(secret)} characters; at least {MIN_SECRET_LENGTH} are needed"
    return None


def installation_secret(settings: Mapping[str, Any]) -> str:
    """The session secret: the configured one if strong; on the embedded default without one,
    the installation's own (created once in the data directory, mode 0600).

    Raises
    ------
    SecretError
        Any other configuration without a strong ``FLUXPROOF_SECRET_KEY``.
    """
    configured = settings.get("SECRET_KEY")
    configured = None if configured in (None, "", PLACEHOLDER_SECRET) else str(configured)
    if configured is not None:
        reason = weak_secret_reason(configured)
        if reason is not None:
            raise SecretError(f"FLUXPROOF_SECRET_KEY: {reason} (use e.g. python -c 'import "
                              "secrets; print(secrets.token_urlsafe(48))')")
        return configured
    if not is_embedded_default(settings):
        raise SecretError("FLUXPROOF_SECRET_KEY: a deployment with its own database needs a "
                          f"secret of at least {MIN_SECRET_LENGTH} characters (none is set, or "
                          "it is the placeholder)")
    path = _data_dir(settings) / SECRET_FILE
    secret = _read_or_create(path, secrets.token_urlsafe(48).encode()).decode().strip()
    reason = weak_secret_reason(secret)
    if reason is not None:
        raise SecretError(f"{path}: the installation secret is unusable: {reason}")
    return secret


def signing_key_path(settings: Mapping[str, Any]) -> Path:
    """Where the signing key lives: ``FLUXPROOF_SIGNING_KEY_FILE``, else (embedded default)
    ``DATA_DIR/signing_key.pem``.

    Raises
    ------
    SecretError
        A deployment with its own database that names no key file.
    """
    configured = settings.get("SIGNING_KEY_FILE")
    if configured:
        return Path(str(configured)).expanduser()
    if not is_embedded_default(settings):
        raise SecretError("FLUXPROOF_SIGNING_KEY_FILE: a deployment with its own database "
                          "keeps its signing key in a file outside it; name that file")
    return _data_dir(settings) / SIGNING_KEY_FILE


def load_signing_key(settings: Mapping[str, Any]) -> Ed25519PrivateKey:
    """The server's Ed25519 signing key (created on first use where the settings place it)."""
    path = signing_key_path(settings)
    fresh = Ed25519PrivateKey.generate().private_bytes(
        serialization.Encoding.PEM, serialization.PrivateFormat.PKCS8,
        serialization.NoEncryption())
    data = _read_or_create(path, fresh)
    key = serialization.load_pem_private_key(data, password=None)
    if not isinstance(key, Ed25519PrivateKey):
        raise SecretError(f"{path}: expected an Ed25519 private key (PKCS #8 PEM)")
    return key


def public_key_pem(key: Ed25519PrivateKey | Ed25519PublicKey) -> str:
    """The public key as SubjectPublicKeyInfo PEM text (what is published)."""
    public = key.public_key() if isinstance(key, Ed25519PrivateKey) else key
    return public.public_bytes(serialization.Encoding.PEM,
                               serialization.PublicFormat.SubjectPublicKeyInfo).decode()


def key_id(key: Ed25519PrivateKey | Ed25519PublicKey) -> str:
    """A short name of the key pair: the first 16 hex digits of SHA-256 of the raw public key."""
    public = key.public_key() if isinstance(key, Ed25519PrivateKey) else key
    raw = public.public_bytes(serialization.Encoding.Raw, serialization.PublicFormat.Raw)
    return hashlib.sha256(raw).hexdigest()[:16]


def sign(key: Ed25519PrivateKey, data: bytes) -> str:
    """Ed25519 signature of ``data``, base64 (RFC 4648)."""
    return base64.b64encode(key.sign(data)).decode()


def verify(public_pem: str, data: bytes, signature: str) -> bool:
    """True when ``signature`` (base64) is the published key's signature of ``data``."""
    public = serialization.load_pem_public_key(public_pem.encode())
    if not isinstance(public, Ed25519PublicKey):
        return False
    try:
        public.verify(base64.b64decode(signature, validate=True), data)
    except (InvalidSignature, ValueError):
        return False
    return True
