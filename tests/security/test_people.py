"""People and their tokens: logins unique after Unicode normalisation and case folding, no
invisible characters in names, passwords kept only as an argon2id hash, tokens that belong to a
person, expire, and stop with their person; failed authentication is an audit event.

The findings (issue 13): four-eyes compared free-text token names, so a reviewer token named
``Engineer-1`` signed ``engineer-1``'s run; tokens never expired; failed authentication was not
audited and token events were attributed to ``cli``.
"""

from __future__ import annotations

from datetime import timedelta

import argon2
import pytest
from sqlalchemy import select, update

from service.audit import list_events
from service.errors import Conflict, ValidationFailed
from service.people import check_password, create_user, login_key
from service.store.models import Token, User, utc_now
from service.tokens import TOKEN_PREFIX, create_token, identify, token_digest
from tests.api.support import TEST_PASSWORD, bearer, make_case, person_token


@pytest.mark.parametrize("taken,attempt", [
    ("engineer-1", "Engineer-1"),
    ("engineer-1", "ENGINEER-1 "),
    ("engineer-1", "\uff45ngineer-1"),  # fullwidth e: NFKC makes it e
    ("strasse", "STRASSE"),
    ("straße", "STRASSE"),  # case folding: ß folds to ss
])
def test_logins_are_unique_after_normalisation_and_case_folding(store, taken, attempt):
    create_user(store, login=taken, name="First Person", role="engineer", password=None,
                actor="os:test")
    with pytest.raises(Conflict, match="is taken"):
        create_user(store, login=attempt, name="Second Person", role="reviewer",
                    password=None, actor="os:test")
    assert login_key(taken) == login_key(attempt)


@pytest.mark.parametrize("text", ["Eve \u202eTSIL", "Eve\u200b", "Eve\u2066x\u2069",
                                  "Eve\x00", "Eve\ue000", "Eve\u00ad"])
def test_invisible_characters_are_refused_in_printed_names_and_logins(store, text):
    with pytest.raises(ValidationFailed) as caught:
        create_user(store, login="eve", name=text, role="engineer", password=None,
                    actor="os:test")
    assert [e["path"] for e in caught.value.errors] == ["name"]
    assert "U+" in caught.value.errors[0]["message"]
    with pytest.raises(ValidationFailed) as caught:
        create_user(store, login=text, name="Eve", role="engineer", password=None,
                    actor="os:test")
    assert [e["path"] for e in caught.value.errors] == ["login"]


def test_passwords_are_stored_only_as_an_argon2id_hash(store):
    create_user(store, login="pat", name="Pat", role="reviewer", password=TEST_PASSWORD,
                actor="os:test")
    with store.transaction() as session:
        stored = session.execute(select(User.password_hash)).scalar_one()
    assert stored.startswith("$argon2id$") and TEST_PASSWORD not in stored
    assert argon2.PasswordHasher().verify(stored, TEST_PASSWORD)
    assert check_password(store, "PAT", TEST_PASSWORD).login == "pat"
    assert check_password(store, "pat", TEST_PASSWORD + "x") is None
    assert check_password(store, "nobody", TEST_PASSWORD) is None
    with pytest.raises(ValidationFailed, match="password cannot"):
        from service.people import set_password

        set_password(store, "pat", "short", actor="os:test")


def test_the_service_hasher_is_argon2id_with_a_memory_hard_cost():
    from service.people import HASH_PARAMETERS

    assert HASH_PARAMETERS.type is argon2.Type.ID
    # KiB; 19 MiB is the smallest memory cost the OWASP Password Storage Cheat Sheet lists for
    # argon2id (from memory); the service uses RFC 9106's 64 MiB profile.
    assert HASH_PARAMETERS.memory_cost >= 19 * 1024


def test_an_expired_token_is_401(client, store):
    token = person_token(store, "auditor", "exp.auditor")
    assert client.get("/v1/cases", headers=bearer(token)).status_code == 200
    with store.transaction() as session:
        session.execute(update(Token).values(expires_at=utc_now() - timedelta(seconds=1)))
    response = client.get("/v1/cases", headers=bearer(token))
    assert response.status_code == 401 and "expired" in response.get_json()["detail"]


def test_tokens_expire_by_default(store, app):
    person_token(store, "auditor", "default.auditor")
    with store.transaction() as session:
        row = session.execute(select(Token)).scalar_one()
        lifetime = row.expires_at - row.created_at
    assert timedelta(days=89) < lifetime <= timedelta(days=90, seconds=5)


def test_a_token_of_nobody_is_refused(client, store):
    """Tokens made before people existed belong to nobody (migration 0006) and are refused."""
    secret = f"{TOKEN_PREFIX}0123456789abcdef_legacysecret"
    with store.transaction() as session:
        session.add(Token(id="0123456789abcdef", name="Engineer-1", role="reviewer",
                          sha256=token_digest(secret), created_at=utc_now(), revoked=False))
    assert identify(store, secret) is None
    assert client.get("/v1/cases", headers=bearer(secret)).status_code == 401


def test_a_disabled_person_s_tokens_stop_at_once(client, store):
    from service.people import disable_user

    token = person_token(store, "engineer", "gone.engineer")
    assert client.post("/v1/cases", json=make_case(), headers=bearer(token)).status_code == 201
    disable_user(store, "gone.engineer", actor="adi.admin")
    assert client.get("/v1/cases", headers=bearer(token)).status_code == 401
    with pytest.raises(ValidationFailed, match="cannot be created"):
        create_token(store, login="gone.engineer", actor="adi.admin")


def test_a_token_acts_as_its_person_with_their_current_role(client, store):
    from service.people import change_user

    token = person_token(store, "engineer", "moving.person", name="Moving Person")
    identity = identify(store, token)
    assert (identity.login, identity.name, identity.role) == ("moving.person",
                                                              "Moving Person", "engineer")
    change_user(store, "moving.person", role="auditor", actor="adi.admin")
    assert client.post("/v1/cases", json=make_case(),
                       headers=bearer(token)).status_code == 403
    assert client.get("/v1/audit", headers=bearer(token)).status_code == 200


def test_failed_authentication_and_token_changes_are_audited_with_the_person(client, store):
    token = person_token(store, "auditor", "ada.auditor")
    token_id = token.split("_")[1]
    client.get("/v1/cases", headers=bearer(token[:-3] + "xyz"))
    client.get("/v1/cases", headers=bearer("garbage"))
    from service.tokens import revoke_token

    revoke_token(store, token_id, actor="adi.admin")
    events = list_events(store)["items"]
    failed = [e for e in events if e["kind"] == "auth.failed"]
    assert [e["subject"] for e in failed] == [f"token {token_id}", "token"]
    assert all(e["payload"]["via"] == "bearer token" for e in failed)
    changes = [(e["kind"], e["actor"]) for e in events
               if e["kind"] in ("user.created", "token.created", "token.revoked")]
    assert changes == [("user.created", "os:test"), ("token.created", "os:test"),
                       ("token.revoked", "adi.admin")]
    assert "cli" not in {e["actor"] for e in events}
