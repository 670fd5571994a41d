"""The audit chain's key and its anchor outside the database.

Someone who can write to the database alone must not be able to change, drop or rewrite audit
events unnoticed. Two things the database does not hold make that so:

* **The chain key.** From revision 0007 on, each event's chain hash is
  ``HMAC-SHA256(K, prev_hash + canonical JSON of the event)`` (RFC 2104), where ``K`` is derived
  with HKDF-SHA256 (RFC 5869) from the server's Ed25519 signing key
  (:func:`service.server_keys.load_signing_key`, a file outside the database). Without the key
  nobody can recompute a hash, so an event changed in place, or a whole chain rewritten and
  re-hashed, no longer matches. An HMAC per event was chosen over an Ed25519 signature of the
  head now and then because it binds *every* event, including the ones written after the last
  signed head, costs about what the SHA-256 it replaces did on the chaining's hot path (a
  pre-keyed HMAC is copied per event; an Ed25519 signature per event would add tens of µs
  each), and needs no second table of signatures that an attacker could delete. Its limit:
  verifying it needs the key, so it is the installation that verifies; the checkpoints below
  are signed with Ed25519 so that anyone holding the published public key can check the
  anchor itself.
* **The anchor file** (``FLUXPROOF_AUDIT_ANCHOR_FILE``, else ``DATA_DIR/audit_anchor.jsonl``,
  created mode 0600): an append-only JSON Lines file that gets one *checkpoint* each time
  events are chained, after the chaining is committed: the chain's id, the head's sequence
  number and hash, the first keyed sequence number, the UTC time, the key id, and an Ed25519
  signature of those fields. Verification reads every checkpoint of the database's chain and
  requires each to match the stored event it names, so deleting the last events and moving the
  head back (fewer events than anchored), or swapping in another chain, is caught even by
  someone who could recompute the hashes. The operator keeps this file (backed up apart from
  the database); every process that chains (the API, each worker) must write to the same one.

Chains written before revision 0007 stay as they were: their events are checked by the old rule
(plain SHA-256, :func:`service.store.audit_chain.event_hash` without a key) up to
``audit_head.keyed_from`` − 1, the head at the time of the upgrade; later events by the keyed
rule. The first checkpoint anchors the old part too (its head hash covers every event before
it). Checkpoints are appended without ``fsync``: a checkpoint lost in a crash only leaves the
last events anchored by the next one.
"""

from __future__ import annotations

import json
import os
import threading
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from cryptography.hazmat.primitives import hashes, serialization
from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey
from cryptography.hazmat.primitives.kdf.hkdf import HKDF

from service.server_keys import key_id, load_signing_key, public_key_pem, sign, verify
from service.store.models import utc_now

ANCHOR_FILE = "audit_anchor.jsonl"
#: HKDF ``info`` of the chain key (changing it makes every keyed chain unverifiable).
CHAIN_KEY_INFO = b"fluxproof audit chain hmac-sha256 v1"
#: The fields of a checkpoint that its signature covers, in the order they are written.
CHECKPOINT_FIELDS = ("chain", "seq", "hash", "keyed_from", "at", "key_id")


class AnchorError(ValueError):
    """The anchor file cannot be read; the message names the file and the line."""


def chain_hmac_key(signing_key: Ed25519PrivateKey) -> bytes:
    """The 32-byte HMAC key of the audit chain, derived from the Ed25519 private key with
    HKDF-SHA256 (RFC 5869; no salt, ``info`` :data:`CHAIN_KEY_INFO`)."""
    raw = signing_key.private_bytes(serialization.Encoding.Raw,
                                    serialization.PrivateFormat.Raw,
                                    serialization.NoEncryption())
    return HKDF(algorithm=hashes.SHA256(), length=32, salt=None,
                info=CHAIN_KEY_INFO).derive(raw)


def anchor_path(settings: Mapping[str, Any]) -> Path:
    """``FLUXPROOF_AUDIT_ANCHOR_FILE``, else ``DATA_DIR/audit_anchor.jsonl``."""
    configured = settings.get("AUDIT_ANCHOR_FILE")
    if configured:
        return Path(str(configured)).expanduser()
    return Path(str(settings.get("DATA_DIR") or "./var")).expanduser() / ANCHOR_FILE


def checkpoint_message(checkpoint: Mapping[str, Any]) -> bytes:
    """The bytes a checkpoint's signature covers: canonical JSON of its
    :data:`CHECKPOINT_FIELDS`."""
    body = {name: checkpoint.get(name) for name in CHECKPOINT_FIELDS}
    return json.dumps(body, sort_keys=True, separators=(",", ":"),
                      ensure_ascii=False).encode("utf-8")


@dataclass(frozen=True)
class ChainHead:
    """Where a chaining left the chain: its id, head sequence number and hash, and the first
    sequence number hashed with the key."""

    chain: str
    seq: int
    hash: str
    keyed_from: int


class AuditSeal:
    """The chain key and the anchor file of one installation."""

    def __init__(self, signing_key: Ed25519PrivateKey, anchor: Path) -> None:
        self.chain_key = chain_hmac_key(signing_key)
        self.key_id = key_id(signing_key)
        self.public_pem = public_key_pem(signing_key)
        self.anchor = anchor
        self._signing_key = signing_key
        self._lock = threading.Lock()
        self._open_anchor().close()

    def _open_anchor(self) -> Any:
        """The anchor file opened for appending (created mode 0600 when missing), so that an
        unwritable place fails when the store first chains, naming the file."""
        self.anchor.parent.mkdir(parents=True, exist_ok=True)
        descriptor = os.open(self.anchor, os.O_WRONLY | os.O_APPEND | os.O_CREAT, 0o600)
        return os.fdopen(descriptor, "ab", buffering=0)

    @classmethod
    def from_settings(cls, settings: Mapping[str, Any]) -> AuditSeal:
        """The seal of the installation ``settings`` describe (the signing key is created
        where they place it when missing, as :func:`~service.server_keys.load_signing_key`
        does)."""
        return cls(load_signing_key(settings), anchor_path(settings))

    def checkpoint(self, head: ChainHead) -> dict[str, Any]:
        """A signed checkpoint of ``head`` at the current UTC time."""
        entry: dict[str, Any] = {"chain": head.chain, "seq": head.seq, "hash": head.hash,
                                 "keyed_from": head.keyed_from,
                                 "at": utc_now().isoformat(timespec="microseconds"),
                                 "key_id": self.key_id}
        entry["signature"] = sign(self._signing_key, checkpoint_message(entry))
        return entry

    def write_checkpoint(self, head: ChainHead) -> dict[str, Any]:
        """Append a checkpoint of ``head`` to the anchor file (one line, ``O_APPEND``; the
        file created mode 0600 when missing)."""
        entry = self.checkpoint(head)
        line = (json.dumps(entry, sort_keys=True, separators=(",", ":")) + "\n").encode()
        with self._lock, self._open_anchor() as handle:
            handle.write(line)
        return entry

    def signature_valid(self, checkpoint: Mapping[str, Any]) -> bool:
        """True when ``checkpoint`` carries this installation's Ed25519 signature of its
        fields."""
        signature = checkpoint.get("signature")
        return isinstance(signature, str) and verify(
            self.public_pem, checkpoint_message(checkpoint), signature)


def read_checkpoints(path: Path, chain: str) -> list[dict[str, Any]]:
    """Every checkpoint of chain ``chain`` in the anchor file, in file order ([] when the file
    does not exist). :class:`AnchorError` names a line that is not a checkpoint."""
    return read_all_checkpoints(path).get(chain, [])


def read_all_checkpoints(path: Path) -> dict[str, list[dict[str, Any]]]:
    """Every checkpoint in the anchor file by chain id, each chain's in file order (each
    carries its ``line``); {} when the file does not exist."""
    if not path.exists():
        return {}
    found: dict[str, list[dict[str, Any]]] = {}
    with path.open("rb") as handle:
        for number, raw in enumerate(handle, start=1):
            if not raw.strip():
                continue
            try:
                entry = json.loads(raw)
            except ValueError as exc:
                raise AnchorError(f"{path}, line {number}: not a JSON checkpoint") from exc
            if not isinstance(entry, dict) or not isinstance(entry.get("seq"), int):
                raise AnchorError(f"{path}, line {number}: not a checkpoint (expected an "
                                  "object with chain, seq, hash, keyed_from, at, key_id, "
                                  "signature)")
            entry["line"] = number
            found.setdefault(str(entry.get("chain")), []).append(entry)
    return found
