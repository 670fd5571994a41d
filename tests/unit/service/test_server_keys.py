"""The installation's secrets: created once, private, refused when weak; Ed25519 signatures
verify with the published key and fail on any change (RFC 8032 test vector 1 as the check of
the library route)."""

from __future__ import annotations

import base64
import stat

import pytest
from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey

from service import server_keys as keys


def test_the_embedded_default_creates_one_private_secret(tmp_path):
    settings = {"DATA_DIR": str(tmp_path)}
    first = keys.installation_secret(settings)
    assert first == keys.installation_secret(settings)
    assert len(first) >= keys.MIN_SECRET_LENGTH
    mode = stat.S_IMODE((tmp_path / keys.SECRET_FILE).stat().st_mode)
    assert mode == 0o600


@pytest.mark.parametrize("secret", [None, "", "dev-only-change-me", "short-secret"])
def test_a_deployment_with_its_own_database_refuses_a_weak_secret(tmp_path, secret):
    settings = {"DATA_DIR": str(tmp_path), "DATABASE_URL": "postgresql://x/y",
                "SECRET_KEY": secret}
    with pytest.raises(keys.SecretError, match="FLUXPROOF_SECRET_KEY"):
        keys.installation_secret(settings)


def test_a_strong_configured_secret_is_used(tmp_path):
    strong = "s" * 40
    assert keys.installation_secret({"DATA_DIR": str(tmp_path), "DATABASE_URL": "x",
                                     "SECRET_KEY": strong}) == strong
    with pytest.raises(keys.SecretError, match="at least 32"):
        keys.installation_secret({"DATA_DIR": str(tmp_path), "SECRET_KEY": "s" * 20})


def test_the_signing_key_is_created_once_and_private(tmp_path):
    settings = {"DATA_DIR": str(tmp_path)}
    key = keys.load_signing_key(settings)
    again = keys.load_signing_key(settings)
    assert keys.public_key_pem(key) == keys.public_key_pem(again)
    assert stat.S_IMODE((tmp_path / keys.SIGNING_KEY_FILE).stat().st_mode) == 0o600
    with pytest.raises(keys.SecretError, match="FLUXPROOF_SIGNING_KEY_FILE"):
        keys.signing_key_path({"DATA_DIR": str(tmp_path), "DATABASE_URL": "x"})


def test_signatures_verify_with_the_published_key_and_fail_on_any_change(tmp_path):
    key = keys.load_signing_key({"DATA_DIR": str(tmp_path)})
    public = keys.public_key_pem(key)
    signature = keys.sign(key, b"record sha256")
    assert keys.verify(public, b"record sha256", signature)
    assert not keys.verify(public, b"record sha257", signature)
    other = keys.public_key_pem(Ed25519PrivateKey.generate())
    assert not keys.verify(other, b"record sha256", signature)
    assert not keys.verify(public, b"record sha256", "not base64!")


def test_rfc8032_test_vector_1():
    """RFC 8032 §7.1, TEST 1: the empty message under the published secret key."""
    secret = bytes.fromhex("9d61b19deffd5a60ba844af492ec2cc44449c5697b326919703bac031cae7f60")
    expected = ("e5564300c360ac729086e2cc806e828a84877f1eb8e5d974d873e06522490155"
                "5fb8821590a33bacc61e39701cf9b46bd25bf5f0595bbe24655141438e7a100b")
    key = Ed25519PrivateKey.from_private_bytes(secret)
    assert base64.b64decode(keys.sign(key, b"")).hex() == expected
