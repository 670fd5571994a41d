"""The audit chain's key and anchor file (``service.store.audit_seal``).

Check values come from outside the project: the HMAC is Python's ``hmac`` module (RFC 2104)
and the key derivation the RFC 5869 construction written out with ``hmac`` (extract with a
zero salt of hash length, then one expand block), so a slip in either is caught.
"""

from __future__ import annotations

import hashlib
import hmac
import json
import os
import stat

import pytest
from cryptography.hazmat.primitives import serialization
from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey

from service.store.audit_chain import event_hash
from service.store.audit_seal import (
    CHAIN_KEY_INFO,
    AnchorError,
    AuditSeal,
    ChainHead,
    anchor_path,
    chain_hmac_key,
    read_checkpoints,
)

# RFC 8032, section 7.1, test 1: the secret key (a published test vector, not a secret).
RFC8032_SECRET = bytes.fromhex(
    "9d61b19deffd5a60ba844af492ec2cc44449c5697b326919703bac031cae7f60")


def _key() -> Ed25519PrivateKey:
    return Ed25519PrivateKey.from_private_bytes(RFC8032_SECRET)


def test_the_chain_key_is_hkdf_sha256_of_the_signing_key_written_out():
    """RFC 5869: PRK = HMAC(salt = 32 zero bytes, IKM); OKM = HMAC(PRK, info || 0x01)."""
    prk = hmac.new(b"\0" * 32, RFC8032_SECRET, hashlib.sha256).digest()
    okm = hmac.new(prk, CHAIN_KEY_INFO + b"\x01", hashlib.sha256).digest()
    assert chain_hmac_key(_key()) == okm
    assert chain_hmac_key(Ed25519PrivateKey.generate()) != okm


def test_a_keyed_event_hash_is_hmac_sha256_and_differs_from_the_old_rule():
    key = chain_hmac_key(_key())
    body = '{"actor":"a","at":"t","kind":"case.stored","payload":{},"seq":1,"subject":"s"}'
    prev = "0" * 64
    keyed = event_hash(prev, 1, "t", "a", "case.stored", "s", {}, key)
    assert keyed == hmac.new(key, (prev + body).encode(), hashlib.sha256).hexdigest()
    assert event_hash(prev, 1, "t", "a", "case.stored", "s", {}) == hashlib.sha256(
        (prev + body).encode()).hexdigest() != keyed
    assert event_hash(prev, 1, "t", "a", "case.stored", "s", {}, b"x" * 32) != keyed


def test_checkpoints_are_appended_signed_and_read_back_by_chain(tmp_path):
    path = tmp_path / "anchor" / "audit_anchor.jsonl"
    seal = AuditSeal(_key(), path)
    assert stat.S_IMODE(os.stat(path).st_mode) == 0o600
    seal.write_checkpoint(ChainHead("chain-a", 3, "a" * 64, 1))
    seal.write_checkpoint(ChainHead("chain-b", 9, "b" * 64, 4))
    seal.write_checkpoint(ChainHead("chain-a", 5, "c" * 64, 1))
    found = read_checkpoints(path, "chain-a")
    assert [(p["seq"], p["hash"], p["line"]) for p in found] == [(3, "a" * 64, 1),
                                                                 (5, "c" * 64, 3)]
    assert all(seal.signature_valid(p) and p["key_id"] == seal.key_id for p in found)
    for field, value in (("seq", 4), ("hash", "d" * 64), ("keyed_from", 2), ("chain", "x"),
                         ("at", "2020-01-01T00:00:00+00:00")):
        assert not seal.signature_valid({**found[0], field: value}), field
    other = AuditSeal(Ed25519PrivateKey.generate(), tmp_path / "other.jsonl")
    assert not other.signature_valid(found[0])
    assert read_checkpoints(tmp_path / "missing.jsonl", "chain-a") == []


def test_an_unreadable_anchor_line_is_named(tmp_path):
    path = tmp_path / "a.jsonl"
    path.write_text(json.dumps({"chain": "c", "seq": 1}) + "\nnot json\n")
    with pytest.raises(AnchorError, match="line 2"):
        read_checkpoints(path, "c")
    path.write_text('["a list"]\n')
    with pytest.raises(AnchorError, match="line 1: not a checkpoint"):
        read_checkpoints(path, "c")


def test_the_anchor_file_is_where_the_settings_say(tmp_path):
    assert anchor_path({"DATA_DIR": str(tmp_path)}) == tmp_path / "audit_anchor.jsonl"
    assert anchor_path({"DATA_DIR": str(tmp_path),
                        "AUDIT_ANCHOR_FILE": str(tmp_path / "x.jsonl")}) == tmp_path / "x.jsonl"
    pem = _key().private_bytes(serialization.Encoding.PEM, serialization.PrivateFormat.PKCS8,
                               serialization.NoEncryption())
    (tmp_path / "k.pem").write_bytes(pem)
    seal = AuditSeal.from_settings({"DATABASE_URL": "postgresql://x/y",
                                    "SIGNING_KEY_FILE": str(tmp_path / "k.pem"),
                                    "DATA_DIR": str(tmp_path)})
    assert seal.chain_key == chain_hmac_key(_key())
    assert seal.anchor == tmp_path / "audit_anchor.jsonl" and seal.anchor.exists()
